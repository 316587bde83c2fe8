/* src/krylov.c: poles of a large circuit near a shift, by shift-invert Krylov-Schur on KLU's factors */
#include "krylov.h"

#include <math.h>
#include <string.h>

#include "alloc.h"
#include "units.h"

/* LAPACK (Fortran calling convention; LOGICAL as int). */
void zgees_(const char *jobvs, const char *sort, int (*select)(const double complex *), const int *n,
            double complex *a, const int *lda, int *sdim, double complex *w, double complex *vs, const int *ldvs,
            double complex *work, const int *lwork, double *rwork, int *bwork, int *info);
void ztrsen_(const char *job, const char *compq, const int *select, const int *n, double complex *t, const int *ldt,
             double complex *q, const int *ldq, double complex *w, int *m, double *s, double *sep,
             double complex *work, const int *lwork, int *info);

/* BLAS: y = alpha op(A) x + beta y. */
void zgemm_(const char *transa, const char *transb, const int *m, const int *n, const int *k,
            const double complex *alpha, const double complex *a, const int *lda, const double complex *b,
            const int *ldb, const double complex *beta, double complex *c, const int *ldc);
void zgemv_(const char *trans, const int *m, const int *n, const double complex *alpha, const double complex *a,
            const int *lda, const double complex *x, const int *incx, const double complex *beta, double complex *y,
            const int *incy);

enum { M = TB_KRYLOV_DIM, LD = TB_KRYLOV_DIM + 1, LWORK = 4 * TB_KRYLOV_DIM * TB_KRYLOV_DIM };

/* The iteration's storage: V (n x (M + 1), column-major) and the small matrices. */
typedef struct {
    const tb_mna *mna;
    tb_probe *probe;
    const tb_loopvec *open;     /* the loop whose gain is at zero, or NULL */
    tb_solver *solver;
    size_t n;
    double complex *V;
    double complex H[LD * M];   /* OP V_m = V_{m+1} H, column-major, leading dimension LD */
    double complex T[M * M];    /* Schur form of H's top m x m */
    double complex Z[M * M];    /* its Schur vectors */
    double complex mu[M];
    double complex work[LWORK];
    double rwork[M];
    int bwork[M];
    int select[M];
    size_t solves;
} kwork;

/* w = (G + sigma C)^-1 C x on the held factorization. */
static tb_status apply(kwork *k, const double complex *x, double complex *w)
{
    const tb_mna *mna = k->mna;
    memset(w, 0, k->n * sizeof(double complex));
    for (size_t j = 0; j < k->n; j++)
        for (int p = mna->Ap[j]; p < mna->Ap[j + 1]; p++)
            w[mna->Ai[p]] += mna->Cx[p] * x[j];
    k->solves++;
    return tb_solver_solve(k->solver, w, 1) ? TB_ERR_NUMERIC : TB_OK;
}

static double norm(const double complex *x, size_t n)
{
    double s = 0;
    for (size_t i = 0; i < n; i++)
        s += creal(x[i]) * creal(x[i]) + cimag(x[i]) * cimag(x[i]);
    return sqrt(s);
}

static double norm(const double complex *x, size_t n);

/* Orthogonalizes w against V's columns 0..j (classical Gram-Schmidt as two BLAS products),
 * adding the coefficients to H's column j; a second pass only where the first cancelled
 * most of w (the DGKS criterion, |w| after below |w| before / sqrt 2: J. W. Daniel,
 * W. B. Gragg, L. Kaufman, G. W. Stewart, Reorthogonalization and stable algorithms for
 * updating the Gram-Schmidt QR factorization, Math. Comp. 30 (1976) 772-795). */
static void orthogonalize(kwork *k, size_t j, double complex *w)
{
    int n = (int)k->n, cols = (int)j + 1, one = 1;
    const double complex unit = 1, zero = 0, minus = -1;
    double before = norm(w, k->n);
    for (int pass = 0; pass < 2; pass++) {
        double complex h[LD];
        zgemv_("C", &n, &cols, &unit, k->V, &n, w, &one, &zero, h, &one);
        zgemv_("N", &n, &cols, &minus, k->V, &n, h, &one, &unit, w, &one);
        for (size_t i = 0; i <= j; i++)
            k->H[i + j * LD] += h[i];
        double after = norm(w, k->n);
        if (after >= before * 0.70710678118654752440)
            break;
        before = after;
    }
}

