/* tests/test_spreadparam.c: .spread and .scan on parameters (.param and subcircuit instance parameters) */
#include <stdlib.h>

#include "testutil.h"

#include "circuit.h"
#include "spread.h"

/* A divider R1/R2 read by a follower of loop gain K = 1000 (E1 drives OUT to K (mid - out)):
 * A = D K/(1 + K), D = R2/(R1 + R2) (Black 1934: A = a/(1 + a beta), scaled by the divider).
 * The divider is set by parameters: its total and the fraction at the bottom. */
static const char *const DIVIDER =
    "divider set by parameters\n"
    ".param rsum=20k frac=0.5\n"
    ".param rtop={rsum*(1-frac)} rbot={rsum*frac}\n"
    "Vs in 0 AC 1\n"
    "R1 in mid {rtop}\n"
    "R2 mid 0 {rbot}\n"
    "E1 out 0 mid out 1000\n"
    "RL out 0 1meg\n"
    ".io Vs v(out)\n"
    ".loop E1\n"
    ".ac dec 2 1 1k\n";

enum { SCAN, CORNERS, SAMPLES };

static tb_spreadset *run(const tb_circuit *ckt, int kind, size_t samples, uint64_t seed)
{
    tb_spread_options opt;
    tb_spread_options_init(&opt);
    opt.samples = samples;
    opt.jobs = 2;
    opt.seed = seed;
    tb_diag *diag = tb_diag_new();
    tb_spreadset *set = NULL;
    tb_status st = kind == SCAN      ? tb_spread_scan(ckt, &opt, diag, &set)
                   : kind == CORNERS ? tb_spread_corners(ckt, &opt, diag, &set)
                                     : tb_spread_monte_carlo(ckt, &opt, diag, &set);
    tu_print_diags(diag);
    tb_diag_free(diag);
    assert_int_equal(st, TB_OK);
    return set;
}

enum { FIG_T = 0, FIG_UNITY = 1, FIG_PM = 2, FIG_A = 5 }; /* among the spread figures (spreadset.c) */

static const double K_OVER = 1000.0 / 1001.0;

/* A Gaussian tolerance on the parameter frac (sigma 2 % of 0.5): D = R2/(R1 + R2) = frac
 * exactly, so A = frac K/(1 + K) is normal with mean 0.5 K/(1+K) and sigma 0.01 K/(1+K)
 * (a linear function of a normal variate). Bounds: 4 standard errors of the mean and of
 * the sigma over N samples (common practice). The loop gain does not move. */
static void test_spreadparam_gauss_fraction(void **state)
{
    (void)state;
    tb_circuit *ckt = tu_parse_cards(DIVIDER, ".spread {frac} gauss 2%\n");
    const size_t n = 3000;
    tb_spreadset *set = run(ckt, SAMPLES, n, 11);
    assert_int_equal(set->params, 1);
    assert_string_equal(set->param_names[0], "{frac}");
    tb_spread_stats s;
    assert_int_equal(tb_spreadset_stats(set, 0, FIG_A, &s), TB_OK);
    assert_int_equal(s.present, n);
    double sA = 0.01 * K_OVER;
    if (fabs(s.mean - 0.5 * K_OVER) > 4 * sA / sqrt((double)n) ||
        fabs(s.sigma - sA) > 4 * sA / sqrt(2.0 * (double)(n - 1)))
        fail_msg("A: mean %.9g sigma %.6g, want %.9g and %.6g", s.mean, s.sigma, 0.5 * K_OVER, sA);
    /* each sample's A is its own frac times K/(1 + K), to rounding */
    for (size_t r = 0; r < n; r++)
        assert_true(fabs(tb_spreadset_row(set, r, 0)[FIG_A].value - set->param_values[r] * K_OVER) < 1e-12);
    assert_int_equal(tb_spreadset_stats(set, 0, FIG_T, &s), TB_OK);
    assert_true(fabs(s.min - 1000) < 1e-9 && fabs(s.max - 1000) < 1e-9);
    /* the loop source's gain does not spread at all (not by the rounding of its mean) */
    tb_spread_desens d;
    assert_true(tb_spreadset_desens(set, 0, 0, &d));
    assert_true(d.spread_k == 0 && d.spread_A > 0);
    tb_spreadset_free(set);
    tb_circuit_free(ckt);
}

