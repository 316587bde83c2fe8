/* tests/test_stability.c: exact crossings, margins, poles, Nyquist count and verdict against
 * closed forms (references.md sections 4 and 8; sources named beside each check). */
#include "testutil.h"

#include "crossing.h"
#include "stability.h"

static tb_status cube_minus_two(void *ctx, double x, double *y)
{
    (void)ctx;
    *y = x * x * x - 2.0;
    return TB_OK;
}

static tb_status parabola(void *ctx, double x, double *y)
{
    (void)ctx;
    *y = (x - 1.25) * (x - 1.25) + 3.0;
    return TB_OK;
}

/* cosh(x - 0.7) + x^4/100: a smooth, non-quadratic minimum; ctx counts the evaluations. */
static tb_status bowl(void *ctx, double x, double *y)
{
    ++*(int *)ctx;
    *y = cosh(x - 0.7) + pow(x, 4) / 100.0;
    return TB_OK;
}

static void test_stability_brent_and_golden(void **state)
{
    (void)state;
    double root = 0, xmin = 0, ymin = 0;
    assert_int_equal(tb_brent_root(cube_minus_two, NULL, 0.0, 3.0, -2.0, 25.0, 1e-14, 100, &root), TB_OK);
    tu_close(root, cbrt(2.0), 1e-13);
    assert_int_equal(tb_brent_root(cube_minus_two, NULL, 2.0, 3.0, 6.0, 25.0, 1e-14, 100, &root),
                     TB_ERR_USAGE); /* no sign change */
    assert_int_equal(tb_line_min(parabola, NULL, -4.0, 4.0, 1e-10, 200, &xmin, &ymin), TB_OK);
    tu_close(xmin, 1.25, 1e-7); /* a minimum is located to about sqrt(eps) only */
    tu_close(ymin, 3.0, 1e-14);
    /* Brent's minimizer (Brent 1973, ch. 5) converges superlinearly on a smooth minimum: golden
     * section alone would need about 50 evaluations to narrow [-4, 4] to 1e-10 (0.618^n). The
     * minimum, from f' = sinh(x - 0.7) + x^3/25 = 0, by Newton's method here. */
    int calls = 0;
    assert_int_equal(tb_line_min(bowl, &calls, -4.0, 4.0, 1e-10, 200, &xmin, &ymin), TB_OK);
    double x = 0.7;
    for (int it = 0; it < 50; it++)
        x -= (sinh(x - 0.7) + x * x * x / 25.0) / (cosh(x - 0.7) + 3.0 * x * x / 25.0);
    tu_close(xmin, x, 1e-7);
    tu_close(ymin, cosh(x - 0.7) + pow(x, 4) / 100.0, 1e-14);
    print_message("Brent minimization: %d evaluations\n", calls);
    assert_true(calls <= 30);
}

static tb_stability stability_of(const char *text, const tb_options *opt)
{
    tb_circuit *ckt = tu_parse(text);
    tb_diag *diag = tb_diag_new();
    tb_result *res = NULL;
    tb_status st = tb_analyse(ckt, opt, diag, &res);
    if (st != TB_OK)
        tu_print_diags(diag);
    assert_int_equal(st, TB_OK);
    tb_stability out;
    assert_int_equal(tb_stability_loop(res, 0, &out), TB_OK);
    assert_true(out.computed);
    tb_result_free(res);
    tb_circuit_free(ckt);
    tb_diag_free(diag);
    return out;
}

/* T(s) = wn^2 / (s (s + 2 zeta wn)) with zeta = 0.5, wn = 1e6 rad/s: an integrator
 * G1 into C1 = 1n and G2 into R2 = 1k || C2 = 1n, gm1 = gm2 = 1 mS. */
static const char integrator_loop[] =
    "second-order loop with an integrator\n"
    "VS in 0 AC 1\n"
    "G1 0 a in out 1m\n"
    "C1 a 0 1n\n"
    "G2 0 b a 0 1m\n"
    "R2 b 0 1k\n"
    "C2 b 0 1n\n"
    "EO out 0 b 0 1\n"
    ".io VS v(out)\n"
    ".loop G1\n"
    ".ac dec 20 100 1g\n";

