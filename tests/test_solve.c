/* tests/test_solve.c: the KLU wrapper: refactor reuses the pivot order, a degraded
 * refactor falls back to a pivoting factorization, singular matrices name the column, a real
 * factorization lives beside the complex one. Expected solutions by Cramer's rule on 2x2
 * systems (exact closed form). */
#include "testutil.h"

#include "mna.h"
#include "solve.h"

/* A dense 2x2 pattern in CSC: column 0 rows {0,1}, column 1 rows {0,1}. */
static int Ap[] = {0, 2, 4};
static int Ai[] = {0, 1, 0, 1};

static tb_mna two_by_two(void)
{
    tb_mna m = {0};
    m.n = 2;
    m.nnz = 4;
    m.Ap = Ap;
    m.Ai = Ai;
    return m;
}

/* Mx for [[a, b], [c, d]] (real), CSC order a, c, b, d. */
static void values(double a, double b, double c, double d, double *Mx)
{
    double v[4] = {a, c, b, d};
    for (int k = 0; k < 4; k++) {
        Mx[2 * k] = v[k];
        Mx[2 * k + 1] = 0;
    }
}

static void check_solution(tb_solver *s, double a, double b, double c, double d)
{
    double complex x[2] = {1, 2};
    assert_int_equal(tb_solver_solve(s, x, 1), TB_OK);
    double det = a * d - b * c;
    tu_close(x[0], (1 * d - b * 2) / det, 1e-12);
    tu_close(x[1], (a * 2 - c * 1) / det, 1e-12);
}

/* Factors [[4, 1], [1, 3]] (diagonal pivots), refactors [[a, b], [c, d]] and
 * checks the solution and how many pivoted factorizations that took. */
static void refactor_case(double a, double b, double c, double d, size_t factorizations)
{
    tb_mna m = two_by_two();
    tb_solver *s = NULL;
    double Mx[8];
    size_t culprit = 0;
    assert_int_equal(tb_solver_new(&m, &s), TB_OK);
    values(4, 1, 1, 3, Mx);
    assert_int_equal(tb_solver_factor(s, Mx, &culprit), TB_OK);
    values(a, b, c, d, Mx);
    assert_int_equal(tb_solver_refactor(s, Mx, 1e-6, &culprit), TB_OK);
    assert_int_equal(tb_solver_factor_count(s), factorizations);
    check_solution(s, a, b, c, d);
    tb_solver_free(s);
}

static void test_solve_refactor_keeps_pivots(void **state)
{
    (void)state;
    refactor_case(5, 1, 2, 3, 1);
}

/* The first pivot order takes a11; at the second point a11 is 1e-15 and the
 * reused order would divide by it: the wrapper must pivot again. */
static void test_solve_degraded_refactor_pivots_again(void **state)
{
    (void)state;
    refactor_case(1e-15, 1, 1, 3, 2);
}

static void test_solve_singular_names_column(void **state)
{
    (void)state;
    tb_mna m = two_by_two();
    tb_solver *s = NULL;
    double Mx[8];
    size_t culprit = 99;
    assert_int_equal(tb_solver_new(&m, &s), TB_OK);
    values(1, 0, 2, 0, Mx); /* column 1 is zero */
    assert_int_equal(tb_solver_factor(s, Mx, &culprit), TB_ERR_SINGULAR);
    assert_int_equal(culprit, 1);
    /* a singular refactor after a good factorization is reported too */
    values(4, 1, 1, 3, Mx);
    assert_int_equal(tb_solver_factor(s, Mx, &culprit), TB_OK);
    values(1, 2, 2, 4, Mx);
    assert_int_equal(tb_solver_refactor(s, Mx, 1e-6, &culprit), TB_ERR_SINGULAR);
    tb_solver_free(s);
}

/* A real factorization beside the complex one: each solves its own matrix (Cramer's rule);
 * a singular real matrix names its column; solving before any real factorization is refused. */
