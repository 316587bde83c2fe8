/* tests/test_loop.c: loop quantities at their edge cases, and the foundation measures
 * (unity-gain frequency, phase margin) against closed forms. */
#include "testutil.h"

static tb_result *analyse(const char *text, tb_circuit **ckt)
{
    return tu_analyse(text, ckt);
}

/* A transconductor charging a capacitor with unity feedback: T(s) = gm/(sC), an
 * integrator (own derivation: KCL at o, sC v_o = gm (v_in - v_o)). At DC the
 * circuit with gm = 0 leaves o floating, so T is infinite there and A_inf = A = 1
 * (design.md, edge cases); unity gain at gm/(2 pi C) with 90 degrees of margin. */
static void test_loop_integrator_infinite_T_at_dc(void **state)
{
    (void)state;
    double gm = 1e-3, C = 1e-9;
    char text[512];
    snprintf(text, sizeof text,
             "integrator\nVs in 0 AC 1\nG1 0 o in o %.17g\nC1 o 0 %.17g\n"
             ".ac dec 200 1k 100meg\n.loop G1\n.io Vs v(o)\n",
             gm, C);
    tb_circuit *ckt = NULL;
    tb_result *res = analyse(text, &ckt);
    tb_point dc;
    assert_true(tb_result_dc(res, 0, &dc));
    assert_true(dc.flags & TB_PT_T_INF);
    assert_true(dc.flags & TB_PT_A0_NONE);
    tu_close(dc.A, 1.0, 1e-12);
    tu_close(dc.A_inf, 1.0, 1e-12);
    const tb_point *pts = tb_result_loop(res, 0);
    const double *f = tb_result_freqs(res);
    for (size_t i = 0; i < tb_result_points(res); i += 97) {
        double complex s = I * 2 * TU_PI * f[i];
        tu_close(pts[i].T, gm / (s * C), 1e-11);
        tu_close(pts[i].A, gm / (gm + s * C), 1e-11);
    }
    tb_measures m;
    assert_int_equal(tb_measure_loop(res, 0, &m), TB_OK);
    assert_true(m.notes & (1u << TB_NOTE_T_INF_DC));
    assert_true(m.has_unity);
    /* |T| = 1/x with x = f/fu: linear in (log f, dB), so interpolation is exact */
    tu_close(m.unity_hz, gm / (2 * TU_PI * C), 1e-9);
    assert_true(m.has_phase_margin);
    assert_true(fabs(m.phase_margin_deg - 90.0) < 1e-9);
    tb_result_free(res);
    tb_circuit_free(ckt);
}

/* A controlled source whose output never reaches its own control: not in a loop. */
static void test_loop_not_in_a_loop(void **state)
{
    (void)state;
    tb_circuit *ckt = NULL;
    tb_result *res = analyse("open chain\nVs in 0 AC 1\nR1 in 0 1k\nE1 out 0 in 0 10\n"
                             "R2 out 0 1k\n.ac dec 5 1 1k\n.loop E1\n.io Vs v(out)\n",
                             &ckt);
    const tb_point *pts = tb_result_loop(res, 0);
    for (size_t i = 0; i < tb_result_points(res); i++) {
        assert_true(pts[i].flags & TB_PT_AINF_NONE);
        assert_true(cabs(pts[i].T) == 0.0);
        tu_close(pts[i].A, 10.0, 1e-14);
    }
    tb_measures m;
    assert_int_equal(tb_measure_loop(res, 0, &m), TB_OK);
    assert_true(m.notes & (1u << TB_NOTE_NOT_IN_LOOP));
    assert_false(m.has_unity);
    tb_result_free(res);
    tb_circuit_free(ckt);
}

/* Feedback into the non-inverting input: T(0) = -a R1/(R1+R2) < 0. With Cp across R1,
 * T(s) = -3/(1 + s tau), tau = R1 R2 Cp/(R1 + R2) (our algebra): |T| = 1 at w tau = sqrt 8,
 * where the phase of T is 180 - atan(sqrt 8) degrees, so the phase margin, wrapped into
 * (-180, 180], is -atan(sqrt 8) = -70.53 degrees (that much lead puts T on -1; the loop is
 * unstable, a real pole at s = 2/tau). The stability analysis gives it; the grid estimate
 * without it keeps the foundation's rule (design.md "Measures": absent when T(0) < 0). */
