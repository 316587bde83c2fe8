/* tests/test_distortion.c: weakly nonlinear distortion (src/distortion.c) against closed forms.
 * Sources: a memoryless stage y = a1 x + a2 x^2 + a3 x^3 inside a loop x = u - beta y has the
 * closed-loop series y = b1 u + b2 u^2 + b3 u^3 with b1 = a1/(1+T), b2 = a2/(1+T)^3,
 * b3 = (a3 (1+T) - 2 a2^2 beta)/(1+T)^5, T = a1 beta (P. Wambacq and W. Sansen, Distortion
 * Analysis of Analog Integrated Circuits, Kluwer 1998, the chapter on feedback, from memory;
 * the form is checked independently by a series fit of the solved loop equation in
 * tests/ref/distortion_check.py). For y = b1 u + b2 u^2 + b3 u^3 driven by u = U cos wt,
 * the harmonics to third order are HD2 = |b2| U/(2 |b1|), HD3 = |b3| U^2/(4 |b1|), and with
 * two tones of U each IM2 = |b2| U/|b1|, IM3 = 3 |b3| U^2/(4 |b1|) (trigonometric identities,
 * common practice); the intercept is U/sqrt(IM3). Every expected value is computed here from
 * the element values, never copied from tbeta. */
#include "testutil.h"

#include "expect.h"

typedef struct {
    tb_circuit *ckt;
    tb_result *res;
    tb_distortion sum;
    tb_distortion_loop dl;
    const tb_dist_sweep_point *pts;
    size_t npts;
} run;

static run analyse(const char *text)
{
    run r = {0};
    r.res = tu_analyse(text, &r.ckt);
    assert_int_equal(tb_distortion_get(r.res, &r.sum), TB_OK);
    assert_int_equal(tb_distortion_loop_get(r.res, 0, &r.dl, &r.pts, &r.npts), TB_OK);
    return r;
}

static void done(run *r)
{
    tb_result_free(r->res);
    tb_circuit_free(r->ckt);
}

/* The memoryless stage: E1 is the amplifier a(x) with x = v(in) - v(fb), Efb feeds back
 * beta v(out). */
static const char memoryless[] = "memoryless stage in a loop\nV1 in 0 AC 1\n"
                                 "E1 out 0 in fb 1000 k2=200 k3=-5000\nEfb fb 0 out 0 0.1\nR2 out 0 1k\n"
                                 ".ac dec 2 10 1k\n.loop E1\n.io V1 v(out)\n.volterra amp=0.1 freq=100\n";

static void test_distortion_memoryless_closed_loop(void **state)
{
    (void)state;
    run r = analyse(memoryless);
    double a1 = 1000, a2 = 200, a3 = -5000, beta = 0.1, U = 0.1;
    double T = a1 * beta;
    double b1 = a1 / (1 + T);
    double b2 = a2 / pow(1 + T, 3);
    double b3 = (a3 * (1 + T) - 2 * a2 * a2 * beta) / pow(1 + T, 5);
    assert_true(r.sum.computed);
    const tb_dist_case *c = &r.sum.closed;
    tu_close(c->fund, b1 * U, 1e-12);
    tu_close(c->hd2.ratio, fabs(b2) * U / (2 * b1), 1e-9);
    tu_close(c->hd3.ratio, fabs(b3) * U * U / (4 * b1), 1e-9);
    tu_close(c->hd2.db, 20 * log10(fabs(b2) * U / (2 * b1)), 1e-9);
    tu_close(c->im2.ratio, fabs(b2) * U / b1, 1e-9);
    tu_close(c->im2_diff.ratio, fabs(b2) * U / b1, 1e-9);
    tu_close(c->im3.ratio, 3 * fabs(b3) * U * U / (4 * b1), 1e-9);
    tu_close(c->iip3, U / sqrt(3 * fabs(b3) * U * U / (4 * b1)), 1e-9);
    /* the k3 part alone: a3 (1+T)/(1+T)^5 in b3; the interaction part: -2 a2^2 beta/(1+T)^5 */
    tu_close(c->hd3_direct.ratio, fabs(a3) / pow(1 + T, 4) * U * U / (4 * b1), 1e-9);
    tu_close(c->hd3_inter.ratio, 2 * a2 * a2 * beta / pow(1 + T, 5) * U * U / (4 * b1), 1e-9);
    assert_true(c->valid);
    done(&r);
}

