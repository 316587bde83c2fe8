/* tests/test_poles.c: natural frequencies, their condition numbers and where they lie, against
 * LAPACK's own condition numbers and closed forms (sources named beside each check). */
#include "testutil.h"

#include <stdlib.h>

#include "circuit.h"
#include "mna.h"
#include "poles.h"
#include "solve.h"

/* LAPACK, to compute RCONDE the way LAPACK itself does (SENSE = 'E'). */
void dggevx_(const char *balanc, const char *jobvl, const char *jobvr, const char *sense,
             const int *n, double *a, const int *lda, double *b, const int *ldb, double *alphar,
             double *alphai, double *beta, double *vl, const int *ldvl, double *vr, const int *ldvr,
             int *ilo, int *ihi, double *lscale, double *rscale, double *abnrm, double *bbnrm,
             double *rconde, double *rcondv, double *work, const int *lwork, int *iwork, int *bwork,
             int *info, size_t balanc_len, size_t jobvl_len, size_t jobvr_len, size_t sense_len);

/* A circuit's mna, a solver on it and the check's buffer. */
typedef struct {
    tb_circuit *ckt;
    tb_mna *mna;
    tb_solver *solver;
    tb_pole_check check;
    tb_pole_found *poles;
    size_t count;
    double scale;
} fixture;

static void fixture_open(fixture *f, const char *text, bool from_file)
{
    tb_diag *diag = tb_diag_new();
    *f = (fixture){0};
    if (from_file)
        assert_int_equal(tb_circuit_read(text, diag, &f->ckt), TB_OK);
    else
        f->ckt = tu_parse(text);
    assert_int_equal(tb_mna_build(f->ckt, diag, &f->mna), TB_OK);
    assert_int_equal(tb_solver_new(f->mna, &f->solver), TB_OK);
    f->check = (tb_pole_check){f->solver, calloc(2 * f->mna->nnz, sizeof(double)), 0};
    f->poles = calloc(f->mna->n, sizeof(tb_pole_found));
    assert_non_null(f->check.Mx);
    assert_non_null(f->poles);
    assert_int_equal(tb_poles_find(f->mna, NULL, &f->check, NULL, 0, f->poles, NULL, &f->count, &f->scale), TB_OK);
    tb_diag_free(diag);
}

static void fixture_close(fixture *f)
{
    free(f->check.Mx);
    free(f->poles);
    tb_solver_free(f->solver);
    tb_mna_free(f->mna);
    tb_circuit_free(f->ckt);
}

/* LAPACK's RCONDE of every finite eigenvalue of the same scaled pencil (G/max|G|, -C/max|C|),
 * balanced, SENSE = 'E'; lam receives the eigenvalues in rad/s. Returns their number. */
static size_t lapack_rconde(const tb_mna *mna, double complex *lam, double *rconde)
{
    int n = (int)mna->n, ilo = 0, ihi = 0, info = 0, lwork = 2 * n * n + 12 * n + 16;
    double *A = calloc((size_t)(n * n), sizeof(double)), *B = calloc((size_t)(n * n), sizeof(double));
    double *v = calloc((size_t)(10 * n), sizeof(double)), *VL = calloc((size_t)(n * n), sizeof(double));
    double *VR = calloc((size_t)(n * n), sizeof(double)), *work = calloc((size_t)lwork, sizeof(double));
    int *iwork = calloc((size_t)(2 * n + 6), sizeof(int));
    double gmax = 0, cmax = 0, abnrm = 0, bbnrm = 0;
    for (int j = 0; j < n; j++)
        for (int k = mna->Ap[j]; k < mna->Ap[j + 1]; k++) {
            gmax = fmax(gmax, fabs(mna->Gx[k]));
            cmax = fmax(cmax, fabs(mna->Cx[k]));
        }
    for (int j = 0; j < n; j++)
        for (int k = mna->Ap[j]; k < mna->Ap[j + 1]; k++) {
            A[j * n + mna->Ai[k]] = mna->Gx[k] / gmax;
            B[j * n + mna->Ai[k]] = -mna->Cx[k] / cmax;
        }
    dggevx_("B", "V", "V", "E", &n, A, &n, B, &n, v, v + n, v + 2 * n, VL, &n, VR, &n, &ilo, &ihi, v + 3 * n,
            v + 4 * n, &abnrm, &bbnrm, v + 5 * n, v + 6 * n, work, &lwork, iwork, iwork + n + 6, &info, 1, 1, 1,
            1);
    assert_int_equal(info, 0);
    size_t count = 0;
    for (int j = 0; j < n; j++) {
        double complex alpha = CMPLX(v[j], v[n + j]);
        if (fabs(v[2 * n + j]) * TB_POLES_INFINITE > cabs(alpha)) {
            lam[count] = alpha / v[2 * n + j] * (gmax / cmax);
            rconde[count++] = v[5 * n + j];
        }
    }
    free(A);
    free(B);
    free(v);
    free(VL);
    free(VR);
    free(work);
    free(iwork);
    return count;
}

