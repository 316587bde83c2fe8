/* tests/test_oom.c: allocation-failure sweep. Fails the k-th allocation (k = 0, 1, 2, ...) of one
 * pass and requires the pass to end in TB_ERR_NOMEM (or succeed when k passes the last
 * allocation) without crashing; ASan and valgrind check that nothing leaks. The passes: read ->
 * parse -> stamp -> solve -> measure -> every writer (text, JSON, sweep, step and feedback CSV;
 * names with bytes that are not UTF-8 too) -> .expect evaluation; and the regression runner:
 * run (each folder and file once, odd names), baseline save and JSON written whole, load
 * against it (checked whole), JSON, JUnit and text writers, merge. The library's and the
 * runner's calls to malloc/calloc/realloc are redirected here by linking with -Wl,--wrap=...
 * (Makefile); jansson's, which the runner's JSON goes through, by json_set_alloc_funcs. */
#include <stdlib.h>
#include <sys/stat.h>
#include <unistd.h>

#include <jansson.h>

#include "testutil.h"

#include "alloc.h"
#include "checkrun.h"
#include "circuit.h"
#include "expect.h"
#include "report_spread.h"
#include "spread.h"
#include "spreadreport.h"

void *__real_malloc(size_t size);
void *__real_calloc(size_t count, size_t size);
void *__real_realloc(void *ptr, size_t size);
void *__wrap_malloc(size_t size);
void *__wrap_calloc(size_t count, size_t size);
void *__wrap_realloc(void *ptr, size_t size);

/* Test-program state only: while armed, the countdown-th allocation fails. */
static bool armed = false;
static long countdown = -1;
static long failures = 0;
static bool count_json = false; /* jansson's allocations count too */
static bool json_failed = false; /* the failed allocation was jansson's */

static bool fail_now(void)
{
    if (!armed || countdown < 0)
        return false;
    if (countdown-- == 0) {
        failures++;
        return true;
    }
    return false;
}

void *__wrap_malloc(size_t size)
{
    return fail_now() ? NULL : __real_malloc(size);
}

void *__wrap_calloc(size_t count, size_t size)
{
    return fail_now() ? NULL : __real_calloc(count, size);
}

void *__wrap_realloc(void *ptr, size_t size)
{
    return fail_now() ? NULL : __real_realloc(ptr, size);
}

static void *json_alloc(size_t size)
{
    if (count_json && fail_now()) {
        json_failed = true;
        return NULL;
    }
    return __real_malloc(size);
}

/* jansson's parser reads an allocation that fails inside a string as a syntax error at that
 * place (jansson 2.14, load.c: the token becomes invalid), so loading a saved run then ends
 * in TB_ERR_INPUT, "not a saved run": a clean end as well. */
static tb_status load_status(tb_status st)
{
    return st == TB_ERR_INPUT && json_failed ? TB_ERR_NOMEM : st;
}

/* One pass from a fresh start; returns the first non-OK status, or TB_OK. */
typedef tb_status (*pass_fn)(const void *ctx);

/* Runs pass with the k-th allocation failing for k = 0, 1, 2, ... until a pass makes fewer
 * than k + 1 allocations (and must then succeed). */
static void sweep(const char *what, pass_fn pass, const void *ctx)
{
    for (long k = 0;; k++) {
        countdown = k;
        failures = 0;
        json_failed = false;
        tb_status st = pass(ctx);
        countdown = -1;
        armed = false;
        if (failures == 0) {
            if (st != TB_OK)
                fail_msg("%s: no allocation failed, yet status %d (%s)", what, st, tb_status_str(st));
            print_message("%s: %ld allocations, each failure handled\n", what, k);
            return;
        }
        /* jansson does without some allocations: its lexer's copy of the text it read, kept
         * for messages, just stops growing (strbuffer_append_byte's result is ignored) */
        if (st != TB_ERR_NOMEM && !(st == TB_OK && json_failed))
            fail_msg("%s: failing allocation %ld gave status %d (%s)", what, k, st, tb_status_str(st));
    }
}