/* Independent Gaussian parameters on the two resistors (sigma 1 % each): to first order
 * (the delta method, any statistics text) D has mean 0.5 and sigma
 * sqrt((R2 s1)^2 + (R1 s2)^2)/(R1 + R2)^2 with s_i = 0.01 R_i, as tests/test_spread.c
 * checks for the same tolerances written on the elements. */
static void test_spreadparam_gauss_divider(void **state)
{
    (void)state;
    tb_circuit *ckt = tu_parse_cards(DIVIDER, ".spread {rtop} {rbot} gauss 1%\n");
    const size_t n = 4000;
    tb_spreadset *set = run(ckt, SAMPLES, n, 20260101);
    double sD = sqrt(2.0) * 10e3 * 100.0 / (20e3 * 20e3);
    tb_spread_stats s;
    assert_int_equal(tb_spreadset_stats(set, 0, FIG_A, &s), TB_OK);
    if (fabs(s.mean - 0.5 * K_OVER) > 4 * sD * K_OVER / sqrt((double)n) ||
        fabs(s.sigma - sD * K_OVER) > 4 * sD * K_OVER / sqrt(2.0 * (double)(n - 1)))
        fail_msg("A: mean %.9g sigma %.6g, want %.9g and %.6g", s.mean, s.sigma, 0.5 * K_OVER, sD * K_OVER);
    tb_spreadset_free(set);
    tb_circuit_free(ckt);
}

/* The same draws give the same numbers whether the tolerance is written on the parameters
 * or on the elements they set (the seed draws dimension by dimension in the same order). */
static void test_spreadparam_same_as_elements(void **state)
{
    (void)state;
    tb_circuit *a = tu_parse_cards(DIVIDER, ".spread {rtop} {rbot} gauss 1%\n");
    tb_circuit *b = tu_parse_cards(DIVIDER, ".spread R1 R2 gauss 1%\n");
    tb_spreadset *sa = run(a, SAMPLES, 200, 5);
    tb_spreadset *sb = run(b, SAMPLES, 200, 5);
    for (size_t r = 0; r < 200; r++)
        assert_true(fabs(tb_spreadset_row(sa, r, 0)[FIG_A].value - tb_spreadset_row(sb, r, 0)[FIG_A].value) <
                    1e-15);
    tb_spreadset_free(sa);
    tb_spreadset_free(sb);
    tb_circuit_free(a);
    tb_circuit_free(b);
}

/* A tolerance on rsum moves both resistors together: D, hence A, stays; a group of the
 * parameter rtop and the element R2 moves both by one draw: the same. */
static void test_spreadparam_moves_together(void **state)
{
    (void)state;
    static const char *const cards[] = {".spread {rsum} flat 10%\n", ".spread {rtop} R2 flat 10% group=g\n"};
    for (size_t c = 0; c < 2; c++) {
        tb_circuit *ckt = tu_parse_cards(DIVIDER, cards[c]);
        tb_spreadset *set = run(ckt, CORNERS, 0, 1);
        assert_int_equal(set->runs, 3);
        for (size_t r = 0; r < set->runs; r++)
            assert_true(fabs(tb_spreadset_row(set, r, 0)[FIG_A].value - 0.5 * K_OVER) < 1e-14);
        tb_spreadset_free(set);
        tb_circuit_free(ckt);
    }
}

/* A parameter's tolerance and the tolerance of an element it sets compose: the parameter
 * sets the element's value, then the element's own tolerance applies about it
 * (docs/spread.md). Corners of {rbot} (+-10 %) and R2 (+-5 %): R2 = rbot (1 +- 0.1)(1 +- 0.05)
 * while R1 stays 10k, and A = R2/(R1 + R2) K/(1 + K) at each. */
