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
#define RS 1e3
#define RT 1e3
#define RSEC 10.0
#define CSEC 1e-12
#define F_LO 1.0
#define F_HI 1e9
/* The bound: 180 fresh factorizations outside the grid at the time of writing (445 before the
 * scan split coarsely between grid points far from 0 dB); a regression that re-walks the line
 * fails here. */
#define MAX_PROBE_FACTORIZATIONS 250

static char *line_netlist(void)
{
    size_t cap = 64 * (size_t)N + 512, len = 0;
    char *text = malloc(cap);
    assert_non_null(text);
    len += (size_t)snprintf(text + len, cap - len, "RC line: %d nodes, a weak loop\nVIN in 0 AC 1\nRS in n1 1k\n", N);
    for (int i = 1; i <= N; i++) {
        len += (size_t)snprintf(text + len, cap - len, "C%d n%d 0 1p\n", i, i);
        if (i < N)
            len += (size_t)snprintf(text + len, cap - len, "R%d n%d n%d 10\n", i, i, i + 1);
    }
    len += (size_t)snprintf(text + len, cap - len,
                            "RT n%d 0 1k\nGW n1 0 n%d 0 1u\n.loop GW\n.io VIN v(n%d)\n.ac dec 10 1 1g\n.end\n", N, N, N);
    assert_true(len < cap);
    return text;
}

/* arg T(j 2 pi f) in radians, wrapped, from the ladder alone: T = gm Z(n1 -> nN), the voltage at nN
 * per unit current into n1 with the source shorted (the return ratio of a transconductance
 * that draws current out of n1; common practice). The cascade runs from the far end: with
 * v(nN) = 1, each series resistor adds R times the current through it, each node its shunt
 * current (the chain-parameter cascade of a ladder, D. M. Pozar, Microwave Engineering, 4th ed.,
 * Wiley 2012, section 4.4). */
static double ladder_arg(double f)
{
    double complex y = I * 2.0 * PI * f * CSEC;
    double complex v = 1.0, cur = v * (y + 1.0 / RT);
    for (int i = N - 1; i >= 1; i--) {
        v += RSEC * cur;
        cur += v * (y + (i == 1 ? 1.0 / RS : 0.0));
    }
    return -carg(cur);
}

/* The frequencies where the unwrapped arg T of the ladder crosses -180 - 360 k degrees inside
 * [F_LO, F_HI], by a fine log grid and bisection; returns how many (at most max). */
static size_t ladder_crossings(double *hz, size_t max)
{
    const int steps = 40000;
    size_t count = 0;
    double prev_f = F_LO, prev = ladder_arg(F_LO), level = -PI;
    /* an RC ladder's transfer impedance has only real negative poles and no finite zeros:
     * its phase falls monotonically, so the levels come in order */
    for (int i = 1; i <= steps; i++) {
        double f = F_LO * pow(F_HI / F_LO, (double)i / steps);
        double ph = prev + remainder(ladder_arg(f) - prev, 2.0 * PI); /* steps far below pi */
        while (ph < level && prev >= level) {
            double lo = log(prev_f), hi = log(f);
            for (int it = 0; it < 200 && hi - lo > 1e-15; it++) {
                double mid = 0.5 * (lo + hi);
                double pm = prev + remainder(ladder_arg(exp(mid)) - prev, 2.0 * PI);
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
    char *text = line_netlist();
    tb_circuit *ckt = NULL;
    tb_result *res = tu_analyse(text, &ckt);
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
    size_t nwant = ladder_crossings(want, 64);
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

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_scancount_line_report),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