/* ---- read, analyse, write, evaluate ------------------------------------------- */

/* Every feedback table the result has: the breakdown (.ideal with .io), each .zport, the
 * wire break (.break). */
static tb_status feedback_tables(const tb_circuit *ckt, const tb_result *res, FILE *sink)
{
    tb_status st = TB_OK;
    for (size_t l = 0; !st && l < tb_result_loops(res); l++) {
        tb_feedback_summary fs;
        assert_int_equal(tb_feedback_loop(res, l, &fs), TB_OK);
        if (fs.computed && fs.has_estimate)
            st = tb_report_feedback_csv(ckt, res, l, "breakdown", sink);
        for (size_t p = 0; !st && p < tb_zport_count(res); p++) {
            tb_zport_summary zs;
            char table[256];
            assert_int_equal(tb_zport_loop(res, p, l, &zs, NULL), TB_OK);
            snprintf(table, sizeof table, "zport:%s", zs.name);
            st = tb_report_feedback_csv(ckt, res, l, table, sink);
        }
    }
    tb_break_summary bs;
    assert_int_equal(tb_break_get(res, &bs, NULL), TB_OK);
    if (!st && bs.computed)
        st = tb_report_feedback_csv(ckt, res, 0, "break", sink);
    return st;
}

/* Every .expect card of ckt against the figures of its loop, as the runner evaluates them. */
static tb_status expectations(const tb_circuit *ckt, const tb_result *res)
{
    tb_figure_value figs[64];
    assert_true(tb_figure_count() <= sizeof figs / sizeof figs[0]);
    for (const tb_expect *x = ckt->expects; x; x = x->next) {
        tb_status st = tb_figure_measure(res, x->loop, figs);
        if (st)
            return st;
        char bound[160];
        char measured[96];
        const tb_figure_value *v = &figs[x->figure];
        (void)tb_expect_holds(x, v->present, v->value);
        tb_expect_bound_text(x, bound, sizeof bound);
        tb_figure_text(x->figure, v->present, v->value, measured, sizeof measured);
    }
    return TB_OK;
}

typedef struct {
    const char *path;
    bool census;
    bool above_limit; /* --pole-limit 0: the argument-principle counts and the Krylov-Schur poles */
} netlist_pass;

static tb_status write_all(const tb_circuit *ckt, const tb_result *res, FILE *sink)
{
    tb_status st = tb_report_text(ckt, res, sink);
    for (size_t l = 0; !st && l < tb_result_loops(res); l++)
        st = tb_report_csv(ckt, res, l, sink);
    if (!st)
        st = tb_report_json(ckt, res, sink);
    tb_step_figures fig;
    assert_int_equal(tb_step_figures_get(res, &fig), TB_OK);
    if (!st && fig.computed) /* absent without .io or poles */
        st = tb_report_step_csv(res, sink);
    if (!st)
        st = feedback_tables(ckt, res, sink);
    return st;
}

static tb_status netlist_once(const void *ctx)
{
    const netlist_pass *np = ctx;
    FILE *sink = fopen("/dev/null", "w");
    assert_non_null(sink);
    armed = true;
    tb_options opt;
    tb_options_init(&opt);
    opt.census = np->census;
    opt.sensitivity = np->census; /* the passes with the census also take the sensitivities */
    static const double at[] = {1234.5, 0.0};
    if (!np->census) { /* the others take figures at chosen frequencies */
        opt.at_hz = at;
        opt.at_count = 2;
    }
    if (np->above_limit)
        opt.pole_limit = 0;
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    tb_result *res = NULL;
    tb_status st = diag ? TB_OK : TB_ERR_NOMEM;
    if (!st)
        st = tb_circuit_read(np->path, diag, &ckt);
    if (!st)
        st = tb_analyse(ckt, &opt, diag, &res);
    if (!st)
        st = write_all(ckt, res, sink);
    if (!st)
        st = expectations(ckt, res);
    tb_result_free(res);
    tb_circuit_free(ckt);
    tb_diag_free(diag);
    armed = false;
    fclose(sink);
    return st;
}

