/* tests/test_spread.c: scans, corners and Monte Carlo against closed forms, sampling error and thread counts */
#include "testutil.h"

#include "alloc.h"
#include "circuit.h"
#include "analyse.h"
#include "spread.h"

/* A divider R1/R2 read by a follower of loop gain K = 1000 (E1 drives OUT to K (mid - out)):
 * T = K, A_inf = D = R2/(R1 + R2), A = D K/(1 + K) (Black 1934: A = a/(1 + a beta) with
 * beta = 1, scaled by the divider). */
static const char *const DIVIDER =
    "divider and follower\n"
    "Vs in 0 AC 1\n"
    "R1 in mid 10k\n"
    "R2 mid 0 10k\n"
    "E1 out 0 mid out 1000\n"
    "RL out 0 1meg\n"
    ".io Vs v(out)\n"
    ".loop E1\n"
    ".ac dec 2 1 1k\n";

static tb_spreadset *run(const tb_circuit *ckt, int kind, size_t samples, unsigned jobs, uint64_t seed)
{
    tb_spread_options opt;
    tb_spread_options_init(&opt);
    opt.samples = samples;
    opt.jobs = jobs;
    opt.seed = seed;
    tb_diag *diag = tb_diag_new();
    tb_spreadset *set = NULL;
    tb_status st = kind == 0   ? tb_spread_scan(ckt, &opt, diag, &set)
                   : kind == 1 ? tb_spread_corners(ckt, &opt, diag, &set)
                               : tb_spread_monte_carlo(ckt, &opt, diag, &set);
    tu_print_diags(diag);
    tb_diag_free(diag);
    assert_int_equal(st, TB_OK);
    return set;
}

enum { FIG_T = 0, FIG_A = 5 }; /* dc.T and dc.A among the spread figures (spreadset.c) */

/* Gaussian R1, R2 (sigma 1 % each, independent): to first order (the delta method, any
 * statistics text) D = R2/(R1 + R2) has mean D0 and sigma
 *   sigma_D = sqrt((R2 s1)^2 + (R1 s2)^2)/(R1 + R2)^2
 * with s_i = 0.01 R_i; the second-order bias of the mean and the error of the sigma are
 * O(1e-4) relative, below the sampling error of N = 4000 samples. Bounds: 4 standard errors
 * of the mean (sigma/sqrt N) and of the sigma (sigma/sqrt(2(N - 1))), common practice. */
static void test_spread_divider_gaussian(void **state)
{
    (void)state;
    tb_circuit *ckt = tu_parse_cards(DIVIDER, ".spread R1 R2 gauss 1%\n");
    const size_t n = 4000;
    tb_spreadset *set = run(ckt, 2, n, 2, 20260101);
    double k = 1000.0 / 1001.0;
    double D0 = 0.5;
    double sD = sqrt(2.0) * 10e3 * 100.0 / (20e3 * 20e3);
    tb_spread_stats s;
    assert_int_equal(tb_spreadset_stats(set, 0, FIG_A, &s), TB_OK);
    assert_int_equal(s.present, n);
    double mean_err = 4 * sD * k / sqrt((double)n);
    double sigma_err = 4 * sD * k / sqrt(2.0 * (double)(n - 1));
    if (fabs(s.mean - D0 * k) > mean_err || fabs(s.sigma - sD * k) > sigma_err)
        fail_msg("A: mean %.9g (want %.9g +- %.3g), sigma %.6g (want %.6g +- %.3g)", s.mean, D0 * k, mean_err,
                 s.sigma, sD * k, sigma_err);
    /* the loop gain does not depend on the divider: T = 1000 in every sample */
    assert_int_equal(tb_spreadset_stats(set, 0, FIG_T, &s), TB_OK);
    assert_true(fabs(s.min - 1000) < 1e-9 && fabs(s.max - 1000) < 1e-9);
    tb_spreadset_free(set);
    tb_circuit_free(ckt);
}

/* Desensitivity: only the amplifier gain K spreads (gauss, sigma 10 %). To first order
 * dA/A = S dK/K with S = 1/(1 + T) = 1/(1 + K) (Black 1934; H. W. Bode 1945, the
 * sensitivity function): sigma_A/A = 0.1/(1 + K). K = 100 here, so that the spread of A
 * stands well above rounding; second-order terms are O(0.1 S) relative. */