/* Arnoldi steps from column first to M - 1; *dim is where it stopped (M, or
 * less where the subspace became invariant exactly or filled C^n: then *beta is
 * 0). A remainder that is merely small is normalized and followed: declaring
 * invariance on a relative threshold would call poorly resolved Ritz values of
 * a wide spectrum exact. */
static tb_status extend(kwork *k, size_t first, size_t *dim, double *beta)
{
    for (size_t j = first; j < M; j++) {
        double complex *w = k->V + (j + 1) * k->n;
        tb_status st = apply(k, k->V + j * k->n, w);
        if (st)
            return st;
        orthogonalize(k, j, w);
        double b = norm(w, k->n);
        if (!isfinite(b))
            return TB_ERR_NUMERIC;
        if (b == 0 || j + 1 >= k->n) { /* the whole invariant subspace (or all of C^n) */
            *dim = j + 1;
            *beta = 0;
            return TB_OK;
        }
        k->H[j + 1 + j * LD] = b;
        for (size_t r = 0; r < k->n; r++)
            w[r] /= b;
        *beta = b;
    }
    *dim = M;
    return TB_OK;
}

/* The Schur form of H's top dim x dim with the keep largest |mu| moved to the top. */
static tb_status schur(kwork *k, int dim, int keep)
{
    for (int c = 0; c < dim; c++)
        for (int r = 0; r < dim; r++)
            k->T[r + c * dim] = k->H[r + c * LD];
    int sdim = 0, info = 0, lwork = LWORK;
    zgees_("V", "N", NULL, &dim, k->T, &dim, &sdim, k->mu, k->Z, &dim, k->work, &lwork, k->rwork, k->bwork, &info);
    if (info)
        return TB_ERR_NUMERIC;
    for (int i = 0; i < dim; i++) { /* select the keep largest */
        int larger = 0;
        for (int j = 0; j < dim; j++)
            larger += cabs(k->mu[j]) > cabs(k->mu[i]) || (cabs(k->mu[j]) == cabs(k->mu[i]) && j < i);
        k->select[i] = larger < keep;
    }
    int m = 0;
    double s = 0, sep = 0;
    ztrsen_("N", "V", k->select, &dim, k->T, &dim, k->Z, &dim, k->mu, &m, &s, &sep, k->work, &lwork, &info);
    return info ? TB_ERR_NUMERIC : TB_OK;
}

/* Residual of the Ritz pair i (i < dim): the eigenvector t of T's leading upper
 * triangle for T_ii by back substitution, then |beta Z(dim-1, :) t| / (|mu| ||t||). */
static double ritz_residual(const kwork *k, int dim, int i, double beta, double complex *t)
{
    double complex lam = k->T[i + i * dim];
    t[i] = 1;
    for (int r = i - 1; r >= 0; r--) {
        double complex acc = 0;
        for (int c = r + 1; c <= i; c++)
            acc += k->T[r + c * dim] * t[c];
        double complex d = k->T[r + r * dim] - lam;
        if (cabs(d) < 1e-14 * cabs(lam))
            d = 1e-14 * cabs(lam);
        t[r] = -acc / d;
    }
    double complex bt = 0;
    double tn = 0;
    for (int c = 0; c <= i; c++) {
        bt += k->Z[(dim - 1) + c * dim] * t[c];
        tn += creal(t[c]) * creal(t[c]) + cimag(t[c]) * cimag(t[c]);
    }
    return beta * cabs(bt) / (cabs(lam) * sqrt(tn));
}

/* Restart: V's first keep columns become V Z(:, 0..keep) (one BLAS product into
 * the scratch columns beyond V's own, in blocks of rows), the last one moves to
 * column keep, and H becomes [T_11; b'] with b = beta Z(dim - 1, 0..keep). */