static void test_oom_demo_netlists(void **state)
{
    (void)state;
    const netlist_pass passes[] = {
        /* .ideal, .zport and .expect */
        {"netlists/photodiode_tia.net", false, false},
        {"tests/ref/ref_lc_twoloop.net", true, false},
        /* includes, subcircuits, parameters, K */
        {"docs/examples/noninverting_from_library.net", false, false},
        {"docs/examples/transformer_feedback.net", true, false},
        /* .ideal breakdown, Blackman ports and a wire break in one netlist; a wire break alone */
        {"tests/fb/noninverting_x20.net", false, false},
        {"tests/fb/transistor_wirebreak.net", false, false},
        /* names with bytes that are not UTF-8, a title with an escape sequence */
        {"tests/cli/odd_bytes.net", true, false},
        /* .volterra: two nonlinear sources, the loop opened, the sweep, distortion .expect cards */
        {"docs/examples/distortion.net", false, false},
        /* a device card with an internal node (device.c's names and nodes) */
        {"tests/device/ce_closed.net", false, false},
        /* above the pole limit: counts by the argument principle, poles by Krylov-Schur */
        {"tests/stab/stab_rhp_open.net", false, true},
    };
    for (size_t i = 0; i < sizeof passes / sizeof passes[0]; i++)
        sweep(passes[i].path, netlist_once, &passes[i]);
}

/* tbeta spread's three kinds of run on a small netlist (one scan axis of two values, one
 * dimension at its corners, two samples), each written as text, CSV and JSON; then the
 * sensitivities at 1 kHz and their text. */
static tb_status spread_once(const void *ctx)
{
    (void)ctx;
    static const char text[] = "spread under failing allocations\nVs in 0 AC 1\nG1 0 x in out 1m\n"
                               "R1 x 0 100k\nC1 x 0 1n\nE1 out 0 x 0 1\n.io Vs v(out)\n.loop G1\n"
                               ".ac dec 2 1 1meg\n.spread C1 R1 flat 5% group=rc\n.scan C1 list 1n 2n\n";
    FILE *sink = fopen("/dev/null", "w");
    assert_non_null(sink);
    armed = true;
    tb_spread_options opt;
    tb_spread_options_init(&opt);
    opt.samples = 2;
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    tb_status st = diag ? tb_circuit_parse(text, sizeof text - 1, "oom.net", diag, &ckt) : TB_ERR_NOMEM;
    for (int kind = 0; kind < 3 && !st; kind++) {
        tb_spreadset *set = NULL;
        st = kind == 0   ? tb_spread_scan(ckt, &opt, diag, &set)
             : kind == 1 ? tb_spread_corners(ckt, &opt, diag, &set)
                         : tb_spread_monte_carlo(ckt, &opt, diag, &set);
        if (!st)
            st = tb_report_spread_text(ckt, set, sink);
        if (!st)
            st = tb_report_spread_csv(ckt, set, sink);
        if (!st)
            st = load_status(tb_report_spread_json(ckt, set, sink));
        tb_spreadset_free(set);
    }
    tb_sens_entry *e = NULL;
    size_t per = 0;
    if (!st)
        st = tb_spread_sensitivities_at(ckt, &opt.analysis, 1e3, diag, &e, &per);
    if (!st)
        st = tb_report_sensitivities_at_text(ckt, 1e3, e, per, sink);
    tb_free(e);
    /* tbeta report's spread part: every kind of run and the sensitivities at two frequencies,
     * held by the result, through the text, JSON and HTML writers */
    tb_result *res = NULL;
    if (!st)
        st = tb_analyse(ckt, &opt.analysis, diag, &res);
    tb_spread_report_options ro;
    tb_spread_report_options_init(&ro);
    ro.samples = 2;
    static const double at[] = {1e3, 0.0};
    ro.at_hz = at;
    ro.at_count = 2;
    if (!st)
        st = tb_spread_report_run(ckt, &opt.analysis, &ro, diag, res);
    if (!st)
        st = tb_report_text(ckt, res, sink);
    if (!st)
        st = load_status(tb_report_json(ckt, res, sink));
    if (!st)
        st = tb_report_html(ckt, res, sink);
    tb_result_free(res);
    tb_circuit_free(ckt);
    tb_diag_free(diag);
    armed = false;
    fclose(sink);
    return st;
}