static void test_spread_desensitivity(void **state)
{
    (void)state;
    char text[2048];
    snprintf(text, sizeof text, "%s", DIVIDER);
    char *k = strstr(text, "mid out 1000");
    memcpy(k, "mid out  100", 12);
    tb_circuit *ckt = tu_parse_cards(text, ".spread E1 gauss 10%\n");
    const size_t n = 3000;
    tb_spreadset *set = run(ckt, 2, n, 2, 7);
    tb_spread_stats sA, sT;
    assert_int_equal(tb_spreadset_stats(set, 0, FIG_A, &sA), TB_OK);
    assert_int_equal(tb_spreadset_stats(set, 0, FIG_T, &sT), TB_OK);
    double rel_T = sT.sigma / sT.mean; /* the drawn spread of K = T, about 10 % */
    double S = 1.0 / (1.0 + sT.mean);
    double rel_A = sA.sigma / sA.mean;
    /* the ratio of the spreads against S, to the first-order error plus sampling */
    if (fabs(rel_A / rel_T - S) > 0.05 * S)
        fail_msg("spread of A / spread of K = %.6g, S = 1/(1+T) = %.6g", rel_A / rel_T, S);
    assert_true(fabs(rel_T - 0.1) < 4 * 0.1 / sqrt(2.0 * (double)n));
    tb_spreadset_free(set);
    tb_circuit_free(ckt);
}

/* Desensitivity over frequency: a two-pole loop whose first stage's gm spreads 10 %. The
 * spread of A at each probe frequency follows |S(jw)| = 1/|1 + T(jw)| times the gain's
 * spread to first order (dA/A = S dk/k, Bode 1945), from 2000 times smaller at DC to equal
 * far above the unity crossing; second-order terms (S itself moves with k) and sampling
 * stay within 10 % at 1500 samples. */
static void test_spread_desensitivity_over_frequency(void **state)
{
    (void)state;
    tb_circuit *ckt = tu_parse("two-pole gain of 5\nVs in 0 AC 1\nG1 0 x1 in fb 1m\nR1 x1 0 1meg\n"
                               "C1 x1 0 1.6n\nG2 0 x2 x1 0 10m\nR2 x2 0 1k\nC2 x2 0 16p\nE1 out 0 x2 0 1\n"
                               "RF out fb 40k\nRG fb 0 10k\n.io Vs v(out)\n.loop G1\n.ac dec 10 1 100meg\n"
                               ".spread G1 gauss 10%\n");
    tb_spreadset *set = run(ckt, 2, 1500, 2, 3);
    assert_true(set->probes.count > 10);
    for (size_t i = 0; i < set->probes.count; i++) {
        tb_spread_desens d;
        assert_true(tb_spreadset_desens(set, 0, i, &d));
        double want = d.S * d.spread_k;
        if (fabs(d.spread_A - want) > 0.1 * want)
            fail_msg("at %g Hz: spread of A %.6g, |S| x spread of k %.6g", d.hz, d.spread_A, want);
    }
    tb_spread_desens dc, top;
    assert_true(tb_spreadset_desens(set, 0, 0, &dc));
    assert_true(tb_spreadset_desens(set, 0, set->probes.count - 1, &top));
    assert_true(fabs(dc.S * 2001 - 1) < 1e-6); /* T(0) = 1m 1meg 10m 1k / 5 = 2000 */
    assert_true(top.S > 0.99);
    tb_spreadset_free(set);
    tb_circuit_free(ckt);
}

/* A run at changed values factors on the nominal circuit's symbolic analysis (the same
 * pattern), and gives the numbers of a fresh analysis of the changed netlist to rounding; a
 * circuit with another pattern gets its own analysis. */