static void test_spreadparam_and_element_compose(void **state)
{
    (void)state;
    tb_circuit *ckt = tu_parse_cards(DIVIDER, ".spread {rbot} flat 10%\n.spread R2 flat 5%\n");
    tb_spreadset *set = run(ckt, CORNERS, 0, 1);
    assert_int_equal(set->runs, 5);
    assert_int_equal(set->params, 2);
    size_t col_r2 = strcmp(set->param_names[0], "R2") == 0 ? 0 : 1;
    assert_string_equal(set->param_names[1 - col_r2], "{rbot}");
    size_t seen = 0;
    for (size_t r = 1; r < set->runs; r++) {
        double rbot = set->param_values[r * 2 + (1 - col_r2)];
        double r2 = set->param_values[r * 2 + col_r2];
        for (int up = 0; up < 2; up++)
            for (int up2 = 0; up2 < 2; up2++) {
                double want_rbot = 10e3 * (up ? 1.1 : 0.9);
                double want_r2 = want_rbot * (up2 ? 1.05 : 0.95);
                if (fabs(rbot - want_rbot) < 1e-9 && fabs(r2 - want_r2) < 1e-9) {
                    seen |= 1u << (2 * up + up2);
                    double D = want_r2 / (10e3 + want_r2);
                    assert_true(fabs(tb_spreadset_row(set, r, 0)[FIG_A].value - D * K_OVER) < 1e-13);
                }
            }
    }
    assert_int_equal(seen, 15); /* all four corners */
    tb_spreadset_free(set);
    tb_circuit_free(ckt);
}

/* A value a parameter takes an element to that no analysis takes (R2 = 0 at frac = 0) is a
 * run not analysed, not a wrong number. */
static void test_spreadparam_out_of_range(void **state)
{
    (void)state;
    tb_circuit *ckt = tu_parse_cards(DIVIDER, ".spread {frac} pick 0 0.25 0.5\n");
    tb_spreadset *set = run(ckt, CORNERS, 0, 1);
    size_t errors = 0;
    for (size_t r = 0; r < set->runs; r++) {
        if (set->param_values[r] == 0) {
            assert_int_equal(set->status[r], TB_RUN_ERROR);
            assert_false(tb_spreadset_row(set, r, 0)[FIG_A].present);
            errors++;
        } else {
            assert_int_not_equal(set->status[r], TB_RUN_ERROR);
        }
    }
    assert_int_equal(errors, 1);
    tb_spreadset_free(set);
    tb_circuit_free(ckt);
}

/* A two-pole loop whose load is a .param and whose amplifier is a subcircuit with a
 * gain-bandwidth parameter: a scan of the parameter and a scan of the element it sets give
 * the same figures in every run; so do a scan of the instance parameter and of the
 * capacitor it sets (CX = gm/(2 pi gbw)). */
static const char *const TWO_POLE =
    "two-pole loop\n"
    ".param cl=1n\n"
    ".subckt amp inp inn out gbw=10meg\n"
    "G1 0 x inp inn 1m\n"
    "RX x 0 100meg\n"
    "CX x 0 {1m/(2*pi*gbw)}\n"
    "E1 y 0 x 0 1\n"
    "RO y out 50\n"
    ".ends\n"
    "Vs in 0 AC 1\n"
    "X1 in out out amp\n"
    "CLD out 0 {cl}\n"
    ".io Vs v(out)\n"
    ".loop X1.G1\n"
    ".ac dec 10 1 1g\n";

static void check_same_runs(const char *cards_a, const char *cards_b)
{
    tb_circuit *a = tu_parse_cards(TWO_POLE, cards_a);
    tb_circuit *b = tu_parse_cards(TWO_POLE, cards_b);
    tb_spreadset *sa = run(a, SCAN, 0, 1);
    tb_spreadset *sb = run(b, SCAN, 0, 1);
    assert_int_equal(sa->runs, sb->runs);
    for (size_t r = 0; r < sa->runs; r++)
        for (size_t i = 0; i < TB_SPREAD_FIGURES; i++) {
            const tb_figure_value *x = &tb_spreadset_row(sa, r, 0)[i];
            const tb_figure_value *y = &tb_spreadset_row(sb, r, 0)[i];
            assert_int_equal(x->present, y->present);
            if (x->present && !(fabs(x->value - y->value) <= 1e-12 * fabs(y->value)))
                fail_msg("run %zu figure %zu: %.17g against %.17g", r, i, x->value, y->value);
        }
    tb_spreadset_free(sa);
    tb_spreadset_free(sb);
    tb_circuit_free(a);
    tb_circuit_free(b);
}