static void test_oom_spread(void **state)
{
    (void)state;
    count_json = true;
    sweep("tbeta spread", spread_once, NULL);
    count_json = false;
}

/* The JSON report of an analysed netlist with every section (loops, stability, step,
 * breakdown, ports, break, census), written with jansson's allocations failed too:
 * the tree and json_dumpf's buffers. */
typedef struct {
    const tb_circuit *ckt;
    const tb_result *res;
} json_pass;

static tb_status json_once(const void *ctx)
{
    const json_pass *jp = ctx;
    FILE *sink = fopen("/dev/null", "w");
    assert_non_null(sink);
    armed = true;
    tb_status st = tb_report_json(jp->ckt, jp->res, sink);
    fclose(sink);
    return st;
}

static void json_sweep(const char *path)
{
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    tb_result *res = NULL;
    tb_options opt;
    tb_options_init(&opt);
    opt.census = true;
    static const double at[] = {1234.5};
    opt.at_hz = at;
    opt.at_count = 1;
    assert_int_equal(tb_circuit_read(path, diag, &ckt), TB_OK);
    assert_int_equal(tb_analyse(ckt, &opt, diag, &res), TB_OK);
    json_pass jp = {ckt, res};
    char what[128];
    snprintf(what, sizeof what, "%s, JSON", path);
    count_json = true;
    sweep(what, json_once, &jp);
    count_json = false;
    tb_result_free(res);
    tb_circuit_free(ckt);
    tb_diag_free(diag);
}

static void test_oom_json_writer(void **state)
{
    (void)state;
    json_sweep("tests/fb/noninverting_x20.net");
    json_sweep("tests/cli/odd_bytes.net"); /* names made UTF-8 (tb_report_json_text) */
    json_sweep("docs/examples/distortion.net"); /* the distortion object */
}

static void test_oom_malformed_netlist(void **state)
{
    (void)state;
    /* structural errors: a floating node; a loop of sources (the loop search's workspace) */
    const netlist_pass passes[] = {{"tests/cli/floating_node.net", false, false}, {"tests/bad/vloop_buffer.net", false, false}};
    for (size_t p = 0; p < 2; p++) {
        for (long k = 0; k < 200; k++) {
            countdown = k;
            failures = 0;
            tb_status st = netlist_once(&passes[p]);
            countdown = -1;
            assert_true(st == TB_ERR_NOMEM || st == TB_ERR_INPUT);
            if (failures == 0)
                break;
        }
    }
}

/* ---- the regression runner ------------------------------------------------------ */

/* Each stage of 'tbeta check' is swept on its own, from inputs made once without failures
 * (run A, and the files below in a temporary folder): the analysis is not repeated for
 * every allocation of the writers. */
typedef struct {
    char dir[64];
    char lib[96];      /* a folder of run A: a netlist with an odd name, links to it and to itself */
    char odd[128];     /* that netlist */
    char link_file[128];
    char link_self[128];
    const char *paths[5]; /* run A */
    char base[128];    /* --save of run A: the baseline */
    char a_json[128];  /* --json of run A */
    char b0_json[128]; /* --json of run B before it is compared */
    char b_json[128];  /* --json of run B against the baseline */
    char scratch[128]; /* written by the swept passes */
    tb_check_run *a;   /* run A, executed */
} runner_state;

/* Run A: a library that fails an expectation (regressed), one that cannot be read (an
 * unknown loop), one that passes with .ideal and .zport, a folder that does not exist, and
 * the folder made in runner_setup (an odd name, a link cycle, a second path to one file). */
static const char *const run_a[] = {"tests/check/regressed", "tests/check/broken", "netlists/photodiode_tia.net",
                                    "tests/check/no_such_folder"};