static void test_stability_second_order_relations(void **state)
{
    (void)state;
    tb_stability st = stability_of(integrator_loop, NULL);
    double zeta = 0.5, wn = 1e6;
    /* references.md section 4 (standard control texts: Franklin, Powell, Emami-Naeini;
     * Ogata): wc/wn = sqrt(sqrt(1 + 4 zeta^4) - 2 zeta^2), PM = atan(2 zeta / (wc/wn)) */
    double wc = wn * sqrt(sqrt(1 + 4 * pow(zeta, 4)) - 2 * zeta * zeta);
    double pm = atan(2 * zeta / (wc / wn)) * 180 / TU_PI;
    assert_int_equal(st.unity_count, 1);
    tu_close(st.unity[0].hz, wc / (2 * TU_PI), 1e-9);
    tu_close(st.phase_margin_deg, pm, 1e-9);
    assert_true(fabs(st.phase_margin_deg - 51.83) < 0.005); /* the table's 51.83 deg */
    tu_close(st.delay_margin_s, pm * TU_PI / 180 / wc, 1e-9);
    /* the phase tends to -180 but never reaches it: no critical gain either way */
    assert_false(st.has_gain_margin_up);
    assert_false(st.has_gain_margin_down);
    /* closed loop wn^2/(s^2 + 2 zeta wn s + wn^2): poles -zeta wn +- j wn sqrt(1 - zeta^2) */
    assert_true(st.has_poles);
    assert_int_equal(st.cl_finite, 2);
    tu_close(st.dominant, CMPLX(-zeta * wn, wn * sqrt(1 - zeta * zeta)), 1e-9);
    tu_close(st.zeta, zeta, 1e-9);
    tu_close(st.q, 1 / (2 * zeta), 1e-9);
    tu_close(st.overshoot_pct, 100 * exp(-TU_PI * zeta / sqrt(1 - zeta * zeta)), 1e-9);
    assert_true(fabs(st.overshoot_pct - 16.30) < 0.005);    /* the table's 16.30 % */
    tu_close(st.peaking_db, -20 * log10(2 * zeta * sqrt(1 - zeta * zeta)), 1e-9);
    assert_true(fabs(st.peaking_db - 1.249) < 0.0005);      /* the table's 1.249 dB */
    /* open loop: the integrator's pole at s = 0 lies on the axis; the Nyquist path
     * goes round it (T infinite at DC) and finds no encirclement */
    assert_int_equal(st.ol_rhp, 0);
    assert_true(st.ol_axis >= 1);
    assert_true(st.has_nyquist);
    assert_int_equal(st.nyquist_n, 0);
    assert_int_equal(st.verdict, TB_VERDICT_STABLE);
}

/* references.md check 8a: R1 = 1k in-a, C1 = 1u a-0, R2 = 1k a-b, C2 = 1u b-0, source
 * shorted: s = -(3 -+ sqrt 5)/(2RC). A buffer marked .loop reads b (not in a loop). */
static void test_stability_rc_ladder_poles(void **state)
{
    (void)state;
    tb_stability st = stability_of("rc ladder\nVS in 0 AC 1\nR1 in a 1k\nC1 a 0 1u\nR2 a b 1k\n"
                                   "C2 b 0 1u\nE1 o 0 b 0 1\nRL o 0 1k\n.loop E1\n.ac dec 10 1 1meg\n",
                                   NULL);
    double rc = 1e-3;
    assert_int_equal(st.cl_finite, 2);
    tu_close(st.poles[0], -(3 - sqrt(5.0)) / (2 * rc), 1e-10);
    tu_close(st.poles[1], -(3 + sqrt(5.0)) / (2 * rc), 1e-10);
    assert_false(st.has_dominant); /* real poles only */
    assert_int_equal(st.verdict, TB_VERDICT_STABLE);
}

static tb_stability stability_of_file(const char *path)
{
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    tb_result *res = NULL;
    assert_int_equal(tb_circuit_read(path, diag, &ckt), TB_OK);
    assert_int_equal(tb_analyse(ckt, NULL, diag, &res), TB_OK);
    tb_stability out;
    assert_int_equal(tb_stability_loop(res, 0, &out), TB_OK);
    tb_result_free(res);
    tb_circuit_free(ckt);
    tb_diag_free(diag);
    return out;
}

/* The nearest |s| among the kept near poles of one kind (closed or open) matching s to rel. */
static bool near_has(const tb_stability *st, bool open, double complex s, double rel)
{
    for (size_t i = 0; i < st->near_count; i++)
        if (st->near_open[i] == open && cabs(st->near_poles[i] - s) <= rel * cabs(s))
            return true;
    return false;
}

/* Above the pole limit the poles nearest s = 0 and the unity crossing come from
 * shift-invert Krylov-Schur on KLU's factors: references.md checks 8a (both ladder
 * poles, -(3 -+ sqrt 5)/(2RC)) and 8b (open loop -1/(RC), closed loop -(1 + T0)/(RC));
 * and on the three-pole loop of check 4c every near pole is one of the dense QZ
 * poles of the same circuit (tb_poles, up to the limit). */
