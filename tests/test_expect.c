/* tests/test_expect.c: .expect cards: the grammar, the figure table, evaluation, loop names,
 * and the runner's shard hash */
#include <stdlib.h>

#include "testutil.h"

#include "checkrun.h"
#include "circuit.h"
#include "expect.h"

/* A one-pole follower: G1 (1 mS) into 1 MOhm || 15.9 nF, OUT tied to the inverting input. */
static const char follower[] =
    "One-pole follower, drawn for the tests\n"
    "Vs in 0 AC 1\n"
    "G1 0 x in x 1m\n"
    "Rx x 0 1meg\n"
    "Cx x 0 15.9n\n"
    ".loop G1\n"
    ".io Vs v(x)\n"
    ".ac dec 50 1 10meg\n";

/* Parses follower plus card (one .expect) and returns its only expectation. */
static tb_circuit *with_card(const char *card, const tb_expect **x)
{
    char text[1024];
    snprintf(text, sizeof text, "%s%s\n", follower, card);
    tb_circuit *ckt = tu_parse(text);
    assert_int_equal(ckt->expect_count, 1);
    *x = ckt->expects;
    return ckt;
}

typedef struct {
    const char *card;
    const char *figure;
    tb_expect_op op;
    double value;
    double tol;
    bool pct;
    double lo;
    double hi;
} grammar_case;

static void test_expect_grammar(void **state)
{
    (void)state;
    static const grammar_case cases[] = {
        {".expect G1.dc.A = 10 ±1%", "dc.A", TB_XOP_EQ, 10, 1, true, 9.9, 10.1},
        {".expect G1.dc.A = 10 +-1%", "dc.A", TB_XOP_EQ, 10, 1, true, 9.9, 10.1},
        {".expect G1.dc.A=10±1%", "dc.A", TB_XOP_EQ, 10, 1, true, 9.9, 10.1},
        {".expect G1.dc.A = 10 ± 0.5", "dc.A", TB_XOP_EQ, 10, 0.5, false, 9.5, 10.5},
        {".expect G1.dc.A = {5*2} +- 2m", "dc.A", TB_XOP_EQ, 10, 2e-3, false, 9.998, 10.002},
        {".expect G1.dc.A = -8 ±2%", "dc.A", TB_XOP_EQ, -8, 2, true, -8.16, -7.84},
        {".expect G1.phase_margin_deg >= 45", "phase_margin_deg", TB_XOP_GE, 0, 0, false, 45, 0},
        {".expect G1.gain_margin_up_db <= {2*3}", "gain_margin_up_db", TB_XOP_LE, 0, 0, false, 0, 6},
        {".expect G1.unity_hz in 1meg 2meg", "unity_hz", TB_XOP_IN, 0, 0, false, 1e6, 2e6},
        {".expect G1.verdict = stable", "verdict", TB_XOP_EQ, TB_VERDICT_STABLE, 0, false, 0, 0},
        {".EXPECT G1.verdict = UNSTABLE", "verdict", TB_XOP_EQ, TB_VERDICT_UNSTABLE, 0, false, 0, 0},
        {".expect G1.gain_margin_down_db = none", "gain_margin_down_db", TB_XOP_NONE, 0, 0, false, 0, 0},
        {".expect G1.dc.T_db >= 59", "dc.T_db", TB_XOP_GE, 0, 0, false, 59, 0},
    };
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        const grammar_case *c = &cases[i];
        const tb_expect *x = NULL;
        tb_circuit *ckt = with_card(c->card, &x);
        assert_string_equal(tb_figure_at((size_t)x->figure)->name, c->figure);
        assert_string_equal(x->loop_name, "G1");
        assert_int_equal(x->op, c->op);
        assert_int_equal(x->loc.line, 9);
        assert_int_equal(x->loc.col, 9);
        if (c->op == TB_XOP_EQ) {
            assert_true(fabs(x->value - c->value) <= 1e-12 * fabs(c->value));
            assert_true(fabs(x->tol - c->tol) <= 1e-12 * c->tol);
            assert_int_equal(x->tol_pct, c->pct);
        }
        if (c->op == TB_XOP_GE || c->op == TB_XOP_IN || (c->op == TB_XOP_EQ && c->tol > 0))
            assert_true(fabs(x->lo - c->lo) <= 1e-12 * fabs(c->lo));
        if (c->op == TB_XOP_LE || c->op == TB_XOP_IN || (c->op == TB_XOP_EQ && c->tol > 0))
            assert_true(fabs(x->hi - c->hi) <= 1e-12 * fabs(c->hi));
        tb_circuit_free(ckt);
    }
}

