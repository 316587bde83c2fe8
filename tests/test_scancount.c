/* tests/test_scancount.c: the factorizations a full analysis spends on a long RC line, counted
 * (never timed), and the phase crossings its margin scan finds against an independent cascade. */
#include "testutil.h"

#include <complex.h>
#include <stdlib.h>

#define PI 3.14159265358979323846

/* The line: N nodes n1..nN, 1 pF from each to ground, 10 ohm between neighbours, RS 1k from
 * the source to n1, RT 1k from nN to ground, GW drawing 1 uS * v(nN) out of n1 (bench/gen_family.sh
 * "line" at N + 2 unknowns). */
#define N 300
#define N_LONG 1000 /* long enough for more phase crossings in the sweep than the list keeps */
#define RS 1e3
#define RT 1e3
#define RSEC 10.0
#define CSEC 1e-12
#define F_LO 1.0
#define F_HI 1e9
/* The bound: 158 fresh factorizations outside the grid at the time of writing, every crossing
 * followed (445 before the scan split coarsely between grid points far from 0 dB); a regression
 * that re-walks the line fails here. */
#define MAX_PROBE_FACTORIZATIONS 210

static char *line_netlist_gm(int n, const char *gm)
{
    size_t cap = 64 * (size_t)n + 512, len = 0;
    char *text = malloc(cap);
    assert_non_null(text);
    len += (size_t)snprintf(text + len, cap - len, "RC line: %d nodes, a weak loop\nVIN in 0 AC 1\nRS in n1 1k\n", n);
    for (int i = 1; i <= n; i++) {
        len += (size_t)snprintf(text + len, cap - len, "C%d n%d 0 1p\n", i, i);
        if (i < n)
            len += (size_t)snprintf(text + len, cap - len, "R%d n%d n%d 10\n", i, i, i + 1);
    }
    len += (size_t)snprintf(text + len, cap - len,
                            "RT n%d 0 1k\nGW n1 0 n%d 0 %s\n.loop GW\n.io VIN v(n%d)\n.ac dec 10 1 1g\n.end\n", n, n,
                            gm, n);
    assert_true(len < cap);
    return text;
}

static char *line_netlist(int n)
{
    return line_netlist_gm(n, "1u");
}

/* A full analysis with the gain-margin cap at cap_db (0: every phase crossing followed). */
static tb_result *analyse_capped(const char *text, double cap_db, tb_circuit **ckt)
{
    *ckt = tu_parse(text);
    tb_options opt;
    tb_options_init(&opt);
    opt.gm_cap_db = cap_db;
    tb_diag *diag = tb_diag_new();
    tb_result *res = NULL;
    assert_int_equal(tb_analyse(*ckt, &opt, diag, &res), TB_OK);
    tb_diag_free(diag);
    return res;
}

/* The current into n1 that sets v(nN) = 1 with the source shorted: T = gm Z(n1 -> nN) = gm / it,
 * the voltage at nN per unit current into n1 (the return ratio of a transconductance that
 * draws current out of n1; common practice). The cascade runs from the far end: with
 * v(nN) = 1, each series resistor adds R times the current through it, each node its shunt
 * current (the chain-parameter cascade of a ladder, D. M. Pozar, Microwave Engineering, 4th ed.,
 * Wiley 2012, section 4.4). */
static double complex ladder_current(int n, double f)
{
    double complex y = I * 2.0 * PI * f * CSEC;
    double complex v = 1.0, cur = v * (y + 1.0 / RT);
    for (int i = n - 1; i >= 1; i--) {
        v += RSEC * cur;
        cur += v * (y + (i == 1 ? 1.0 / RS : 0.0));
    }
    return cur;
}

/* arg T(j 2 pi f) in radians, wrapped, from the ladder alone. */
static double ladder_arg(int n, double f)
{
    return -carg(ladder_current(n, f));
}

/* The frequencies where the unwrapped arg T of the ladder crosses -180 - 360 k degrees inside
 * [F_LO, F_HI], by a fine log grid and bisection; returns how many (at most max). */
static size_t ladder_crossings(int n, double *hz, size_t max)
{
    const int steps = 40000;
    size_t count = 0;
    double prev_f = F_LO, prev = ladder_arg(n, F_LO), level = -PI;
    /* an RC ladder's transfer impedance has only real negative poles and no finite zeros:
     * its phase falls monotonically, so the levels come in order */
    for (int i = 1; i <= steps; i++) {
        double f = F_LO * pow(F_HI / F_LO, (double)i / steps);
        double ph = prev + remainder(ladder_arg(n, f) - prev, 2.0 * PI); /* steps far below pi */
        while (ph < level && prev >= level) {
            double lo = log(prev_f), hi = log(f);
            for (int it = 0; it < 200 && hi - lo > 1e-15; it++) {
                double mid = 0.5 * (lo + hi);
                double pm = prev + remainder(ladder_arg(n, exp(mid)) - prev, 2.0 * PI);
                if (pm >= level)
                    lo = mid;
                else
                    hi = mid;
            }
            if (count < max)
                hz[count] = exp(0.5 * (lo + hi));
            count++;
            level -= 2.0 * PI;
        }
        prev = ph;
        prev_f = f;
    }
    return count;
}