static void test_spread_shares_symbolic(void **state)
{
    (void)state;
    tb_circuit *ckt = tu_parse(DIVIDER);
    tb_circuit *other = tu_parse("divider, R2 at 30k\nVs in 0 AC 1\nR1 in mid 10k\nR2 mid 0 30k\n"
                                 "E1 out 0 mid out 1000\nRL out 0 1meg\n.io Vs v(out)\n.loop E1\n.ac dec 2 1 1k\n");
    tb_circuit *bigger = tu_parse("divider with an RC\nVs in 0 AC 1\nR1 in mid 10k\nR2 mid 0 10k\n"
                                  "R3 mid x 1k\nC1 x 0 1n\nE1 out 0 mid out 1000\nRL out 0 1meg\n.io Vs v(out)\n.loop E1\n"
                                  ".ac dec 2 1 1k\n");
    tb_sweep *base = NULL, *same = NULL, *own = NULL;
    assert_int_equal(tb_sweep_new(ckt, 1e-6, 1, NULL, &base), TB_OK);
    assert_int_equal(tb_sweep_new_on(other, 1e-6, 2, base, NULL, &same), TB_OK);
    assert_int_equal(tb_sweep_new_on(bigger, 1e-6, 1, base, NULL, &own), TB_OK);
    assert_true(tb_sweep_shared(same));
    assert_false(tb_sweep_shared(own));
    assert_false(tb_sweep_shared(base));
    tb_options opt;
    tb_options_init(&opt);
    tb_result *on = NULL, *fresh = NULL;
    assert_int_equal(tb_analyse_on(other, &opt, base, NULL, &on), TB_OK);
    assert_int_equal(tb_analyse(other, &opt, NULL, &fresh), TB_OK);
    tb_point a, b;
    assert_true(tb_result_dc(on, 0, &a) && tb_result_dc(fresh, 0, &b));
    assert_true(cabs(a.A - b.A) < 1e-14 * cabs(b.A) && cabs(a.A - 0.75 * 1000.0 / 1001.0) < 1e-12);
    tb_result_free(on);
    tb_result_free(fresh);
    tb_sweep_free(own);
    tb_sweep_free(same);
    tb_sweep_free(base);
    tb_circuit_free(bigger);
    tb_circuit_free(other);
    tb_circuit_free(ckt);
}

/* Sensitivities at chosen frequencies against the closed form of a two-pole loop,
 *   T = gm1 R1/(1 + jw R1 C1) * gm2 R2/(1 + jw R2 C2)   (return ratio at G1, Bode 1945):
 * d ln T/d ln C1 = -jw R1 C1/(1 + jw R1 C1), d ln T/d ln R1 = 1/(1 + jw R1 C1), and 1 for
 * gm2 and the loop's own gm1; |T| moves by the real part (%/%), its phase by the imaginary
 * part (rad per unit, so 180/pi/100 degrees per %). */
static void test_spread_sensitivities_at(void **state)
{
    (void)state;
    tb_circuit *ckt = tu_parse("two poles\nVs in 0 AC 1\nG1 0 x1 in out 1m\nR1 x1 0 1meg\nC1 x1 0 1.5n\n"
                               "G2 0 x2 x1 0 10m\nR2 x2 0 1k\nC2 x2 0 150p\nE1 out 0 x2 0 1\n.io Vs v(out)\n"
                               ".loop G1\n.ac dec 10 1 100meg\n");
    tb_options opt;
    tb_options_init(&opt);
    static const double freqs[] = {0, 1e3, 3e5};
    for (size_t k = 0; k < 3; k++) {
        tb_sens_entry *e = NULL;
        size_t per = 0;
        assert_int_equal(tb_spread_sensitivities_at(ckt, &opt, freqs[k], NULL, &e, &per), TB_OK);
        assert_int_equal(per, 7);
        double w = 2 * TU_PI * freqs[k];
        double complex p1 = 1.0 + I * w * 1e6 * 1.5e-9, p2 = 1.0 + I * w * 1e3 * 150e-12;
        struct {
            const char *name;
            double complex want;
        } cases[] = {{"C1", -I * w * 1e6 * 1.5e-9 / p1}, {"R1", 1.0 / p1}, {"C2", -I * w * 1e3 * 150e-12 / p2},
                     {"R2", 1.0 / p2}, {"G2", 1.0}, {"G1", 1.0}, {"E1", 1.0}};
        for (size_t c = 0; c < 7; c++) {
            size_t i = 0;
            while (i < per && strcmp(e[i].element, cases[c].name) != 0)
                i++;
            assert_true(i < per && e[i].has_T);
            double mag = creal(cases[c].want), ph = cimag(cases[c].want) * 180.0 / TU_PI / 100.0;
            if (fabs(e[i].T_mag - mag) > 1e-9 + 1e-9 * fabs(mag) || fabs(e[i].T_phase_deg - ph) > 1e-9)
                fail_msg("%s at %g Hz: |T| %.12g (want %.12g), phase %.12g deg/%% (want %.12g)", cases[c].name,
                         freqs[k], e[i].T_mag, mag, e[i].T_phase_deg, ph);
            if (i > 0) /* ranked by |T_mag| */
                assert_true(fabs(e[i - 1].T_mag) >= fabs(e[i].T_mag));
        }
        tb_free(e);
    }
    tb_circuit_free(ckt);
}