static void test_stability_near_poles_above_limit(void **state)
{
    (void)state;
    tb_options opt;
    tb_options_init(&opt);
    opt.pole_limit = 0;
    tb_stability st = stability_of("rc ladder\nVS in 0 AC 1\nR1 in a 1k\nC1 a 0 1u\nR2 a b 1k\n"
                                   "C2 b 0 1u\nE1 o 0 b 0 1\nRL o 0 1k\n.loop E1\n.ac dec 10 1 1meg\n",
                                   &opt);
    assert_false(st.has_poles);
    assert_true(near_has(&st, false, -(3 - sqrt(5.0)) / 2e-3, 1e-10));
    assert_true(near_has(&st, false, -(3 + sqrt(5.0)) / 2e-3, 1e-10));
    assert_true(st.near_complete);
    st = stability_of("pole moved by feedback\nVS in 0 AC 1\nE1 x 0 in out 99\n"
                      "R x out 1k\nC out 0 1u\n.io VS v(out)\n.loop E1\n.ac dec 20 1 100meg\n", &opt);
    assert_true(near_has(&st, false, -1e5, 1e-10));
    assert_true(near_has(&st, true, -1e3, 1e-10));
    tb_stability dense = stability_of_file("tests/stab/stab_threepole_unstable.net");
    opt.pole_limit = 0;
    tb_circuit *ckt = NULL;
    tb_result *res = NULL;
    tb_diag *diag = tb_diag_new();
    assert_int_equal(tb_circuit_read("tests/stab/stab_threepole_unstable.net", diag, &ckt), TB_OK);
    assert_int_equal(tb_analyse(ckt, &opt, diag, &res), TB_OK);
    assert_int_equal(tb_stability_loop(res, 0, &st), TB_OK);
    assert_true(st.near_count >= 3);
    for (size_t i = 0; i < st.near_count; i++) {
        if (st.near_open[i])
            continue;
        bool found = false;
        for (size_t j = 0; j < dense.pole_count; j++)
            found = found || cabs(dense.poles[j] - st.near_poles[i]) <= 1e-8 * cabs(dense.poles[j]);
        assert_true(found);
    }
    tb_result_free(res);
    tb_circuit_free(ckt);
    tb_diag_free(diag);
}

/* references.md check 8b: VCVS v_x = 99 (v_in - v_out), R = 1k x-out, C = 1u out-0:
 * open-loop pole -1/(RC) = -1000 rad/s, closed-loop pole -(1 + T0)/(RC) = -1e5 rad/s. */
static void test_stability_feedback_moves_pole(void **state)
{
    (void)state;
    tb_stability st = stability_of("pole moved by feedback\nVS in 0 AC 1\nE1 x 0 in out 99\n"
                                   "R x out 1k\nC out 0 1u\n.io VS v(out)\n.loop E1\n.ac dec 20 1 100meg\n",
                                   NULL);
    assert_int_equal(st.cl_finite, 1);
    tu_close(st.poles[0], -1e5, 1e-10);
    assert_int_equal(st.ol_rhp, 0);
    /* single pole: unity crossing at sqrt(T0^2 - 1)/(2 pi RC), PM = 180 - atan(sqrt(T0^2 - 1)) */
    double x = sqrt(99.0 * 99.0 - 1);
    assert_int_equal(st.unity_count, 1);
    tu_close(st.unity[0].hz, x * 1000 / (2 * TU_PI), 1e-9);
    tu_close(st.phase_margin_deg, 180 - atan(x) * 180 / TU_PI, 1e-9);
    assert_int_equal(st.verdict, TB_VERDICT_STABLE);
}

/* A lossless LC tank: poles +- j/sqrt(LC) on the axis: marginal. */
static void test_stability_lc_tank_marginal(void **state)
{
    (void)state;
    tb_stability st = stability_of("lc tank\nI1 0 a AC 1\nL1 a 0 1m\nC1 a 0 1u\nE1 o 0 a 0 1\n"
                                   "RL o 0 1k\n.loop E1\n.ac dec 7 1 1meg\n",
                                   NULL);
    assert_int_equal(st.cl_finite, 2);
    assert_int_equal(st.cl_axis, 2);
    tu_close(cabs(st.poles[0]), 1 / sqrt(1e-3 * 1e-6), 1e-10);
    assert_int_equal(st.verdict, TB_VERDICT_MARGINAL);
}


/* references.md section 4, check 4b: T = T0/((1 + s/p1)(1 + s/p2)), exact crossover
 * u = fc^2 = [-(f1^2 + f2^2) + sqrt((f1^2 + f2^2)^2 + 4 f1^2 f2^2 (T0^2 - 1))]/2,
 * PM = 180 - atan(fc/f1) - atan(fc/f2); closed loop wn = sqrt(p1 p2 (1 + T0)),
 * zeta = (p1 + p2)/(2 wn) (standard control texts, from memory). */
