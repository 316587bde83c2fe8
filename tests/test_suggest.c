/* tests/test_suggest.c: "did you mean": the closest name by optimal string alignment distance */
#include <stdlib.h>

#include "testutil.h"

#include "suggest.h"

/* Each case: the name looked up, the candidates (NULL-terminated), the expected
 * suggestion (NULL: none). Distances worked by hand from the definition of the
 * optimal string alignment distance (common practice: Levenshtein edits plus
 * transposition of two adjacent characters, no substring edited twice). */
static const struct {
    const char *name;
    const char *candidates[6];
    const char *want;
} cases[] = {
    {"G2", {"G1", "R1", NULL}, "G1"},              /* 1 substitution; R1 is 2 away */
    {"outt", {"out", "in", "fb", NULL}, "out"},    /* one deletion */
    {"OUT1", {"out", NULL}, "out"},                /* case does not count */
    {"vsnese", {"Vsense", "Vin", NULL}, "Vsense"}, /* one transposition (len 6: limit 2) */
    {"Vsnees", {"Vsense", NULL}, "Vsense"},        /* two transpositions: 2 <= 6/3 */
    {"Vxyzes", {"Vsense", NULL}, NULL},            /* 3 edits > limit 2 */
    {"ab", {"ba", NULL}, "ba"},                    /* transposition costs 1 */
    {"abc", {"ca", NULL}, NULL},                   /* 3 edits > limit 1 */
    /* OSA gives abc -> ca 3 edits (unrestricted Damerau would give 2, a tie with
     * "xxxxxxdec", which would then win as "xxxxxxca" comes first in byte order) */
    {"xxxxxxabc", {"xxxxxxca", "xxxxxxdec", NULL}, "xxxxxxdec"},
    {"x", {"y", "xy", NULL}, "xy"},                /* tie at 1: "xy" < "y" in byte order */
    {"R5", {"R5", "R6", NULL}, "R6"},              /* the name itself is no suggestion */
    {"r5", {"R5", NULL}, NULL},                    /* equal without case: no suggestion */
    {"node12", {"node21", "node13", "node1", NULL}, "node1"}, /* ties at 1, byte order */
    {"abcdefghi", {"abcdefghijkl", NULL}, "abcdefghijkl"},    /* len 9: limit 3, 3 insertions */
    {"abcdefghi", {"abcdefghijklm", NULL}, NULL},             /* 4 insertions */
    {"q", {"", NULL}, NULL},                       /* an empty candidate is never suggested */
    {"", {"a", NULL}, NULL},                       /* an empty name gets nothing */
    {"Cload", {"CLOAD2", "Rload", "Cl", NULL}, "CLOAD2"},     /* 1 vs 1 vs 3: byte order */
};

static void test_suggest_table(void **state)
{
    (void)state;
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        size_t count = 0;
        while (cases[i].candidates[count])
            count++;
        const char *got = tb_suggest(cases[i].name, cases[i].candidates, count);
        if (!cases[i].want && got) {
            print_error("case %zu ('%s'): got '%s', want none\n", i, cases[i].name, got);
            fail();
        }
        if (cases[i].want && (!got || strcmp(got, cases[i].want) != 0)) {
            print_error("case %zu ('%s'): got '%s', want '%s'\n", i, cases[i].name,
                        got ? got : "(none)", cases[i].want);
            fail();
        }
    }
}

/* The answer does not depend on the order of the candidates. */
static void test_suggest_order_independent(void **state)
{
    (void)state;
    const char *forward[] = {"net3", "net1", "nett", "neta"};
    const char *backward[] = {"neta", "nett", "net1", "net3"};
    assert_string_equal(tb_suggest("net", forward, 4), "net1");
    assert_string_equal(tb_suggest("net", backward, 4), "net1");
    /* a closer candidate late in the list wins over an earlier one first in byte order */
    const char *later[] = {"ampl1fie1", "amplifierz"}; /* 2 substitutions; 1 insertion */
    assert_string_equal(tb_suggest("amplifier", later, 2), "amplifierz");
}

/* The incremental form sees the same as the one-call form; NULL candidates are skipped. */
static void test_suggest_incremental(void **state)
{
    (void)state;
    tb_suggester s;
    tb_suggest_init(&s, "Vinn");
    assert_null(tb_suggest_best(&s));
    tb_suggest_offer(&s, NULL);
    tb_suggest_offer(&s, "Rin"); /* a substitution and a deletion: 2 > limit 1 */
    assert_null(tb_suggest_best(&s));
    tb_suggest_offer(&s, "Vin");
    assert_string_equal(tb_suggest_best(&s), "Vin");
}

/* Names longer than TB_SUGGEST_MAX_LEN get nothing; one at the limit works. */
static void test_suggest_long_names(void **state)
{
    (void)state;
    char name[TB_SUGGEST_MAX_LEN + 2];
    char cand[TB_SUGGEST_MAX_LEN + 2];
    memset(name, 0, sizeof name);
    memset(name, 'a', TB_SUGGEST_MAX_LEN);
    name[TB_SUGGEST_MAX_LEN] = '\0';
    memcpy(cand, name, sizeof name);
    cand[5] = 'b';
    const char *list[] = {cand};
    assert_ptr_equal(tb_suggest(name, list, 1), cand);
    name[TB_SUGGEST_MAX_LEN] = 'a';
    name[TB_SUGGEST_MAX_LEN + 1] = '\0';
    assert_null(tb_suggest(name, list, 1));
}

/* 10^5 names like the node names of a large ladder: the answer is found among
 * them (a timing check belongs in make bench, not here). */
static void test_suggest_many(void **state)
{
    (void)state;
    enum { N = 100000 };
    char *store = malloc((size_t)N * 16);
    const char **list = malloc(N * sizeof *list);
    assert_non_null(store);
    assert_non_null(list);
    for (int i = 0; i < N; i++) {
        snprintf(store + (size_t)i * 16, 16, "n%d", i);
        list[i] = store + (size_t)i * 16;
    }
    /* "n7777x": one insertion from n7777 (and 1 from n77770..n77779, later in byte order) */
    assert_string_equal(tb_suggest("n7777x", list, N), "n7777");
    assert_string_equal(tb_suggest("n99_999", list, N), "n99999");
    assert_null(tb_suggest("qqqqqqq", list, N));
    free(list);
    free(store);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_suggest_table),
        cmocka_unit_test(test_suggest_order_independent),
        cmocka_unit_test(test_suggest_incremental),
        cmocka_unit_test(test_suggest_long_names),
        cmocka_unit_test(test_suggest_many),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
