/* tests/test_rng.c: the Monte Carlo generator against its published definition and the distributions' moments */
#include "testutil.h"

#include "rng.h"

/* splitmix64 from state 0: first output 0xe220a8397b1dcdaf (from memory: the value the
 * reference implementation of Steele, Lea and Flood gives for seed 0, widely quoted). */
static void test_rng_splitmix64_seed0(void **state)
{
    (void)state;
    uint64_t s = 0;
    assert_true(tb_rng_splitmix64(&s) == 0xe220a8397b1dcdafu);
    assert_true(s == 0x9e3779b97f4a7c15u);
}

/* xoshiro256** from the state {1, 2, 3, 4}, worked by hand from the published algorithm
 * (Blackman and Vigna 2021, figure 1): the first output is rotl(2 * 5, 7) * 9 = 11520; the
 * update makes s[1] = 2 ^ (3 ^ 1) = 0, so the second output is 0. */
static void test_rng_xoshiro_by_hand(void **state)
{
    (void)state;
    tb_rng r = {{1, 2, 3, 4}};
    assert_true(tb_rng_next(&r) == 11520u);
    assert_true(r.s[0] == 7u && r.s[1] == 0u && r.s[2] == (2u ^ (2u << 17)));
    assert_true(tb_rng_next(&r) == 0u);
}

/* Uniform on (0, 1): mean 1/2, variance 1/12; standard normal: mean 0, variance 1, and
 * P(|z| < 1) = 0.682689 (the normal distribution's definition). N = 200000 draws; each
 * check allows 5 standard errors (common practice for a test that must not flake). */
static void test_rng_moments(void **state)
{
    (void)state;
    const size_t n = 200000;
    tb_rng r = tb_rng_stream(12345, 0);
    double su = 0, suu = 0, sz = 0, szz = 0, inside = 0;
    for (size_t i = 0; i < n; i++) {
        double u = tb_rng_uniform(&r);
        assert_true(u > 0 && u < 1);
        su += u;
        suu += u * u;
        double z = tb_rng_normal(&r);
        sz += z;
        szz += z * z;
        inside += fabs(z) < 1;
    }
    double N = (double)n;
    assert_true(fabs(su / N - 0.5) < 5 * sqrt(1.0 / 12 / N));
    assert_true(fabs(suu / N - su * su / N / N - 1.0 / 12) < 5 * sqrt(1.0 / 180 / N)); /* var of u^2 ~ 4/45 - 1/9 */
    assert_true(fabs(sz / N) < 5 / sqrt(N));
    assert_true(fabs(szz / N - 1) < 5 * sqrt(2 / N));
    assert_true(fabs(inside / N - 0.682689) < 5 * sqrt(0.682689 * 0.317311 / N));
}

/* Streams of neighbouring samples differ and a stream is a function of (seed, index) alone. */
static void test_rng_streams(void **state)
{
    (void)state;
    tb_rng a = tb_rng_stream(7, 3);
    tb_rng b = tb_rng_stream(7, 3);
    tb_rng c = tb_rng_stream(7, 4);
    tb_rng d = tb_rng_stream(8, 3);
    uint64_t xa = tb_rng_next(&a);
    assert_true(xa == tb_rng_next(&b));
    assert_true(xa != tb_rng_next(&c));
    assert_true(xa != tb_rng_next(&d));
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_rng_splitmix64_seed0),
        cmocka_unit_test(test_rng_xoshiro_by_hand),
        cmocka_unit_test(test_rng_moments),
        cmocka_unit_test(test_rng_streams),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