static void test_stability_two_pole_closed_form(void **state)
{
    (void)state;
    tb_stability st = stability_of_file("tests/stab/stab_twopole.net");
    double T0 = 1e4, f1 = 100, f2 = 1e6;
    double S = f1 * f1 + f2 * f2;
    double fc = sqrt((-S + sqrt(S * S + 4 * f1 * f1 * f2 * f2 * (T0 * T0 - 1))) / 2);
    double pm = 180 - (atan(fc / f1) + atan(fc / f2)) * 180 / TU_PI;
    assert_int_equal(st.unity_count, 1);
    tu_close(st.unity[0].hz, fc, 1e-9);
    tu_close(st.phase_margin_deg, pm, 1e-9);
    assert_false(st.has_gain_margin_up || st.has_gain_margin_down);
    double wn = 2 * TU_PI * sqrt(f1 * f2 * (1 + T0));
    tu_close(st.fn_hz, wn / (2 * TU_PI), 1e-9);
    tu_close(st.zeta, 2 * TU_PI * (f1 + f2) / (2 * wn), 1e-9);
    assert_int_equal(st.verdict, TB_VERDICT_STABLE);
}

/* references.md section 4, check 4c: T = T0/(1 + s/p)^3: w180 = sqrt(3) p, |T(j w180)| = T0/8;
 * |T| = 1 at wc = p sqrt(T0^(2/3) - 1), PM = 180 - 3 atan(wc/p); closed-loop poles
 * (1 + s/p)^3 = -T0: s/p = -1 + T0^(1/3) e^(+-j pi/3) and -1 - T0^(1/3). T0 = 10 is
 * unstable and encircles -1 twice (check 8c). */
static void test_stability_three_pole_closed_form(void **state)
{
    (void)state;
    double p = 2 * TU_PI * 1e3;
    const char *path[2] = {"tests/stab/stab_threepole.net", "tests/stab/stab_threepole_unstable.net"};
    double T0s[2] = {2, 10};
    for (int i = 0; i < 2; i++) {
        tb_stability st = stability_of_file(path[i]);
        double T0 = T0s[i], wc = p * sqrt(pow(T0, 2.0 / 3.0) - 1), r = cbrt(T0);
        assert_int_equal(st.phase_count, 1);
        tu_close(st.phase[0].hz, sqrt(3.0) * p / (2 * TU_PI), 1e-9);
        /* GM = 8/T0: T0 = 2 may rise by 12.04 dB; T0 = 10 (unstable) is 1.94 dB above the boundary */
        assert_true(st.has_gain_margin_up == (i == 0) && st.has_gain_margin_down == (i == 1));
        tu_close(i == 0 ? st.gain_margin_up_db : st.gain_margin_down_db, fabs(20 * log10(T0 / 8)), 1e-9);
        tu_close(st.unity[0].hz, wc / (2 * TU_PI), 1e-9);
        tu_close(st.phase_margin_deg, 180 - 3 * atan(wc / p) * 180 / TU_PI, 1e-9);
        assert_int_equal(st.cl_finite, 3);
        tu_close(st.poles[0], p * CMPLX(-1 + r / 2, r * sqrt(3.0) / 2), 1e-9);
        tu_close(st.poles[2], p * (-1 - r), 1e-9);
        assert_int_equal(st.cl_rhp, i == 0 ? 0 : 2);
        assert_int_equal(st.nyquist_n, i == 0 ? 0 : 2);
        assert_int_equal(st.verdict, i == 0 ? TB_VERDICT_STABLE : TB_VERDICT_UNSTABLE);
        assert_true(st.pm_ok == (i == 0) && st.gm_ok == (i == 0));
    }
}

/* A narrow resonance between two grid points: gm into a parallel RLC tank (Q = 100,
 * f0 = 2400 Hz) on a 5-point-per-decade grid whose nearest points see |T| < 0.22.
 * T = K / (1 + jQ(x - 1/x)), x = f/f0, K = gm R = 2 (the band-pass second-order
 * section; e.g. Franklin, Powell, Emami-Naeini, from memory): |T| = 1 where
 * x - 1/x = +-sqrt(K^2 - 1)/Q, with phase -+60 degrees there. */
