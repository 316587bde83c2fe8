/* tests/test_step.c: the closed-loop step response and its figures against closed forms, by both routes */
#include "testutil.h"

/* One-pole follower: G1 (gm = 1 mS) drives R || C at the output, which feeds G1's inverting
 * input: A(s) = gm/(gm + 1/R + sC), A(0) = gm R/(1 + gm R), tau = C/(gm + 1/R). Step
 * y = A(0)(1 - e^(-t/tau)): 10-90 % rise tau ln 9, 2 % settling tau ln 50, no overshoot
 * (first-order circuit, common practice). */
#define ONE_POLE                                                                                   \
    "one-pole follower\n"                                                                          \
    "VS in 0 AC 1\n"                                                                               \
    "G1 0 out in out 1m\n"                                                                         \
    "R1 out 0 1meg\n"                                                                              \
    "C1 out 0 1n\n"                                                                                \
    ".io VS v(out)\n"                                                                              \
    ".loop G1\n"                                                                                   \
    ".ac dec 10 1 1g\n"

/* The same with a 1 s RC hanging on the input, which the ideal source holds: a closed-loop
 * natural frequency the output never sees. */
static const char monitored[] = ONE_POLE "RM in mon 1meg\nCM mon 0 1u\n";

/* Two-pole follower tests/stab/stab_twopole.net: the closed loop is the second-order low-pass
 * with wn^2 = p1 p2 (1 + T0), 2 zeta wn = p1 + p2, T0 = 1e4, p1 = 2 pi 100, p2 = 2 pi 1e6;
 * overshoot exp(-pi zeta/sqrt(1 - zeta^2)) at t = pi/wd (references.md section 4). */
static const char twopole[] = "tests/stab/stab_twopole.net";

static tb_result *analyse_jobs(tb_circuit *ckt, size_t pole_limit, unsigned jobs, tb_step_figures *fig)
{
    tb_options opt;
    tb_options_init(&opt);
    opt.pole_limit = pole_limit;
    opt.jobs = jobs;
    tb_result *res = NULL;
    assert_int_equal(tb_analyse(ckt, &opt, NULL, &res), TB_OK);
    tb_circuit_free(ckt);
    assert_int_equal(tb_step_figures_get(res, fig), TB_OK);
    return res;
}

static tb_result *analyse_circuit(tb_circuit *ckt, size_t pole_limit, tb_step_figures *fig)
{
    return analyse_jobs(ckt, pole_limit, 1, fig);
}

static tb_result *analyse(const char *text, size_t pole_limit, tb_step_figures *fig)
{
    return analyse_circuit(tu_parse(text), pole_limit, fig);
}

static void one_pole_case(const char *text, size_t pole_limit, double rel)
{
    tb_step_figures fig;
    tb_result *res = analyse(text, pole_limit, &fig);
    double gm = 1e-3, R = 1e6, C = 1e-9, A0 = gm * R / (1 + gm * R), tau = C / (gm + 1 / R);
    assert_true(fig.computed);
    assert_null(fig.why_no_figures);
    assert_true(fig.error_estimate <= 5e-4); /* the most either route accepts */
    tu_close(fig.final_value, A0, 1e-12);
    assert_true(fig.has_rise && fig.has_settling && fig.has_overshoot);
    tu_close(fig.rise_s, tau * log(9.0), rel);
    tu_close(fig.settling_s, tau * log(50.0), rel);
    assert_true(fig.overshoot_pct <= 100 * rel); /* 0 exactly; time stepping may pass A(0) by its error */
    assert_true(fig.t_end_s < 100 * tau); /* the 1 s mode does not stretch the time axis */
    const double *t = NULL, *y = NULL;
    size_t n = 0;
    assert_int_equal(tb_step_samples(res, &t, &y, &n), TB_OK);
    assert_int_equal(n, fig.points);
    for (size_t k = 0; k < n; k++)
        assert_true(fabs(y[k] - A0 * (1 - exp(-t[k] / tau))) <= rel * A0);
    tb_result_free(res);
}