static void test_scancount_line_report(void **state)
{
    (void)state;
    char *text = line_netlist(N);
    tb_circuit *ckt = NULL;
    tb_result *res = analyse_capped(text, 0, &ckt); /* every crossing followed */
    free(text);

    tb_stats stats;
    assert_int_equal(tb_result_stats(res, &stats), TB_OK);
    print_message("grid %zu factorizations, outside the grid %zu (bound %d)\n", stats.grid_factorizations,
                  stats.probe_factorizations, MAX_PROBE_FACTORIZATIONS);
    assert_true(stats.probe_factorizations <= MAX_PROBE_FACTORIZATIONS);

    /* every phase crossing inside the sweep, none lost to a coarse split: the same levels at
     * the same frequencies as the cascade's */
    tb_stability stab;
    assert_int_equal(tb_stability_loop(res, 0, &stab), TB_OK);
    double want[64];
    size_t nwant = ladder_crossings(N, want, 64);
    assert_true(nwant >= 5 && nwant <= 64); /* about 53 rad of lag at 1 GHz: 8 levels */
    size_t k = 0;
    for (size_t i = 0; i < stab.phase_count; i++) {
        const tb_crossing *c = &stab.phase[i];
        if (c->sweep != TB_SWEEP_INSIDE)
            continue;
        assert_true(k < nwant);
        tu_close(c->phase_deg, -180.0 - 360.0 * (double)k, 1e-9);
        tu_close(c->hz, want[k], 1e-7);
        k++;
    }
    assert_int_equal(k, nwant);
    tb_result_free(res);
    tb_circuit_free(ckt);
}

/* The bound for the long line (no right-half-plane count: the scan, the closed loop and the
 * near poles): 291 fresh factorizations at the time of writing, 389 while the scan followed
 * T's phase to the top of the sweep after its crossing list had overflowed. */
#define MAX_LONG_FACTORIZATIONS 330

/* 1000 sections: more phase crossings inside the sweep, more than the 16 the list keeps.
 * The 16 kept are the cascade's lowest 16; the overflow is noted (margins not determined);
 * |T| < 1 everywhere (T(0) < 1e-3 and an RC ladder's |T| falls with frequency), so 1 + T
 * stays in the right half-plane and the Nyquist count is 0. */
static void test_scancount_long_line_overflow(void **state)
{
    (void)state;
    char *text = line_netlist(N_LONG);
    tb_circuit *ckt = tu_parse(text);
    free(text);
    tb_options opt;
    tb_options_init(&opt);
    opt.rhp_count_limit = 0;
    opt.gm_cap_db = 0; /* every crossing followed, as the list overflows */
    tb_diag *diag = tb_diag_new();
    tb_result *res = NULL;
    assert_int_equal(tb_analyse(ckt, &opt, diag, &res), TB_OK);
    tb_diag_free(diag);
    tb_stats stats;
    assert_int_equal(tb_result_stats(res, &stats), TB_OK);
    print_message("long line: outside the grid %zu (bound %d)\n", stats.probe_factorizations,
                  MAX_LONG_FACTORIZATIONS);
    assert_true(stats.probe_factorizations <= MAX_LONG_FACTORIZATIONS);

    tb_stability stab;
    assert_int_equal(tb_stability_loop(res, 0, &stab), TB_OK);
    double want[64];
    size_t nwant = ladder_crossings(N_LONG, want, 64);
    assert_true(nwant > TB_MAX_CROSSINGS && nwant <= 64);
    assert_int_equal(stab.phase_count, TB_MAX_CROSSINGS);
    assert_true(stab.notes & (1u << TB_SNOTE_TRUNCATED));
    assert_false(stab.margins_determined);
    for (size_t k = 0; k < stab.phase_count; k++) {
        const tb_crossing *c = &stab.phase[k];
        assert_int_equal(c->sweep, TB_SWEEP_INSIDE);
        tu_close(c->phase_deg, -180.0 - 360.0 * (double)k, 1e-9);
        tu_close(c->hz, want[k], 1e-7);
    }
    assert_int_equal(stab.unity_count, 0);
    assert_true(stab.has_nyquist);
    assert_int_equal(stab.nyquist_n, 0);
    assert_int_equal(stab.verdict, TB_VERDICT_STABLE);
    tb_result_free(res);
    tb_circuit_free(ckt);
}

