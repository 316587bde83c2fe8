/* tests/test_include.c: .include files (relative paths, cycles, depth, messages with the
 * include stack) and the source texts a circuit keeps for later diagnostics */
#include <stdlib.h>
#include <sys/stat.h>
#include <unistd.h>

#include "testutil.h"

#include "circuit.h"

static char dir[64];

static int make_dir(void **state)
{
    (void)state;
    strcpy(dir, "/tmp/tbeta-inc-XXXXXX");
    return mkdtemp(dir) ? 0 : -1;
}

static int remove_dir(void **state)
{
    (void)state;
    char cmd[128];
    snprintf(cmd, sizeof cmd, "rm -rf '%s'", dir);
    return system(cmd) == 0 ? 0 : -1;
}

/* Writes text to dir/name and returns the full path (static buffer). */
static const char *put(const char *name, const char *text)
{
    static char path[256];
    snprintf(path, sizeof path, "%s/%s", dir, name);
    FILE *f = fopen(path, "wb");
    assert_non_null(f);
    fputs(text, f);
    fclose(f);
    return path;
}

/* Reads dir/name; returns the status, the formatted first diagnostic in first. */
static tb_status read_net(const char *name, tb_circuit **ckt, char *first, size_t size)
{
    char path[256];
    snprintf(path, sizeof path, "%s/%s", dir, name);
    tb_diag *diag = tb_diag_new();
    tb_status st = tb_circuit_read(path, diag, ckt);
    first[0] = '\0';
    if (tb_diag_count(diag))
        tb_diag_format(diag, 0, first, size);
    tb_diag_free(diag);
    return st;
}

static void test_include_relative_paths(void **state)
{
    (void)state;
    char sub[128];
    snprintf(sub, sizeof sub, "%s/lib", dir);
    mkdir(sub, 0700);
    put("lib/stage.inc", "\xEF\xBB\xBF* no title line in an included file\n"
                         ".include 'load.inc'\n"
                         ".subckt stage a y\n"
                         "G1 y 0 a 0 {-gm}\n"
                         "Rl y 0 {rl}\n"
                         ".ends\n");
    put("lib/load.inc", ".param rl=10k\n.end\nthis is not read\n");
    put("top.net", "top\n.param gm=2m\n.include \"lib/stage.inc\"\nV1 in 0 AC 1\n"
                   "X1 in out stage\n.loop X1.G1\n.io V1 v(out)\n");
    tb_circuit *ckt = NULL;
    char first[2048];
    tb_status st = read_net("top.net", &ckt, first, sizeof first);
    if (st != TB_OK)
        print_error("%s", first);
    assert_int_equal(st, TB_OK);
    size_t g = 0;
    assert_true(tb_circuit_find_element(ckt, "X1.G1", &g));
    assert_true(ckt->elems[g].value == -2e-3);
    char want[256];
    snprintf(want, sizeof want, "%s/lib/stage.inc", dir);
    assert_string_equal(ckt->elems[g].loc.file, want);
    assert_int_equal(ckt->elems[g].loc.line, 4);
    size_t rl = 0;
    assert_true(tb_circuit_find_element(ckt, "X1.Rl", &rl));
    assert_true(ckt->elems[rl].value == 10e3);
    /* every text read stays with the circuit for later messages */
    size_t len = 0;
    const char *line = tb_circuit_source_line(ckt, want, 5, &len);
    assert_non_null(line);
    assert_int_equal(len, strlen("Rl y 0 {rl}"));
    assert_memory_equal(line, "Rl y 0 {rl}", len);
    assert_null(tb_circuit_source_line(ckt, want, 99, &len));
    assert_null(tb_circuit_source_line(ckt, "nowhere.net", 1, &len));
    tb_circuit_free(ckt);
}

/* An error in an included file is located there, with the stack under it. */
static void test_include_error_stack(void **state)
{
    (void)state;
    put("inner.inc", "R1 a 0 1k\nR2 a 0 1k5\n");
    put("outer.inc", "* outer\n.include inner.inc\n");
    put("stack.net", "stack\nV1 a 0 AC 1\n.include outer.inc\n");
    tb_circuit *ckt = NULL;
    char first[2048];
    assert_int_equal(read_net("stack.net", &ckt, first, sizeof first), TB_ERR_INPUT);
    char want[2048];
    snprintf(want, sizeof want,
             "%s/inner.inc:2:8: error: malformed value '1k5'\n"
             "  included from %s/outer.inc:2\n"
             "  included from %s/stack.net:3\n"
             "  R2 a 0 1k5\n"
             "         ^\n",
             dir, dir, dir);
    assert_string_equal(first, want);
}

