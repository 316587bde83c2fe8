/* tests/test_oom.c: allocation-failure sweep. Fails the k-th allocation the library makes
 * (k = 0, 1, 2, ...) through read -> parse -> stamp -> solve -> measure -> report, and
 * requires each run to end in TB_ERR_NOMEM (or succeed when k passes the last allocation)
 * without crashing; ASan and valgrind check that nothing leaks. The library's calls to
 * malloc/calloc/realloc are redirected here by linking with -Wl,--wrap=... (Makefile). */
#include "testutil.h"

void *__real_malloc(size_t size);
void *__real_calloc(size_t count, size_t size);
void *__real_realloc(void *ptr, size_t size);
void *__wrap_malloc(size_t size);
void *__wrap_calloc(size_t count, size_t size);
void *__wrap_realloc(void *ptr, size_t size);

static long countdown = -1; /* test-program state only */
static long failures = 0;

static bool fail_now(void)
{
    if (countdown < 0)
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

/* One full pass (with the loop census when census is set); returns the first
 * non-OK status, or TB_OK. */
static tb_status one_pass(const char *path, bool census, FILE *sink)
{
    tb_options opt;
    tb_options_init(&opt);
    opt.census = census;
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    tb_result *res = NULL;
    tb_status st = diag ? TB_OK : TB_ERR_NOMEM;
    if (!st)
        st = tb_circuit_read(path, diag, &ckt);
    if (!st)
        st = tb_analyse(ckt, &opt, diag, &res);
    if (!st)
        st = tb_report_text(ckt, res, sink);
    if (!st)
        st = tb_report_csv(ckt, res, 0, sink);
    if (!st)
        st = tb_report_json(ckt, res, sink);
    const double *t = NULL, *y = NULL;
    size_t n = 0;
    if (!st && tb_step_samples(res, &t, &y, &n) == TB_OK && n > 0) /* absent without .io or poles */
        st = tb_report_step_csv(res, sink);
    tb_result_free(res);
    tb_circuit_free(ckt);
    tb_diag_free(diag);
    return st;
}

static void sweep(const char *path, bool census)
{
    FILE *sink = fopen("/dev/null", "w");
    assert_non_null(sink);
    for (long k = 0;; k++) {
        countdown = k;
        failures = 0;
        tb_status st = one_pass(path, census, sink);
        countdown = -1;
        if (failures == 0) {
            assert_int_equal(st, TB_OK); /* k is past the last allocation: done */
            print_message("%s: %ld allocations, each failure handled\n", path, k);
            break;
        }
        if (st != TB_ERR_NOMEM) {
            print_error("%s: failing allocation %ld gave status %d (%s)\n", path, k, st,
                        tb_status_str(st));
            fail();
        }
    }
    fclose(sink);
}

static void test_oom_demo_netlists(void **state)
{
    (void)state;
    sweep("netlists/photodiode_tia.net", false);
    sweep("tests/ref/ref_lc_twoloop.net", true);
    /* includes, subcircuits, parameters, K */
    sweep("docs/examples/noninverting_from_library.net", false);
    sweep("docs/examples/transformer_feedback.net", true);
    /* .ideal breakdown, Blackman ports, wire break */
    sweep("tests/fb/noninverting_x20.net", false);
    sweep("tests/fb/transistor_wirebreak.net", false);
}

static void test_oom_malformed_netlist(void **state)
{
    (void)state;
    FILE *sink = fopen("/dev/null", "w");
    assert_non_null(sink);
    /* structural errors: a floating node; a loop of sources (the loop search's workspace) */
    const char *paths[] = {"tests/cli/floating_node.net", "tests/bad/vloop_buffer.net"};
    for (size_t p = 0; p < 2; p++) {
        for (long k = 0; k < 200; k++) {
            countdown = k;
            failures = 0;
            tb_status st = one_pass(paths[p], false, sink);
            countdown = -1;
            assert_true(st == TB_ERR_NOMEM || st == TB_ERR_INPUT);
            if (failures == 0)
                break;
        }
    }
    fclose(sink);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_oom_demo_netlists),
        cmocka_unit_test(test_oom_malformed_netlist),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