static void restart(kwork *k, int dim, int keep, double beta)
{
    const double complex unit = 1, zero = 0;
    int n = (int)k->n;
    double complex *tmp = k->V + (size_t)(M + 1) * k->n; /* three scratch columns: 3 n values */
    int block = 3 * n / keep;
    for (int r0 = 0; r0 < n; r0 += block) {
        int rows = n - r0 < block ? n - r0 : block;
        zgemm_("N", "N", &rows, &keep, &dim, &unit, k->V + r0, &n, k->Z, &dim, &zero, tmp, &rows);
        for (int c = 0; c < keep; c++)
            memcpy(k->V + r0 + (size_t)c * k->n, tmp + (size_t)c * rows, (size_t)rows * sizeof(double complex));
    }
    memmove(k->V + (size_t)keep * k->n, k->V + (size_t)dim * k->n, k->n * sizeof(double complex));
    memset(k->H, 0, sizeof k->H);
    for (int c = 0; c < keep; c++) {
        for (int r = 0; r <= c; r++)
            k->H[r + c * LD] = k->T[r + c * dim];
        k->H[keep + c * LD] = beta * k->Z[(dim - 1) + c * dim];
    }
}

/* A fixed start vector, normalized (a small linear congruential sequence). */
static void start_vector(kwork *k)
{
    uint32_t x = 12345u;
    for (size_t r = 0; r < k->n; r++) {
        x = x * 1664525u + 1013904223u;
        k->V[r] = 1.0 + (double)(x >> 8) / 16777216.0;
    }
    double s = norm(k->V, k->n);
    for (size_t r = 0; r < k->n; r++)
        k->V[r] /= s;
}

/* x = V Z t: the Ritz vector of Ritz value i (t from ritz_residual). */
static void ritz_vector(const kwork *k, int dim, int i, const double complex *t, double complex *x)
{
    double complex zt[M];
    for (int j = 0; j < dim; j++) {
        zt[j] = 0;
        for (int c = 0; c <= i; c++)
            zt[j] += k->Z[j + c * dim] * t[c];
    }
    for (size_t r = 0; r < k->n; r++) {
        double complex acc = 0;
        for (int j = 0; j < dim; j++)
            acc += k->V[r + (size_t)j * k->n] * zt[j];
        x[r] = acc;
    }
}

/* The pencil's row-wise backward error of (s, x): max over rows r of
 * |((G + s C) x)_r| / (sum_c (|G| + |s| |C|)_rc ||x||_inf), each row against its own
 * scale (an amplifier's 1 S beside a node's 1 uS would hide the node's row in a
 * norm of the whole matrix); rows without entries must have a zero residual.
 * G0 = G - k u v' takes G's place for an open loop (its rows from G's magnitudes
 * and the loop's). */
static double backward_error(const kwork *k, const double complex *x, double complex s)
{
    const tb_mna *mna = k->mna;
    double complex *y = k->V + (size_t)(M + 2) * k->n; /* scratch columns */
    double *d = (double *)(k->V + (size_t)(M + 3) * k->n);
    memset(y, 0, k->n * sizeof(double complex));
    memset(d, 0, k->n * sizeof(double));
    double as = cabs(s), xmax = 0;
    for (size_t j = 0; j < k->n; j++) {
        xmax = fmax(xmax, cabs(x[j]));
        for (int p = mna->Ap[j]; p < mna->Ap[j + 1]; p++) {
            y[mna->Ai[p]] += (mna->Gx[p] + s * mna->Cx[p]) * x[j];
            d[mna->Ai[p]] += fabs(mna->Gx[p]) + as * fabs(mna->Cx[p]);
        }
    }
    if (k->open) { /* G0 = G - k u v' */
        const tb_loopvec *lv = k->open;
        tb_svec_axpy(&lv->u, -lv->k * tb_svec_dot(&lv->v, x), y);
        for (int e = 0; e < lv->u.count; e++)
            for (int f = 0; f < lv->v.count; f++)
                d[lv->u.idx[e]] += fabs(lv->k * lv->u.coef[e] * lv->v.coef[f]);
    }
    double worst = 0;
    for (size_t r = 0; r < k->n; r++) {
        double a = cabs(y[r]);
        if (d[r] > 0)
            worst = fmax(worst, a / (d[r] * xmax));
        else if (a > 0)
            return INFINITY;
    }
    return worst;
}