static void test_stability_narrow_resonance_refined(void **state)
{
    (void)state;
    double f0 = 2400.0, Q = 100.0, R = 1e3;
    double C = Q / R / (2 * TU_PI * f0), L = R / Q / (2 * TU_PI * f0);
    char text[512];
    snprintf(text, sizeof text,
             "band-pass loop\nVS in 0 AC 1\nG1 0 t in out 2m\nRt t 0 %.17g\nCt t 0 %.17g\n"
             "Lt t 0 %.17g\nEO out 0 t 0 1\n.io VS v(out)\n.loop G1\n.ac dec 5 10 1meg\n",
             R, C, L);
    tb_stability st = stability_of(text, NULL);
    double d = sqrt(2.0 * 2.0 - 1) / Q;
    double x_lo = (-d + sqrt(d * d + 4)) / 2, x_hi = (d + sqrt(d * d + 4)) / 2;
    assert_int_equal(st.unity_count, 2);
    tu_close(st.unity[0].hz, f0 * x_lo, 1e-9);
    tu_close(st.unity[1].hz, f0 * x_hi, 1e-9);
    assert_int_equal(st.unity[0].direction, 1);
    assert_int_equal(st.unity[1].direction, -1);
    tu_close(st.unity[0].phase_deg, 60.0, 1e-9);
    tu_close(st.unity[1].phase_deg, -60.0, 1e-9);
    tu_close(st.unity[1].margin, 120.0, 1e-9);
    tu_close(fabs(st.phase_margin_deg), 120.0, 1e-9);
    assert_int_equal(st.verdict, TB_VERDICT_STABLE);
    assert_true(st.pm_ok);
    /* closed loop: the tank with gm added to 1/R, poles s = -(1 + K)/(2RC) +- j... */
    double sigma = (1 + 2.0) / (2 * R * C);
    tu_close(creal(st.poles[0]), -sigma, 1e-9);
}

/* references.md check 4c again, T = 2/(1 + s/p)^3 with p = 2 pi 1 kHz, swept on ranges that
 * leave out one crossing or the other: the search beyond the sweep still finds the -180
 * crossing at sqrt(3) p (the loop gain may rise by 20 log10(8/T0)) and the unity crossing at
 * p sqrt(T0^(2/3) - 1) (PM 180 - 3 atan(wc/p)), each flagged on its side of the sweep, and the
 * thresholds judge them. T(0) < 0 (positive feedback, -0.4/(1 + s/p)): DC itself is the
 * critical point, the gain may rise by -20 log10 0.4 (our algebra: 1 + K T(0) = 0). */
static void test_stability_margins_beyond_sweep(void **state)
{
    (void)state;
    static const char three[] = "three poles\nVS in 0 AC 1\nG1 0 a in out 2m\nRa a 0 1k\n"
                                "Ca a 0 1.5915494309189534e-07\nG2 0 b a 0 1m\nRb b 0 1k\n"
                                "Cb b 0 1.5915494309189534e-07\nG3 0 c b 0 1m\nRc c 0 1k\n"
                                "Cc c 0 1.5915494309189534e-07\nEO out 0 c 0 1\n.loop G1\n";
    double p = 2 * TU_PI * 1e3, T0 = 2, wc = p * sqrt(pow(T0, 2.0 / 3.0) - 1);
    char text[1024];
    snprintf(text, sizeof text, "%s.ac dec 20 1 1k\n", three); /* f180 = 1.732 kHz lies above */
    tb_options opt;
    tb_options_init(&opt);
    opt.gm_min_db = 13;
    tb_stability st = stability_of(text, &opt);
    assert_true(st.margins_determined);
    assert_int_equal(st.phase_count, 1);
    assert_int_equal(st.phase[0].sweep, TB_SWEEP_ABOVE);
    tu_close(st.phase[0].hz, sqrt(3.0) * p / (2 * TU_PI), 1e-9);
    assert_true(st.has_gain_margin_up && !st.has_gain_margin_down);
    tu_close(st.gain_margin_up_db, 20 * log10(8 / T0), 1e-9);
    assert_false(st.gm_ok); /* 12.04 dB < 13 dB, although the sweep never reaches it */
    assert_true(st.notes & (1u << TB_SNOTE_OUTSIDE_SWEEP));
    snprintf(text, sizeof text, "%s.ac dec 20 2k 1meg\n", three); /* fc = 766 Hz lies below */
    st = stability_of(text, NULL);
    assert_int_equal(st.unity_count, 1);
    assert_int_equal(st.unity[0].sweep, TB_SWEEP_BELOW);
    tu_close(st.phase_margin_hz, wc / (2 * TU_PI), 1e-9);
    tu_close(st.phase_margin_deg, 180 - 3 * atan(wc / p) * 180 / TU_PI, 1e-9);
    tu_close(st.delay_margin_s, st.phase_margin_deg / 360 / st.phase_margin_hz, 1e-12);
    st = stability_of("positive feedback at DC\nVS in 0 AC 1\nG1 0 a out in 0.4m\nRa a 0 1k\n"
                      "Ca a 0 1.5915494309189535e-07\nEO out 0 a 0 1\n.loop G1\n.ac dec 20 10 1meg\n",
                      NULL);
    assert_int_equal(st.unity_count, 0);
    assert_int_equal(st.phase_count, 1);
    assert_true(st.phase[0].hz == 0 && st.phase[0].direction == 0);
    tu_close(st.gain_margin_up_db, -20 * log10(0.4), 1e-12);
    assert_true(st.gain_margin_up_hz == 0);
    assert_int_equal(st.verdict, TB_VERDICT_STABLE);
}

