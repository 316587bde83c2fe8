/* tests/test_spreadcount.c: the factorizations one Monte Carlo sample spends, counted (never
 * timed), and the samples' figures against a closed form and against a full analysis of the
 * same perturbed netlist written out. */
#include "testutil.h"

#include <complex.h>
#include <stdlib.h>

#include "spread.h"
#include "spreadset.h"

/* The bound on one sample's factorizations: the grid's 31 points and DC, the margin scan, the
 * closed-loop -3 dB search. At the time of writing a sample took 126 to 130; before the
 * samples skipped what the spread does not report (the argument-principle walk, the near
 * poles, the step response, the vector margin's golden section) one took 660 to 680. */
#define MAX_SAMPLE_FACTORIZATIONS 150

/* Two poles: T = gm1 R1/(1 + s R1 C1) * gm2 R2/(1 + s R2 C2), the return ratio at G1 (Bode
 * 1945; the same loop as test_spread.c's sensitivities). */
static const char *const TWO_POLES = "two poles\nVs in 0 AC 1\nG1 0 x1 in out %.17g\nR1 x1 0 %.17g\nC1 x1 0 %.17g\n"
                                     "G2 0 x2 x1 0 %.17g\nR2 x2 0 %.17g\nC2 x2 0 %.17g\nE1 out 0 x2 0 1\n"
                                     ".io Vs v(out)\n.loop G1\n.ac dec 10 1 100meg\n%s";

enum { V_G1, V_R1, V_C1, V_G2, V_R2, V_C2, V_COUNT };
static const char *const names[V_COUNT] = {"G1", "R1", "C1", "G2", "R2", "C2"};
static const double nominal[V_COUNT] = {1e-3, 1e6, 1.5e-9, 10e-3, 1e3, 150e-12};

static char *netlist(const double *v, const char *cards)
{
    size_t cap = 2048;
    char *text = malloc(cap);
    assert_non_null(text);
    int n = snprintf(text, cap, TWO_POLES, v[V_G1], v[V_R1], v[V_C1], v[V_G2], v[V_R2], v[V_C2], cards);
    assert_true(n > 0 && (size_t)n < cap);
    return text;
}

/* The closed form's unity crossing and phase margin: |T(j w)| = 1 by bisection in log w
 * (|T| falls monotonically), PM = 180 - atan(w R1 C1) - atan(w R2 C2) degrees. */
static void closed_form(const double *v, double *hz, double *pm)
{
    double t0 = v[V_G1] * v[V_R1] * v[V_G2] * v[V_R2], a = v[V_R1] * v[V_C1], b = v[V_R2] * v[V_C2];
    double lo = log(1.0), hi = log(1e12);
    for (int i = 0; i < 200; i++) {
        double w = exp(0.5 * (lo + hi));
        double mag = t0 / sqrt((1 + w * w * a * a) * (1 + w * w * b * b));
        if (mag > 1)
            lo = 0.5 * (lo + hi);
        else
            hi = 0.5 * (lo + hi);
    }
    double w = exp(0.5 * (lo + hi));
    *hz = w / (2 * TU_PI);
    *pm = 180.0 - (atan(w * a) + atan(w * b)) * 180.0 / TU_PI;
}

/* Monte Carlo of the netlist text: samples runs on one thread at the given pole limit. */
static tb_spreadset *monte_carlo(char *text, size_t samples, size_t pole_limit, tb_circuit **ckt)
{
    *ckt = tu_parse(text);
    free(text);
    tb_spread_options opt;
    tb_spread_options_init(&opt);
    opt.samples = samples;
    opt.analysis.pole_limit = pole_limit;
    tb_diag *diag = tb_diag_new();
    tb_spreadset *set = NULL;
    assert_int_equal(tb_spread_monte_carlo(*ckt, &opt, diag, &set), TB_OK);
    tu_print_diags(diag);
    tb_diag_free(diag);
    return set;
}

/* Sample r's element values: the nominal ones, those the spread drew replaced by name. */
static void sample_values(const tb_spreadset *set, size_t r, const char *const *names_of, const double *nom,
                          int count, double *v)
{
    memcpy(v, nom, (size_t)count * sizeof(double));
    for (size_t p = 0; p < set->params; p++)
        for (int k = 0; k < count; k++)
            if (strcmp(set->param_names[p], names_of[k]) == 0)
                v[k] = set->param_values[r * set->params + p];
}

enum { FIG_UNITY = 1, FIG_PM = 2, FIG_VERDICT = 8 }; /* among the spread figures (spreadset.c) */

