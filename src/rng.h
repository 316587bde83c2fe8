/* src/rng.h: the seeded random numbers of Monte Carlo: splitmix64 seeding, xoshiro256** streams */
#ifndef TB_RNG_H
#define TB_RNG_H

#include <stdint.h>

/* xoshiro256** 1.0 (D. Blackman and S. Vigna, "Scrambled linear pseudorandom number
 * generators", ACM Trans. Math. Softw. 47(4), 2021; prng.di.unimi.it), seeded through
 * splitmix64 (G. Steele, D. Lea and C. Flood, "Fast splittable pseudorandom number
 * generators", OOPSLA 2014) as its authors recommend. A stream is a plain value: no
 * global state. */
typedef struct {
    uint64_t s[4];
} tb_rng;

/* splitmix64: advances *state by the golden-ratio increment and returns the mixed value. */
uint64_t tb_rng_splitmix64(uint64_t *state);

/* The stream of sample `index` of a run seeded with seed: its own splitmix64 sequence
 * started at seed + index * 2^32-odd constant, so that each sample draws the same numbers
 * whichever thread takes it and in whatever order. */
tb_rng tb_rng_stream(uint64_t seed, uint64_t index);

/* The next 64 bits of xoshiro256**. */
uint64_t tb_rng_next(tb_rng *r);

/* Uniform on (0, 1): the top 53 bits, offset by half a step, so neither 0 nor 1. */
double tb_rng_uniform(tb_rng *r);

/* Standard normal (mean 0, sigma 1) by the Box-Muller transform (G. Box and M. Muller,
 * Ann. Math. Stat. 29, 1958): two uniforms per value, the second value thrown away so that
 * a draw always takes the same amount of the stream. */
double tb_rng_normal(tb_rng *r);

#endif