static void test_solve_real_beside_complex(void **state)
{
    (void)state;
    tb_mna m = two_by_two();
    tb_solver *s = NULL;
    double Mx[8];
    size_t culprit = 99;
    assert_int_equal(tb_solver_new(&m, &s), TB_OK);
    double B[2] = {1, 2};
    assert_int_equal(tb_solver_solve_real(s, B, 1), TB_ERR_NUMERIC);
    values(4, 1, 1, 3, Mx);
    assert_int_equal(tb_solver_factor(s, Mx, &culprit), TB_OK);
    double Ax[4] = {2, 5, 7, 1}; /* [[2, 7], [5, 1]] in CSC order */
    assert_int_equal(tb_solver_factor_real(s, Ax, &culprit), TB_OK);
    assert_int_equal(tb_solver_solve_real(s, B, 1), TB_OK);
    double det = 2 * 1 - 7 * 5;
    tu_close(B[0], (1 * 1 - 7 * 2) / det, 1e-12);
    tu_close(B[1], (2 * 2 - 5 * 1) / det, 1e-12);
    check_solution(s, 4, 1, 1, 3); /* the complex factorization is untouched */
    double singular_Ax[4] = {1, 2, 0, 0}; /* column 1 is zero */
    assert_int_equal(tb_solver_factor_real(s, singular_Ax, &culprit), TB_ERR_SINGULAR);
    assert_int_equal(culprit, 1);
    tb_solver_free(s);
}

/* The real refactor: on the held pivot order while its pivots hold (Cramer's rule on the
 * new matrix, no pivoted factorization counted), pivoted again when a reused pivot has
 * collapsed (1e-15 in the place of 4), with nothing held it pivots. */
static void real_solution(tb_solver *s, const double *Ax)
{
    double B[2] = {1, 2};
    assert_int_equal(tb_solver_solve_real(s, B, 1), TB_OK);
    double a = Ax[0], c = Ax[1], b = Ax[2], d = Ax[3], det = a * d - b * c;
    tu_close(B[0], (1 * d - b * 2) / det, 1e-12);
    tu_close(B[1], (a * 2 - c * 1) / det, 1e-12);
}

static void test_solve_real_refactor(void **state)
{
    (void)state;
    tb_mna m = two_by_two();
    tb_solver *s = NULL;
    size_t culprit = 99;
    assert_int_equal(tb_solver_new(&m, &s), TB_OK);
    double first[4] = {4, 1, 1, 3}; /* [[4, 1], [1, 3]] in CSC order */
    assert_int_equal(tb_solver_refactor_real(s, first, 1e-3, &culprit), TB_OK);
    assert_int_equal(tb_solver_get_counts(s).pivoted, 1);
    real_solution(s, first);
    double second[4] = {5, 2, 1, 3};
    assert_int_equal(tb_solver_refactor_real(s, second, 1e-3, &culprit), TB_OK);
    assert_int_equal(tb_solver_get_counts(s).pivoted, 1);
    assert_int_equal(tb_solver_get_counts(s).numeric, 2);
    real_solution(s, second);
    double collapsed[4] = {1e-15, 1, 1, 3};
    assert_int_equal(tb_solver_refactor_real(s, collapsed, 1e-3, &culprit), TB_OK);
    assert_int_equal(tb_solver_get_counts(s).pivoted, 2);
    real_solution(s, collapsed);
    double singular[4] = {1, 2, 0, 0};
    assert_int_equal(tb_solver_refactor_real(s, singular, 1e-3, &culprit), TB_ERR_SINGULAR);
    assert_int_equal(culprit, 1);
    tb_solver_free(s);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_solve_refactor_keeps_pivots),
        cmocka_unit_test(test_solve_degraded_refactor_pivots_again),
        cmocka_unit_test(test_solve_singular_names_column),
        cmocka_unit_test(test_solve_real_beside_complex),
        cmocka_unit_test(test_solve_real_refactor),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
