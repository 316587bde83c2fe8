/* tests/test_sweep.c: the point loop: one factorization of M per frequency whatever analyses are on */
#include "testutil.h"

#include <pthread.h>
#include <stdlib.h>
#include <time.h>

#include "grid.h"
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
    assert_int_equal(tb_sweep_new(fx.ckt, 1e-6, 1, fx.diag, &fx.sw), TB_OK);
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

/* Everything a reader of the result sees, as the writers print it: the JSON
 * report, the sweep table of every loop and the feedback tables (a .zport's, the
 * .break's) when the netlist has them. */
static char *written(const char *path, unsigned jobs)
{
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    assert_int_equal(tb_circuit_read(path, diag, &ckt), TB_OK);
    tb_options opt;
    tb_options_init(&opt);
    opt.census = true;
    opt.jobs = jobs;
    tb_result *res = NULL;
    assert_int_equal(tb_analyse(ckt, &opt, diag, &res), TB_OK);
    char *text = NULL;
    size_t size = 0;
    FILE *out = open_memstream(&text, &size);
    assert_non_null(out);
    assert_int_equal(tb_report_json(ckt, res, out), TB_OK);
    for (size_t l = 0; l < tb_result_loops(res); l++) {
        assert_int_equal(tb_report_csv(ckt, res, l, out), TB_OK);
        for (size_t p = 0; p < tb_zport_count(res); p++) {
            char table[300];
            tb_zport_summary zs;
            assert_int_equal(tb_zport_loop(res, p, l, &zs, NULL), TB_OK);
            snprintf(table, sizeof table, "zport:%s", zs.name);
            assert_int_equal(tb_report_feedback_csv(ckt, res, l, table, out), TB_OK);
        }
        tb_status st = tb_report_feedback_csv(ckt, res, l, "break", out);
        assert_true(st == TB_OK || st == TB_ERR_NOT_FOUND);
    }
    assert_int_equal(fclose(out), 0);
    tb_result_free(res);
    tb_circuit_free(ckt);
    tb_diag_free(diag);
    return text;
}

/* The chunks of the grid, and so every number, are the same whatever the number
 * of threads: the tables of 1, 2 and 3 threads are identical byte for byte, with
 * the census, the .zport impedances and the .break on (hooks called concurrently). */
static void test_sweep_threads_give_identical_tables(void **state)
{
    (void)state;
    const char *paths[] = {"netlists/noninverting_loaded_opamp.net", "netlists/threestage_unstable_t0_10.net",
                           "netlists/photodiode_tia.net", "tests/fb/noninverting_x20.net",
                           "tests/fb/noninverting_gain1e7_ports.net", "tests/fb/transistor_wirebreak.net",
                           "tests/fb/inverting_x10_source.net", "tests/ref/ref_lc_twoloop.net",
                           "tests/stab/census_ring.net"};
    for (size_t i = 0; i < sizeof paths / sizeof paths[0]; i++) {
        char *one = written(paths[i], 1);
        for (unsigned jobs = 2; jobs <= 3; jobs++) {
            char *more = written(paths[i], jobs);
            if (strcmp(one, more) != 0)
                print_error("%s: --jobs %u differs from --jobs 1\n", paths[i], jobs);
            assert_string_equal(one, more);
            free(more);
        }
        free(one);
    }
}

/* Records loop 0 at every grid point and the lane that computed it; the first
 * call on each lane waits (at most 2 s) until every lane has arrived, so that
 * each lane takes chunks however the threads are scheduled. */
typedef struct {
    pthread_mutex_t lock;
    pthread_cond_t arrived;
    size_t lanes;
    size_t seen;
    bool lane_seen[4];
    size_t npoints;
    tb_point *pts;    /* npoints */
    size_t *lane_of;  /* npoints */
} recorder;

static tb_status record_point(void *self, const tb_sweep_point *pt)
{
    recorder *r = self;
    if (pt->index == TB_SWEEP_DC)
        return TB_OK;
    pthread_mutex_lock(&r->lock);
    if (!r->lane_seen[pt->lane]) {
        r->lane_seen[pt->lane] = true;
        r->seen++;
        pthread_cond_broadcast(&r->arrived);
    }
    struct timespec until;
    clock_gettime(CLOCK_REALTIME, &until);
    until.tv_sec += 2;
    while (r->seen < r->lanes && pthread_cond_timedwait(&r->arrived, &r->lock, &until) == 0)
        continue;
    pthread_mutex_unlock(&r->lock);
    r->pts[pt->index] = pt->loops[0];
    r->lane_of[pt->index] = pt->lane;
    return TB_OK;
}

/* The netlist at path on `lanes` lanes over its own grid, recorded (free pts and lane_of). */
static void record_sweep(const char *path, size_t lanes, recorder *r)
{
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    assert_int_equal(tb_circuit_read(path, diag, &ckt), TB_OK);
    tb_sweep *sw = NULL;
    assert_int_equal(tb_sweep_new(ckt, 1e-6, lanes, diag, &sw), TB_OK);
    memset(r, 0, sizeof *r);
    r->npoints = tb_grid_count(&ckt->ac);
    double *f = malloc(r->npoints * sizeof(double));
    r->pts = calloc(r->npoints, sizeof(tb_point));
    r->lane_of = calloc(r->npoints, sizeof(size_t));
    assert_true(f && r->pts && r->lane_of);
    tb_grid_fill(&ckt->ac, f);
    pthread_mutex_init(&r->lock, NULL);
    pthread_cond_init(&r->arrived, NULL);
    r->lanes = lanes;
    tb_sweep_hook hook = {r, record_point};
    bool has_dc = false;
    assert_int_equal(tb_sweep_run(sw, f, r->npoints, true, &hook, 1, &has_dc), TB_OK);
    pthread_cond_destroy(&r->arrived);
    pthread_mutex_destroy(&r->lock);
    free(f);
    tb_sweep_free(sw);
    tb_diag_free(diag);
    tb_circuit_free(ckt);
}