/* A hierarchical loop name keeps its dots; the figure is the longest name the target ends in. */
static void test_expect_split(void **state)
{
    (void)state;
    size_t loop_len = 0;
    int f = tb_expect_split("X1.G1.dc.T_db", 13, &loop_len);
    assert_true(f >= 0);
    assert_string_equal(tb_figure_at((size_t)f)->name, "dc.T_db");
    assert_int_equal(loop_len, 5);
    f = tb_expect_split("XA.XB.E1.verdict", 16, &loop_len);
    assert_string_equal(tb_figure_at((size_t)f)->name, "verdict");
    assert_int_equal(loop_len, 8);
    assert_int_equal(tb_expect_split("dc.A", 4, &loop_len), -1); /* no loop part */
    assert_int_equal(tb_expect_split("G1.dc.Ax", 8, &loop_len), -1);
    size_t off = 0;
    const char *best = tb_expect_suggest("G1.unity_hzz", 12, &off);
    assert_string_equal(best, "unity_hz");
    assert_int_equal(off, 3);
}

/* Every figure is found by its own name, and no two share one. */
static void test_expect_figure_table(void **state)
{
    (void)state;
    assert_true(tb_figure_count() >= 19);
    for (size_t i = 0; i < tb_figure_count(); i++) {
        const tb_figure *f = tb_figure_at(i);
        assert_int_equal(tb_figure_find(f->name, strlen(f->name)), (int)i);
        assert_non_null(f->get);
        assert_true(strlen(f->what) > 0);
    }
    assert_null(tb_figure_at(tb_figure_count()));
    assert_int_equal(tb_figure_word_find("Marginal", 8), TB_VERDICT_MARGINAL);
    assert_int_equal(tb_figure_word_find("stabl", 5), -1);
    assert_string_equal(tb_figure_word_suggest("stabel"), "stable");
}

typedef struct {
    const char *card;
    bool present;
    double v;
    bool holds;
} holds_case;

/* Bounds are inclusive; an absent figure fails every bound but '= none'. */
static void test_expect_holds(void **state)
{
    (void)state;
    static const holds_case cases[] = {
        {".expect G1.dc.A = 10 ±1%", true, 10.1, true},
        {".expect G1.dc.A = 10 ±1%", true, 9.9, true},
        {".expect G1.dc.A = 10 ±1%", true, 10.1000001, false},
        {".expect G1.dc.A = 10 ±1%", true, 9.8999999, false},
        {".expect G1.dc.A = -10 ±1%", true, -9.9, true},
        {".expect G1.dc.A = -10 ±1%", true, 9.9, false},
        {".expect G1.dc.A = 10 ±0.5", true, 10.5, true},
        {".expect G1.dc.A = 10 ±0.5", true, 10.6, false},
        {".expect G1.dc.A = 10 ±1%", false, 10, false},
        {".expect G1.phase_margin_deg >= 45", true, 45, true},
        {".expect G1.phase_margin_deg >= 45", true, 44.999, false},
        {".expect G1.phase_margin_deg >= 45", false, 0, false},
        {".expect G1.gain_margin_up_db <= 3", true, 3, true},
        {".expect G1.gain_margin_up_db <= 3", true, 3.001, false},
        {".expect G1.unity_hz in 1meg 2meg", true, 1e6, true},
        {".expect G1.unity_hz in 1meg 2meg", true, 2e6, true},
        {".expect G1.unity_hz in 1meg 2meg", true, 2.0001e6, false},
        {".expect G1.unity_hz in 1meg 2meg", true, 0.9999e6, false},
        {".expect G1.gain_margin_down_db = none", false, 0, true},
        {".expect G1.gain_margin_down_db = none", true, 12, false},
        {".expect G1.verdict = stable", true, TB_VERDICT_STABLE, true},
        {".expect G1.verdict = stable", true, TB_VERDICT_MARGINAL, false},
        {".expect G1.verdict = stable", false, 0, false},
    };
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        const tb_expect *x = NULL;
        tb_circuit *ckt = with_card(cases[i].card, &x);
        if (tb_expect_holds(x, cases[i].present, cases[i].v) != cases[i].holds)
            fail_msg("case %zu: %s with %g", i, cases[i].card, cases[i].v);
        tb_circuit_free(ckt);
    }
}