/* Thresholds are the user's; the pole limit turns the pencil off and says so. */
static void test_stability_thresholds_and_limit(void **state)
{
    (void)state;
    tb_options opt;
    tb_options_init(&opt);
    assert_true(opt.pm_min_deg < 0 && opt.gm_min_db < 0); /* the netlist's, else common practice */
    tb_stability st = stability_of(integrator_loop, &opt);
    assert_true(st.pm_min_deg == 45.0 && st.gm_min_db == 10.0); /* common practice */
    assert_true(st.pm_ok && st.gm_ok);
    opt.pm_min_deg = 60.0;
    opt.pole_limit = 3;
    st = stability_of(integrator_loop, &opt);
    assert_false(st.pm_ok);
    assert_false(st.has_poles);
    assert_true(st.notes & (1u << TB_SNOTE_POLES_TOO_BIG));
    /* above the limit the counts come from the argument principle, not an assumed P = 0:
     * wn^2/(s(s + 2 zeta wn)) closes to two left-half-plane poles (references.md section 4);
     * with G1 at zero, C1 floats: det M0 has a zero at s = 0 and one at -1/(R2 C2) (RC algebra) */
    assert_false(st.notes & (1u << TB_SNOTE_NYQUIST_ASSUMES_P0));
    assert_true(st.notes & (1u << TB_SNOTE_RHP_BY_WINDING));
    assert_int_equal(st.cl_count_by, TB_COUNT_WINDING);
    /* G1 at zero leaves R1 C1 and R2 C2, passive: P = 0 by the passive blocks, and the
     * check walk (within rhp_check_limit) adds the open loop's zero on the axis */
    assert_int_equal(st.ol_count_by, TB_COUNT_PASSIVE_BLOCKS);
    assert_true(st.notes & (1u << TB_SNOTE_RHP_BY_PASSIVE));
    assert_true(st.ol_axis_counted);
    assert_int_equal(st.cl_finite, 2);
    assert_int_equal(st.cl_rhp, 0);
    assert_int_equal(st.cl_axis, 0);
    assert_int_equal(st.ol_rhp, 0);
    assert_int_equal(st.ol_axis, 1);
    assert_true(st.winding_evaluations > 0);
    assert_int_equal(st.verdict, TB_VERDICT_STABLE);
    /* without the check walk: no factorization for the counts, the closed loop not counted,
     * and the verdict from N + P with the proven P */
    opt.rhp_check_limit = 0;
    st = stability_of(integrator_loop, &opt);
    assert_int_equal(st.ol_count_by, TB_COUNT_PASSIVE_BLOCKS);
    assert_false(st.ol_axis_counted);
    assert_int_equal(st.cl_count_by, TB_COUNT_NONE);
    assert_int_equal(st.winding_evaluations, 0);
    assert_false(st.notes & (1u << TB_SNOTE_NYQUIST_ASSUMES_P0));
    assert_int_equal(st.verdict, TB_VERDICT_STABLE);
    opt.rhp_check_limit = 1000;
    opt.pole_limit = 500;
    st = stability_of(integrator_loop, &opt);
    assert_int_equal(st.cl_count_by, TB_COUNT_POLES);
    assert_int_equal(st.winding_evaluations, 0);
    opt.stability = false;
    tb_circuit *ckt = tu_parse(integrator_loop);
    tb_result *res = NULL;
    assert_int_equal(tb_analyse(ckt, &opt, NULL, &res), TB_OK);
    assert_int_equal(tb_stability_loop(res, 0, &st), TB_OK);
    assert_false(st.computed);
    tb_result_free(res);
    tb_circuit_free(ckt);
}

/* The three verdicts a tolerance tied to max|G|/max|C| got wrong (tests/stab headers):
 * a slow servo around a 1e6 gain (poles of (1 + 2s)(Gy + 1u s) + 10/(1e6 + 1), quadratic
 * formula), a follower behind a 2.2M/4.7p filter (-1/(RF CF)), and positive feedback
 * through a 1e6 buffer (s = 2.2 k/(k + 1) - 1.5 with k = 1e6: first-order RC algebra). */
