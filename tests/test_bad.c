/* tests/test_bad.c: every malformed netlist in tests/bad/ is refused with the first diagnostic its .err file gives */
#include <dirent.h>
#include <stdlib.h>

#include "testutil.h"

#define BAD_DIR "tests/bad"

/* Fewer fixtures than this means the folder was not found or lost files. */
#define MIN_FIXTURES 15

static bool has_suffix(const char *name, const char *suffix)
{
    size_t n = strlen(name);
    size_t k = strlen(suffix);
    return n > k && strcmp(name + n - k, suffix) == 0;
}

/* The content of path without its final line end; NULL when it cannot be read. */
static char *read_expected(const char *path)
{
    FILE *f = fopen(path, "rb");
    if (!f)
        return NULL;
    char *text = calloc(1, 4096);
    assert_non_null(text);
    size_t n = fread(text, 1, 4095, f);
    fclose(f);
    if (n > 0 && text[n - 1] == '\n')
        text[--n] = '\0';
    if (n > 0 && text[n - 1] == '\r')
        text[--n] = '\0';
    return text;
}

/* Checks one fixture; returns false (after saying why) when it does not hold. */
static bool check_fixture(const char *name)
{
    char net[1024];
    char err[1024];
    snprintf(net, sizeof net, "%s/%s", BAD_DIR, name);
    snprintf(err, sizeof err, "%s/%.*s.err", BAD_DIR, (int)(strlen(name) - 4), name);
    char *want = read_expected(err);
    if (!want) {
        print_error("%s: no %s\n", net, err);
        return false;
    }
    tb_diag *diag = tb_diag_new();
    assert_non_null(diag);
    tb_circuit *ckt = NULL;
    tb_status st = tb_circuit_read(net, diag, &ckt);
    char got[4096];
    tb_diag_format(diag, 0, got, sizeof got);
    got[strcspn(got, "\n")] = '\0';
    bool ok = st == TB_ERR_INPUT && ckt == NULL && strcmp(got, want) == 0;
    if (!ok)
        print_error("%s: status %d (want %d), first diagnostic\n  %s\nwant\n  %s\n", net, st,
                    TB_ERR_INPUT, got, want);
    tb_circuit_free(ckt);
    tb_diag_free(diag);
    free(want);
    return ok;
}

static void test_bad_fixtures(void **state)
{
    (void)state;
    DIR *dir = opendir(BAD_DIR);
    if (!dir)
        print_error("cannot open %s (run the tests from the repository root)\n", BAD_DIR);
    assert_non_null(dir);
    size_t checked = 0;
    size_t failed = 0;
    size_t err_files = 0;
    struct dirent *ent;
    while ((ent = readdir(dir)) != NULL) {
        if (has_suffix(ent->d_name, ".err"))
            err_files++;
        if (!has_suffix(ent->d_name, ".net"))
            continue;
        checked++;
        if (!check_fixture(ent->d_name))
            failed++;
    }
    closedir(dir);
    assert_int_equal(failed, 0);
    assert_true(checked >= MIN_FIXTURES);
    assert_int_equal(err_files, checked); /* no .err without its netlist */
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_bad_fixtures),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