static void test_expect_bound_text(void **state)
{
    (void)state;
    char buf[160];
    const tb_expect *x = NULL;
    tb_circuit *ckt = with_card(".expect G1.unity_hz in 1meg 2meg", &x);
    assert_string_equal(tb_expect_bound_text(x, buf, sizeof buf), "in [1e+06, 2e+06] Hz");
    tb_circuit_free(ckt);
    ckt = with_card(".expect G1.dc.A = 10 ±1%", &x);
    assert_string_equal(tb_expect_bound_text(x, buf, sizeof buf), "= 10 +- 1% [9.9, 10.1]");
    tb_circuit_free(ckt);
    ckt = with_card(".expect G1.phase_margin_deg >= 45", &x);
    assert_string_equal(tb_expect_bound_text(x, buf, sizeof buf), ">= 45 deg");
    tb_circuit_free(ckt);
    assert_string_equal(tb_figure_text(tb_figure_find("verdict", 7), true, TB_VERDICT_UNSTABLE, buf,
                                       sizeof buf), "unstable");
    assert_string_equal(tb_figure_text(0, false, 0, buf, sizeof buf), "absent");
}

/* An unknown loop is an error at the target, with the closest .loop name. */
static void test_expect_unknown_loop(void **state)
{
    (void)state;
    const tb_expect *x = NULL;
    /* reading the netlist refuses it: every command, not only the runner */
    char text[1024];
    snprintf(text, sizeof text, "%s%s\n", follower, ".expect G2.unity_hz in 1meg 2meg");
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    assert_int_equal(tb_circuit_parse(text, strlen(text), "t.net", diag, &ckt), TB_ERR_INPUT);
    assert_null(ckt);
    const tb_diag_entry *d = tb_diag_get(diag, tb_diag_count(diag) - 1);
    assert_non_null(d);
    assert_string_equal(d->message, "unknown loop 'G2' in .expect (did you mean 'G1'?)");
    assert_int_equal(d->line, 9);
    assert_int_equal(d->col, 9);
    tb_diag_free(diag);
    ckt = with_card(".expect g1.unity_hz in 1meg 2meg", &x); /* names are case-insensitive */
    diag = tb_diag_new();
    assert_int_equal(tb_expect_resolve(ckt, diag), TB_OK);
    assert_int_equal(x->loop, 0);
    tb_diag_free(diag);
    tb_circuit_free(ckt);
}

/* The figures of an analysed circuit against closed forms: one pole, T0 = gm*R = 1000, beta = 1,
 * A = T0/(1 + T0), gain error -1/(1 + T0), fc = fp*sqrt(T0^2 - 1), PM = 180 - atan(fc/fp)
 * (references.md sections 1 and 4); one pole never reaches -180 deg: no gain margin. */
static void test_expect_figures_closed_form(void **state)
{
    (void)state;
    tb_circuit *ckt = tu_parse(follower);
    tb_options opt;
    tb_options_init(&opt);
    tb_result *res = NULL;
    assert_int_equal(tb_analyse(ckt, &opt, NULL, &res), TB_OK);
    tb_measures m;
    tb_stability st;
    tb_step_figures step;
    assert_int_equal(tb_measure_loop(res, 0, &m), TB_OK);
    assert_int_equal(tb_stability_loop(res, 0, &st), TB_OK);
    assert_int_equal(tb_step_figures_get(res, &step), TB_OK);
    tb_figure_src src = {&m, &st, &step, NULL, NULL, NULL};
    double T0 = 1000.0;
    double fp = 1.0 / (2 * TU_PI * 1e6 * 15.9e-9);
    double fc = fp * sqrt(T0 * T0 - 1);
    struct {
        const char *name;
        double want;
        double rel;
    } cases[] = {
        {"dc.T", T0, 1e-9},
        {"dc.T_db", 60.0, 1e-9},
        {"dc.A", T0 / (1 + T0), 1e-9},
        {"dc.beta", 1.0, 1e-9},
        {"dc.gain_error_pct", -100.0 / (1 + T0), 1e-6},
        {"unity_hz", fc, 1e-6},
        {"phase_margin_deg", 180.0 - atan(fc / fp) * 180.0 / TU_PI, 1e-6},
        {"verdict", TB_VERDICT_STABLE, 0},
    };
    /* tb_figure_measure reads every figure at once: what .expect cards are evaluated against */
    tb_figure_value all[64];
    assert_true(tb_figure_count() <= sizeof all / sizeof all[0]);
    assert_int_equal(tb_figure_measure(res, 0, all), TB_OK);
    assert_int_equal(tb_figure_measure(res, 1, all), TB_ERR_USAGE);
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        int idx = tb_figure_find(cases[i].name, strlen(cases[i].name));
        const tb_figure *f = tb_figure_at((size_t)idx);
        double x = 0;
        const char *why = NULL;
        assert_true(f->get(&src, &x, &why));
        if (fabs(x - cases[i].want) > cases[i].rel * fabs(cases[i].want))
            fail_msg("%s = %.12g, closed form %.12g", cases[i].name, x, cases[i].want);
        assert_true(all[idx].present && all[idx].value == x && all[idx].why == NULL);
    }
    double x = 0;
    const char *why = NULL;
    int gm_idx = tb_figure_find("gain_margin_up_db", 17);
    const tb_figure *gm = tb_figure_at((size_t)gm_idx);
    assert_false(gm->get(&src, &x, &why));
    assert_string_equal(why, "the phase of T never reaches -180 deg where |T| < 1");
    assert_false(all[gm_idx].present);
    assert_true(all[gm_idx].value == 0);
    assert_string_equal(all[gm_idx].why, "the phase of T never reaches -180 deg where |T| < 1");
    gm = tb_figure_at((size_t)tb_figure_find("gain_margin_down_db", 19));
    assert_false(gm->get(&src, &x, &why));
    assert_string_equal(why, "the phase of T never reaches -180 deg where |T| > 1");
    tb_result_free(res);
    tb_circuit_free(ckt);
}

