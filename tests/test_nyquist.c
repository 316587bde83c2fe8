/* tests/test_nyquist.c: the encirclement count and the verdict that weighs it against the poles
 * (Z = N + P: H. Nyquist, "Regeneration theory", Bell Syst. Tech. J. 11, 1932, from memory). */
#include "testutil.h"

#include "nyquist.h"

/* A loop with poles computed: cl_rhp closed-loop and ol_rhp open-loop poles to the right,
 * cl_axis on the axis, and a Nyquist count n. */
static tb_stability counted(size_t cl_rhp, size_t cl_axis, size_t ol_rhp, long n)
{
    tb_stability st = {0};
    st.has_poles = true;
    st.cl_rhp = cl_rhp;
    st.cl_axis = cl_axis;
    st.ol_rhp = ol_rhp;
    st.has_nyquist = true;
    st.nyquist_n = n;
    return st;
}

/* Z = N + P holds: the verdict is the poles', nothing disagrees. */
static void test_nyquist_counts_agree(void **state)
{
    (void)state;
    tb_stability st = counted(2, 0, 0, 2); /* references.md check 8c: T0 = 10, three poles */
    tb_nyquist_verdict(&st, false);
    assert_int_equal(st.verdict, TB_VERDICT_UNSTABLE);
    assert_false(st.counts_disagree);
    st = counted(0, 0, 1, -1); /* an open-loop RHP pole encircled once counterclockwise */
    tb_nyquist_verdict(&st, false);
    assert_int_equal(st.verdict, TB_VERDICT_STABLE);
    assert_false(st.counts_disagree);
    assert_false(st.notes & (1u << TB_SNOTE_COUNTS_DISAGREE));
}

/* Z != N + P: the report says so and the worse verdict stands (a right-half-plane pole,
 * from either count, outranks everything). */
static void test_nyquist_counts_disagree_take_the_worse(void **state)
{
    (void)state;
    tb_stability st = counted(0, 0, 0, 2); /* poles: stable; Nyquist: Z = 2 */
    tb_nyquist_verdict(&st, false);
    assert_int_equal(st.pole_verdict, TB_VERDICT_STABLE);
    assert_int_equal(st.verdict, TB_VERDICT_UNSTABLE);
    assert_true(st.counts_disagree);
    assert_true(st.notes & (1u << TB_SNOTE_COUNTS_DISAGREE));
    st = counted(1, 0, 0, 0); /* poles: one to the right; Nyquist: none */
    tb_nyquist_verdict(&st, false);
    assert_int_equal(st.verdict, TB_VERDICT_UNSTABLE);
    assert_true(st.counts_disagree);
    st = counted(0, 0, 0, -1); /* N + P < 0 counts nothing: the poles decide */
    tb_nyquist_verdict(&st, false);
    assert_int_equal(st.verdict, TB_VERDICT_STABLE);
    assert_true(st.counts_disagree);
}

/* Poles on the axis (closed loop, or open loop away from s = 0): the plain contour runs
 * through them, so the counts are not compared; a right-half-plane pole still outranks. */
static void test_nyquist_axis_poles_not_compared(void **state)
{
    (void)state;
    tb_stability st = counted(0, 2, 0, 3);
    tb_nyquist_verdict(&st, false);
    assert_int_equal(st.verdict, TB_VERDICT_MARGINAL);
    assert_false(st.counts_disagree);
    assert_true(st.notes & (1u << TB_SNOTE_NYQUIST_ON_AXIS));
    st = counted(1, 2, 0, 0);
    tb_nyquist_verdict(&st, false);
    assert_int_equal(st.verdict, TB_VERDICT_UNSTABLE);
    st = counted(0, 0, 0, 1);
    tb_nyquist_verdict(&st, true);
    assert_int_equal(st.verdict, TB_VERDICT_STABLE);
    assert_false(st.counts_disagree);
}

/* Without poles the Nyquist count decides alone, assuming P = 0, and says so. */
static void test_nyquist_alone(void **state)
{
    (void)state;
    tb_stability st = {0};
    st.has_nyquist = true;
    st.nyquist_n = 1;
    tb_nyquist_verdict(&st, false);
    assert_int_equal(st.verdict, TB_VERDICT_UNSTABLE);
    assert_true(st.notes & (1u << TB_SNOTE_NYQUIST_ASSUMES_P0));
    st = (tb_stability){0};
    tb_nyquist_verdict(&st, false);
    assert_int_equal(st.verdict, TB_VERDICT_UNKNOWN);
}

/* Without poles, the argument principle's counts take their place: an open-loop
 * right-half-plane pole encircled once counterclockwise (Z = N + P = 0) is stable and
 * assumes nothing; a closed-loop count that N + P contradicts takes the worse verdict. */
static void test_nyquist_winding_counts(void **state)
{
    (void)state;
    tb_stability st = {0};
    st.has_nyquist = true;
    st.nyquist_n = -1;
    st.ol_count_by = TB_COUNT_WINDING;
    st.ol_rhp = 1;
    tb_nyquist_verdict(&st, false);
    assert_int_equal(st.verdict, TB_VERDICT_STABLE);
    assert_false(st.notes & (1u << TB_SNOTE_NYQUIST_ASSUMES_P0));
    st.cl_count_by = TB_COUNT_WINDING;
    st.nyquist_n = 1; /* N + P = 2, but the closed-loop count says 0 */
    st.notes = 0;
    tb_nyquist_verdict(&st, false);
    assert_int_equal(st.verdict, TB_VERDICT_UNSTABLE);
    assert_true(st.counts_disagree);
    assert_int_equal(st.pole_verdict, TB_VERDICT_STABLE);
    st = (tb_stability){0};
    st.has_nyquist = true;
    st.nyquist_n = 0;
    st.ol_count_by = TB_COUNT_WINDING;
    tb_nyquist_verdict(&st, true); /* open-loop zeros on the axis: N + P is no count */
    assert_int_equal(st.verdict, TB_VERDICT_UNKNOWN);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_nyquist_counts_agree),
        cmocka_unit_test(test_nyquist_counts_disagree_take_the_worse),
        cmocka_unit_test(test_nyquist_axis_poles_not_compared),
        cmocka_unit_test(test_nyquist_alone),
        cmocka_unit_test(test_nyquist_winding_counts),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