/* A seeded run gives the same numbers for 1, 2 and 3 threads, and another seed others. */
static void test_spread_reproducible(void **state)
{
    (void)state;
    tb_circuit *ckt = tu_parse_cards(DIVIDER, ".spread R* flat 5%\n.spread E1 pick 100 1000 10000\n");
    tb_spreadset *a = run(ckt, 2, 37, 1, 99);
    tb_spreadset *b = run(ckt, 2, 37, 2, 99);
    tb_spreadset *c = run(ckt, 2, 37, 3, 99);
    tb_spreadset *d = run(ckt, 2, 37, 3, 100);
    size_t cells = a->runs * a->loops * TB_SPREAD_FIGURES;
    for (size_t i = 0; i < cells; i++) {
        assert_true(a->fig[i].present == b->fig[i].present && a->fig[i].value == b->fig[i].value);
        assert_true(a->fig[i].present == c->fig[i].present && a->fig[i].value == c->fig[i].value);
    }
    assert_memory_equal(a->param_values, c->param_values, a->runs * a->params * sizeof(double));
    assert_memory_not_equal(a->param_values, d->param_values, a->runs * a->params * sizeof(double));
    tb_spreadset_free(a);
    tb_spreadset_free(b);
    tb_spreadset_free(c);
    tb_spreadset_free(d);
    tb_circuit_free(ckt);
}

/* A scan of K over a list: dc.A = D K/(1 + K) and dc.T = K at each value (Black 1934). */
static void test_spread_scan_closed_form(void **state)
{
    (void)state;
    tb_circuit *ckt = tu_parse_cards(DIVIDER, ".scan E1 list 1 10 100 1000\n.scan R2 list 10k 30k\n");
    tb_spreadset *set = run(ckt, 0, 0, 2, 0);
    assert_int_equal(set->runs, 8);
    static const double Ks[4] = {1, 10, 100, 1000};
    for (size_t r = 0; r < set->runs; r++) {
        double K = set->param_values[r * 2];
        double R2 = set->param_values[r * 2 + 1];
        assert_true(K == Ks[r / 2] && R2 == (r % 2 ? 30e3 : 10e3));
        double want = R2 / (10e3 + R2) * K / (1 + K);
        const tb_figure_value *f = tb_spreadset_row(set, r, 0);
        assert_true(f[FIG_T].present && fabs(f[FIG_T].value - K) < 1e-9 * K);
        assert_true(f[FIG_A].present && fabs(f[FIG_A].value - want) < 1e-9 * want);
    }
    tb_spreadset_free(set);
    tb_circuit_free(ckt);
}

/* Corners of a group and two single parts: 3 dimensions, 1 + 2^3 runs; the extremes of A =
 * D K/(1 + K) lie where D and K are extreme: lowest with R1 high, R2 low, K low. R1 and R2
 * in one group move together, so D stays 0.5 in every corner. */