/* Inverse iteration on the pencil itself at s0 = *s (one pivoted factorization of
 * G + s0 C, or G0 + s0 C, on the probe's solver): x <- (G + s0 C)^-1 C x, s = s0 -
 * x_m / w_m at x's largest entry m, up to four steps; *eta is the backward error
 * after it. For a Ritz pair whose backward error OP's solves left above
 * TB_KRYLOV_BACKWARD. */
static tb_status refine_pole(kwork *k, double complex *x, double complex *s, double *eta)
{
    const tb_mna *mna = k->mna;
    double complex s0 = *s;
    double *Mx = k->probe->Mx;
    if (k->open)
        tb_mna_values_gain(mna, cimag(s0), k->open, -k->open->k, Mx);
    else
        tb_mna_values(mna, cimag(s0), Mx);
    for (size_t p = 0; p < mna->nnz; p++)
        Mx[2 * p] += creal(s0) * mna->Cx[p];
    tb_solver *solver = tb_probe_take_solver(k->probe);
    size_t culprit = 0;
    k->probe->factorizations++;
    tb_status st = tb_solver_factor(solver, Mx, &culprit);
    if (st == TB_ERR_SINGULAR) { /* s0 is a pole to the last digit */
        *eta = backward_error(k, x, s0);
        return TB_OK;
    }
    double complex *w = k->V + (size_t)(M + 2) * k->n;
    for (int step = 0; !st && step < 4; step++) {
        if (apply(k, x, w)) /* on the factorization of G + s0 C: k->solver is the probe's */
            return TB_ERR_NUMERIC;
        size_t m = 0;
        for (size_t r = 1; r < k->n; r++)
            m = cabs(x[r]) > cabs(x[m]) ? r : m;
        if (!(cabs(w[m]) > 0))
            break;
        *s = s0 - x[m] / w[m];
        size_t big = 0;
        for (size_t r = 1; r < k->n; r++)
            big = cabs(w[r]) > cabs(w[big]) ? r : big;
        double complex scale = w[big];
        for (size_t r = 0; r < k->n; r++)
            x[r] = w[r] / scale;
    }
    *eta = st ? INFINITY : backward_error(k, x, *s);
    return st == TB_ERR_NOMEM ? st : TB_OK;
}

/* The converged poles among the want largest |mu| of T's leading kept Ritz
 * values (ztrsen keeps their order), nearest sigma first: Ritz residual at most
 * TB_KRYLOV_TOL; in the final round (final true) also the pencil's backward error
 * at most TB_KRYLOV_BACKWARD, a pair above that but below TB_KRYLOV_REFINE being
 * refined by inverse iteration on the pencil first; *refused counts those that
 * fail it. */
static tb_status harvest(kwork *k, int dim, int kept, size_t want, double beta, double complex sigma, bool final,
                         size_t *refused, tb_krylov_found *out)
{
    out->count = 0;
    double largest = 0;
    for (int i = 0; i < kept; i++)
        largest = fmax(largest, cabs(k->T[i + i * dim]));
    double complex *x = k->V + (size_t)(M + 1) * k->n;
    for (int i = 0; i < kept; i++) {
        double complex mu = k->T[i + i * dim];
        size_t larger = 0;
        for (int j = 0; j < kept; j++) {
            double complex other = k->T[j + j * dim];
            larger += cabs(other) > cabs(mu) || (cabs(other) == cabs(mu) && j < i);
        }
        if (larger >= want || !(cabs(mu) > TB_KRYLOV_FAR * largest))
            continue; /* an infinite eigenvalue (C's null space) in rounding, or too far to be near */
        double complex t[M];
        double res = ritz_residual(k, dim, i, beta, t);
        if (!(res <= TB_KRYLOV_TOL))
            continue;
        tb_krylov_pole p = {sigma - 1.0 / mu, res, 0};
        if (final) {
            ritz_vector(k, dim, i, t, x);
            p.backward = backward_error(k, x, p.s);
            if (p.backward > TB_KRYLOV_BACKWARD && p.backward <= TB_KRYLOV_REFINE) {
                tb_status st = refine_pole(k, x, &p.s, &p.backward);
                if (st)
                    return st;
            }
            if (!(p.backward <= TB_KRYLOV_BACKWARD)) {
                (*refused)++;
                continue; /* a Ritz value of OP that is no pole of the circuit */
            }
        }
        size_t at = out->count++;
        while (at > 0 && cabs(out->poles[at - 1].s - sigma) > cabs(p.s - sigma)) {
            out->poles[at] = out->poles[at - 1];
            at--;
        }
        out->poles[at] = p;
    }
    return TB_OK;
}

