/* tests/test_sweep.c: the point loop: one factorization of M per frequency whatever analyses are on */
#include "testutil.h"

#include "sweep.h"

/* A non-inverting stage with a zero-volt source in its feedback wire (invented for
 * this test). The variants differ only in directives, so M is the same matrix. */
#define STAGE                                                                    \
    "counting stage\n"                                                           \
    "VS in 0 AC 1\n"                                                             \
    "RS in p 1k\n"                                                               \
    "RIN p n 1meg\n"                                                             \
    "EA x 0 p n 100k\n"                                                          \
    "RP x y 1meg\n"                                                              \
    "CP y 0 1.59n\n"                                                             \
    "EB z 0 y 0 1\n"                                                             \
    "RO z out 100\n"                                                             \
    "RL out 0 1k\n"                                                              \
    "VB out fb 0\n"                                                              \
    "R2 fb n 19k\n"                                                              \
    "R1 n 0 1k\n"                                                                \
    "GL out 0 y 0 1u\n"                                                          \
    ".ac dec 20 1 10meg\n"                                                       \
    ".loop EA\n"                                                                 \
    ".io VS v(out)\n"

static tb_stats stats_of(const char *text, bool census)
{
    tb_circuit *ckt = tu_parse(text);
    tb_options opt;
    tb_options_init(&opt);
    opt.census = census;
    tb_diag *diag = tb_diag_new();
    tb_result *res = NULL;
    assert_int_equal(tb_analyse(ckt, &opt, diag, &res), TB_OK);
    tb_stats st;
    assert_int_equal(tb_result_stats(res, &st), TB_OK);
    assert_true(tb_zport_count(res) == 0 || tb_zport_count(res) == 2);
    tb_result_free(res);
    tb_diag_free(diag);
    tb_circuit_free(ckt);
    return st;
}

/* With two .zport, a .break and the census on, the grid costs the same numeric
 * factorizations as without them: one per point (DC included), the design's
 * floor (shared/design.md "Layers"); only the right-hand sides grow. */
static void test_sweep_one_factorization_per_point(void **state)
{
    (void)state;
    tb_stats plain = stats_of(STAGE ".end\n", false);
    tb_stats all = stats_of(STAGE ".zport in i(VS)\n.zport out v(out)\n.break VB\n.end\n", true);
    assert_int_equal(plain.grid_points, 7 * 20 + 1 + 1); /* 141 grid points and DC */
    assert_int_equal(plain.grid_factorizations, plain.grid_points);
    assert_int_equal(all.grid_factorizations, plain.grid_factorizations);
    assert_int_equal(all.grid_pivoted, plain.grid_pivoted);
    assert_true(all.grid_solve_columns > plain.grid_solve_columns);
}

/* The stage's circuit and a sweep over it. */
typedef struct {
    tb_circuit *ckt;
    tb_diag *diag;
    tb_sweep *sw;
} fixture;

static fixture open_stage(void)
{
    fixture fx = {tu_parse(STAGE ".end\n"), tb_diag_new(), NULL};
    assert_int_equal(tb_sweep_new(fx.ckt, 1e-6, fx.diag, &fx.sw), TB_OK);
    return fx;
}

static void close_stage(fixture *fx)
{
    tb_sweep_free(fx->sw);
    tb_diag_free(fx->diag);
    tb_circuit_free(fx->ckt);
}

typedef struct {
    size_t calls;
    size_t dc_calls;
    size_t next;
    bool in_order;
} counter;

static tb_status count_point(void *self, const tb_sweep_point *pt)
{
    counter *c = self;
    c->calls++;
    if (pt->index == TB_SWEEP_DC) {
        c->dc_calls++;
        c->in_order = c->in_order && c->calls == 1 && pt->f == 0.0;
        return TB_OK;
    }
    c->in_order = c->in_order && pt->index == c->next++;
    return TB_OK;
}

/* Every hook sees DC first, then each grid point once, in ascending order, and
 * the sweep factors M once per point for all hooks together. */
static void test_sweep_hooks_see_every_point_once(void **state)
{
    (void)state;
    fixture fx = open_stage();
    tb_sweep *sw = fx.sw;
    double f[5] = {10, 100, 1e3, 1e4, 1e5};
    counter a = {0, 0, 0, true}, b = {0, 0, 0, true};
    tb_sweep_hook hooks[2] = {{&a, count_point}, {&b, count_point}};
    bool has_dc = false;
    assert_int_equal(tb_sweep_run(sw, f, 5, true, hooks, 2, &has_dc), TB_OK);
    assert_true(has_dc);
    assert_true(a.in_order && b.in_order);
    assert_int_equal(a.calls, 6);
    assert_int_equal(a.dc_calls, 1);
    assert_int_equal(b.calls, 6);
    assert_int_equal(tb_sweep_counts(sw).numeric, 6);
    close_stage(&fx);
}

static tb_status fail_at_third(void *self, const tb_sweep_point *pt)
{
    (void)self;
    return pt->index == 2 ? TB_ERR_NUMERIC : TB_OK;
}

/* A hook's error stops the sweep and comes back unchanged. */
static void test_sweep_hook_error_stops(void **state)
{
    (void)state;
    fixture fx = open_stage();
    tb_sweep *sw = fx.sw;
    double f[5] = {10, 100, 1e3, 1e4, 1e5};
    counter a = {0, 0, 0, true};
    tb_sweep_hook hooks[2] = {{NULL, fail_at_third}, {&a, count_point}};
    bool has_dc = false;
    assert_int_equal(tb_sweep_run(sw, f, 5, true, hooks, 2, &has_dc), TB_ERR_NUMERIC);
    assert_int_equal(a.calls, 3); /* DC, 0, 1 */
    close_stage(&fx);
}

/* The probe does not factor the matrix the solver already holds. */
static void test_sweep_probe_reuses_what_it_holds(void **state)
{
    (void)state;
    fixture fx = open_stage();
    tb_sweep *sw = fx.sw;
    tb_probe *probe = tb_sweep_probe(sw);
    size_t culprit = 0;
    assert_int_equal(tb_probe_eval(probe, 1234.5, &culprit), TB_OK);
    tb_point first = probe->row[0];
    size_t numeric = tb_sweep_counts(sw).numeric;
    assert_int_equal(tb_probe_eval(probe, 1234.5, &culprit), TB_OK);
    assert_int_equal(tb_sweep_counts(sw).numeric, numeric);
    assert_true(probe->row[0].T == first.T);
    assert_int_equal(tb_probe_factor(probe, 1234.5, true, &culprit), TB_OK); /* asks for pivoting: new */
    assert_int_equal(tb_sweep_counts(sw).numeric, numeric + 1);
    assert_int_equal(tb_probe_eval(probe, 99.0, &culprit), TB_OK);
    assert_int_equal(tb_sweep_counts(sw).numeric, numeric + 2);
    close_stage(&fx);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_sweep_one_factorization_per_point),
        cmocka_unit_test(test_sweep_hooks_see_every_point_once),
        cmocka_unit_test(test_sweep_hook_error_stops),
        cmocka_unit_test(test_sweep_probe_reuses_what_it_holds),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
