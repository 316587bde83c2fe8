/* tests/test_ref_dense.c: T, A, A_inf and A0 checked against dense LAPACK computations
 * that use none of tbeta's rank-one formulas:
 *  - T + 1 = det M / det M0 (Bode's return difference as a determinant ratio;
 *    references.md section 1, W.-K. Chen "General feedback theory"), with M0 the
 *    matrix of the same netlist re-read with the marked gain written as 0;
 *  - T = k v' M0^-1 u by a separate dense solve with M0 (test-source definition);
 *  - A0 by a dense solve of the k = 0 netlist; A by a dense solve of M;
 *  - A_inf by a bordered (nullor) solve [M0 u; v' 0] (references.md section 2);
 *  - ln det M and arg det M from KLU's factors against the dense LU's.
 * LAPACK zgetrf/zgetrs (Debian's liblapack / OpenBLAS) do the dense work. */
#include "testutil.h"

#include <stdlib.h>

#include "circuit.h"
#include "grid.h"
#include "loop.h"
#include "mna.h"
#include "solve.h"
#include "sweep.h"

void zgetrf_(const int *m, const int *n, double complex *a, const int *lda, int *ipiv, int *info);
void zgetrs_(const char *trans, const int *n, const int *nrhs, const double complex *a,
             const int *lda, const int *ipiv, double complex *b, const int *ldb, int *info,
             size_t trans_len);

typedef struct {
    size_t n;
    double complex *lu;
    int *ipiv;
} dense_lu;

static dense_lu dense_factor(const double complex *M, size_t n)
{
    dense_lu f = {n, malloc(n * n * sizeof(double complex)), malloc(n * sizeof(int))};
    assert_non_null(f.lu);
    assert_non_null(f.ipiv);
    memcpy(f.lu, M, n * n * sizeof(double complex));
    int ni = (int)n;
    int info = 0;
    zgetrf_(&ni, &ni, f.lu, &ni, f.ipiv, &info);
    assert_int_equal(info, 0);
    return f;
}

static void dense_solve(const dense_lu *f, double complex *b)
{
    int ni = (int)f->n;
    int one = 1;
    int info = 0;
    zgetrs_("N", &ni, &one, f->lu, &ni, f->ipiv, b, &ni, &info, 1);
    assert_int_equal(info, 0);
}

/* log det as (sum log|u_ii|, sum arg u_ii + pi per row swap): ratios without overflow */
static double complex log_det(const dense_lu *f)
{
    double complex s = 0;
    for (size_t i = 0; i < f->n; i++) {
        s += clog(f->lu[i * f->n + i]);
        if (f->ipiv[i] != (int)i + 1)
            s += I * TU_PI;
    }
    return s;
}

static void dense_free(dense_lu *f)
{
    free(f->lu);
    free(f->ipiv);
}

static double complex svec_dot(const tb_svec *s, const double complex *x)
{
    return tb_svec_dot(s, x);
}

/* Reference values of loop 0 of `with` at omega; `zero` is the same netlist with gain 0. */
typedef struct {
    double complex T_det, T_solve, A, A0, A_inf;
} reference;