/* Factors M (or M0) at sigma = j 2 pi *f, moving f off a singular point. */
static tb_status factor_shift(tb_probe *probe, size_t open_loop, double *f)
{
    tb_status st = TB_ERR_SINGULAR;
    for (int attempt = 0; attempt < 4 && st == TB_ERR_SINGULAR; attempt++) {
        if (attempt > 0)
            *f = *f > 0 ? *f * (1.0 + 1e-6) : 1e-3;
        size_t culprit = 0;
        st = open_loop == SIZE_MAX ? tb_probe_factor(probe, *f, true, &culprit)
                                   : tb_probe_factor_gain(probe, *f, open_loop, -1.0, &culprit);
    }
    return st;
}

static tb_status iterate(kwork *k, size_t want, double complex sigma, tb_krylov_found *out)
{
    int keep = TB_KRYLOV_KEEP;
    size_t first = 0;
    start_vector(k);
    for (size_t round = 0;; round++) {
        size_t dim = 0;
        double beta = 0;
        tb_status st = extend(k, first, &dim, &beta);
        if (st)
            return st;
        int d = (int)dim, kept = keep < d ? keep : d;
        if ((st = schur(k, d, kept)))
            return st;
        size_t wanted = want < dim ? want : dim;
        size_t refused = 0;
        if ((st = harvest(k, d, kept, wanted, beta, sigma, false, &refused, out)))
            return st;
        out->restarts = round;
        bool last = out->count == wanted || beta == 0 || round + 1 >= TB_KRYLOV_RESTARTS || kept >= d;
        if (last) {
            st = harvest(k, d, kept, wanted, beta, sigma, true, &refused, out);
            /* or every pole of an invariant subspace, none refused */
            out->converged = out->count == wanted || (beta == 0 && refused == 0);
            return st;
        }
        restart(k, d, kept, beta);
        first = (size_t)kept;
    }
}

tb_status tb_krylov_near(tb_probe *probe, double f, size_t open_loop, size_t want, tb_krylov_found *out)
{
    if (!probe || !out || !(f >= 0) || !isfinite(f) || want == 0 || want > TB_KRYLOV_WANT ||
        (open_loop != SIZE_MAX && open_loop >= probe->mna->loop_count) || probe->mna->n == 0)
        return TB_ERR_USAGE;
    tb_status st = factor_shift(probe, open_loop, &f);
    if (st)
        return st;
    kwork *k = tb_calloc(1, sizeof(kwork));
    size_t n = probe->mna->n;
    if (k) {
        k->V = tb_malloc(n, (M + 4) * sizeof(double complex)); /* and three scratch columns */
    }
    if (!k || !k->V) {
        st = TB_ERR_NOMEM;
        goto done;
    }
    k->mna = probe->mna;
    k->probe = probe;
    k->open = open_loop == SIZE_MAX ? NULL : &probe->mna->loops[open_loop];
    k->solver = probe->solver;
    k->n = n;
    tb_krylov_found found = {.shift_hz = f};
    st = iterate(k, want, I * TB_TWO_PI * f, &found);
    found.solves = k->solves;
    if (!st)
        *out = found;
done:
    if (k) {
        tb_free(k->V);
    }
    tb_free(k);
    return st;
}
