/* tests/test_spreadcard.c: the .spread and .scan cards as read into the circuit, and name patterns */
#include "testutil.h"

#include "circuit.h"
#include "spreadcard.h"

static const char *const NET =
    "spread cards\n"
    "Vs in 0 AC 1\n"
    "G1 0 x in fb 1m\n"
    "R1 x 0 100k\n"
    "C1 x 0 1n\n"
    "E1 out 0 x 0 1\n"
    "RF out fb 1k\n"
    "RG fb 0 1k\n"
    ".subckt pad a\n"
    "RP a 0 1meg\n"
    ".ends\n"
    "X1 out pad\n"
    ".io Vs v(out)\n"
    ".loop G1\n"
    ".ac dec 5 1 1meg\n"
    ".spread R? flat 1%\n"
    ".spread RF RG flat 10 group=div\n"
    ".spread C1 gauss 2.5%\n"
    ".spread G1 pick 0.5m 1m 2m\n"
    ".scan C1 log 100p 10n 5\n"
    ".scan RF list 1k 2.2k\n";

static void test_spreadcard_rules(void **state)
{
    (void)state;
    tb_circuit *ckt = tu_parse(NET);
    const tb_spread_cards *sc = ckt->spread;
    assert_non_null(sc);
    assert_int_equal(sc->rule_count, 5); /* RF and RG are two rules of one card */
    const tb_spread_rule *r = sc->rules;
    assert_string_equal(r->pattern, "R?");
    assert_int_equal(r->dist, TB_SPREAD_FLAT);
    assert_true(r->relative && fabs(r->width - 0.01) < 1e-15 && !r->group);
    r = r->next;
    assert_string_equal(r->pattern, "RF");
    assert_true(!r->relative && r->width == 10 && strcmp(r->group, "div") == 0);
    r = r->next;
    assert_string_equal(r->pattern, "RG");
    assert_string_equal(r->group, "div");
    assert_int_equal(r->pattern_loc.line, 17);
    assert_int_equal(r->pattern_loc.col, 12);
    r = r->next;
    assert_int_equal(r->dist, TB_SPREAD_GAUSS);
    assert_true(r->relative && fabs(r->width - 0.025) < 1e-15);
    r = r->next;
    assert_int_equal(r->dist, TB_SPREAD_PICK);
    assert_int_equal(r->value_count, 3);
    assert_true(r->values[0] == 0.5e-3 && r->values[1] == 1e-3 && r->values[2] == 2e-3);
    assert_null(r->next);
    tb_circuit_free(ckt);
}

/* log spacing: v_i = lo (hi/lo)^(i/(n-1)) (common practice), both ends exact */
static void test_spreadcard_scan(void **state)
{
    (void)state;
    tb_circuit *ckt = tu_parse(NET);
    const tb_spread_cards *sc = ckt->spread;
    assert_int_equal(sc->axis_count, 2);
    const tb_scan_axis *a = &sc->axes[0];
    assert_int_equal(a->kind, TB_SCAN_LOG);
    assert_int_equal(a->count, 5);
    const double want[5] = {100e-12, 316.227766016838e-12, 1e-9, 3.16227766016838e-9, 10e-9};
    for (size_t i = 0; i < 5; i++)
        assert_true(fabs(a->values[i] - want[i]) < 1e-13 * want[i]);
    size_t c1 = 0;
    assert_true(tb_circuit_find_element(ckt, "C1", &c1));
    assert_int_equal(a->elem, c1);
    assert_int_equal(sc->axes[1].kind, TB_SCAN_LIST);
    assert_true(sc->axes[1].count == 2 && sc->axes[1].values[1] == 2200);
    tb_circuit_free(ckt);
}

static void test_spreadcard_match(void **state)
{
    (void)state;
    static const struct {
        const char *pattern, *name;
        bool match;
    } cases[] = {
        {"R*", "R1", true},     {"R*", "RF", true},        {"r*", "RF", true},  {"R*", "C1", false},
        {"R?", "R12", false},   {"R??", "R12", true},      {"X1.*", "X1.RP", true}, {"X1.*", "X12.RP", false},
        {"*", "anything", true}, {"*.R*", "X1.X2.RB", true}, {"C3", "c3", true}, {"C3", "C31", false},
        {"*P", "X1.RP", true},  {"**", "", true},          {"?", "", false},
    };
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++)
        if (tb_spreadcard_match(cases[i].pattern, cases[i].name) != cases[i].match)
            fail_msg("pattern %s against %s", cases[i].pattern, cases[i].name);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_spreadcard_rules),
        cmocka_unit_test(test_spreadcard_scan),
        cmocka_unit_test(test_spreadcard_match),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