static void test_spread_corners_extremes(void **state)
{
    (void)state;
    tb_circuit *ckt = tu_parse_cards(DIVIDER, ".spread R1 flat 10%\n.spread R2 gauss 1%\n.spread E1 pick 10 100\n");
    tb_spreadset *set = run(ckt, 1, 0, 2, 0);
    assert_int_equal(set->runs, 9);
    assert_int_equal(set->dimensions, 3);
    assert_false(set->reduced);
    tb_spread_stats s;
    assert_int_equal(tb_spreadset_stats(set, 0, FIG_A, &s), TB_OK);
    double lo = 9.7e3 / (11e3 + 9.7e3) * 10.0 / 11.0;
    double hi = 10.3e3 / (9e3 + 10.3e3) * 100.0 / 101.0;
    assert_true(fabs(s.min - lo) < 1e-9 * lo && fabs(s.max - hi) < 1e-9 * hi);
    tb_spreadset_free(set);
    tb_circuit_free(ckt);

    ckt = tu_parse_cards(DIVIDER, ".spread R1 R2 flat 10% group=matched\n");
    set = run(ckt, 1, 0, 1, 0);
    assert_int_equal(set->runs, 3);
    assert_int_equal(tb_spreadset_stats(set, 0, FIG_A, &s), TB_OK);
    assert_true(fabs(s.max - s.min) < 1e-12);
    tb_spreadset_free(set);
    tb_circuit_free(ckt);
}

/* Eleven independent resistors: past TB_SPREAD_FULL_CORNERS the reduced design runs the
 * nominal point, each resistor alone at both ends, then the corners they predict. The gain
 * of a chain of inverting stages is monotone in every resistor, so the predicted corner is
 * the true worst case: A = prod (Rf_i/Rin_i) at its extremes. */
static void test_spread_corners_reduced(void **state)
{
    (void)state;
    char text[4096] = "gain chain\nVs in 0 AC 1\n";
    char line[160];
    static const char *const outs[6] = {"o1", "o2", "o3", "o4", "o5", "o6"};
    const char *prev = "in";
    for (int i = 1; i <= 6; i++) {
        snprintf(line, sizeof line, "RI%d %s m%d 10k\nRF%d m%d o%d %dk\nE%d o%d 0 0 m%d 1meg\n", i, prev, i, i, i, i,
                 10 + i, i, i, i);
        strcat(text, line);
        prev = outs[i - 1];
    }
    strcat(text, ".io Vs v(o6)\n.loop E1\n.ac dec 2 1 1k\n.spread RI* RF1 RF2 RF3 RF4 RF5 flat 1%\n");
    tb_circuit *ckt = tu_parse(text);
    tb_spreadset *set = run(ckt, 1, 0, 2, 0);
    assert_true(set->reduced);
    assert_int_equal(set->dimensions, 11);
    assert_true(set->runs > 23 && set->runs <= 23 + 2 * (TB_SPREAD_FIGURES - 1));
    tb_spread_stats s;
    assert_int_equal(tb_spreadset_stats(set, 0, FIG_A, &s), TB_OK);
    /* |A| largest with every RF high and RI low (RF6 fixed); six inversions: A > 0 */
    double up = 1, down = 1;
    for (int i = 1; i <= 6; i++) {
        double rf = (10 + i) * 1e3;
        double hi = i < 6 ? 1.01 : 1.0;
        double lo = i < 6 ? 0.99 : 1.0;
        up *= rf * hi / (10e3 * 0.99);
        down *= rf * lo / (10e3 * 1.01);
    }
    /* finite stage gains (1e6) shift A by about 1e-5 relative: compare to 1e-4 */
    if (fabs(s.max / up - 1) > 1e-4 || fabs(s.min / down - 1) > 1e-4)
        fail_msg("reduced corners: A from %.9g to %.9g, want %.9g to %.9g", s.min, s.max, down, up);
    tb_spreadset_free(set);
    tb_circuit_free(ckt);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_spread_divider_gaussian),
        cmocka_unit_test(test_spread_desensitivity),
        cmocka_unit_test(test_spread_desensitivity_over_frequency),
        cmocka_unit_test(test_spread_shares_symbolic),
        cmocka_unit_test(test_spread_sensitivities_at),
        cmocka_unit_test(test_spread_reproducible),
        cmocka_unit_test(test_spread_scan_closed_form),
        cmocka_unit_test(test_spread_corners_extremes),
        cmocka_unit_test(test_spread_corners_reduced),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