/* Opened at equal output amplitude Y = b1 U: the amplifier alone, driven with s = Y/a1, gives
 * HD2 = a2 s/(2 a1), HD3 = |a3| s^2/(4 a1); so feedback divides HD2 by 1 + T and the k3 part of
 * HD3 by 1 + T, and the whole of HD3 by (1+T)/(1 - 2 a2^2 beta/(a3 (1+T))) (from b1, b2, b3). */
static void test_distortion_memoryless_opened(void **state)
{
    (void)state;
    run r = analyse(memoryless);
    double a1 = 1000, a2 = 200, a3 = -5000, beta = 0.1, U = 0.1;
    double T = a1 * beta;
    double Y = a1 / (1 + T) * U;
    double s = Y / a1;
    assert_true(r.dl.computed);
    tu_close(r.dl.T, T, 1e-12);
    tu_close(r.dl.open.drive, s, 1e-12);
    tu_close(r.dl.open.fund, Y, 1e-12);
    tu_close(r.dl.open.hd2.ratio, a2 * s / (2 * a1), 1e-9);
    tu_close(r.dl.open.hd3.ratio, fabs(a3) * s * s / (4 * a1), 1e-9);
    assert_false(r.dl.open.hd3_inter.has_db); /* nothing feeds the second order back */
    tu_close(r.dl.hd2_reduction, 1 + T, 1e-9);
    tu_close(r.dl.rule_hd2, 1 + T, 1e-12);
    tu_close(r.dl.hd3_direct_reduction, 1 + T, 1e-9);
    tu_close(r.dl.hd3_reduction, (1 + T) / (1 - 2 * a2 * a2 * beta / (a3 * (1 + T))), 1e-9);
    /* memoryless: every sweep point agrees with the stated tone */
    assert_int_equal(r.npts, 5);
    for (size_t i = 0; i < r.npts; i++) {
        assert_true(r.pts[i].has_closed && r.pts[i].has_open && r.pts[i].has_T);
        tu_close(r.pts[i].hd2_closed, r.sum.closed.hd2.ratio, 1e-9);
        tu_close(r.pts[i].hd3_open, r.dl.open.hd3.ratio, 1e-9);
        tu_close(r.pts[i].T_mag, T, 1e-12);
        tu_close(r.pts[i].amp, U, 1e-12); /* memoryless: the same input holds the output */
    }
    done(&r);
}

/* A transconductor into R || C with no loop around it (T = 0): the nonlinear current
 * k2 v^2 sees the load at 2 w, so HD2 = k2 U |Z(2 jw)|/(2 gm |Z(jw)|) and, with
 * k3 alone, HD3 = k3 U^2 |Z(3 jw)|/(4 gm |Z(jw)|) (the method of nonlinear currents written
 * out by hand for one node). */
static void test_distortion_one_pole_load(void **state)
{
    (void)state;
    const char *text = "transconductor into R || C\nV1 in 0 AC 1\nG1 0 out in 0 10m k2=2m k3=-3m\n"
                       "R1 out 0 1k\nC1 out 0 159.154943n\n.ac dec 2 10 10k\n.loop G1\n.io V1 v(out)\n"
                       ".volterra amp=50m freq=1k\n";
    run r = analyse(text);
    double gm = 10e-3, k2 = 2e-3, k3 = -3e-3, U = 50e-3, R = 1e3, C = 159.154943e-9, w = 2 * TU_PI * 1e3;
    double complex Z1 = R / (1 + I * w * R * C);
    double complex Z2 = R / (1 + 2 * I * w * R * C);
    double complex Z3 = R / (1 + 3 * I * w * R * C);
    assert_true(r.sum.computed);
    tu_close(r.sum.closed.fund, gm * U * cabs(Z1), 1e-12);
    tu_close(r.sum.closed.hd2.ratio, k2 * U * cabs(Z2) / (2 * gm * cabs(Z1)), 1e-9);
    tu_close(r.sum.closed.hd3.ratio, fabs(k3) * U * U * cabs(Z3) / (4 * gm * cabs(Z1)), 1e-9);
    assert_false(r.sum.closed.hd3_inter.has_db); /* the control does not see the output */
    /* no loop around G1: opening it changes nothing */
    assert_true(r.dl.computed);
    tu_close(r.dl.T, 0, 1e-12);
    tu_close(r.dl.hd2_reduction, 1, 1e-9);
    done(&r);
}