/* Fresh factorizations of a full analysis (the grid's not counted). */
static size_t probe_count(const tb_result *res)
{
    tb_stats stats;
    assert_int_equal(tb_result_stats(res, &stats), TB_OK);
    return stats.probe_factorizations;
}

/* The default cap of 60 dB on the weak line, whose |T| stays below -70 dB: no phase crossing
 * is listed, the rising gain margin reads "more than 60 dB" (a bound, and a judgment: the
 * threshold of 10 dB is met), the margins are determined, and the scan spends fewer fresh
 * factorizations than with every crossing followed. */
static void test_scancount_cap_weak_line(void **state)
{
    (void)state;
    char *text = line_netlist(N);
    tb_circuit *all_ckt = NULL, *ckt = NULL;
    tb_result *all = analyse_capped(text, 0, &all_ckt);
    tb_result *res = analyse_capped(text, 60, &ckt);
    free(text);
    tb_stability full, stab;
    assert_int_equal(tb_stability_loop(all, 0, &full), TB_OK);
    assert_int_equal(tb_stability_loop(res, 0, &stab), TB_OK);
    assert_true(full.phase_count >= 5);
    for (size_t i = 0; i < full.phase_count; i++)
        assert_true(full.phase[i].T_db < -60.0); /* the independent check of these: above */
    assert_int_equal(stab.phase_count, 0);
    assert_false(stab.has_gain_margin_up);
    assert_true(stab.has_gain_margin_up_above);
    tu_close(stab.gm_cap_db, 60.0, 1e-12);
    assert_true(stab.notes & (1u << TB_SNOTE_BELOW_GM_CAP));
    assert_true(stab.margins_determined);
    assert_true(stab.gm_ok);
    assert_int_equal(stab.verdict, TB_VERDICT_STABLE);
    print_message("weak line: %zu fresh factorizations capped, %zu with every crossing\n", probe_count(res),
                  probe_count(all));
    assert_true(probe_count(res) < probe_count(all));
    tb_result_free(all);
    tb_result_free(res);
    tb_circuit_free(all_ckt);
    tb_circuit_free(ckt);
}

/* A stronger loop on the same line (gm 2.5 mS, T(0) = 0.5): its first phase crossings lie above
 * the cap, the later ones far below. Against the cascade: every crossing with |T| above
 * -57 dB is listed at its frequency, none below -90 dB, and the rising gain margin is the
 * cascade's -20 log |T| at the first crossing. */
static void test_scancount_cap_strong_line(void **state)
{
    (void)state;
    const double gm = 2.5e-3;
    char *text = line_netlist_gm(N, "2.5m");
    tb_circuit *ckt = NULL;
    tb_result *res = analyse_capped(text, 60, &ckt);
    free(text);
    tb_stability stab;
    assert_int_equal(tb_stability_loop(res, 0, &stab), TB_OK);
    double want[64];
    size_t nwant = ladder_crossings(N, want, 64), above = 0, below = 0;
    assert_true(nwant >= 5 && nwant <= 64);
    for (size_t k = 0; k < nwant; k++) {
        double db = 20.0 * log10(gm / cabs(ladder_current(N, want[k])));
        bool listed = false;
        for (size_t i = 0; i < stab.phase_count; i++)
            if (fabs(stab.phase[i].hz / want[k] - 1.0) < 1e-7) {
                listed = true;
                tu_close(stab.phase[i].T_db, db, 1e-6);
                tu_close(stab.phase[i].phase_deg, -180.0 - 360.0 * (double)k, 1e-9);
            }
        if (db > -57.0) {
            assert_true(listed);
            above++;
        }
        if (db < -90.0) {
            assert_false(listed);
            below++;
        }
    }
    print_message("strong line: %zu crossings above -57 dB, %zu below -90 dB, %zu listed\n", above, below,
                  stab.phase_count);
    assert_true(above >= 1 && below >= 1);
    assert_true(stab.margins_determined);
    assert_true(stab.has_gain_margin_up);
    assert_false(stab.has_gain_margin_up_above);
    tu_close(stab.gain_margin_up_db, -20.0 * log10(gm / cabs(ladder_current(N, want[0]))), 1e-6);
    tb_result_free(res);
    tb_circuit_free(ckt);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_scancount_line_report),
        cmocka_unit_test(test_scancount_long_line_overflow),
        cmocka_unit_test(test_scancount_cap_weak_line),
        cmocka_unit_test(test_scancount_cap_strong_line),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
