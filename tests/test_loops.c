/* tests/test_loops.c: many loops in one netlist: the work at new frequencies grows with the
 * number of loops, not with its square (each loop's search solves for that loop alone) */
#include "testutil.h"

#include <stdlib.h>

#include "probe.h"
#include "sweep.h"

/* A cascade of n inverting stages, each one a .loop (the netlist of bench/gen_loops.sh):
 * RI 1k into the summing node, RF 2k back from the output, E (gain 10 000) with RP 1k and
 * a load capacitor of 1 to 7 nF, so every stage has its own unity crossing. Invented for
 * this test. with_io adds an .io, so each fresh point also solves for x = M^-1 b. */
static char *cascade(size_t n, bool with_io)
{
    size_t cap = 256 + 160 * n;
    char *text = malloc(cap);
    assert_non_null(text);
    size_t at = (size_t)snprintf(text, cap, "cascade of %zu stages\nV1 in 0 AC 1\n", n);
    for (size_t k = 1; k <= n; k++) {
        char prev[32];
        if (k == 1)
            snprintf(prev, sizeof prev, "in");
        else
            snprintf(prev, sizeof prev, "o%zu", k - 1);
        at += (size_t)snprintf(text + at, cap - at,
                               "RI%zu %s m%zu 1k\nRF%zu m%zu o%zu 2k\nE%zu x%zu 0 0 m%zu 10000\n"
                               "RP%zu x%zu o%zu 1k\nCP%zu o%zu 0 %zun\n.loop E%zu\n",
                               k, prev, k, k, k, k, k, k, k, k, k, k, k, k, 1 + k % 7, k);
    }
    at += (size_t)snprintf(text + at, cap - at, "%s.ac dec 10 1 1g\n.end\n",
                           with_io ? ".io V1 v(o1)\n" : "");
    assert_true(at < cap);
    return text;
}

typedef struct {
    double factorizations; /* at new frequencies, per loop */
    double columns;        /* right-hand sides solved at new frequencies, per loop */
    size_t grid_columns;
    size_t grid_points;
} per_loop;

static per_loop work_of(size_t n, bool with_io)
{
    char *text = cascade(n, with_io);
    tb_circuit *ckt = tu_parse(text);
    free(text);
    tb_options opt;
    tb_options_init(&opt);
    opt.pole_limit = 0; /* margins, Nyquist and closed loop on fresh solves; no QZ */
    tb_diag *diag = tb_diag_new();
    tb_result *res = NULL;
    assert_int_equal(tb_analyse(ckt, &opt, diag, &res), TB_OK);
    tb_stats st;
    assert_int_equal(tb_result_stats(res, &st), TB_OK);
    assert_int_equal(tb_result_loops(res), n);
    for (size_t l = 0; l < n; l++) { /* every stage found its crossing */
        tb_measures m;
        assert_int_equal(tb_measure_loop(res, l, &m), TB_OK);
        assert_true(m.has_unity);
    }
    tb_result_free(res);
    tb_diag_free(diag);
    tb_circuit_free(ckt);
    return (per_loop){(double)st.probe_factorizations / (double)n, (double)st.probe_solve_columns / (double)n,
                      st.grid_solve_columns, st.grid_points};
}

/* 8, 16 and 32 loops: the factorizations and the solves at new frequencies per loop stay
 * within 25 % of those of 8 loops (before, each fresh point solved for every loop, so the
 * solves per loop grew fourfold from 8 to 32). */
static void check_growth(bool with_io)
{
    per_loop base = work_of(8, with_io);
    assert_true(base.columns > 0);
    print_message("  8 loops%s: %.1f factorizations, %.1f solves per loop at new frequencies\n",
                  with_io ? " (.io)" : "", base.factorizations, base.columns);
    for (size_t n = 16; n <= 32; n *= 2) {
        per_loop w = work_of(n, with_io);
        print_message("  %zu loops%s: %.1f factorizations, %.1f solves per loop at new frequencies\n", n,
                      with_io ? " (.io)" : "", w.factorizations, w.columns);
        assert_true(w.factorizations <= 1.25 * base.factorizations);
        assert_true(w.columns <= 1.25 * base.columns);
        /* the grid: every loop at every point (w_l, x with .io, and refinements of large T) */
        assert_true(w.grid_columns >= w.grid_points * (n + (with_io ? 1 : 0)));
    }
}

static void test_loops_work_per_loop_does_not_grow(void **state)
{
    (void)state;
    check_growth(false);
}

static void test_loops_work_per_loop_does_not_grow_with_io(void **state)
{
    (void)state;
    check_growth(true);
}

/* One loop evaluated alone at a new frequency gives the numbers every loop evaluated together
 * gives (the same factorization, the same solves, column by column), at two frequencies and
 * with the solver moved elsewhere in between. */
static void test_loops_one_loop_alone_is_the_same(void **state)
{
    (void)state;
    const size_t n = 5;
    char *text = cascade(n, true);
    tb_circuit *ckt = tu_parse(text);
    free(text);
    tb_diag *diag = tb_diag_new();
    tb_sweep *sw = NULL;
    assert_int_equal(tb_sweep_new(ckt, 1e-6, 1, diag, &sw), TB_OK);
    tb_probe *probe = tb_sweep_probe(sw);
    const double freqs[] = {1234.5, 3.3e7};
    for (size_t i = 0; i < 2; i++) {
        size_t culprit = 0;
        tb_point all[5];
        assert_int_equal(tb_probe_eval(probe, freqs[i], &culprit), TB_OK);
        memcpy(all, probe->row, sizeof all);
        size_t before = probe->factorizations;
        for (size_t l = 0; l < n; l++) {
            assert_int_equal(tb_probe_factor(probe, 77.0 + (double)l, false, &culprit), TB_OK); /* elsewhere */
            assert_int_equal(tb_probe_eval_loop(probe, freqs[i], l, &culprit), TB_OK);
            assert_true(probe->row[l].T == all[l].T);
            assert_true(probe->row[l].A == all[l].A);
            assert_true(probe->row[l].A_inf == all[l].A_inf);
            assert_true(probe->row[l].A0 == all[l].A0);
            assert_int_equal(probe->row[l].flags, all[l].flags);
            assert_true(cabs(all[l].T) > 0);
            /* asked again at the same frequency: nothing new */
            size_t held = probe->factorizations;
            assert_int_equal(tb_probe_eval_loop(probe, freqs[i], l, &culprit), TB_OK);
            assert_int_equal(probe->factorizations, held);
        }
        assert_int_equal(probe->factorizations, before + 2 * n);
    }
    tb_sweep_free(sw);
    tb_diag_free(diag);
    tb_circuit_free(ckt);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_loops_work_per_loop_does_not_grow),
        cmocka_unit_test(test_loops_work_per_loop_does_not_grow_with_io),
        cmocka_unit_test(test_loops_one_loop_alone_is_the_same),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