static void test_spreadcount_two_poles(void **state)
{
    (void)state;
    tb_circuit *ckt = NULL;
    /* a pole limit of 0: as above it, the nominal count by the argument principle */
    tb_spreadset *set = monte_carlo(netlist(nominal, ".spread R1 R2 C1 C2 flat 20%\n"), 12, 0, &ckt);

    /* the open loop's two poles lie in the left half-plane: P = 0, from the nominal walk */
    assert_non_null(set->ol_rhp_nominal);
    assert_int_equal(set->ol_rhp_nominal[0], 0);
    assert_int_equal(set->params, 4);
    size_t most = 0;
    for (size_t r = 0; r < set->runs; r++) {
        assert_int_equal(set->status[r] == TB_RUN_ERROR, false);
        double v[V_COUNT];
        sample_values(set, r, names, nominal, V_COUNT, v);
        const tb_figure_value *row = tb_spreadset_row(set, r, 0);
        double hz = 0, pm = 0;
        closed_form(v, &hz, &pm);
        assert_true(row[FIG_UNITY].present && row[FIG_PM].present);
        tu_close(row[FIG_UNITY].value, hz, 1e-7);
        tu_close(row[FIG_PM].value, pm, 1e-6);

        /* the same values as a netlist of their own, analysed in full (its poles by QZ) */
        char *one = netlist(v, "");
        tb_circuit *c1 = NULL;
        tb_result *res = tu_analyse(one, &c1);
        free(one);
        tb_stability st;
        assert_int_equal(tb_stability_loop(res, 0, &st), TB_OK);
        assert_true(st.has_poles && st.has_phase_margin);
        assert_int_equal(st.verdict, TB_VERDICT_STABLE);
        tu_close(row[FIG_PM].value, st.phase_margin_deg, 1e-9);
        tu_close(row[FIG_UNITY].value, st.phase_margin_hz, 1e-9);
        assert_true(row[FIG_VERDICT].present);
        tu_close(row[FIG_VERDICT].value, (double)TB_VERDICT_STABLE, 0);
        tb_result_free(res);
        tb_circuit_free(c1);

        assert_true(set->factorizations[r] > 0);
        if (set->factorizations[r] > most)
            most = set->factorizations[r];
    }
    print_message("most factorizations in one sample: %zu (bound %d)\n", most, MAX_SAMPLE_FACTORIZATIONS);
    assert_true(most <= MAX_SAMPLE_FACTORIZATIONS);
    tb_spreadset_free(set);
    tb_circuit_free(ckt);
}

/* Three poles, T = T0/((1 + s R1 C1)(1 + s R2 C2)(1 + s R3 C3)), T0 = gm1 R1 gm2 R2 gm3 R3 (three
 * transconductance stages, unity-gain output; Bode 1945): a phase crossing where the three lags
 * sum to 180 degrees, the gain margin -20 log10 |T| there. Samples bracket their phase crossings
 * between grid points and refine them at the end of the sweep (tb_options.crossing_list false). */
static const char *const THREE_POLES = "three poles\nVs in 0 AC 1\nG1 0 x1 in out 1m\nR1 x1 0 %.17g\nC1 x1 0 %.17g\n"
                                       "G2 0 x2 x1 0 1m\nR2 x2 0 %.17g\nC2 x2 0 %.17g\nG3 0 x3 x2 0 1m\n"
                                       "R3 x3 0 %.17g\nC3 x3 0 %.17g\nE1 out 0 x3 0 1\n.io Vs v(out)\n.loop G1\n"
                                       ".ac dec 10 1 100meg\n%s";

static const char *const names3[6] = {"R1", "C1", "R2", "C2", "R3", "C3"};
static const double nominal3[6] = {10e3, 15.9e-9, 1e3, 15.9e-9, 1e3, 1.59e-9};

static char *netlist3(const double *v, const char *cards)
{
    size_t cap = 2048;
    char *text = malloc(cap);
    assert_non_null(text);
    int n = snprintf(text, cap, THREE_POLES, v[0], v[1], v[2], v[3], v[4], v[5], cards);
    assert_true(n > 0 && (size_t)n < cap);
    return text;
}

/* The gain margin of the closed form: the phase crossing by bisection in log w (the lag rises
 * monotonically), then -20 log10 |T|. */
static double gain_margin3(const double *v)
{
    double t0 = 1e-3 * v[0] * 1e-3 * v[2] * 1e-3 * v[4], tau[3] = {v[0] * v[1], v[2] * v[3], v[4] * v[5]};
    double lo = log(1.0), hi = log(1e12), w = 0;
    for (int i = 0; i < 200; i++) {
        w = exp(0.5 * (lo + hi));
        double lag = atan(w * tau[0]) + atan(w * tau[1]) + atan(w * tau[2]);
        if (lag < TU_PI)
            lo = 0.5 * (lo + hi);
        else
            hi = 0.5 * (lo + hi);
    }
    double mag = t0;
    for (int k = 0; k < 3; k++)
        mag /= sqrt(1 + w * w * tau[k] * tau[k]);
    return -20.0 * log10(mag);
}

enum { FIG_GM = 3 };

static void test_spreadcount_three_poles_gain_margin(void **state)
{
    (void)state;
    tb_circuit *ckt = NULL;
    tb_spreadset *set = monte_carlo(netlist3(nominal3, ".spread R* C* flat 10%\n"), 8, 500, &ckt);
    for (size_t r = 0; r < set->runs; r++) {
        double v[6];
        sample_values(set, r, names3, nominal3, 6, v);
        const tb_figure_value *row = tb_spreadset_row(set, r, 0);
        assert_true(row[FIG_GM].present);
        tu_close(row[FIG_GM].value, gain_margin3(v), 1e-6);

        char *one = netlist3(v, "");
        tb_circuit *c1 = NULL;
        tb_result *res = tu_analyse(one, &c1);
        free(one);
        tb_stability st;
        assert_int_equal(tb_stability_loop(res, 0, &st), TB_OK);
        assert_true(st.has_gain_margin_up);
        tu_close(row[FIG_GM].value, st.gain_margin_up_db, 1e-9);
        tb_result_free(res);
        tb_circuit_free(c1);
    }
    tb_spreadset_free(set);
    tb_circuit_free(ckt);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_spreadcount_two_poles),
        cmocka_unit_test(test_spreadcount_three_poles_gain_margin),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