/* Checks after parsing quote the line of the file the element came from. */
static void test_include_later_checks_quote_right_file(void **state)
{
    (void)state;
    put("sense.inc", "* sensing\nF1 b 0 Vq 2\n");
    put("sense.net", "sense\nV1 a 0 AC 1\nR1 a b 1k\n.include sense.inc\n.loop F1\n");
    tb_circuit *ckt = NULL;
    char first[2048];
    assert_int_equal(read_net("sense.net", &ckt, first, sizeof first), TB_ERR_INPUT);
    char want[256];
    snprintf(want, sizeof want, "%s/sense.inc:2:1: error: ", dir);
    assert_memory_equal(first, want, strlen(want));
    assert_non_null(strstr(first, "\n  F1 b 0 Vq 2\n  ^\n"));
}

static void test_include_cycle(void **state)
{
    (void)state;
    put("a.inc", "R1 a 0 1\n.include b.inc\n");
    put("b.inc", "R2 a 0 1\n.include ./a.inc\n");
    put("cycle.net", "cycle\n.include a.inc\n");
    tb_circuit *ckt = NULL;
    char first[2048];
    assert_int_equal(read_net("cycle.net", &ckt, first, sizeof first), TB_ERR_INPUT);
    first[strcspn(first, "\n")] = '\0';
    char want[1024];
    snprintf(want, sizeof want,
             "%s/b.inc:2:10: error: '%s/./a.inc' includes itself: %s/a.inc -> %s/b.inc -> %s/./a.inc",
             dir, dir, dir, dir, dir);
    assert_string_equal(first, want);
}

/* A chain of 70 files passes the depth limit: a clear error, no exhaustion. */
static void test_include_depth_limit(void **state)
{
    (void)state;
    char name[32];
    char text[64];
    for (int i = 0; i < 70; i++) {
        snprintf(name, sizeof name, "d%d.inc", i);
        snprintf(text, sizeof text, "R%d a 0 1\n.include d%d.inc\n", i, i + 1);
        put(name, text);
    }
    put("d70.inc", "R70 a 0 1\n");
    put("deep.net", "deep\n.include d0.inc\n");
    tb_circuit *ckt = NULL;
    char first[8192];
    assert_int_equal(read_net("deep.net", &ckt, first, sizeof first), TB_ERR_INPUT);
    first[strcspn(first, "\n")] = '\0';
    char want[256];
    snprintf(want, sizeof want,
             "%s/d62.inc:2:10: error: includes nested too deeply (limit is 64 files)", dir);
    assert_string_equal(first, want);
}

static void test_include_missing_file(void **state)
{
    (void)state;
    put("missing.net", "missing\n.include nothing_here.inc\n");
    tb_circuit *ckt = NULL;
    char first[2048];
    assert_int_equal(read_net("missing.net", &ckt, first, sizeof first), TB_ERR_INPUT);
    first[strcspn(first, "\n")] = '\0';
    char want[512];
    snprintf(want, sizeof want,
             "%s/missing.net:2:10: error: cannot read '%s/nothing_here.inc': No such file or directory",
             dir, dir);
    assert_string_equal(first, want);
    put("noname.net", "noname\n.include\n");
    assert_int_equal(read_net("noname.net", &ckt, first, sizeof first), TB_ERR_INPUT);
    first[strcspn(first, "\n")] = '\0';
    snprintf(want, sizeof want, "%s/noname.net:2:9: error: expected a file name after '.include'", dir);
    assert_string_equal(first, want);
}

/* A circuit parsed from memory keeps its own copy of the text for later messages. */
static void test_include_source_line_from_memory(void **state)
{
    (void)state;
    char *text = strdup("mem\r\nV1 a 0 AC 1\r\nE1 b 0 a 0 2\r\n.loop E1\r\n");
    tb_circuit *ckt = tu_parse(text);
    memset(text, 'x', strlen(text));
    free(text);
    size_t len = 0;
    const char *line = tb_circuit_source_line(ckt, "t.net", 3, &len);
    assert_non_null(line);
    assert_int_equal(len, 12);
    assert_memory_equal(line, "E1 b 0 a 0 2", 12);
    assert_null(tb_circuit_source_line(ckt, "t.net", 0, &len));
    assert_null(tb_circuit_source_line(NULL, "t.net", 1, &len));
    tb_circuit_free(ckt);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_include_relative_paths),
        cmocka_unit_test(test_include_error_stack),
        cmocka_unit_test(test_include_later_checks_quote_right_file),
        cmocka_unit_test(test_include_cycle),
        cmocka_unit_test(test_include_depth_limit),
        cmocka_unit_test(test_include_missing_file),
        cmocka_unit_test(test_include_source_line_from_memory),
    };
    return cmocka_run_group_tests(tests, make_dir, remove_dir);
}