/* The hand-estimate figures against closed forms: with .ideal gain=1 on the follower,
 * A - 1 = -1/(1 + T), so the error at DC is 100/(1 + T0) percent, and the estimate leaves its
 * default 1 % tolerance where |1 + T| = 100: with T = T0/(1 + jx), x = f/fp,
 * (1 + T0)^2 + x^2 = 1e4 (1 + x^2), x = sqrt(((1 + T0)^2 - 1e4)/(1e4 - 1)) (our algebra). */
static void test_expect_ideal_figures(void **state)
{
    (void)state;
    char text[1024];
    snprintf(text, sizeof text, "%s.ideal gain=1\n", follower);
    tb_circuit *ckt = tu_parse(text);
    tb_options opt;
    tb_options_init(&opt);
    tb_result *res = NULL;
    assert_int_equal(tb_analyse(ckt, &opt, NULL, &res), TB_OK);
    tb_measures m;
    tb_stability st;
    tb_step_figures step;
    tb_feedback_summary fb;
    assert_int_equal(tb_measure_loop(res, 0, &m), TB_OK);
    assert_int_equal(tb_stability_loop(res, 0, &st), TB_OK);
    assert_int_equal(tb_step_figures_get(res, &step), TB_OK);
    assert_int_equal(tb_feedback_loop(res, 0, &fb), TB_OK);
    tb_figure_src src = {&m, &st, &step, &fb, NULL, NULL};
    double T0 = 1000.0;
    double fp = 1.0 / (2 * TU_PI * 1e6 * 15.9e-9);
    double x = 0;
    const char *why = NULL;
    assert_true(tb_figure_at((size_t)tb_figure_find("ideal.error_pct", 15))->get(&src, &x, &why));
    assert_true(fabs(x - 100.0 / (1 + T0)) <= 1e-9 * x);
    assert_true(tb_figure_at((size_t)tb_figure_find("ideal.limit_hz", 14))->get(&src, &x, &why));
    double want = fp * sqrt(((1 + T0) * (1 + T0) - 1e4) / (1e4 - 1));
    if (fabs(x - want) > 1e-6 * want)
        fail_msg("ideal.limit_hz = %.12g, closed form %.12g", x, want);
    src.fb = NULL; /* a netlist without .ideal */
    assert_false(tb_figure_at((size_t)tb_figure_find("ideal.error_pct", 15))->get(&src, &x, &why));
    assert_string_equal(why, "no .ideal estimate");
    tb_result_free(res);
    tb_circuit_free(ckt);
}

/* FNV-1a 64 test vectors (L. C. Noll's published FNV test suite; from memory, confirmed by an
 * independent Python implementation of the published algorithm). */
static void test_expect_shard_hash(void **state)
{
    (void)state;
    assert_true(tb_check_hash("") == 14695981039346656037u);
    assert_true(tb_check_hash("a") == 0xaf63dc4c8601ec8cu);
    assert_true(tb_check_hash("foobar") == 0x85944171f73967e8u);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_expect_grammar),
        cmocka_unit_test(test_expect_split),
        cmocka_unit_test(test_expect_figure_table),
        cmocka_unit_test(test_expect_holds),
        cmocka_unit_test(test_expect_bound_text),
        cmocka_unit_test(test_expect_unknown_loop),
        cmocka_unit_test(test_expect_figures_closed_form),
        cmocka_unit_test(test_expect_ideal_figures),
        cmocka_unit_test(test_expect_shard_hash),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