static void test_stability_verdict_is_scale_free(void **state)
{
    (void)state;
    tb_stability st = stability_of_file("tests/stab/stab_slow_servo.net");
    double gy = 1 / 100e3 + 1 / (1e6 + 1), a = 2e-6, b = 2 * gy + 1e-6, c = gy + 10 / (1e6 + 1);
    assert_int_equal(st.verdict, TB_VERDICT_STABLE);
    assert_int_equal(st.cl_axis, 0);
    tu_close(st.poles[0], (-b + sqrt(b * b - 4 * a * c)) / (2 * a), 1e-10);
    tu_close(st.poles[1], (-b - sqrt(b * b - 4 * a * c)) / (2 * a), 1e-10);
    assert_int_equal(st.pole_place[0], TB_POLE_LEFT);
    st = stability_of_file("tests/stab/stab_follower_input_rc.net");
    assert_int_equal(st.verdict, TB_VERDICT_STABLE);
    assert_int_equal(st.cl_finite, 1);
    tu_close(st.poles[0], -1 / (2.2e6 * 4.7e-12), 1e-10);
    st = stability_of_file("tests/stab/stab_positive_feedback_rhp.net");
    assert_int_equal(st.verdict, TB_VERDICT_UNSTABLE);
    assert_int_equal(st.cl_rhp, 1);
    assert_int_equal(st.pole_place[0], TB_POLE_RIGHT);
    tu_close(st.poles[0], 2.2 * 1e6 / (1e6 + 1) - 1.5, 1e-10);
    assert_true(st.has_nyquist); /* its own Nyquist count agrees: N = 1, P = 0 */
    assert_int_equal(st.nyquist_n, 1);
    assert_false(st.counts_disagree);
}

/* Residue weight |R|/|Re s| of pole s of A = num(s)/P(s), P(s) = (prod (1 + s/p_i) + n0)
 * prod (1 + s/q_j): R = num(s)/P'(s) at a simple root (partial fractions, from memory);
 * p: the loop's poles (T = n0/prod), q: poles outside the loop. */
static double weight_of(double complex s, double complex num, double n0, const double *p, int np, const double *q,
                        int nq)
{
    double complex f = 1, df = 0, g = 1, dg = 0;
    for (int i = 0; i < np; i++) {
        df = df * (1 + s / p[i]) + f / p[i];
        f *= 1 + s / p[i];
    }
    f += n0;
    for (int j = 0; j < nq; j++) {
        dg = dg * (1 + s / q[j]) + g / q[j];
        g *= 1 + s / q[j];
    }
    return cabs(num / (df * g + f * dg)) / fabs(creal(s));
}

/* tests/stab/stab_pair_dominant.net: T = 1000/((1 + s/p1)(1 + s/p2)(1 + s/p3)): the pair
 * weighs 62500 times the far real pole; stab_pair_filtered.net: the 3 kHz output filter's
 * real pole outweighs the pair (T = 1e4/((1 + s/p1)(1 + s/p2)), A = T/(1 + T)/(1 + s/pF)). */
static void test_stability_dominant_pair_by_weight(void **state)
{
    (void)state;
    double p3[3] = {2 * TU_PI * 100, 2 * TU_PI * 80e3, 2 * TU_PI * 20e6};
    tb_stability st = stability_of_file("tests/stab/stab_pair_dominant.net");
    assert_true(st.has_weights && st.weights_of_a);
    assert_int_equal(st.cl_finite, 3);
    for (size_t i = 0; i < st.pole_count; i++) {
        double complex s = st.poles[i];
        double complex f = (1 + s / p3[0]) * (1 + s / p3[1]) * (1 + s / p3[2]);
        assert_true(cabs(f + 1000) <= 1e-9 * cabs(f)); /* a root of prod + T0 = 0 */
        tu_close(st.pole_weight[i], weight_of(s, 1000, 1000, p3, 3, NULL, 0), 1e-7);
    }
    assert_true(st.has_dominant);
    assert_int_equal(st.dominance, TB_DOMINANT_PAIR);
    tu_close(st.weight_ratio, st.pole_weight[0] / st.pole_weight[2], 1e-12);
    assert_true(st.weight_ratio > 6e4 && st.weight_ratio < 6.5e4); /* the header's 1/60000 */
    assert_false(st.has_separation);   /* no other pole above a tenth of its weight */
    tu_close(st.zeta, -creal(st.poles[0]) / cabs(st.poles[0]), 1e-12);

    double p2[2] = {2 * TU_PI * 10, 2 * TU_PI * 36e3}, qf[1] = {2 * TU_PI * 3e3};
    st = stability_of_file("tests/stab/stab_pair_filtered.net");
    assert_false(st.has_dominant);
    assert_int_equal(st.dominance, TB_DOMINANT_OUTWEIGHED);
    for (size_t i = 0; i < st.pole_count; i++)
        tu_close(st.pole_weight[i], weight_of(st.poles[i], 1e4, 1e4, p2, 2, qf, 1), 1e-7);
    tu_close(st.poles[0], -qf[0], 1e-12); /* the filter's pole, nearest the axis */
    assert_true(st.pole_weight[0] > 10 * st.pole_weight[1]);
}

