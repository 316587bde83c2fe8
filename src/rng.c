/* src/rng.c: splitmix64 seeding and xoshiro256** streams (Blackman and Vigna), uniform and normal draws */
#include "rng.h"

#include <math.h>

#include "units.h"

uint64_t tb_rng_splitmix64(uint64_t *state)
{
    uint64_t z = (*state += 0x9e3779b97f4a7c15u);
    z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9u;
    z = (z ^ (z >> 27)) * 0x94d049bb133111ebu;
    return z ^ (z >> 31);
}

tb_rng tb_rng_stream(uint64_t seed, uint64_t index)
{
    /* each sample's seeding sequence starts at its own point, far apart for
     * neighbouring indices because splitmix64 mixes every bit */
    uint64_t state = seed ^ (index * 0xd1342543de82ef95u + 0x632be59bd9b4e019u);
    tb_rng r;
    for (int i = 0; i < 4; i++)
        r.s[i] = tb_rng_splitmix64(&state);
    return r;
}

static inline uint64_t rotl(uint64_t x, int k)
{
    return (x << k) | (x >> (64 - k));
}

uint64_t tb_rng_next(tb_rng *r)
{
    uint64_t *s = r->s;
    uint64_t result = rotl(s[1] * 5, 7) * 9;
    uint64_t t = s[1] << 17;
    s[2] ^= s[0];
    s[3] ^= s[1];
    s[1] ^= s[2];
    s[0] ^= s[3];
    s[2] ^= t;
    s[3] = rotl(s[3], 45);
    return result;
}

double tb_rng_uniform(tb_rng *r)
{
    return ((double)(tb_rng_next(r) >> 11) + 0.5) * 0x1.0p-53;
}

double tb_rng_normal(tb_rng *r)
{
    double u1 = tb_rng_uniform(r);
    double u2 = tb_rng_uniform(r);
    return sqrt(-2.0 * log(u1)) * cos(TB_TWO_PI * u2);
}