static void test_spreadparam_scan_equals_element_scan(void **state)
{
    (void)state;
    check_same_runs(".scan {cl} log 100p 10n 5\n", ".scan CLD log 100p 10n 5\n");
    /* gbw 5, 10, 20 MHz: CX = 1m/(2 pi gbw) */
    char cx[256];
    snprintf(cx, sizeof cx, ".scan X1.CX list %.17g %.17g %.17g\n", 1e-3 / (2 * TU_PI * 5e6),
             1e-3 / (2 * TU_PI * 10e6), 1e-3 / (2 * TU_PI * 20e6));
    check_same_runs(".scan {X1.gbw} list 5meg 10meg 20meg\n", cx);
    /* a bare name that is a parameter and no element is the parameter */
    check_same_runs(".scan X1.gbw list 5meg 20meg\n", ".scan {x1.GBW} list 5meg 20meg\n");
}

/* The phase margin falls as the load grows: for this loop (two real poles, 1/(RX CX) and
 * 1/(RO CL)) PM = 180 - atan(wc RX CX) - atan(wc RO CL) at the unity crossing
 * wc (|T| = 1), any feedback text; checked here at each scanned value by the crossing
 * tbeta reports, and in tests/ref/param_check.py against an independent computation. */
static void test_spreadparam_scan_phase_margin(void **state)
{
    (void)state;
    tb_circuit *ckt = tu_parse_cards(TWO_POLE, ".scan {cl} log 100p 10n 5\n");
    tb_spreadset *set = run(ckt, SCAN, 0, 1);
    double tx = 100e6 * 1e-3 / (2 * TU_PI * 10e6);
    double last = 180;
    for (size_t r = 0; r < set->runs; r++) {
        double cl = set->param_values[r];
        const tb_figure_value *f = tb_spreadset_row(set, r, 0);
        double wc = 2 * TU_PI * f[FIG_UNITY].value;
        double pm = 180 - (atan(wc * tx) + atan(wc * 50 * cl)) * 180 / TU_PI;
        double mag = 1e5 / (sqrt(1 + wc * wc * tx * tx) * sqrt(1 + wc * wc * 2500 * cl * cl));
        assert_true(fabs(mag - 1) < 1e-9);
        assert_true(fabs(f[FIG_PM].value - pm) < 1e-9);
        assert_true(f[FIG_PM].value < last);
        last = f[FIG_PM].value;
    }
    tb_spreadset_free(set);
    tb_circuit_free(ckt);
}

/* ---- sensitivities to parameters ------------------------------------------------------ */

/* The two-pole loop with its load and output resistance as parameters, the output
 * resistance read by two expressions (RO and a snubber RS = 40 ro), the load through a
 * square: CL = cl^2/1n. */
static const char *const SENS_NET =
    "two-pole loop, parameters\n"
    ".param cl=1n ro=50\n"
    ".subckt amp inp inn out gbw=10meg\n"
    "G1 0 x inp inn 1m\n"
    "RX x 0 100meg\n"
    "CX x 0 {1m/(2*pi*gbw)}\n"
    "E1 y 0 x 0 1\n"
    "RO y out {ro}\n"
    ".ends\n"
    "Vs in 0 AC 1\n"
    "X1 in fb out amp\n"
    "CL out 0 {cl*cl/1n}\n"
    "RS out 0 {40*ro}\n"
    "RF out fb 10k\n"
    "RG fb 0 10k\n"
    ".io Vs v(out)\n"
    ".loop X1.G1\n"
    ".ac dec 10 1 1g\n";

typedef struct {
    double T_mag, A_mag, pm_deg, unity_hz;
} sens_figs;

/* The figures of SENS_NET with the definition `from` written as `to` (a fresh parse). */
static sens_figs figures_with(const char *from, const char *to)
{
    char text[4096];
    const char *at = strstr(SENS_NET, from);
    assert_non_null(at);
    snprintf(text, sizeof text, "%.*s%s%s", (int)(at - SENS_NET), SENS_NET, to, at + strlen(from));
    tb_circuit *ckt = NULL;
    tb_result *res = tu_analyse(text, &ckt);
    tb_measures m;
    tb_stability st;
    assert_int_equal(tb_measure_loop(res, 0, &m), TB_OK);
    assert_int_equal(tb_stability_loop(res, 0, &st), TB_OK);
    assert_true(st.has_phase_margin);
    sens_figs f = {cabs(m.dc.T), cabs(m.dc.A), st.phase_margin_deg, st.phase_margin_hz};
    tb_result_free(res);
    tb_circuit_free(ckt);
    return f;
}