static void test_loop_positive_feedback_at_dc(void **state)
{
    (void)state;
    static const char text[] = "positive feedback\nVs in 0 AC 1\nRin in n 1k\nE1 out 0 p n 30\n"
                               "R2 out p 9k\nR1 p 0 1k\nCp p 0 1u\n"
                               ".ac dec 20 1 1meg\n.loop E1\n.io Vs v(out)\n";
    tb_circuit *ckt = NULL;
    tb_result *res = analyse(text, &ckt);
    tb_point dc;
    assert_true(tb_result_dc(res, 0, &dc));
    tu_close(dc.T, -30.0 * 1e3 / 10e3, 1e-12);
    tb_measures m;
    assert_int_equal(tb_measure_loop(res, 0, &m), TB_OK);
    double tau = 1e3 * 9e3 * 1e-6 / 10e3;
    assert_true(m.has_unity);
    tu_close(m.unity_hz, sqrt(8.0) / tau / (2 * TU_PI), 1e-9);
    assert_true(m.has_phase_margin);
    tu_close(m.phase_margin_deg, -atan(sqrt(8.0)) * 180 / TU_PI, 1e-9);
    assert_true(m.notes & (1u << TB_NOTE_POSITIVE_FB_DC));
    tb_result_free(res);
    tb_circuit_free(ckt);
    tb_options opt;
    tb_options_init(&opt);
    opt.stability = false;
    ckt = tu_parse(text);
    assert_int_equal(tb_analyse(ckt, &opt, NULL, &res), TB_OK);
    assert_int_equal(tb_measure_loop(res, 0, &m), TB_OK);
    assert_true(m.has_unity);
    assert_false(m.has_phase_margin);
    assert_true(m.notes & (1u << TB_NOTE_POSITIVE_FB_DC));
    tb_result_free(res);
    tb_circuit_free(ckt);
}

/* A VCVS that reads its own output node, the usual unity follower E out 0 p out k:
 * with the source's output k*x_c replaced by k*1, out = k and the returned x_c =
 * V(p) - V(out) = -k, so T = k (Bode's return ratio, design.md "The algebra"), and
 * A0 = 0 (nothing reaches out with the gain at zero). The branch incidence of E is
 * not part of its gain, so M0 keeps it. */
static void test_loop_follower_reads_own_output(void **state)
{
    (void)state;
    tb_circuit *ckt = NULL;
    tb_result *res = analyse("follower\nVs in 0 AC 1\nR1 in p 1k\nE1 out 0 p out 2e5\nRL out 0 10k\n"
                             ".ac dec 5 1 1k\n.loop E1\n.io Vs v(out)\n",
                             &ckt);
    tb_point dc;
    assert_true(tb_result_dc(res, 0, &dc));
    tu_close(dc.T, 2e5, 1e-12);
    tu_close(dc.A, 2e5 / (1 + 2e5), 1e-12);
    assert_true(cabs(dc.A0) <= 1e-12);
    tb_result_free(res);
    tb_circuit_free(ckt);
}

/* references.md check 4b: two real poles, T = T0/((1+s/p1)(1+s/p2)), T0 = 1e4,
 * f1 = 100 Hz, f2 = 1 MHz. Exact crossover u = fc^2 =
 * [-(f1^2+f2^2) + sqrt((f1^2+f2^2)^2 + 4 f1^2 f2^2 (T0^2-1))]/2,
 * PM = 180 - atan(fc/f1) - atan(fc/f2) degrees (about 51.8). Buffered RC poles
 * so that each pole stands alone. */
static void test_loop_two_pole_margin(void **state)
{
    (void)state;
    double T0 = 1e4, f1 = 100, f2 = 1e6, R = 1e3;
    char text[1024];
    snprintf(text, sizeof text,
             "two poles\nVs in 0 AC 1\nE1 a 0 in out %.17g\nR1 a b %.17g\nC1 b 0 %.17g\n"
             "Eb1 c 0 b 0 1\nR2 c d %.17g\nC2 d 0 %.17g\nEb2 out 0 d 0 1\n"
             ".ac dec 1000 100k 10meg\n.loop E1\n.io Vs v(out)\n",
             T0, R, 1 / (2 * TU_PI * R * f1), R, 1 / (2 * TU_PI * R * f2));
    tb_circuit *ckt = NULL;
    tb_result *res = analyse(text, &ckt);
    double s1 = f1 * f1 + f2 * f2;
    double u = (-s1 + sqrt(s1 * s1 + 4 * f1 * f1 * f2 * f2 * (T0 * T0 - 1))) / 2;
    double fc = sqrt(u);
    double pm = 180 - (atan(fc / f1) + atan(fc / f2)) * 180 / TU_PI;
    tb_measures m;
    assert_int_equal(tb_measure_loop(res, 0, &m), TB_OK);
    assert_true(m.has_unity && m.has_phase_margin);
    /* 1000 points/decade: the (log f, dB) interpolation error is below 1e-6 relative
     * and the phase one below 1e-4 degree for this smooth two-pole curve */
    tu_close(m.unity_hz, fc, 1e-6);
    assert_true(fabs(m.phase_margin_deg - pm) < 1e-4);
    tb_result_free(res);
    tb_circuit_free(ckt);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_loop_integrator_infinite_T_at_dc),
        cmocka_unit_test(test_loop_not_in_a_loop),
        cmocka_unit_test(test_loop_positive_feedback_at_dc),
        cmocka_unit_test(test_loop_two_pole_margin),
        cmocka_unit_test(test_loop_follower_reads_own_output),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