/* Every lane takes chunks, and every point's numbers are bit for bit those of one
 * lane: a chunk's numbers do not depend on what its lane computed before. On the
 * first netlist a point factored with another pivot order than the reference's
 * differs in its last bits; on the second the reference order degrades in the
 * upper part of the grid, where chunks re-pivot. */
static void test_sweep_lanes_compute_what_one_lane_does(void **state)
{
    (void)state;
    const char *paths[] = {"netlists/noninverting_loaded_opamp.net", "tests/stab/stab_conditional.net"};
    for (size_t p = 0; p < 2; p++) {
        recorder one, three;
        record_sweep(paths[p], 1, &one);
        record_sweep(paths[p], 3, &three);
        assert_int_equal(one.npoints, three.npoints);
        bool lane_used[3] = {false, false, false};
        size_t chunk = tb_sweep_chunk(three.npoints);
        for (size_t i = 0; i < three.npoints; i++) {
            assert_true(three.lane_of[i] < 3);
            lane_used[three.lane_of[i]] = true;
            assert_true(three.lane_of[i] == three.lane_of[i - i % chunk]); /* whole chunks */
        }
        assert_true(lane_used[0] && lane_used[1] && lane_used[2]);
        assert_memory_equal(one.pts, three.pts, one.npoints * sizeof(tb_point));
        free(one.pts);
        free(one.lane_of);
        free(three.pts);
        free(three.lane_of);
    }
}

/* Chunks of npoints/8 points, 4 to TB_SWEEP_CHUNK; lanes as asked, at most one per
 * chunk, at least one. */
static void test_sweep_lanes_per_chunk(void **state)
{
    (void)state;
    assert_int_equal(tb_sweep_chunk(19), 4);
    assert_int_equal(tb_sweep_chunk(91), 11);
    assert_int_equal(tb_sweep_chunk(1000), TB_SWEEP_CHUNK);
    assert_int_equal(tb_sweep_lanes_for(1, 1000), 1);
    assert_int_equal(tb_sweep_lanes_for(3, 1000), 3);
    assert_int_equal(tb_sweep_lanes_for(8, 8), 2);  /* chunks of 4 */
    assert_int_equal(tb_sweep_lanes_for(8, 9), 3);
    assert_int_equal(tb_sweep_lanes_for(64, 91), 9); /* chunks of 11 */
    assert_int_equal(tb_sweep_lanes_for(4, 1), 1);
    assert_int_equal(tb_sweep_lanes_for(4, 0), 1);
    assert_int_equal(tb_sweep_lanes_for(1000, 100000), TB_SWEEP_MAX_LANES);
    assert_true(tb_sweep_lanes_for(0, 1000) >= 1);
}

/* With three lanes the sweep still factors once per point; the pivoted ones are
 * DC and one reference factorization at the first grid point per lane that took
 * a chunk (this stage's reference order never degrades). */
static void test_sweep_lanes_visit_every_point_once(void **state)
{
    (void)state;
    tb_circuit *ckt = tu_parse(STAGE ".end\n");
    tb_diag *diag = tb_diag_new();
    tb_sweep *sw = NULL;
    assert_int_equal(tb_sweep_new(ckt, 1e-6, 3, diag, &sw), TB_OK);
    assert_int_equal(tb_sweep_lanes(sw), 3);
    enum { NPTS = 83 }; /* chunks of 10: 9 of them */
    double f[NPTS];
    for (size_t i = 0; i < NPTS; i++)
        f[i] = 10.0 * pow(10.0, 0.05 * (double)i);
    bool has_dc = false;
    assert_int_equal(tb_sweep_run(sw, f, NPTS, true, NULL, 0, &has_dc), TB_OK);
    assert_true(has_dc);
    tb_solver_counts c = tb_sweep_counts(sw);
    assert_int_equal(c.numeric - c.pivoted, NPTS - 1); /* every grid point but the first is a refactor */
    assert_true(c.pivoted >= 2 && c.pivoted <= 1 + 3); /* DC and one reference per lane */
    tb_sweep_free(sw);
    tb_diag_free(diag);
    tb_circuit_free(ckt);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_sweep_one_factorization_per_point),
        cmocka_unit_test(test_sweep_hooks_see_every_point_once),
        cmocka_unit_test(test_sweep_hook_error_stops),
        cmocka_unit_test(test_sweep_probe_reuses_what_it_holds),
        cmocka_unit_test(test_sweep_threads_give_identical_tables),
        cmocka_unit_test(test_sweep_lanes_per_chunk),
        cmocka_unit_test(test_sweep_lanes_visit_every_point_once),
        cmocka_unit_test(test_sweep_lanes_compute_what_one_lane_does),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