/* The validity limit: HD3 grows as U^2, so ten times the amplitude lifts the third-order
 * terms a hundredfold past limit=1 (percent). */
static void test_distortion_validity(void **state)
{
    (void)state;
    const char *small = "cubic stage\nV1 in 0 AC 1\nE1 out 0 in 0 10 k3=-40\nR2 out 0 1k\n.ac dec 1 10 100\n"
                        ".loop E1\n.io V1 v(out)\n.volterra amp=10m freq=100 limit=1\n";
    run r = analyse(small);
    /* IM3 = 3 |k3| U^2/(4 k) = 3e-4: inside 1 % */
    tu_close(r.sum.closed.third, 3 * 40 * 1e-4 / (4 * 10), 1e-9);
    assert_true(r.sum.closed.valid);
    done(&r);
    const char *large = "cubic stage\nV1 in 0 AC 1\nE1 out 0 in 0 10 k3=-40\nR2 out 0 1k\n.ac dec 1 10 100\n"
                        ".loop E1\n.io V1 v(out)\n.volterra amp=200m freq=100 limit=1\n";
    r = analyse(large);
    tu_close(r.sum.closed.third, 3 * 40 * 0.04 / (4 * 10), 1e-9); /* 12 % */
    assert_false(r.sum.closed.valid);
    done(&r);
}

/* One factorization per distinct frequency: f, 2f, 3f, f2, f2 - f, f + f2, 2f - f2 at the
 * stated tones, then f, 2f, 3f at each sweep point, on top of the same netlist without
 * .volterra. */
static void test_distortion_factorizations(void **state)
{
    (void)state;
    const char *base = "count\nV1 in 0 AC 1\nE1 out 0 in fb 1000 k2=1\nEfb fb 0 out 0 0.1\nR2 out 0 1k\n"
                       ".ac dec 3 10 1k\n.loop E1\n.io V1 v(out)\n";
    char text[512];
    snprintf(text, sizeof text, "%s.volterra amp=1m freq=100\n", base);
    tb_circuit *c0 = NULL, *c1 = NULL;
    tb_result *r0 = tu_analyse(base, &c0);
    tb_result *r1 = tu_analyse(text, &c1);
    tb_stats s0, s1;
    tb_result_stats(r0, &s0);
    tb_result_stats(r1, &s1);
    tb_distortion sum;
    tb_distortion_get(r1, &sum);
    assert_int_equal(sum.sweep_points, 7);
    assert_int_equal(s1.probe_factorizations - s0.probe_factorizations, 7 + 3 * sum.sweep_points);
    tb_result_free(r0);
    tb_result_free(r1);
    tb_circuit_free(c0);
    tb_circuit_free(c1);
}

static void test_distortion_absent(void **state)
{
    (void)state;
    run r = analyse("linear\nV1 in 0 AC 1\nE1 out 0 in 0 10\nR2 out 0 1k\n.ac dec 1 10 100\n.loop E1\n"
                    ".io V1 v(out)\n.volterra amp=1m freq=100\n");
    assert_false(r.sum.computed);
    assert_string_equal(r.sum.why_absent, "no source has k2= or k3=: the circuit is linear");
    assert_false(r.dl.computed);
    assert_null(r.pts);
    done(&r);
    r = analyse("no io\nV1 in 0 AC 1\nE1 out 0 in 0 10 k2=1\nR2 out 0 1k\n.ac dec 1 10 100\n.loop E1\n"
                ".volterra amp=1m freq=100\n");
    assert_false(r.sum.computed);
    assert_string_equal(r.sum.why_absent, "no .io directive: distortion needs an input and an output");
    done(&r);
    r = analyse("none\nV1 in 0 AC 1\nE1 out 0 in 0 10 k2=1\nR2 out 0 1k\n.ac dec 1 10 100\n.loop E1\n");
    assert_false(r.sum.computed);
    assert_string_equal(r.sum.why_absent, "no .volterra directive");
    done(&r);
    tb_distortion sum;
    assert_int_equal(tb_distortion_get(NULL, &sum), TB_ERR_USAGE);
}

/* The .expect figures read the same numbers: HD2 and HD3 in dB and percent from b1, b2, b3, the
 * reductions from the opened stage (closed forms above). */