static reference compute_reference(const tb_mna *mk, const tb_mna *m0, double omega)
{
    size_t n = mk->n;
    assert_int_equal(m0->n, n);
    double complex *M = malloc(n * n * sizeof(double complex));
    double complex *M0 = malloc(n * n * sizeof(double complex));
    double complex *y = calloc(n + 1, sizeof(double complex));
    double complex *bord = calloc((n + 1) * (n + 1), sizeof(double complex));
    assert_true(M && M0 && y && bord);
    tb_mna_dense(mk, omega, M);
    tb_mna_dense(m0, omega, M0);
    dense_lu fm = dense_factor(M, n);
    dense_lu f0 = dense_factor(M0, n);
    reference r;
    r.T_det = cexp(log_det(&fm) - log_det(&f0)) - 1.0;
    const tb_loopvec *lv = &mk->loops[0];
    /* T = k v' M0^-1 u */
    memset(y, 0, n * sizeof(double complex));
    tb_svec_axpy(&lv->u, 1.0, y);
    dense_solve(&f0, y);
    r.T_solve = lv->k * svec_dot(&lv->v, y);
    /* A and A0 */
    memset(y, 0, n * sizeof(double complex));
    tb_svec_axpy(&mk->b, 1.0, y);
    dense_solve(&fm, y);
    r.A = svec_dot(&mk->c, y);
    memset(y, 0, n * sizeof(double complex));
    tb_svec_axpy(&mk->b, 1.0, y);
    dense_solve(&f0, y);
    r.A0 = svec_dot(&mk->c, y);
    /* bordered nullor system */
    for (size_t j = 0; j < n; j++)
        memcpy(bord + j * (n + 1), M0 + j * n, n * sizeof(double complex));
    for (int i = 0; i < lv->u.count; i++)
        bord[n * (n + 1) + lv->u.idx[i]] = lv->u.coef[i];
    for (int i = 0; i < lv->v.count; i++)
        bord[lv->v.idx[i] * (n + 1) + n] = lv->v.coef[i];
    dense_lu fb = dense_factor(bord, n + 1);
    memset(y, 0, (n + 1) * sizeof(double complex));
    tb_svec_axpy(&mk->b, 1.0, y);
    dense_solve(&fb, y);
    r.A_inf = svec_dot(&mk->c, y);
    dense_free(&fm);
    dense_free(&f0);
    dense_free(&fb);
    free(M);
    free(M0);
    free(y);
    free(bord);
    return r;
}

static tb_circuit *parse_gain(const char *fmt, double k)
{
    char text[4096];
    snprintf(text, sizeof text, fmt, k);
    return tu_parse(text);
}

static tb_mna *build(const tb_circuit *ckt)
{
    tb_mna *m = NULL;
    assert_int_equal(tb_mna_build(ckt, NULL, &m), TB_OK);
    return m;
}

/* Compares tbeta's loop 0 with the dense references at DC and every sweep point. */
static void check_netlist(const char *fmt, double k)
{
    tb_circuit *ck = parse_gain(fmt, k);
    tb_circuit *c0 = parse_gain(fmt, 0.0);
    tb_mna *mk = build(ck);
    tb_mna *m0 = build(c0);
    tb_result *res = NULL;
    assert_int_equal(tb_analyse(ck, NULL, NULL, &res), TB_OK);
    size_t np = tb_result_points(res);
    const tb_point *pts = tb_result_loop(res, 0);
    for (size_t i = 0; i <= np; i++) {
        tb_point p;
        double omega = 0;
        if (i == np) {
            assert_true(tb_result_dc(res, 0, &p));
        } else {
            p = pts[i];
            omega = 2.0 * TU_PI * tb_result_freqs(res)[i];
        }
        reference r = compute_reference(mk, m0, omega);
        assert_int_equal(p.flags, 0);
        tu_close(p.T, r.T_det, 1e-9);
        tu_close(p.T, r.T_solve, 1e-9);
        tu_close(p.A, r.A, 1e-9);
        tu_close(p.A0, r.A0, 1e-9);
        tu_close(p.A_inf, r.A_inf, 1e-9);
        tu_close(p.a, r.A_inf * r.T_solve, 1e-9);
    }
    tb_result_free(res);
    tb_mna_free(mk);
    tb_mna_free(m0);
    tb_circuit_free(ck);
    tb_circuit_free(c0);
}

/* Non-inverting stage with source, input, output and load resistances and a
 * pole (references.md check 2a' plus an RC pole): VCVS loop source. */
