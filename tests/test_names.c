/* tests/test_names.c: the name index: positions by case-insensitive name, first entry kept on duplicates, growth */
#include <stdlib.h>

#include "testutil.h"

#include "names.h"

typedef struct {
    char (*names)[16];
    size_t count;
} table;

static const char *name_of(const void *owner, size_t i)
{
    return ((const table *)owner)->names[i];
}

static void test_names_find_and_duplicates(void **state)
{
    (void)state;
    char names[][16] = {"R1", "out", "Vin", "r1", "OUT", "X1.n3"};
    table t = {names, 6};
    tb_name_index idx = {NULL, 0, 0};
    size_t found = 0;
    assert_false(tb_names_find(&idx, name_of, &t, "R1", 2, &found)); /* empty index */
    size_t want_earlier[] = {SIZE_MAX, SIZE_MAX, SIZE_MAX, 0, 1, SIZE_MAX};
    for (size_t i = 0; i < t.count; i++) {
        size_t earlier = 7;
        assert_int_equal(tb_names_add(&idx, name_of, &t, i, &earlier), TB_OK);
        assert_int_equal(earlier, want_earlier[i]);
    }
    assert_true(tb_names_find(&idx, name_of, &t, "vIN", 3, &found));
    assert_int_equal(found, 2);
    assert_true(tb_names_find(&idx, name_of, &t, "r1", 2, &found));
    assert_int_equal(found, 0); /* the first of that name keeps the slot */
    assert_true(tb_names_find(&idx, name_of, &t, "x1.N3xyz", 5, &found)); /* a slice */
    assert_int_equal(found, 5);
    assert_false(tb_names_find(&idx, name_of, &t, "R", 1, &found));
    assert_false(tb_names_find(&idx, name_of, &t, "R11", 3, &found));
    tb_names_free(&idx);
    assert_null(idx.slots);
    assert_int_equal(idx.cap, 0);
    tb_names_free(&idx); /* twice is fine */
}

/* 200 000 names that differ only in their last digits: every one is found where it was put. */
static void test_names_many(void **state)
{
    (void)state;
    enum { N = 200000 };
    table t = {calloc(N, sizeof t.names[0]), N};
    assert_non_null(t.names);
    tb_name_index idx = {NULL, 0, 0};
    for (size_t i = 0; i < N; i++) {
        size_t earlier = 0;
        snprintf(t.names[i], sizeof t.names[i], "p%zu", i);
        assert_int_equal(tb_names_add(&idx, name_of, &t, i, &earlier), TB_OK);
        assert_int_equal(earlier, SIZE_MAX);
    }
    assert_true(idx.cap >= 2 * N); /* at most half full */
    for (size_t i = 0; i < N; i += 997) {
        size_t found = 0;
        char upper[16];
        snprintf(upper, sizeof upper, "P%zu", i);
        assert_true(tb_names_find(&idx, name_of, &t, upper, strlen(upper), &found));
        assert_int_equal(found, i);
    }
    size_t found = 0;
    assert_false(tb_names_find(&idx, name_of, &t, "p200000", 7, &found));
    tb_names_free(&idx);
    free(t.names);
}

/* Finds through the recent entries agree with plain finds, for names remembered,
 * found before, never seen and absent; more names than recent slots, so that many
 * share a slot and a remembered entry is replaced by another of a different name. */
static void test_names_recent(void **state)
{
    (void)state;
    enum { N = 5000 };
    table t = {calloc(N, sizeof t.names[0]), N};
    assert_non_null(t.names);
    tb_name_index idx = {NULL, 0, 0};
    tb_name_recent recent = {{{0, 0}}};
    size_t found = 0;
    assert_false(tb_names_find_recent(&idx, &recent, name_of, &t, "n1", 2, &found)); /* empty */
    for (size_t i = 0; i < N; i++) {
        size_t earlier = 0;
        snprintf(t.names[i], sizeof t.names[i], "n%zu", i);
        assert_int_equal(tb_names_add(&idx, name_of, &t, i, &earlier), TB_OK);
        tb_names_remember(&recent, name_of, &t, i);
        tb_names_prefetch(&idx, tb_names_hash(t.names[i], strlen(t.names[i]))); /* only a hint */
    }
    for (size_t pass = 0; pass < 2; pass++) {
        for (size_t k = 0; k < N; k++) {
            size_t i = (k * 7919) % N; /* every name, out of order */
            char upper[16];
            snprintf(upper, sizeof upper, "N%zu", i);
            size_t want = SIZE_MAX;
            assert_true(tb_names_find(&idx, name_of, &t, upper, strlen(upper), &want));
            assert_true(tb_names_find_recent(&idx, &recent, name_of, &t, upper, strlen(upper), &found));
            assert_int_equal(found, want);
            assert_int_equal(found, i);
            snprintf(upper, sizeof upper, "N%zux", i); /* absent: shares nothing but a prefix */
            assert_false(tb_names_find_recent(&idx, &recent, name_of, &t, upper, strlen(upper), &found));
        }
    }
    assert_false(tb_names_find_recent(&idx, &recent, name_of, &t, "n5000", 5, &found));
    tb_names_free(&idx);
    free(t.names);
}

/* Seek, then claim, adds a name with one probe: names are found (through the recent
 * entries or the index) exactly as tb_names_find finds them, whatever their case, and a
 * name that is not there gives the slot that then holds it. */