#define RUN_A_COUNT 5
/* Run B: the same netlist as regressed/, slightly changed: it drifts against A's baseline. */
static const char *const run_b[] = {"tests/check/drift"};

/* A file written as 'tbeta check' writes it: whole or not at all (tb_checkfile_write). */
static tb_status write_to(const char *path, const tb_check_run *run, tb_check_writer writer)
{
    char why[256];
    tb_status st = tb_checkfile_write(path, run, writer, why, sizeof why);
    if (st == TB_ERR_NOMEM)
        assert_string_equal(why, "out of memory");
    return st;
}

/* Every writer into the sink, and the save and full JSON into files (when not NULL). */
static tb_status write_run(const tb_check_run *run, const char *save, const char *json)
{
    FILE *sink = fopen("/dev/null", "w");
    assert_non_null(sink);
    tb_status st = tb_check_write_text(run, sink);
    if (!st)
        st = tb_check_write_junit(run, sink);
    if (!st)
        st = save ? write_to(save, run, tb_check_write_save) : tb_check_write_save(run, sink);
    if (!st)
        st = json ? write_to(json, run, tb_check_write_json) : tb_check_write_json(run, sink);
    fclose(sink);
    return st;
}

/* Collects and executes paths on one thread (the countdown is not shared between threads). */
static tb_status execute(const char *const *paths, size_t count, tb_check_run **run)
{
    tb_check_options opt;
    tb_check_options_init(&opt);
    opt.jobs = 1;
    tb_status st = tb_check_collect(paths, count, &opt, run);
    if (!st)
        st = tb_check_execute(*run);
    return st;
}

/* A new run holding the entries of the --json files at paths. */
static tb_status merged(const char *const *paths, size_t count, tb_check_run **run)
{
    char why[256];
    tb_check_options opt;
    tb_check_options_init(&opt);
    tb_status st = tb_check_collect(NULL, 0, &opt, run);
    for (size_t i = 0; !st && i < count; i++)
        st = load_status(tb_check_merge(*run, paths[i], why, sizeof why));
    if (!st)
        tb_check_sort(*run);
    return st;
}

/* Run A: collect the files, read, analyse and evaluate each. */
static tb_status runner_execute_once(const void *ctx)
{
    const runner_state *rs = ctx;
    tb_check_run *run = NULL;
    armed = true;
    tb_status st = execute(rs->paths, RUN_A_COUNT, &run);
    tb_check_free(run);
    armed = false;
    return st;
}

/* Run A's text and JUnit, its baseline and its --json into files. */
static tb_status runner_write_once(const void *ctx)
{
    const runner_state *rs = ctx;
    armed = true;
    tb_status st = write_run(rs->a, rs->scratch, rs->scratch);
    armed = false;
    return st;
}

/* Run B (made unarmed) against A's baseline, then every writer. */
static tb_status runner_against_once(const void *ctx)
{
    const runner_state *rs = ctx;
    const char *b0 = rs->b0_json;
    tb_check_run *run = NULL;
    char why[256];
    assert_int_equal(merged(&b0, 1, &run), TB_OK);
    armed = true;
    tb_status st = load_status(tb_check_against(run, rs->base, why, sizeof why));
    if (st == TB_ERR_NOMEM && !json_failed)
        assert_string_equal(why, "out of memory");
    if (!st)
        st = write_run(run, NULL, NULL);
    armed = false;
    tb_check_free(run);
    return st;
}

/* The --json files of A and B merged into one run, then every writer. */
static tb_status runner_merge_once(const void *ctx)
{
    const runner_state *rs = ctx;
    const char *paths[] = {rs->a_json, rs->b_json};
    tb_check_run *run = NULL;
    armed = true;
    tb_status st = merged(paths, 2, &run);
    if (!st)
        st = write_run(run, NULL, NULL);
    tb_check_free(run);
    armed = false;
    return st;
}