static const char noninv[] = "loaded non-inverting stage\n"
                             "Vs vs 0 AC 1\nRs vs p 10k\nRi p n 100k\n"
                             "E1 x 0 p n %.17g\nRo x y 1k\nCo y 0 1n\nRL y 0 2k\n"
                             "R2 y n 9k\nR1 n 0 1k\nCf y n 2p\n"
                             ".ac dec 3 10 100meg\n.loop E1\n.io Vs v(y)\n";

static void test_ref_dense_vcvs_gain_1e3(void **state)
{
    (void)state;
    check_netlist(noninv, 1e3);
}

static void test_ref_dense_vcvs_gain_1e7(void **state)
{
    (void)state;
    check_netlist(noninv, 1e7);
}

/* The largest amplifier gain tbeta promises A0 for (T about 5e7 at DC). */
static void test_ref_dense_vcvs_gain_1e9(void **state)
{
    (void)state;
    check_netlist(noninv, 1e9);
}

/* Transistor-like stage with feedthrough (references.md check 2c) plus capacitances. */
static const char vccs[] = "shunt-shunt gm stage with feedthrough\n"
                           "Vs vs 0 AC 1\nRs vs g 1k\nRF g d 10k\nCF g d 0.5p\nRD d 0 10k\n"
                           "Cg g 0 2p\nG1 d 0 g 0 %.17g\n"
                           ".ac dec 4 1k 10g\n.loop G1\n.io Vs v(d)\n";

static void test_ref_dense_vccs_feedthrough(void **state)
{
    (void)state;
    check_netlist(vccs, 10e-3);
    check_netlist(vccs, 1e3); /* gm so large that T is about 5e5 */
}

/* Current-controlled loop source (F) with an inductor, current output i(Vo). */
static const char cccs[] = "current mirror loop\n"
                           "Iin 0 a AC 1\nRa a 0 1k\nVsen a b 0\nLb b 0 1m\nRb b 0 50\n"
                           "F1 c 0 Vsen %.17g\nRc c e 200\nVo e 0 0\nRfb c a 5k\n"
                           ".ac oct 2 100 100meg\n.loop F1\n.io Iin i(Vo)\n";

static void test_ref_dense_cccs(void **state)
{
    (void)state;
    check_netlist(cccs, 20.0);
}

/* Current-controlled voltage source (H) as a transresistance loop, differential output. */
static const char ccvs[] = "transresistance loop\n"
                           "Vs s 0 AC 1\nRs s a 2k\nCa a 0 10p\nVsen a m 0\nRm m 0 100\n"
                           "H1 o 0 Vsen %.17g\nRo o p 50\nRL p q 1k\nRq q 0 500\nRf p a 20k\n"
                           ".ac lin 7 1k 50meg\n.loop H1\n.io Vs v(p,q)\n";

static void test_ref_dense_ccvs(void **state)
{
    (void)state;
    check_netlist(ccvs, -1e5);
}

/* The largest relative error, against the dense T = k v' M0^-1 u, of T = q/(1 - q) from the
 * rank-one update alone (q = k v'M^-1 u from one solve on M, no refinement), over DC and
 * the grid of netlist fmt at gain k. */
static double unrefined_error(const char *fmt, double k)
{
    tb_circuit *ck = parse_gain(fmt, k);
    tb_circuit *c0 = parse_gain(fmt, 0.0);
    tb_mna *mk = build(ck);
    tb_mna *m0 = build(c0);
    size_t np = tb_grid_count(&ck->ac);
    double *freqs = malloc((np + 1) * sizeof(double));
    double *Mx = malloc(2 * mk->nnz * sizeof(double));
    assert_true(freqs && Mx);
    freqs[0] = 0;
    tb_grid_fill(&ck->ac, freqs + 1);
    tb_solver *solver = NULL;
    tb_loop_work *work = NULL;
    assert_int_equal(tb_solver_new(mk, &solver), TB_OK);
    assert_int_equal(tb_loop_work_new(mk, &work), TB_OK);
    double worst = 0;
    for (size_t i = 0; i <= np; i++) {
        double omega = 2.0 * TU_PI * freqs[i];
        size_t culprit = 0;
        double complex q = 0;
        tb_mna_values(mk, omega, Mx);
        assert_int_equal(tb_solver_factor(solver, Mx, &culprit), TB_OK);
        assert_int_equal(tb_loop_q(mk, solver, work, 0, &q), TB_OK);
        reference r = compute_reference(mk, m0, omega);
        double err = cabs(q / (1.0 - q) - r.T_solve) / cabs(r.T_solve);
        worst = err > worst ? err : worst;
    }
    tb_loop_work_free(work);
    tb_solver_free(solver);
    free(freqs);
    free(Mx);
    tb_mna_free(mk);
    tb_mna_free(m0);
    tb_circuit_free(ck);
    tb_circuit_free(c0);
    return worst;
}