static void test_distortion_expect_figures(void **state)
{
    (void)state;
    run r = analyse(memoryless);
    double a1 = 1000, a2 = 200, a3 = -5000, beta = 0.1, U = 0.1;
    double T = a1 * beta;
    double b1 = a1 / (1 + T);
    double hd2 = a2 / pow(1 + T, 3) * U / (2 * b1);
    double hd3 = fabs(a3 * (1 + T) - 2 * a2 * a2 * beta) / pow(1 + T, 5) * U * U / (4 * b1);
    struct {
        const char *name;
        double want;
    } cases[] = {
        {"hd2_db", 20 * log10(hd2)},
        {"hd3_db", 20 * log10(hd3)},
        {"hd2_pct", 100 * hd2},
        {"hd3_pct", 100 * hd3},
        {"im3_db", 20 * log10(3 * hd3)},
        {"hd2_reduction", 1 + T},
    };
    tb_figure_value all[64];
    assert_true(tb_figure_count() <= sizeof all / sizeof all[0]);
    assert_int_equal(tb_figure_measure(r.res, 0, all), TB_OK);
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        int idx = tb_figure_find(cases[i].name, strlen(cases[i].name));
        assert_true(idx >= 0);
        assert_true(all[idx].present);
        tu_close(all[idx].value, cases[i].want, 1e-9);
    }
    done(&r);
    /* without .volterra every distortion figure is absent, with the reason */
    r = analyse("none\nV1 in 0 AC 1\nE1 out 0 in 0 10 k2=1\nR2 out 0 1k\n.ac dec 1 10 100\n.loop E1\n"
                ".io V1 v(out)\n");
    assert_int_equal(tb_figure_measure(r.res, 0, all), TB_OK);
    int idx = tb_figure_find("hd3_db", 6);
    assert_false(all[idx].present);
    assert_string_equal(all[idx].why, "no .volterra directive");
    done(&r);
}

/* A loop with memory: G1 drives R || C at out, Efb feeds back beta v(out), so
 * T(jw) = gm beta R/(1 + jw R C) (written out by hand). The harmonics G1 makes are currents at
 * the node the loop senses, so at equal output amplitude feedback divides HD2 by |1 + T(2jw)|
 * and the k3 part of HD3 by |1 + T(3jw)|, not by |1 + T(jw)| (the distortion is fed back at its
 * own frequency: common practice, here exact because beta is memoryless and A0 = 0). */
static void test_distortion_rule_at_harmonics(void **state)
{
    (void)state;
    const char *text = "one-pole loop\nV1 in 0 AC 1\nG1 0 out in fb 10m k2=5m k3=-20m\nR1 out 0 100k\n"
                       "C1 out 0 1n\nEfb fb 0 out 0 0.5\n.ac dec 2 100 100k\n.loop G1\n.io V1 v(out)\n"
                       ".volterra amp=10m freq=20k\n";
    run r = analyse(text);
    double gm = 10e-3, R = 100e3, C = 1e-9, beta = 0.5, w = 2 * TU_PI * 20e3;
    double complex T1 = gm * beta * R / (1 + I * w * R * C);
    double complex T2 = gm * beta * R / (1 + 2 * I * w * R * C);
    double complex T3 = gm * beta * R / (1 + 3 * I * w * R * C);
    assert_true(r.dl.computed);
    tu_close(r.dl.T, T1, 1e-12);
    tu_close(r.dl.T_2f, T2, 1e-12);
    tu_close(r.dl.T_3f, T3, 1e-12);
    tu_close(r.dl.rule_hd2, cabs(1 + T2), 1e-12);
    tu_close(r.dl.hd2_reduction, cabs(1 + T2), 1e-9);
    tu_close(r.dl.hd3_direct_reduction, cabs(1 + T3), 1e-9);
    /* the interaction makes the whole of HD3 differ from the rule */
    assert_true(fabs(r.dl.hd3_reduction / cabs(1 + T3) - 1) > 1e-3);
    done(&r);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_distortion_memoryless_closed_loop),
        cmocka_unit_test(test_distortion_memoryless_opened),
        cmocka_unit_test(test_distortion_one_pole_load),
        cmocka_unit_test(test_distortion_validity),
        cmocka_unit_test(test_distortion_factorizations),
        cmocka_unit_test(test_distortion_absent),
        cmocka_unit_test(test_distortion_rule_at_harmonics),
        cmocka_unit_test(test_distortion_expect_figures),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