static void copy_file(const char *from, const char *to)
{
    char buf[4096];
    FILE *in = fopen(from, "rb");
    FILE *out = fopen(to, "wb");
    assert_non_null(in);
    assert_non_null(out);
    for (size_t n; (n = fread(buf, 1, sizeof buf, in)) > 0;)
        assert_int_equal(fwrite(buf, 1, n, out), n);
    fclose(in);
    assert_int_equal(fclose(out), 0);
}

static void runner_setup(runner_state *rs)
{
    snprintf(rs->dir, sizeof rs->dir, "/tmp/tbeta-oom-XXXXXX");
    assert_non_null(mkdtemp(rs->dir));
    snprintf(rs->lib, sizeof rs->lib, "%s/lib", rs->dir);
    snprintf(rs->odd, sizeof rs->odd, "%s/verst\344rker.net", rs->lib);
    snprintf(rs->link_file, sizeof rs->link_file, "%s/again.net", rs->lib);
    snprintf(rs->link_self, sizeof rs->link_self, "%s/self", rs->lib);
    assert_int_equal(mkdir(rs->lib, 0777), 0);
    copy_file("tests/cli/odd_bytes.net", rs->odd);
    assert_int_equal(symlink("verst\344rker.net", rs->link_file), 0);
    assert_int_equal(symlink(".", rs->link_self), 0);
    for (size_t i = 0; i < RUN_A_COUNT - 1; i++)
        rs->paths[i] = run_a[i];
    rs->paths[RUN_A_COUNT - 1] = rs->lib;
    snprintf(rs->base, sizeof rs->base, "%s/base.json", rs->dir);
    snprintf(rs->a_json, sizeof rs->a_json, "%s/a.json", rs->dir);
    snprintf(rs->b0_json, sizeof rs->b0_json, "%s/b0.json", rs->dir);
    snprintf(rs->b_json, sizeof rs->b_json, "%s/b.json", rs->dir);
    snprintf(rs->scratch, sizeof rs->scratch, "%s/scratch.json", rs->dir);
    tb_check_run *b = NULL;
    char why[256];
    rs->a = NULL;
    assert_int_equal(execute(rs->paths, RUN_A_COUNT, &rs->a), TB_OK);
    assert_int_equal(tb_check_count(rs->a), 5); /* the odd netlist once */
    assert_int_equal(write_run(rs->a, rs->base, rs->a_json), TB_OK);
    assert_int_equal(execute(run_b, 1, &b), TB_OK);
    assert_int_equal(write_run(b, NULL, rs->b0_json), TB_OK);
    assert_int_equal(tb_check_against(b, rs->base, why, sizeof why), TB_OK);
    assert_true(tb_check_get(b, 0)->drift_count > 0); /* the drift path is taken */
    assert_int_equal(write_run(b, NULL, rs->b_json), TB_OK);
    tb_check_free(b);
}

static void runner_teardown(runner_state *rs)
{
    const char *files[] = {rs->base, rs->a_json, rs->b0_json, rs->b_json, rs->scratch,
                           rs->odd, rs->link_file, rs->link_self};
    for (size_t i = 0; i < sizeof files / sizeof files[0]; i++)
        unlink(files[i]);
    assert_int_equal(rmdir(rs->lib), 0);
    assert_int_equal(rmdir(rs->dir), 0); /* no temporary file stayed behind */
    tb_check_free(rs->a);
}

static void test_oom_runner(void **state)
{
    (void)state;
    runner_state rs;
    runner_setup(&rs);
    count_json = true;
    sweep("check: collect, analyse, evaluate", runner_execute_once, &rs);
    sweep("check: text, JUnit, baseline and JSON files", runner_write_once, &rs);
    sweep("check: against the baseline, write", runner_against_once, &rs);
    sweep("check: merge, write", runner_merge_once, &rs);
    count_json = false;
    runner_teardown(&rs);
}

int main(void)
{
    json_set_alloc_funcs(json_alloc, free);
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_oom_demo_netlists),
        cmocka_unit_test(test_oom_malformed_netlist),
        cmocka_unit_test(test_oom_json_writer),
        cmocka_unit_test(test_oom_spread),
        cmocka_unit_test(test_oom_runner),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
