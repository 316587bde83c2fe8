/* tests/test_demos.c: every demo netlist in netlists/ and netlists/devices/ runs, and the
 * figures its header states in "* check: SOURCE.KEY = VALUE rel|abs TOL" lines hold. The figures
 * come from the closed forms written out in each header (their sources are named there). */
#include "testutil.h"

#include <dirent.h>
#include <stdlib.h>

#define MIN_DEMOS 6

typedef struct {
    char source[130];
    char key[130];
    double value;
    bool relative;
    double tol;
} figure;

static char *slurp(const char *path)
{
    FILE *f = fopen(path, "rb");
    assert_non_null(f);
    fseek(f, 0, SEEK_END);
    long size = ftell(f);
    fseek(f, 0, SEEK_SET);
    char *text = malloc((size_t)size + 1);
    assert_non_null(text);
    assert_int_equal(fread(text, 1, (size_t)size, f), (size_t)size);
    text[size] = '\0';
    fclose(f);
    return text;
}

/* Parses one "* check: SRC.KEY = V rel T" line; false when the line is not one. */
static bool parse_figure(const char *line, figure *fig)
{
    char kind[8];
    char name[130];
    if (sscanf(line, "* check: %129s = %lf %7s %lf", name, &fig->value, kind, &fig->tol) != 4)
        return false;
    /* the source may be hierarchical (XU1.Ga): the key starts at ".dc." or after the last '.' */
    char *dot = strstr(name, ".dc.");
    if (!dot)
        dot = strrchr(name, '.');
    assert_non_null(dot);
    *dot = '\0';
    snprintf(fig->source, sizeof fig->source, "%s", name);
    snprintf(fig->key, sizeof fig->key, "%s", dot + 1);
    assert_true(strcmp(kind, "rel") == 0 || strcmp(kind, "abs") == 0);
    fig->relative = strcmp(kind, "rel") == 0;
    return true;
}

/* The measured value of a figure; fails the test for an unknown key or an absent value. */
static double measured(const tb_measures *m, const char *key)
{
    unsigned fl = m->dc.flags;
    if (strcmp(key, "dc.T") == 0 && !(fl & TB_PT_T_INF))
        return creal(m->dc.T);
    if (strcmp(key, "dc.A") == 0 && !(fl & TB_PT_NO_IO))
        return creal(m->dc.A);
    if (strcmp(key, "dc.A_inf") == 0 && !(fl & (TB_PT_NO_IO | TB_PT_AINF_NONE)))
        return creal(m->dc.A_inf);
    if (strcmp(key, "dc.beta") == 0 && !(fl & (TB_PT_NO_IO | TB_PT_AINF_NONE)))
        return creal(1.0 / m->dc.A_inf);
    if (strcmp(key, "dc.A0") == 0 && !(fl & (TB_PT_NO_IO | TB_PT_A0_NONE)))
        return creal(m->dc.A0);
    if (strcmp(key, "dc.a") == 0 && !(fl & (TB_PT_NO_IO | TB_PT_AINF_NONE | TB_PT_T_INF)))
        return creal(m->dc.a);
    if (strcmp(key, "unity_hz") == 0 && m->has_unity)
        return m->unity_hz;
    if (strcmp(key, "phase_margin_deg") == 0 && m->has_phase_margin)
        return m->phase_margin_deg;
    if (strcmp(key, "f3db_closed_hz") == 0 && m->has_f3db)
        return m->f3db_closed_hz;
    print_error("unknown or absent figure '%s'\n", key);
    fail();
    return 0;
}

static size_t check_demo(const char *path)
{
    char *text = slurp(path);
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    tb_result *res = NULL;
    assert_int_equal(tb_circuit_read(path, diag, &ckt), TB_OK);
    assert_int_equal(tb_analyse(ckt, NULL, diag, &res), TB_OK);
    assert_int_equal(tb_diag_errors(diag), 0);
    size_t checked = 0;
    for (char *line = strtok(text, "\r\n"); line; line = strtok(NULL, "\r\n")) {
        figure fig;
        if (!parse_figure(line, &fig))
            continue;
        size_t l = 0;
        assert_int_equal(tb_circuit_find_loop(ckt, fig.source, &l), TB_OK);
        tb_measures m;
        assert_int_equal(tb_measure_loop(res, l, &m), TB_OK);
        double got = measured(&m, fig.key);
        double bound = fig.relative ? fig.tol * fabs(fig.value) : fig.tol;
        if (!(fabs(got - fig.value) <= bound)) {
            print_error("%s: %s.%s = %.12g, stated %.12g (%s %g)\n", path, fig.source, fig.key, got,
                        fig.value, fig.relative ? "rel" : "abs", fig.tol);
            fail();
        }
        checked++;
    }
    if (checked == 0) {
        print_error("%s states no figures\n", path);
        fail();
    }
    tb_result_free(res);
    tb_circuit_free(ckt);
    tb_diag_free(diag);
    free(text);
    return checked;
}

/* The demos of one folder (not its subfolders); adds to *demos and returns the figures. */
static size_t check_folder(const char *folder, size_t *demos)
{
    DIR *dir = opendir(folder);
    assert_non_null(dir);
    size_t figures = 0;
    for (struct dirent *ent = readdir(dir); ent; ent = readdir(dir)) {
        size_t len = strlen(ent->d_name);
        if (len < 5 || strcmp(ent->d_name + len - 4, ".net") != 0)
            continue;
        char path[512];
        snprintf(path, sizeof path, "%s/%s", folder, ent->d_name);
        figures += check_demo(path);
        (*demos)++;
    }
    closedir(dir);
    return figures;
}

static void test_demos_stated_figures_hold(void **state)
{
    (void)state;
    size_t demos = 0;
    /* netlists/devices: the demos written with device cards (Q, M) */
    size_t figures = check_folder("netlists", &demos) + check_folder("netlists/devices", &demos);
    print_message("%zu demo netlists, %zu stated figures checked\n", demos, figures);
    assert_true(demos >= MIN_DEMOS);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_demos_stated_figures_hold),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