/* The rank-one update loses digits of T where 1 - q cancels (T about 5e7 at gain 1e9): there
 * q/(1 - q) alone misses the dense reference by more than the 1e-9 the tests ask, so
 * test_ref_dense_vcvs_gain_1e9 passes only if the backward-error estimate asks for the
 * refinement at those points (docs/algebra.md, "Accuracy"). At gain 1e3 the update alone
 * is within the goal, and the estimate may skip the step. */
static void test_ref_dense_update_loses_digits(void **state)
{
    (void)state;
    assert_true(unrefined_error(noninv, 1e9) > 1e-9);
    assert_true(unrefined_error(noninv, 1e3) < 1e-9);
    check_netlist(noninv, 1e9);
}

/* An error amplifier, a dominant pole and four segments of RC line each driven by a unity
 * buffer, the far end fed back (the benchmark's buffered line, small): T(0) equals the gain,
 * and the output is reached only through the amplifier, so A0 = 0 whatever the values; the
 * dense solve of the gain-zero netlist says the same. The grid stops at 100 kHz: above, |T| falls
 * below 0.02 and the reference det M / det M0 - 1 itself cancels. */
static const char buffered[] = "buffered line\n"
                               "VIN in 0 AC 1\nEA a 0 in fb %.17g\nRD a d 1k\nCD d 0 159.1549431u\n"
                               "EB1 m1 0 d 0 1\nR11 m1 m2 10\nC12 m2 0 0.1p\nR12 m2 m3 10\nC13 m3 0 0.1p\n"
                               "EB2 p1 0 m3 0 1\nR21 p1 p2 10\nC22 p2 0 0.1p\nR22 p2 p3 10\nC23 p3 0 0.1p\n"
                               "EB3 s1 0 p3 0 1\nR31 s1 s2 10\nC32 s2 0 0.1p\nR32 s2 s3 10\nC33 s3 0 0.1p\n"
                               "EB4 t1 0 s3 0 1\nR41 t1 t2 10\nC42 t2 0 0.1p\nR42 t2 fb 10\nC43 fb 0 0.1p\n"
                               ".ac dec 5 1 100k\n.loop EA\n.io VIN v(fb)\n";

static void test_ref_dense_buffered_nil_feedthrough(void **state)
{
    (void)state;
    check_netlist(buffered, 2000.0);
    check_netlist(buffered, 2e7);
    tb_circuit *ckt = parse_gain(buffered, 2000.0);
    tb_mna *mna = build(ckt);
    assert_true(mna->loops[0].feed_nil);
    tb_result *res = NULL;
    assert_int_equal(tb_analyse(ckt, NULL, NULL, &res), TB_OK);
    for (size_t i = 0; i < tb_result_points(res); i++)
        assert_true(tb_result_loop(res, 0)[i].A0 == 0);
    tb_result_free(res);
    tb_mna_free(mna);
    tb_circuit_free(ckt);
}

/* ln det M and arg det M from KLU's factors (tb_solver_log_det: U's diagonal, the row
 * scale factors, the signs of the permutations) against LAPACK's dense LU of the same
 * M (zgetrf: sum of ln u_ii, pi per row interchange) at DC and every grid point of the
 * netlist, the first point factored with pivoting and the others refactored. */