/* The pair's second-order predictions next to the computed figures: the two-pole follower
 * (references.md section 4, check 4b) agrees; stab_pair_zero.net (a zero at -p2 next to the
 * pair, A = 1000 (1 + s/p2)/((1 + s/p1)(1 + s/p2) + 4e4)) does not: 44.4 % predicted against
 * 125 % (scipy.signal.step, its header), 6.3 dB against 13.0 dB. */
static void test_stability_pair_against_step(void **state)
{
    (void)state;
    tb_stability st = stability_of_file("tests/stab/stab_twopole.net");
    assert_true(st.has_dominant && st.pair_checked && st.has_step_overshoot && st.has_cl_peaking);
    assert_false(st.pair_disagrees);
    tu_close(st.step_overshoot_pct, st.overshoot_pct, 1e-3);
    tu_close(st.cl_peaking_db, st.peaking_db, 1e-6); /* T/(1 + T) is exactly second order */
    double p2[2] = {2 * TU_PI * 10, 2 * TU_PI * 1e5};
    st = stability_of_file("tests/stab/stab_pair_zero.net");
    assert_true(st.has_dominant && st.pair_checked);
    tu_close(st.pole_weight[0], weight_of(st.poles[0], 1000 * (1 + st.poles[0] / p2[1]), 4e4, p2, 2, NULL, 0), 1e-7);
    assert_true(st.pair_disagrees);
    assert_true(st.notes & (1u << TB_SNOTE_PAIR_DISAGREES));
    assert_true(st.step_overshoot_pct > 2 * st.overshoot_pct);
    assert_true(st.cl_peaking_db > 2 * st.peaking_db);
}

/* The 2x rule with its floors (our choice, docs/stability.md): 1 percentage point of
 * overshoot, 0.5 dB of peaking. */
static void test_stability_pair_rule(void **state)
{
    (void)state;
    struct {
        double os_pred, os_step, pk_pred, pk_cl;
        bool off;
    } cases[] = {
        {10, 19, 1.0, 1.9, false}, {10, 21, 1.0, 1.0, true}, {0.5, 0, 0, 0, false},
        {5, 2, 0, 0, true},        {2, 2, 1.0, 2.6, true},   {2, 2, 0.2, 0.6, false},
    };
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        tb_stability st = {.computed = true, .has_dominant = true, .has_overshoot = true,
                           .overshoot_pct = cases[i].os_pred, .has_peaking = cases[i].pk_pred > 0,
                           .peaking_db = cases[i].pk_pred, .has_cl_peaking = true, .cl_peaking_db = cases[i].pk_cl};
        tb_step_figures fig = {.computed = true, .has_overshoot = true, .overshoot_pct = cases[i].os_step};
        tb_stability_vs_step(&fig, &st);
        assert_true(st.pair_checked);
        assert_int_equal(st.pair_disagrees, cases[i].off);
    }
    tb_stability none = {.computed = true};
    tb_stability_vs_step(NULL, &none);
    assert_false(none.pair_checked);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_stability_brent_and_golden),
        cmocka_unit_test(test_stability_second_order_relations),
        cmocka_unit_test(test_stability_rc_ladder_poles),
        cmocka_unit_test(test_stability_near_poles_above_limit),
        cmocka_unit_test(test_stability_feedback_moves_pole),
        cmocka_unit_test(test_stability_lc_tank_marginal),
        cmocka_unit_test(test_stability_two_pole_closed_form),
        cmocka_unit_test(test_stability_three_pole_closed_form),
        cmocka_unit_test(test_stability_narrow_resonance_refined),
        cmocka_unit_test(test_stability_margins_beyond_sweep),
        cmocka_unit_test(test_stability_thresholds_and_limit),
        cmocka_unit_test(test_stability_verdict_is_scale_free),
        cmocka_unit_test(test_stability_dominant_pair_by_weight),
        cmocka_unit_test(test_stability_pair_against_step),
        cmocka_unit_test(test_stability_pair_rule),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
