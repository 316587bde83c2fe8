/* tests/test_zeropath.c: the structural test for a nil feedthrough A0 against dense solves of the
 * gain-zero circuit (LAPACK zgesv on tb_mna_dense of the netlist re-read with the marked gain 0) */
#include "testutil.h"

#include <stdlib.h>

#include "circuit.h"
#include "mna.h"
#include "zeropath.h"

void zgesv_(const int *n, const int *nrhs, double complex *a, const int *lda, int *ipiv, double complex *b,
            const int *ldb, int *info);

/* c'M^-1 b of mna at omega by a dense LU with partial pivoting. */
static double complex dense_gain(const tb_mna *mna, double omega)
{
    size_t n = mna->n;
    double complex *M = malloc(n * n * sizeof(double complex));
    double complex *y = calloc(n, sizeof(double complex));
    int *ipiv = malloc(n * sizeof(int));
    assert_true(M && y && ipiv);
    tb_mna_dense(mna, omega, M);
    tb_svec_axpy(&mna->b, 1.0, y);
    int ni = (int)n, one = 1, info = 0;
    zgesv_(&ni, &one, M, &ni, ipiv, y, &ni, &info);
    assert_int_equal(info, 0);
    double complex g = tb_svec_dot(&mna->c, y);
    free(M);
    free(y);
    free(ipiv);
    return g;
}

static tb_mna *build_gain(const char *fmt, double k, tb_circuit **ckt)
{
    char text[2048];
    snprintf(text, sizeof text, fmt, k);
    *ckt = tu_parse(text);
    tb_mna *m = NULL;
    assert_int_equal(tb_mna_build(*ckt, NULL, &m), TB_OK);
    return m;
}

/* feed_nil of fmt's loop at gain k, checked against the dense A0 (gain 0) and A (gain k) at
 * 1 kHz and 1 MHz: nil means A0 is zero to rounding of A; not nil, that it is not. */
static bool check_nil(const char *fmt, double k)
{
    tb_circuit *ck = NULL, *c0 = NULL;
    tb_mna *mk = build_gain(fmt, k, &ck);
    tb_mna *m0 = build_gain(fmt, 0.0, &c0);
    bool nil = mk->loops[0].feed_nil;
    bool direct = false;
    assert_int_equal(tb_zeropath_feed_nil(mk, &mk->loops[0], &direct), TB_OK);
    assert_true(direct == nil);
    for (double f = 1e3; f <= 1e6; f *= 1e3) {
        double complex A0 = dense_gain(m0, 2 * TU_PI * f);
        double complex A = dense_gain(mk, 2 * TU_PI * f);
        if (nil)
            assert_true(cabs(A0) <= 1e-15 * cabs(A));
        else
            assert_true(cabs(A0) > 1e-6 * cabs(A));
    }
    tb_mna_free(mk);
    tb_mna_free(m0);
    tb_circuit_free(ck);
    tb_circuit_free(c0);
    return nil;
}

/* Inverting amplifier read at the amplifier's output (common practice: an ideal VCVS holds
 * its output at 0 when its gain is 0, so nothing reaches it around the amplifier). */
static const char inverting[] = "inverting\nVs s 0 AC 1\nR1 s n 1k\nR2 n o 10k\nC2 n o 1n\n"
                                "E1 o 0 0 n %.17g\nRL o 0 2k\n.ac dec 2 1 1meg\n.loop E1\n.io Vs v(o)\n";
/* The same read across the load behind an output resistance: the feedback network carries the
 * input to the load when E1's gain is 0 (A0 != 0). */
static const char behind_ro[] = "inverting behind Ro\nVs s 0 AC 1\nR1 s n 1k\nR2 n y 10k\n"
                                "E1 o 0 0 n %.17g\nRo o y 100\nRL y 0 2k\n.ac dec 2 1 1meg\n.loop E1\n"
                                ".io Vs v(y)\n";
/* A transconductance stage with a feedback resistor: feedthrough through RF. */
static const char vccs[] = "gm stage\nVs vs 0 AC 1\nRs vs g 1k\nRF g d 10k\nCF g d 0.5p\nRD d 0 10k\n"
                           "Cg g 0 2p\nG1 d 0 g 0 %.17g\n.ac dec 4 1k 10g\n.loop G1\n.io Vs v(d)\n";
/* A follower whose output is read differentially, v(o, m), both ends behind the amplifier. */
static const char differential[] = "differential\nVs s 0 AC 1\nRi s p 1k\nE1 o 0 p m %.17g\n"
                                   "R1 o m 9k\nR2 m 0 1k\nRL o 0 1k\n.ac dec 2 1 1meg\n.loop E1\n"
                                   ".io Vs v(o,m)\n";

static void test_zeropath_amplifier_output(void **state)
{
    (void)state;
    assert_true(check_nil(inverting, 1e5));
    assert_true(check_nil(differential, 1e5));
}

static void test_zeropath_feedthrough(void **state)
{
    (void)state;
    assert_false(check_nil(behind_ro, 1e5));
    assert_false(check_nil(vccs, 10e-3));
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_zeropath_amplifier_output),
        cmocka_unit_test(test_zeropath_feedthrough),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
