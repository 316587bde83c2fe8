/* tests/test_include.c: .include files (relative paths, cycles, depth, messages with the
 * include stack) and the source texts a circuit keeps for later diagnostics */
#include <stdlib.h>
#include <sys/stat.h>
#include <sys/types.h>
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

/* dir/name (static buffer). */
static const char *at(const char *name)
{
    static char path[256];
    snprintf(path, sizeof path, "%s/%s", dir, name);
    return path;
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

/* Reads dir/name with options opt (NULL: the defaults); returns the status, the
 * formatted first diagnostic in first, and fails the test when any diagnostic holds
 * the marker of foreign content. */
static tb_status read_with(const char *name, const tb_read_options *opt, tb_circuit **ckt, char *first,
                           size_t size, size_t *errors)
{
    char path[256];
    snprintf(path, sizeof path, "%s/%s", dir, name);
    tb_diag *diag = tb_diag_new();
    tb_status st = tb_circuit_read_with(path, opt, diag, ckt);
    first[0] = '\0';
    if (tb_diag_count(diag))
        tb_diag_format(diag, 0, first, size);
    for (size_t i = 0; i < tb_diag_count(diag); i++) {
        char buf[8192];
        tb_diag_format(diag, i, buf, sizeof buf);
        assert_null(strstr(buf, "SECRET"));
    }
    if (errors)
        *errors = tb_diag_errors(diag);
    tb_diag_free(diag);
    return st;
}

static tb_status read_net(const char *name, tb_circuit **ckt, char *first, size_t size)
{
    return read_with(name, NULL, ckt, first, size, NULL);
}

/* The first line of s, in place. */
static const char *line1(char *s)
{
    s[strcspn(s, "\n")] = '\0';
    return s;
}

/* The text every included-file test uses around its .include cards. */
#define AMP "amp\nV1 a 0 AC 1\nE1 b 0 a 0 2\nRb b 0 1k\n.loop E1\n"

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

/* A FIFO, a device or a folder is refused at once, as an included file and as the
 * netlist itself: nothing waits for a writer or reads without end. */
static void test_include_non_regular(void **state)
{
    (void)state;
    assert_int_equal(mkfifo(at("pipe.inc"), 0600), 0);
    assert_int_equal(mkdir(at("folder.inc"), 0700), 0);
    put("nonreg.net", AMP ".include pipe.inc\n.include /dev/zero\n.include folder.inc\n.include /dev/urandom\n");
    tb_circuit *ckt = NULL;
    char first[2048];
    char want[1024];
    size_t errors = 0;
    assert_int_equal(read_with("nonreg.net", NULL, &ckt, first, sizeof first, &errors), TB_ERR_INPUT);
    assert_int_equal(errors, 4);
    snprintf(want, sizeof want, "%s/nonreg.net:6:10: error: cannot read '%s/pipe.inc': not a regular file (a FIFO)",
             dir, dir);
    assert_string_equal(line1(first), want);
    assert_int_equal(read_net("pipe.inc", &ckt, first, sizeof first), TB_ERR_IO);
    snprintf(want, sizeof want, "%s/pipe.inc: error: cannot read '%s/pipe.inc': not a regular file (a FIFO)", dir,
             dir);
    assert_string_equal(line1(first), want);
    tb_diag *diag = tb_diag_new();
    assert_int_equal(tb_circuit_read("/dev/zero", diag, &ckt), TB_ERR_IO);
    assert_string_equal(tb_diag_get(diag, 0)->message,
                        "cannot read '/dev/zero': not a regular file (a character device)");
    tb_diag_free(diag);
}

/* A file that is not a netlist is named with the including line, never quoted: binary
 * (a NUL byte), or text whose first cards do not read as cards. */
static void test_include_not_a_netlist(void **state)
{
    (void)state;
    FILE *f = fopen(at("blob.inc"), "wb");
    assert_non_null(f);
    fwrite("* looks fine\nR1 a 0 1k\nSECRET\0\x01 and more", 1, 38, f);
    fclose(f);
    put("passwd.inc", "root:x:0:0:SECRET:/root:/bin/sh\n");
    put("late.inc", "* a comment, then two cards, then none\n.param q=1\nR9 a 0 {q}\n"
                    "SECRET line three\nmore SECRET\n");
    put("shell.inc", "ls SECRET\n");
    put("fourth.inc", "* three good cards, then anything: only the first three are looked at\n"
                      "Rx1 a 0 1\nRx2 a 0 1\n.end\nSECRET 1 2 3\n");
    put("foreign.net", AMP ".include blob.inc\n.include passwd.inc\n.include late.inc\n"
                       ".include shell.inc\n.include blob.inc\n.include fourth.inc\n");
    tb_circuit *ckt = NULL;
    char first[2048];
    size_t errors = 0;
    assert_int_equal(read_with("foreign.net", NULL, &ckt, first, sizeof first, &errors), TB_ERR_INPUT);
    assert_int_equal(errors, 5); /* blob.inc twice: once per card, never read twice */
    char want[1024];
    snprintf(want, sizeof want,
             "%s/foreign.net:6:10: error: '%s/blob.inc' is not a netlist: it holds binary data (a NUL byte on line 3)\n"
             "  .include blob.inc\n"
             "           ^\n",
             dir, dir);
    assert_string_equal(first, want);
    tb_diag *diag = tb_diag_new();
    char path[256];
    snprintf(path, sizeof path, "%s/foreign.net", dir);
    assert_int_equal(tb_circuit_read(path, diag, &ckt), TB_ERR_INPUT);
    const char *msgs[] = {"passwd.inc' is not a netlist: line 1 does not start like a card (its text is not shown)",
                          "late.inc' is not a netlist: line 4 does not start like a card (its text is not shown)",
                          "shell.inc' is not a netlist: line 1 does not start like a card (its text is not shown)",
                          "blob.inc' is not a netlist: it holds binary data (a NUL byte on line 3)"};
    for (size_t i = 0; i < 4; i++) {
        const char *m = tb_diag_get(diag, i + 1)->message;
        assert_string_equal(m + strlen(m) - strlen(msgs[i]), msgs[i]);
    }
    tb_diag_free(diag);
}

/* Files P0.inc .. P{levels}.inc, each but the last including the next twice. */
static void put_fan_out(const char *prefix, int levels)
{
    char name[32];
    char text[128];
    for (int i = 0; i < levels; i++) {
        snprintf(name, sizeof name, "%s%d.inc", prefix, i);
        snprintf(text, sizeof text, "* level %d\n.include %s%d.inc\n.include %s%d.inc\n", i, prefix, i + 1,
                 prefix, i + 1);
        put(name, text);
    }
    snprintf(name, sizeof name, "%s%d.inc", prefix, levels);
    put(name, "* the last level\n");
}

/* Each file is read once and its text shared: a fan-out of 2^10 inclusions keeps one
 * source per file, and a second name for a file quotes it too. */
static void test_include_shared_once(void **state)
{
    (void)state;
    put_fan_out("s", 10);
    put("alias.inc", "* one file, two names\n");
    put("shared.net", AMP ".include s0.inc\n.include alias.inc\n.include ./alias.inc\n");
    tb_circuit *ckt = NULL;
    char first[2048];
    assert_int_equal(read_net("shared.net", &ckt, first, sizeof first), TB_OK);
    assert_int_equal(ckt->source_count, 1 + 11 + 1 + 1); /* the netlist, s0..s10, alias.inc and its alias */
    char path[256];
    snprintf(path, sizeof path, "%s/./alias.inc", dir);
    size_t len = 0;
    const char *line = tb_circuit_source_line(ckt, path, 1, &len);
    assert_non_null(line);
    assert_memory_equal(line, "* one file, two names", len);
    assert_ptr_equal(ckt->sources[13].text, ckt->sources[12].text);
    tb_circuit_free(ckt);
}

/* 20 files, each including the next twice: the cap on inclusions is said once, with the
 * include chain, in a moment (it took 4 GB and ended in "out of memory"). */
static void test_include_fan_out_limit(void **state)
{
    (void)state;
    put_fan_out("w", 20);
    put("wide.net", AMP ".include w0.inc\n");
    tb_circuit *ckt = NULL;
    char first[8192];
    size_t errors = 0;
    assert_int_equal(read_with("wide.net", NULL, &ckt, first, sizeof first, &errors), TB_ERR_INPUT);
    assert_int_equal(errors, 1);
    char want[256];
    snprintf(want, sizeof want, "error: too many files read through .include (limit is 10000 in all)\n"
                                "  included from %s/w", dir);
    assert_non_null(strstr(first, want));
    snprintf(want, sizeof want, "\n  included from %s/w0.inc:2\n  included from %s/wide.net:6\n", dir, dir);
    assert_non_null(strstr(first, want));
}

/* An include root confines .include to a folder (symbolic links resolved); includes
 * can be turned off; the bytes read have a cap. */
static void test_include_root_and_limits(void **state)
{
    (void)state;
    char path[256];
    char root[256];
    snprintf(root, sizeof root, "%s/libroot", dir);
    mkdir(root, 0700);
    put("libroot/ok.inc", "* inside\n.param k=2\n");
    put("outside.inc", "* outside\n.param s=7\n");
    snprintf(path, sizeof path, "%s/libroot/link.inc", dir);
    assert_int_equal(symlink("../outside.inc", path), 0);
    put("libroot/top.net", AMP ".include ok.inc\n.include ../outside.inc\n.include link.inc\n");
    tb_read_options opt;
    tb_read_options_init(&opt);
    assert_true(opt.allow_include);
    assert_null(opt.include_root);
    assert_int_equal(opt.max_bytes, TB_READ_MAX_BYTES);
    opt.include_root = root;
    tb_circuit *ckt = NULL;
    char first[2048];
    char want[1024];
    size_t errors = 0;
    assert_int_equal(read_with("libroot/top.net", &opt, &ckt, first, sizeof first, &errors), TB_ERR_INPUT);
    assert_int_equal(errors, 2);
    snprintf(want, sizeof want, "%s/libroot/top.net:7:10: error: cannot include '%s/libroot/../outside.inc': it "
                                "lies outside the include root '%s'", dir, dir, root);
    assert_string_equal(line1(first), want);
    /* without a root the same netlist reads */
    assert_int_equal(read_with("libroot/top.net", NULL, &ckt, first, sizeof first, &errors), TB_ERR_INPUT);
    assert_int_equal(errors, 1); /* outside.inc and the link are one file, included twice: s twice */
    assert_non_null(strstr(first, "parameter 's' is defined twice"));
    put("libroot/inside.net", AMP ".include ok.inc\n");
    assert_int_equal(read_with("libroot/inside.net", &opt, &ckt, first, sizeof first, NULL), TB_OK);
    tb_circuit_free(ckt);
    /* a root that is missing or not a folder */
    opt.include_root = "no/such/folder";
    assert_int_equal(read_with("libroot/inside.net", &opt, &ckt, first, sizeof first, NULL), TB_ERR_IO);
    snprintf(want, sizeof want, "%s/libroot/inside.net: error: cannot use 'no/such/folder' as the include root: "
                                "No such file or directory", dir);
    assert_string_equal(line1(first), want);
    snprintf(path, sizeof path, "%s/libroot/ok.inc", dir);
    opt.include_root = path;
    assert_int_equal(read_with("libroot/inside.net", &opt, &ckt, first, sizeof first, NULL), TB_ERR_IO);
    assert_non_null(strstr(first, "as the include root: Not a directory"));
    /* includes turned off */
    tb_read_options_init(&opt);
    opt.allow_include = false;
    assert_int_equal(read_with("libroot/inside.net", &opt, &ckt, first, sizeof first, NULL), TB_ERR_INPUT);
    snprintf(want, sizeof want, "%s/libroot/inside.net:6:10: error: .include is not allowed: this netlist is read "
                                "with includes turned off", dir);
    assert_string_equal(line1(first), want);
    /* the cap on bytes: the netlist alone, then with its include (ok.inc is 20 bytes) */
    tb_read_options_init(&opt);
    opt.max_bytes = 50;
    assert_int_equal(read_with("libroot/inside.net", &opt, &ckt, first, sizeof first, NULL), TB_ERR_INPUT);
    snprintf(want, sizeof want, "%s/libroot/inside.net: error: cannot read '%s/libroot/inside.net': a netlist and "
                                "its includes may hold at most 50 bytes in all", dir, dir);
    assert_string_equal(line1(first), want);
    opt.max_bytes = strlen(AMP ".include ok.inc\n") + 19;
    assert_int_equal(read_with("libroot/inside.net", &opt, &ckt, first, sizeof first, NULL), TB_ERR_INPUT);
    snprintf(want, sizeof want, "%s/libroot/inside.net:6:10: error: cannot read '%s/libroot/ok.inc': a netlist and "
                                "its includes may hold at most %zu bytes in all", dir, dir, opt.max_bytes);
    assert_string_equal(line1(first), want);
    opt.max_bytes += 1;
    assert_int_equal(read_with("libroot/inside.net", &opt, &ckt, first, sizeof first, NULL), TB_OK);
    tb_circuit_free(ckt);
    /* the same options from memory */
    opt.allow_include = false;
    tb_diag *diag = tb_diag_new();
    const char *text = AMP ".include ok.inc\n";
    assert_int_equal(tb_circuit_parse_with(text, strlen(text), "mem.net", &opt, diag, &ckt), TB_ERR_INPUT);
    assert_string_equal(tb_diag_get(diag, 0)->message,
                        ".include is not allowed: this netlist is read with includes turned off");
    tb_diag_free(diag);
}

/* A file larger than the default cap (1 GiB) is refused from its size, without reading
 * it: a sparse file costs no disk. */
static void test_include_size_cap(void **state)
{
    (void)state;
    char path[256];
    snprintf(path, sizeof path, "%s/huge.net", dir);
    FILE *f = fopen(path, "wb");
    assert_non_null(f);
    fputs("huge\n", f);
    fclose(f);
    assert_int_equal(truncate(path, (off_t)TB_READ_MAX_BYTES + 1), 0);
    tb_circuit *ckt = NULL;
    char first[2048];
    assert_int_equal(read_net("huge.net", &ckt, first, sizeof first), TB_ERR_INPUT);
    char want[1024];
    snprintf(want, sizeof want, "%s: error: cannot read '%s': a netlist and its includes may hold at most 1 GiB "
                                "in all", path, path);
    assert_string_equal(line1(first), want);
    put("includes_huge.net", AMP ".include huge.net\n");
    assert_int_equal(read_net("includes_huge.net", &ckt, first, sizeof first), TB_ERR_INPUT);
    assert_non_null(strstr(first, ":6:10: error: cannot read"));
    assert_non_null(strstr(first, "may hold at most 1 GiB in all"));
    unlink(path);
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
        cmocka_unit_test(test_include_non_regular),
        cmocka_unit_test(test_include_not_a_netlist),
        cmocka_unit_test(test_include_shared_once),
        cmocka_unit_test(test_include_fan_out_limit),
        cmocka_unit_test(test_include_root_and_limits),
        cmocka_unit_test(test_include_size_cap),
    };
    return cmocka_run_group_tests(tests, make_dir, remove_dir);
}
