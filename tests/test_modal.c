/* tests/test_modal.c: poles and residues of c'(G + sC)^-1 b over the pencil's modes, against closed forms */
#include "testutil.h"

#include "mna.h"
#include "modal.h"

/* Two-pole follower tests/stab/stab_twopole.net: T(s) = T0 / ((1 + s/p1)(1 + s/p2)), T0 = 1e4,
 * p1 = 2 pi 100, p2 = 2 pi 1e6; the closed loop A = T/(1 + T) is the second-order low-pass
 * K / (s^2 + (p1 + p2) s + p1 p2 (1 + T0)), K = T0 p1 p2 (our algebra). */
static const char twopole[] = "tests/stab/stab_twopole.net";

/* Feedthrough: R1 || C1 from in to out, R2 from out to ground, H(s) = (G1 + sC1)/(G1 + G2 + sC1)
 * = 1 - (G2/C1)/(s + (G1 + G2)/C1) (nodal analysis by hand): one pole, residue -G2/C1, and
 * H(inf) = 1. EX is an unrelated source so that the netlist has a .loop. */
static const char feedthrough[] = "divider with a speed-up capacitor\n"
                                  "VS in 0 AC 1\n"
                                  "R1 in out 1k\n"
                                  "C1 in out 1n\n"
                                  "R2 out 0 3k\n"
                                  "EX x 0 out 0 1\n"
                                  "RX x 0 1k\n"
                                  ".io VS v(out)\n"
                                  ".loop EX\n";

static tb_mna *build_circuit(tb_circuit *ckt)
{
    tb_mna *mna = NULL;
    assert_int_equal(tb_mna_build(ckt, NULL, &mna), TB_OK);
    return mna;
}

static tb_mna *build(const char *text, tb_circuit **ckt)
{
    *ckt = tu_parse(text);
    return build_circuit(*ckt);
}

static tb_mna *build_file(const char *path, tb_circuit **ckt)
{
    assert_int_equal(tb_circuit_read(path, NULL, ckt), TB_OK);
    return build_circuit(*ckt);
}

static void test_modal_second_order_closed_form(void **state)
{
    (void)state;
    tb_circuit *ckt = NULL;
    tb_mna *mna = build_file(twopole, &ckt);
    tb_modal m;
    assert_int_equal(tb_modal_compute(mna, &m), TB_OK);
    double p1 = 2 * TU_PI * 100, p2 = 2 * TU_PI * 1e6, T0 = 1e4;
    double wn = sqrt(p1 * p2 * (1 + T0)), zeta = (p1 + p2) / (2 * wn), wd = wn * sqrt(1 - zeta * zeta);
    double K = T0 * p1 * p2;
    assert_int_equal(m.count, 2);
    for (size_t k = 0; k < 2; k++) {
        double sign = cimag(m.s[k]) > 0 ? 1 : -1;
        tu_close(m.s[k], CMPLX(-zeta * wn, sign * wd), 1e-10);
        /* residue of K / ((s - s+)(s - s-)) at s+-: K / (s+- - s-+) = K / (+-2j wd) */
        tu_close(m.r[k], K / CMPLX(0, 2 * sign * wd), 1e-8);
    }
    assert_true(cimag(m.s[0]) == -cimag(m.s[1]) && m.r[0] == conj(m.r[1])); /* exact pairs */
    double A0 = T0 / (1 + T0);
    for (double f = 1e3; f < 1e8; f *= 10) { /* no feedthrough: d0 = 0 */
        double complex s = CMPLX(0, 2 * TU_PI * f);
        tu_close(tb_modal_transfer(&m, 0, s), K / (s * s + 2 * zeta * wn * s + wn * wn), 1e-9);
    }
    /* unit step of the second-order low-pass (Ogata, Modern Control Engineering, from memory):
     * y = A0 [1 - e^(-zeta wn t) (cos wd t + zeta/sqrt(1 - zeta^2) sin wd t)],
     * y' = A0 wn/sqrt(1 - zeta^2) e^(-zeta wn t) sin wd t */
    for (double t = 0; t < 5e-6; t += 3.3e-7) {
        double y = 0, dy = 0, e = exp(-zeta * wn * t), q = sqrt(1 - zeta * zeta);
        tb_modal_step(&m, A0, t, &y, &dy);
        assert_true(fabs(y - A0 * (1 - e * (cos(wd * t) + zeta / q * sin(wd * t)))) <= 1e-9 * A0);
        assert_true(fabs(dy - A0 * wn / q * e * sin(wd * t)) <= 1e-9 * A0 * wn);
    }
    tb_modal_free(&m);
    tb_mna_free(mna);
    tb_circuit_free(ckt);
}

static void test_modal_feedthrough_closed_form(void **state)
{
    (void)state;
    tb_circuit *ckt = NULL;
    tb_mna *mna = build(feedthrough, &ckt);
    tb_modal m;
    assert_int_equal(tb_modal_compute(mna, &m), TB_OK);
    double G1 = 1e-3, G2 = 1.0 / 3e3, C1 = 1e-9;
    assert_int_equal(m.count, 1);
    tu_close(m.s[0], -(G1 + G2) / C1, 1e-12);
    tu_close(m.r[0], -G2 / C1, 1e-10);
    /* y(0+) = A(0) + r/s = G1/(G1 + G2) + G2/(G1 + G2) = 1 = H(inf) */
    double A0 = G1 / (G1 + G2), y = 0, dy = 0;
    tb_modal_step(&m, A0, 0, &y, &dy);
    tu_close(y, 1.0, 1e-12);
    tb_modal_free(&m);
    tb_mna_free(mna);
    tb_circuit_free(ckt);
}

/* Without capacitors or inductors there is no finite mode at all. */
static void test_modal_no_dynamics(void **state)
{
    (void)state;
    tb_circuit *ckt = NULL;
    tb_mna *mna = build("divider\nVS in 0 AC 1\nR1 in out 1k\nR2 out 0 1k\nEX x 0 out 0 1\n"
                        "RX x 0 1k\n.io VS v(out)\n.loop EX\n",
                        &ckt);
    tb_modal m;
    assert_int_equal(tb_modal_compute(mna, &m), TB_OK);
    assert_int_equal(m.count, 0);
    assert_true(m.scale == 0);
    tb_modal_free(&m);
    tb_modal_free(NULL);
    tb_mna_free(mna);
    tb_circuit_free(ckt);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_modal_second_order_closed_form),
        cmocka_unit_test(test_modal_feedthrough_closed_form),
        cmocka_unit_test(test_modal_no_dynamics),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