static void test_step_one_pole_exact(void **state)
{
    (void)state;
    one_pole_case(ONE_POLE, 500, 1e-9);
    one_pole_case(monitored, 500, 1e-9);
}

/* Above the pole limit: time stepping with error control, to issue 11's target (1e-3). */
static void test_step_one_pole_time_stepping(void **state)
{
    (void)state;
    one_pole_case(ONE_POLE, 0, 1e-3);
    one_pole_case(monitored, 0, 1e-3);
}

static void two_pole_case(size_t pole_limit, double rel)
{
    tb_step_figures fig;
    tb_circuit *ckt = NULL;
    assert_int_equal(tb_circuit_read(twopole, NULL, &ckt), TB_OK);
    tb_result *res = analyse_circuit(ckt, pole_limit, &fig);
    double p1 = 2 * TU_PI * 100, p2 = 2 * TU_PI * 1e6, T0 = 1e4;
    double wn = sqrt(p1 * p2 * (1 + T0)), zeta = (p1 + p2) / (2 * wn);
    double q = sqrt(1 - zeta * zeta);
    assert_true(fig.computed && fig.has_overshoot && fig.has_peak);
    tu_close(fig.overshoot_pct, 100 * exp(-TU_PI * zeta / q), rel);
    tu_close(fig.peak_s, TU_PI / (wn * q), sqrt(rel)); /* a maximum is located to sqrt(eps) only */
    tu_close(fig.peak_value, T0 / (1 + T0) * (1 + exp(-TU_PI * zeta / q)), rel);
    tb_result_free(res);
}

static void test_step_second_order_overshoot(void **state)
{
    (void)state;
    two_pole_case(500, 1e-9);
    two_pole_case(0, 1e-3);
}

/* R1 || C1 from in to out, R2 to ground, and a loop that does not touch them: the output jumps
 * to 1 at t = 0+, then decays to A0 = G1/(G1 + G2) with tau = C1/(G1 + G2) (nodal analysis by
 * hand). Peak 1 at t = 0: overshoot (1/A0 - 1) 100 %; z = y/A0 starts above 0.9: rise 0; 2 %
 * settling where (1/A0 - 1) e^(-t/tau) = 0.02. */
static void test_step_feedthrough_jump(void **state)
{
    (void)state;
    tb_step_figures fig;
    tb_result *res = analyse("speed-up capacitor\nVS in 0 AC 1\nR1 in out 1k\nC1 in out 1n\nR2 out 0 3k\n"
                             "G1 0 x out x 1m\nRX x 0 1k\n.io VS v(out)\n.loop G1\n",
                             500, &fig);
    double G1 = 1e-3, G2 = 1.0 / 3e3, A0 = G1 / (G1 + G2), tau = 1e-9 / (G1 + G2);
    assert_true(fig.computed);
    const double *t = NULL, *y = NULL;
    size_t n = 0;
    assert_int_equal(tb_step_samples(res, &t, &y, &n), TB_OK);
    assert_true(t[0] == 0 && fabs(y[0] - 1) <= 1e-12); /* the value just after the jump */
    tu_close(fig.overshoot_pct, 100 * (1 / A0 - 1), 1e-9);
    assert_true(fig.peak_s == 0 && fig.has_rise && fig.rise_s == 0);
    tu_close(fig.settling_s, tau * log((1 / A0 - 1) / 0.02), 1e-9);
    tb_result_free(res);
}

/* Absent figures say why: no .io, an unstable loop (T0 = 10 through three equal poles,
 * references.md check 4c), no capacitor at all. */