static void test_names_seek_and_claim(void **state)
{
    (void)state;
    enum { N = 3000 };
    table t = {calloc(N, sizeof t.names[0]), 0};
    assert_non_null(t.names);
    tb_name_index idx = {NULL, 0, 0};
    tb_name_recent recent = {{{0, 0}}};
    for (size_t k = 0; k < 3 * N; k++) {
        char name[16];
        size_t i = (k * 7919) % (k / 3 + 1); /* mostly names seen before, out of order */
        snprintf(name, sizeof name, k % 2 ? "X%zu" : "x%zu", k % 3 ? i : k / 3);
        uint32_t h = tb_names_hash(name, strlen(name));
        assert_int_equal(tb_names_reserve(&idx, t.count + 1), TB_OK);
        size_t found = SIZE_MAX;
        tb_name_slot *empty = NULL;
        size_t want = SIZE_MAX;
        bool there = tb_names_find(&idx, name_of, &t, name, strlen(name), &want);
        if (tb_names_seek(&idx, &recent, name_of, &t, name, strlen(name), h, &found, &empty)) {
            assert_true(there);
            assert_int_equal(found, want);
            assert_true(tb_name_eq(t.names[found], name));
            continue;
        }
        assert_false(there);
        assert_non_null(empty);
        assert_true(t.count < N);
        snprintf(t.names[t.count], sizeof t.names[0], "%s", name);
        tb_names_claim(empty, &recent, t.count, h);
        assert_true(tb_names_find(&idx, name_of, &t, name, strlen(name), &found));
        assert_int_equal(found, t.count);
        t.count++;
    }
    assert_true(t.count > N / 2);
    tb_names_free(&idx);
    free(t.names);
}

/* Names whose trailing numbers are equal in value or alike in their last digits share
 * groups of slots: each is still found as itself, never as one written differently. */
static void test_names_numbered(void **state)
{
    (void)state;
    char names[][16] = {"n1",          "n01",         "N001",       "n1_1",  "n1_01",
                        "n",           "1",           "01",         "n9",    "n17",
                        "n1000000001", "n0000000001", "n2000000001", "m1",   "nx1"};
    enum { COUNT = sizeof names / sizeof names[0] };
    table t = {names, COUNT};
    tb_name_index idx = {NULL, 0, 0};
    for (size_t i = 0; i < COUNT; i++) {
        size_t earlier = 0;
        assert_int_equal(tb_names_add(&idx, name_of, &t, i, &earlier), TB_OK);
        assert_int_equal(earlier, SIZE_MAX); /* all distinct */
    }
    for (size_t i = 0; i < COUNT; i++) {
        size_t found = COUNT;
        assert_true(tb_names_find(&idx, name_of, &t, names[i], strlen(names[i]), &found));
        assert_int_equal(found, i);
    }
    size_t found = 0;
    assert_false(tb_names_find(&idx, name_of, &t, "n0001", 5, &found));
    assert_false(tb_names_find(&idx, name_of, &t, "n3000000001", 11, &found));
    assert_false(tb_names_find(&idx, name_of, &t, "001", 3, &found));
    tb_names_free(&idx);
}

/* Families of numbered names filling whole groups (blocks of consecutive numbers, and
 * every eighth number) in a table grown from empty: every name is found where it was put. */
static void test_names_numbered_families(void **state)
{
    (void)state;
    enum { N = 60000 };
    table t = {calloc(N, sizeof t.names[0]), N};
    assert_non_null(t.names);
    tb_name_index idx = {NULL, 0, 0};
    for (size_t i = 0; i < N; i++) {
        size_t earlier = 0;
        static const char *const stem[] = {"R", "C", "n", "x1.n"};
        size_t number = i % 3 == 0 ? 8 * (i / 3) : i / 3;
        snprintf(t.names[i], sizeof t.names[i], "%s%zu%s", stem[i % 4], number, i % 3 == 0 ? "" : "_");
        assert_int_equal(tb_names_add(&idx, name_of, &t, i, &earlier), TB_OK);
        assert_int_equal(earlier, SIZE_MAX); /* all distinct */
    }
    for (size_t i = 0; i < N; i++) {
        size_t found = 0;
        assert_true(tb_names_find(&idx, name_of, &t, t.names[i], strlen(t.names[i]), &found));
        assert_int_equal(found, i);
    }
    tb_names_free(&idx);
    free(t.names);
}

static void test_names_equality(void **state)
{
    (void)state;
    assert_true(tb_name_eq("Gnd", "gND"));
    assert_false(tb_name_eq("gnd", "gnd0"));
    assert_false(tb_name_eq("gnd0", "gnd"));
    assert_true(tb_name_eq_n("gnd", "GNDX", 3));
    assert_false(tb_name_eq_n("gnd", "GN", 2));
    assert_false(tb_name_eq("\xC3\xA9", "\xC3\x89")); /* ASCII case only: bytes above 127 as they are */
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_names_find_and_duplicates),
        cmocka_unit_test(test_names_many),
        cmocka_unit_test(test_names_recent),
        cmocka_unit_test(test_names_equality),
        cmocka_unit_test(test_names_numbered),
        cmocka_unit_test(test_names_seek_and_claim),
        cmocka_unit_test(test_names_numbered_families),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