/* tbeta computes RCONDE from QZ's eigenvectors and the balancing scales instead of asking
 * dggevx for it (which costs a second eigenvector per eigenvalue): both must agree. */
static void test_poles_rcond_is_lapacks(void **state)
{
    (void)state;
    const char *files[] = {"tests/stab/stab_twopole.net", "tests/stab/stab_conditional.net",
                           "tests/stab/stab_slow_servo.net", "tests/stab/stab_minor_loop.net",
                           "tests/ref/ref_cfa_h.net", "netlists/photodiode_tia.net"};
    size_t compared = 0;
    for (size_t i = 0; i < sizeof files / sizeof files[0]; i++) {
        fixture f;
        fixture_open(&f, files[i], true);
        double complex lam[64];
        double rconde[64];
        assert_true(f.mna->n <= 64);
        size_t count = lapack_rconde(f.mna, lam, rconde);
        assert_int_equal(count, f.count);
        for (size_t p = 0; p < f.count; p++) {
            size_t best = 0;
            for (size_t q = 1; q < count; q++)
                if (cabs(lam[q] - f.poles[p].s) < cabs(lam[best] - f.poles[p].s))
                    best = q;
            if (rconde[best] > 1e-6) { /* a multiple eigenvalue's is zero up to its own rounding */
                tu_close(f.poles[p].rcond, rconde[best], 1e-6);
                compared++;
            }
        }
        fixture_close(&f);
    }
    assert_true(compared >= 15); /* 17 poles of these netlists are simple */
}

/* A parallel RLC tank with Q = 1e10 (R = 1e10 sqrt(L/C)): poles -1/(2RC) +- j sqrt(1/LC -
 * 1/(2RC)^2) (second-order section, from memory), |Re s|/|s| = 5e-11. A tolerance of
 * 1e-9 |s| called this the axis; the circuit resolves it: left, refined on the circuit. */
static void test_poles_high_q_tank_is_left(void **state)
{
    (void)state;
    double L = 1e-3, C = 1e-6, R = 1e10 * sqrt(L / C);
    char text[256];
    snprintf(text, sizeof text,
             "tank\nI1 0 a AC 1\nL1 a 0 %.17g\nC1 a 0 %.17g\nR1 a 0 %.17g\nE1 o 0 a 0 1\nRL o 0 1k\n"
             ".loop E1\n.ac dec 5 1 1meg\n",
             L, C, R);
    fixture f;
    fixture_open(&f, text, false);
    double sigma = 1 / (2 * R * C), wd = sqrt(1 / (L * C) - sigma * sigma);
    assert_int_equal(f.count, 2);
    for (size_t i = 0; i < 2; i++) {
        assert_int_equal(f.poles[i].place, TB_POLE_LEFT);
        tu_close(creal(f.poles[i].s), -sigma, 1e-3);
        tu_close(fabs(cimag(f.poles[i].s)), wd, 1e-12);
    }
    fixture_close(&f);
    /* without R the poles are on the axis: +- j/sqrt(LC) exactly */
    fixture_open(&f, "tank\nI1 0 a AC 1\nL1 a 0 1m\nC1 a 0 1u\nE1 o 0 a 0 1\nRL o 0 1k\n.loop E1\n.ac dec 5 1 1meg\n",
                 false);
    assert_int_equal(f.count, 2);
    assert_int_equal(f.poles[0].place, TB_POLE_AXIS);
    assert_int_equal(f.poles[1].place, TB_POLE_AXIS);
    assert_true(f.poles[0].checked);
    fixture_close(&f);
}

/* Poles far below max|G|/max|C| (a 1e6 gain next to microfarads): stab_slow_servo's
 * closed loop (1 + 2s)(Gy + 1u s) + 10/(1e6 + 1) = 0 (its header; quadratic formula). */
static void test_poles_slow_poles_are_left(void **state)
{
    (void)state;
    fixture f;
    fixture_open(&f, "tests/stab/stab_slow_servo.net", true);
    double gy = 1 / 100e3 + 1 / (1e6 + 1), a = 2e-6, b = 2 * gy + 1e-6, c = gy + 10 / (1e6 + 1);
    double r1 = (-b + sqrt(b * b - 4 * a * c)) / (2 * a), r2 = (-b - sqrt(b * b - 4 * a * c)) / (2 * a);
    assert_true(f.scale > 1e11); /* the old tolerance, 1e-11 scale, reached 1 rad/s */
    assert_int_equal(f.count, 2);
    for (size_t i = 0; i < 2; i++) {
        double s = creal(f.poles[i].s);
        assert_int_equal(f.poles[i].place, TB_POLE_LEFT);
        assert_true(fabs(s - r1) <= 1e-10 * fabs(r1) || fabs(s - r2) <= 1e-10 * fabs(r2));
    }
    fixture_close(&f);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_poles_rcond_is_lapacks),
        cmocka_unit_test(test_poles_high_q_tank_is_left),
        cmocka_unit_test(test_poles_slow_poles_are_left),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