static void test_step_absent_with_reason(void **state)
{
    (void)state;
    tb_step_figures fig;
    tb_result *res = analyse("no io\nVS in 0 AC 1\nG1 0 out in out 1m\nR1 out 0 1k\nC1 out 0 1n\n.loop G1\n", 500,
                             &fig);
    assert_false(fig.computed);
    assert_string_equal(fig.why_absent, "no .io directive: no input to step");
    tb_result_free(res);
    const char *unstable = "three poles, T0 = 10\nVS in 0 AC 1\nG1 0 a in out 10m\nRa a 0 1k\n"
                           "Ca a 0 1.5915494309189534e-07\nG2 0 b a 0 1m\nRb b 0 1k\n"
                           "Cb b 0 1.5915494309189534e-07\nG3 0 c b 0 1m\nRc c 0 1k\n"
                           "Cc c 0 1.5915494309189534e-07\nEO out 0 c 0 1\n.io VS v(out)\n.loop G1\n"
                           ".ac dec 20 1 1meg\n";
    for (size_t limit = 0; limit <= 500; limit += 500) {
        res = analyse(unstable, limit, &fig);
        assert_true(fig.computed); /* the samples show the growth */
        assert_string_equal(fig.why_no_figures, "figures only for a stable closed loop");
        assert_false(fig.has_overshoot || fig.has_rise || fig.has_settling || fig.has_peak);
        tb_result_free(res);
    }
    res = analyse("divider\nVS in 0 AC 1\nG1 0 out in out 1m\nR1 out 0 1k\n.io VS v(out)\n.loop G1\n", 500, &fig);
    assert_false(fig.computed);
    assert_string_equal(fig.why_absent,
                        "no finite closed-loop poles: the output follows the input at once, there is no time scale");
    tb_result_free(res);
}

/* With two threads the time-stepped response (above the pole limit, 0 here) runs beside the
 * stability analysis on a solver of its own: the second-order closed form as above, and the
 * samples and figures those of one thread, bit for bit. */
static tb_result *two_pole_jobs(unsigned jobs, tb_step_figures *fig)
{
    tb_circuit *ckt = NULL;
    assert_int_equal(tb_circuit_read(twopole, NULL, &ckt), TB_OK);
    return analyse_jobs(ckt, 0, jobs, fig);
}

static void test_step_beside_stability(void **state)
{
    (void)state;
    tb_step_figures one, two;
    tb_result *r1 = two_pole_jobs(1, &one);
    tb_result *r2 = two_pole_jobs(2, &two);
    double p1 = 2 * TU_PI * 100, p2 = 2 * TU_PI * 1e6, T0 = 1e4;
    double wn = sqrt(p1 * p2 * (1 + T0)), zeta = (p1 + p2) / (2 * wn);
    assert_true(two.computed && two.has_overshoot);
    tu_close(two.overshoot_pct, 100 * exp(-TU_PI * zeta / sqrt(1 - zeta * zeta)), 1e-3);
    assert_true(one.overshoot_pct == two.overshoot_pct && one.rise_s == two.rise_s &&
                one.settling_s == two.settling_s && one.points == two.points);
    assert_string_equal(one.method, two.method);
    const double *t1 = NULL, *y1 = NULL, *t2 = NULL, *y2 = NULL;
    size_t n1 = 0, n2 = 0;
    assert_int_equal(tb_step_samples(r1, &t1, &y1, &n1), TB_OK);
    assert_int_equal(tb_step_samples(r2, &t2, &y2, &n2), TB_OK);
    assert_int_equal(n1, n2);
    assert_memory_equal(t1, t2, n1 * sizeof(double));
    assert_memory_equal(y1, y2, n1 * sizeof(double));
    tb_result_free(r1);
    tb_result_free(r2);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_step_one_pole_exact),
        cmocka_unit_test(test_step_one_pole_time_stepping),
        cmocka_unit_test(test_step_second_order_overshoot),
        cmocka_unit_test(test_step_feedthrough_jump),
        cmocka_unit_test(test_step_absent_with_reason),
        cmocka_unit_test(test_step_beside_stability),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