static void check_log_det(const char *fmt, double k)
{
    tb_circuit *ckt = parse_gain(fmt, k);
    tb_mna *mna = build(ckt);
    size_t np = tb_grid_count(&ckt->ac);
    double *f = malloc((np + 1) * sizeof(double));
    double *Mx = malloc(2 * mna->nnz * sizeof(double));
    double complex *M = malloc(mna->n * mna->n * sizeof(double complex));
    assert_true(f && Mx && M);
    f[0] = 0.0;
    tb_grid_fill(&ckt->ac, f + 1);
    tb_solver *solver = NULL;
    assert_int_equal(tb_solver_new(mna, &solver), TB_OK);
    for (size_t i = 0; i <= np; i++) {
        double omega = 2.0 * TU_PI * f[i];
        size_t culprit = 0;
        tb_mna_values(mna, omega, Mx);
        if (i < 2)
            assert_int_equal(tb_solver_factor(solver, Mx, &culprit), TB_OK);
        else
            assert_int_equal(tb_solver_refactor(solver, Mx, 1e-6, &culprit), TB_OK);
        double log_abs = 0, arg = 0;
        assert_int_equal(tb_solver_log_det(solver, &log_abs, &arg), TB_OK);
        tb_mna_dense(mna, omega, M);
        dense_lu lu = dense_factor(M, mna->n);
        double complex want = log_det(&lu);
        dense_free(&lu);
        assert_true(fabs(log_abs - creal(want)) <= 1e-10 * fmax(1.0, fabs(creal(want))));
        double darg = remainder(arg - cimag(want), 2.0 * TU_PI);
        if (!(fabs(darg) <= 1e-9)) {
            print_error("%s at %g Hz: arg det %.15g, LAPACK %.15g\n", fmt, f[i], arg, cimag(want));
            fail();
        }
        assert_true(arg > -TU_PI && arg <= TU_PI);
    }
    tb_solver_free(solver);
    free(f);
    free(Mx);
    free(M);
    tb_mna_free(mna);
    tb_circuit_free(ckt);
}

static void test_ref_dense_log_det(void **state)
{
    (void)state;
    check_log_det(noninv, 1e3);
    check_log_det(noninv, 1e9);
    check_log_det(noninv, -3.0); /* positive feedback: det M changes sign along the real axis */
    check_log_det(vccs, 10e-3);
    check_log_det(cccs, 20.0);
    check_log_det(ccvs, -1e5);
}

/* No factorization held: no determinant. */
static void test_ref_dense_log_det_needs_factors(void **state)
{
    (void)state;
    tb_circuit *ckt = parse_gain(noninv, 1e3);
    tb_mna *mna = build(ckt);
    tb_solver *solver = NULL;
    assert_int_equal(tb_solver_new(mna, &solver), TB_OK);
    double log_abs = 0, arg = 0;
    assert_int_equal(tb_solver_log_det(solver, &log_abs, &arg), TB_ERR_NOT_FOUND);
    tb_solver_free(solver);
    tb_mna_free(mna);
    tb_circuit_free(ckt);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_ref_dense_vcvs_gain_1e3),
        cmocka_unit_test(test_ref_dense_vcvs_gain_1e7),
        cmocka_unit_test(test_ref_dense_vcvs_gain_1e9),
        cmocka_unit_test(test_ref_dense_vccs_feedthrough),
        cmocka_unit_test(test_ref_dense_cccs),
        cmocka_unit_test(test_ref_dense_ccvs),
        cmocka_unit_test(test_ref_dense_log_det),
        cmocka_unit_test(test_ref_dense_log_det_needs_factors),
        cmocka_unit_test(test_ref_dense_update_loses_digits),
        cmocka_unit_test(test_ref_dense_buffered_nil_feedthrough),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