static void close_to(double chain, double fd, const char *what, const char *name)
{
    if (fabs(chain - fd) > 1e-6 * fabs(fd) + 1e-7)
        fail_msg("%s of %s: chain rule %.12g, central differences %.12g", what, name, chain, fd);
}

/* Each parameter's sensitivities (the chain rule through the element values it sets, the
 * adjoint method for theirs) against central finite differences of complete analyses of
 * the netlist re-read with the parameter at p (1 +- 1e-5): the definition of the
 * derivative, as tests/test_sensitivity.c checks the elements. */
static void test_spreadparam_sensitivities(void **state)
{
    (void)state;
    static const struct {
        const char *name, *def, *fmt;
        double value;
    } cases[] = {
        {"{cl}", "cl=1n", "cl=%.17g", 1e-9},
        {"{ro}", "ro=50", "ro=%.17g", 50},
        {"{X1.gbw}", "gbw=10meg", "gbw=%.17g", 10e6},
    };
    tb_circuit *ckt = tu_parse(SENS_NET);
    tb_options opt;
    tb_options_init(&opt);
    opt.sensitivity = true;
    tb_diag *diag = tb_diag_new();
    tb_result *res = NULL;
    assert_int_equal(tb_analyse(ckt, &opt, diag, &res), TB_OK);
    tb_sensitivity s;
    assert_int_equal(tb_sensitivity_get(res, 0, &s), TB_OK);
    const double h = 1e-5;
    for (size_t c = 0; c < sizeof cases / sizeof cases[0]; c++) {
        const tb_sens_entry *e = NULL;
        for (size_t i = 0; i < s.count; i++)
            if (strcmp(s.entries[i].element, cases[c].name) == 0)
                e = &s.entries[i];
        assert_non_null(e);
        assert_true(e->has_T && e->has_A && e->has_pm && e->has_unity);
        char up_def[64], down_def[64];
        snprintf(up_def, sizeof up_def, cases[c].fmt, cases[c].value * (1 + h));
        snprintf(down_def, sizeof down_def, cases[c].fmt, cases[c].value * (1 - h));
        sens_figs up = figures_with(cases[c].def, up_def);
        sens_figs down = figures_with(cases[c].def, down_def);
        close_to(e->T_mag, (up.T_mag - down.T_mag) / (2 * h) / ((up.T_mag + down.T_mag) / 2), "|T|", cases[c].name);
        close_to(e->A_mag, (up.A_mag - down.A_mag) / (2 * h) / ((up.A_mag + down.A_mag) / 2), "|A|", cases[c].name);
        close_to(e->pm_deg_pct, (up.pm_deg - down.pm_deg) / (2 * h) / 100, "phase margin", cases[c].name);
        close_to(e->unity, (up.unity_hz - down.unity_hz) / (2 * h) / ((up.unity_hz + down.unity_hz) / 2),
                 "unity crossing", cases[c].name);
    }
    /* the load enters as cl^2: twice the effect of the element it sets */
    const tb_sens_entry *p = NULL, *el = NULL;
    for (size_t i = 0; i < s.count; i++) {
        p = strcmp(s.entries[i].element, "{cl}") == 0 ? &s.entries[i] : p;
        el = strcmp(s.entries[i].element, "CL") == 0 ? &s.entries[i] : el;
    }
    assert_true(fabs(p->pm_deg_pct - 2 * el->pm_deg_pct) < 1e-6 * fabs(el->pm_deg_pct));
    tb_result_free(res);
    tb_diag_free(diag);
    tb_circuit_free(ckt);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_spreadparam_gauss_fraction),
        cmocka_unit_test(test_spreadparam_gauss_divider),
        cmocka_unit_test(test_spreadparam_same_as_elements),
        cmocka_unit_test(test_spreadparam_moves_together),
        cmocka_unit_test(test_spreadparam_and_element_compose),
        cmocka_unit_test(test_spreadparam_out_of_range),
        cmocka_unit_test(test_spreadparam_scan_equals_element_scan),
        cmocka_unit_test(test_spreadparam_scan_phase_margin),
        cmocka_unit_test(test_spreadparam_sensitivities),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
