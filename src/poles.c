/* src/poles.c: natural frequencies from the dense MNA pencil (LAPACK dggevx), placed left of, on or right of the axis */
#include "poles.h"

#include <float.h>
#include <limits.h>
#include <math.h>
#include <stdint.h>
#include <string.h>

#include "alloc.h"
#include "m0.h"

/* LAPACK (Fortran calling convention; trailing lengths of the character arguments).
 * dggevx with BALANC = 'B' permutes and scales the pencil before QZ (R. C. Ward,
 * "Balancing the generalized eigenvalue problem", SIAM J. Sci. Stat. Comput. 2, 1981
 * (from memory)), which keeps poles far from the pencil's natural scale accurate.
 * SENSE = 'E' would return each eigenvalue's reciprocal condition number RCONDE, but
 * costs twice the QZ itself (an eigenvector per eigenvalue again): rcond_of computes
 * the same number from the eigenvectors QZ returns, and dggbak says how balancing
 * scaled each row and column. */
void dggevx_(const char *balanc, const char *jobvl, const char *jobvr, const char *sense,
             const int *n, double *a, const int *lda, double *b, const int *ldb, double *alphar,
             double *alphai, double *beta, double *vl, const int *ldvl, double *vr, const int *ldvr,
             int *ilo, int *ihi, double *lscale, double *rscale, double *abnrm, double *bbnrm,
             double *rconde, double *rcondv, double *work, const int *lwork, int *iwork, int *bwork,
             int *info, size_t balanc_len, size_t jobvl_len, size_t jobvr_len, size_t sense_len);
void dggbak_(const char *job, const char *side, const int *n, const int *ilo, const int *ihi,
             const double *lscale, const double *rscale, const int *m, double *v, const int *ldv, int *info,
             size_t job_len, size_t side_len);

/* The dense problem, QZ's answers, and the vectors of the check on the circuit. */
typedef struct {
    int n;
    double *A, *B;            /* n*n: G/max|G| and -C/max|C|, overwritten by QZ */
    double *VL, *VR;          /* n*n: left and right eigenvectors (LAPACK's real layout) */
    double *ar, *ai, *be;     /* n: alpha (real, imaginary), beta */
    double *lscale, *rscale;  /* n: balancing as dggbal leaves it (scales, permutations) */
    double *sl, *sr;          /* n: the scale balancing gave each row (sl), column (sr) */
    int ilo, ihi;
    double abnrm, bbnrm;      /* 1-norms of the balanced pencil */
    double gmax, cmax;        /* the scaling of G and C */
    double complex *x, *y, *w, *x_qz; /* n each */
    double *d;                /* n */
    int *col;                 /* n: LAPACK's index of each finite pole */
    double *vec;              /* the block holding the n-vectors of doubles */
} qz_work;

static void qz_free(qz_work *q)
{
    tb_free(q->A);
    tb_free(q->x);
    tb_free(q->vec);
    tb_free(q->col);
}

static bool qz_alloc(qz_work *q, size_t n)
{
    *q = (qz_work){.n = (int)n};
    if (n > INT_MAX || n > SIZE_MAX / n)
        return false;
    q->A = tb_malloc(n * n, 4 * sizeof(double));
    double *v = tb_malloc(n, 8 * sizeof(double));
    q->x = tb_malloc(n, 4 * sizeof(double complex));
    q->col = tb_malloc(n, sizeof(int));
    q->vec = v;
    if (!q->A || !v || !q->x || !q->col)
        return false;
    q->B = q->A + n * n;
    q->VL = q->B + n * n;
    q->VR = q->VL + n * n;
    q->ar = v;
    q->ai = v + n;
    q->be = v + 2 * n;
    q->lscale = v + 3 * n;
    q->rscale = v + 4 * n;
    q->sl = v + 5 * n;
    q->sr = v + 6 * n;
    q->d = v + 7 * n;
    q->y = q->x + n;
    q->w = q->y + n;
    q->x_qz = q->w + n;
    return true;
}

/* Dense column-major G and -C, each scaled to max-norm 1 (q->gmax, q->cmax). */
static void fill_pencil(const tb_mna *mna, const tb_loopvec *lv, qz_work *q)
{
    size_t n = mna->n;
    memset(q->A, 0, 2 * n * n * sizeof(double));
    q->gmax = 0;
    q->cmax = 0;
    for (size_t j = 0; j < n; j++) {
        for (int k = mna->Ap[j]; k < mna->Ap[j + 1]; k++) {
            double g = tb_m0_g_at(mna, lv, (size_t)k);
            q->A[j * n + (size_t)mna->Ai[k]] = g;
            q->B[j * n + (size_t)mna->Ai[k]] = -mna->Cx[k];
            q->gmax = fmax(q->gmax, fabs(g));
            q->cmax = fmax(q->cmax, fabs(mna->Cx[k]));
        }
    }
    for (size_t i = 0; i < n * n; i++) {
        q->A[i] = q->gmax > 0 ? q->A[i] / q->gmax : q->A[i];
        q->B[i] = q->cmax > 0 ? q->B[i] / q->cmax : q->B[i];
    }
}

static void call_qz(qz_work *q, double *work, int lwork, int *iwork, int *bwork, int *info)
{
    double unused[1];
    dggevx_("B", "V", "V", "N", &q->n, q->A, &q->n, q->B, &q->n, q->ar, q->ai, q->be, q->VL, &q->n, q->VR,
            &q->n, &q->ilo, &q->ihi, q->lscale, q->rscale, &q->abnrm, &q->bbnrm, unused, unused, work,
            &lwork, iwork, bwork, info, 1, 1, 1, 1);
}

/* sl[i], sr[i]: the scale balancing gave original row i and column i: the balancing
 * scales (1 outside ilo..ihi) carried through dggbal's permutations by dggbak. */
static void balance_scales(qz_work *q)
{
    int one = 1, info = 0;
    for (int i = 0; i < q->n; i++) {
        bool scaled = i + 1 >= q->ilo && i + 1 <= q->ihi;
        q->sl[i] = scaled ? q->lscale[i] : 1.0;
        q->sr[i] = scaled ? q->rscale[i] : 1.0;
    }
    dggbak_("P", "L", &q->n, &q->ilo, &q->ihi, q->lscale, q->rscale, &one, q->sl, &q->n, &info, 1, 1);
    dggbak_("P", "R", &q->n, &q->ilo, &q->ihi, q->lscale, q->rscale, &one, q->sr, &q->n, &info, 1, 1);
}

/* QZ with eigenvectors and eigenvalue condition numbers (workspace query first). */
static tb_status run_qz(qz_work *q)
{
    int info = 0;
    double query = 0;
    int *iwork = tb_malloc((size_t)q->n + 6, 2 * sizeof(int)); /* iwork n + 6, then bwork n */
    if (!iwork)
        return TB_ERR_NOMEM;
    call_qz(q, &query, -1, iwork, iwork + q->n + 6, &info);
    double want = fmax(query, 10.0 * q->n + 16.0);
    double *work = info == 0 && want < 2e9 ? tb_malloc((size_t)want, sizeof(double)) : NULL;
    tb_status st = info != 0 ? TB_ERR_NUMERIC : TB_ERR_NOMEM;
    if (work) {
        call_qz(q, work, (int)want, iwork, iwork + q->n + 6, &info);
        st = info == 0 ? TB_OK : TB_ERR_NUMERIC;
        if (!st)
            balance_scales(q);
    }
    tb_free(work);
    tb_free(iwork);
    return st;
}

/* Eigenvector of LAPACK's eigenvalue j from V (VL or VR): real, or the complex
 * pair's member (V(:,j) + i V(:,j+1) for alphai > 0, its conjugate for the next). */
static void eigvec(const qz_work *q, const double *V, int j, double complex *out)
{
    size_t n = (size_t)q->n;
    const double *re = V + (size_t)(q->ai[j] < 0 ? j - 1 : j) * n;
    double sign = q->ai[j] > 0 ? 1.0 : q->ai[j] < 0 ? -1.0 : 0.0;
    for (size_t i = 0; i < n; i++)
        out[i] = CMPLX(re[i], sign * (sign != 0 ? re[n + i] : 0.0));
}

/* out = C x (sparse). */
static void c_times(const tb_mna *mna, const double complex *x, double complex *out)
{
    memset(out, 0, mna->n * sizeof(double complex));
    for (size_t j = 0; j < mna->n; j++)
        for (int k = mna->Ap[j]; k < mna->Ap[j + 1]; k++)
            out[mna->Ai[k]] += mna->Cx[k] * x[j];
}

/* |Re z| + |Im z|: a cheap modulus for comparisons. */
static inline double cabs1(double complex z)
{
    return fabs(creal(z)) + fabs(cimag(z));
}

/* y^H C x, and |y|' |C| |x| (in the modulus cabs1) in *size unless size is NULL. */
static double complex y_c_x(const tb_mna *mna, const double complex *y, const double complex *x, double *size)
{
    double complex sum = 0;
    double total = 0;
    for (size_t j = 0; j < mna->n; j++)
        for (int k = mna->Ap[j]; k < mna->Ap[j + 1]; k++) {
            sum += conj(y[mna->Ai[k]]) * mna->Cx[k] * x[j];
            if (size)
                total += cabs1(y[mna->Ai[k]]) * fabs(mna->Cx[k]) * cabs1(x[j]);
        }
    if (size)
        *size = total;
    return sum;
}

/* Index of x's component of largest modulus (cabs1). */
static size_t largest(const double complex *x, size_t n)
{
    size_t big = 0;
    for (size_t i = 1; i < n; i++)
        if (cabs1(x[i]) > cabs1(x[big]))
            big = i;
    return big;
}

/* x /= its component of largest modulus. */
static void normalise(double complex *x, size_t n)
{
    double complex d = x[largest(x, n)];
    for (size_t i = 0; d != 0 && i < n; i++)
        x[i] /= d;
}

/* Mx = G + s C (G with lv's own stamp removed), complex s, KLU's interleaved layout. */
static void pencil_values(const tb_mna *mna, const tb_loopvec *lv, double complex s, double *Mx)
{
    for (size_t k = 0; k < mna->nnz; k++) {
        Mx[2 * k] = tb_m0_g_at(mna, lv, k) + creal(s) * mna->Cx[k];
        Mx[2 * k + 1] = cimag(s) * mna->Cx[k];
    }
}

/* The finite eigenvalues in rad/s into poles (upper member of a pair first, its
 * lower member the exact conjugate), with LAPACK's index. */
static size_t collect(qz_work *q, double scale, tb_pole_found *poles)
{
    size_t c = 0;
    for (int j = 0; j < q->n; j++) {
        double complex alpha = CMPLX(q->ar[j], q->ai[j]);
        if (!(fabs(q->be[j]) * TB_POLES_INFINITE > cabs(alpha)))
            continue;
        poles[c] = (tb_pole_found){.s = alpha / q->be[j] * scale};
        q->col[c++] = j;
        if (q->ai[j] > 0 && j + 1 < q->n && q->ai[j + 1] < 0 &&
            fabs(q->be[j + 1]) * TB_POLES_INFINITE > cabs(CMPLX(q->ar[j + 1], q->ai[j + 1]))) {
            poles[c] = (tb_pole_found){.s = conj(poles[c - 1].s)};
            q->col[c++] = ++j;
        }
    }
    return c;
}

/* The reciprocal condition number of the eigenvalue whose vectors are q->x, q->y,
 * as LAPACK defines it (dtgsna, from memory): sqrt(|y'Ax|^2 + |y'Bx|^2) / (|y| |x|)
 * for the balanced pencil (A, B) = (G/max|G|, -C/max|C|) balanced; y'Ax and y'Bx
 * do not change under balancing, the norms take the balancing scales. */
static double rcond_of(const tb_mna *mna, const tb_loopvec *lv, const qz_work *q)
{
    double complex yax = 0, ybx = 0;
    for (size_t j = 0; j < mna->n; j++)
        for (int k = mna->Ap[j]; k < mna->Ap[j + 1]; k++) {
            double complex yx = conj(q->y[mna->Ai[k]]) * q->x[j];
            yax += tb_m0_g_at(mna, lv, (size_t)k) / q->gmax * yx;
            ybx -= mna->Cx[k] / q->cmax * yx;
        }
    double nx = 0, ny = 0;
    for (size_t i = 0; i < mna->n; i++) {
        nx += pow(cabs(q->x[i]) / q->sr[i], 2);
        ny += pow(cabs(q->y[i]) / q->sl[i], 2);
    }
    return nx > 0 && ny > 0 ? hypot(cabs(yax), cabs(ybx)) / sqrt(nx * ny) : 0;
}

/* QZ's error bound on pole s (rad/s): the chordal distance to the exact eigenvalue
 * is at most eps ||(A, B)|| / RCONDE (LAPACK Users' Guide, 3rd ed., section
 * 4.11.1.1, from memory), which is |ds| <= scale eps ||(A, B)|| / RCONDE
 * (1 + |s/scale|^2) to first order; +inf when rcond is 0. */
static double qz_bound(const qz_work *q, double scale, double complex s, double rcond)
{
    double lam = cabs(s) / scale;
    return rcond > 0 ? scale * DBL_EPSILON * hypot(q->abnrm, q->bbnrm) / rcond * (1.0 + lam * lam) : INFINITY;
}

/* Inverse iteration x <- (G + s0 C)^-1 C x on a fresh sparse factorization at
 * s0 (check->solver): s = s0 - 1/nu, nu = y^H C w / y^H C x for the iterate
 * w = (G + s0 C)^-1 C x (two-sided with QZ's left vector y; the ratio at x's
 * largest component when y^H C x nearly vanishes). It stops when s moves by less
 * than 4 eps |s| + 1e-6 |Re s|: the side is then settled (a pole near the axis
 * iterates to full precision). *s_out = s0 when G + s0 C is singular to the LU's
 * precision (s0 is then a pole as far as the circuit can tell). */
static tb_status refine(const tb_mna *mna, const tb_loopvec *lv, tb_pole_check *check, qz_work *q,
                        double complex s0, double complex *s_out)
{
    size_t culprit = 0, n = mna->n;
    pencil_values(mna, lv, s0, check->Mx);
    check->factorizations++;
    tb_status st = tb_solver_factor(check->solver, check->Mx, &culprit);
    *s_out = s0;
    if (st == TB_ERR_SINGULAR || st == TB_ERR_NUMERIC)
        return TB_OK;
    if (st)
        return st;
    double size = 0;
    normalise(q->x, n);
    double complex yx = y_c_x(mna, q->y, q->x, &size), prev = s0;
    bool two_sided = cabs(yx) > 1e-8 * size;
    for (int it = 0; it < TB_POLES_REFINE_STEPS; it++) {
        c_times(mna, q->x, q->w);
        if (tb_solver_solve(check->solver, q->w, 1))
            break;
        size_t big = largest(q->x, n); /* x[big] = 1 after normalise */
        double complex yw = two_sided ? y_c_x(mna, q->y, q->w, NULL) : 0;
        double complex nu = two_sided ? yw / yx : q->w[big] / q->x[big];
        if (!(cabs(nu) > 0) || !isfinite(cabs(nu)))
            break;
        double complex s = s0 - 1.0 / nu, d = q->w[largest(q->w, n)];
        memcpy(q->x, q->w, n * sizeof(double complex));
        normalise(q->x, n);
        yx = yw / d;
        *s_out = s;
        if (cabs(s - prev) <= 4 * DBL_EPSILON * cabs(s) + 1e-6 * fabs(creal(s)))
            break;
        prev = s;
    }
    return TB_OK;
}

/* Componentwise backward error of (p, x) as an eigenpair of G + sC: the least eta
 * such that some dG, dC with |dG| <= eta |G|, |dC| <= eta |C| (entry by entry)
 * make (G + dG + p (C + dC)) x = 0, max_i |r_i| / ((|G| + |p| |C|) |x|)_i with
 * r = (G + pC) x (the Oettli-Prager form; D. J. Higham and N. J. Higham, SIAM J.
 * Matrix Anal. Appl. 20(2), 1998, from memory). r and d: n values of workspace. */
static double backward_error(const tb_mna *mna, const tb_loopvec *lv, double complex p, const double complex *x,
                             double complex *r, double *d)
{
    memset(r, 0, mna->n * sizeof(double complex));
    memset(d, 0, mna->n * sizeof(double));
    for (size_t j = 0; j < mna->n; j++)
        for (int k = mna->Ap[j]; k < mna->Ap[j + 1]; k++) {
            double g = tb_m0_g_at(mna, lv, (size_t)k);
            r[mna->Ai[k]] += (g + p * mna->Cx[k]) * x[j];
            d[mna->Ai[k]] += (fabs(g) + cabs(p) * fabs(mna->Cx[k])) * cabs(x[j]);
        }
    double eta = 0;
    for (size_t i = 0; i < mna->n; i++)
        if (d[i] > 0)
            eta = fmax(eta, cabs(r[i]) / d[i]);
    return eta;
}

/* Residues gain (out'x)(y^H in)/(y^H C x) of each transfer at the pole whose
 * vectors are q->x, q->y: (G + sC)^-1 = x y^H / ((s - p) y^H C x) + (analytic)
 * near a simple pole p. false when y^H C x nearly vanishes (a multiple pole). */
static bool residues_at(const tb_mna *mna, const qz_work *q, const tb_pole_transfer *tf, size_t ntf,
                        double complex *out)
{
    double size = 0;
    double complex ycx = y_c_x(mna, q->y, q->x, &size);
    bool simple = cabs(ycx) > 1e-6 * size;
    for (size_t t = 0; t < ntf; t++) {
        double complex y_in = 0;
        for (int i = 0; i < tf[t].in->count; i++)
            y_in += conj(q->y[tf[t].in->idx[i]]) * tf[t].in->coef[i];
        out[t] = simple ? tf[t].gain * tb_svec_dot(tf[t].out, q->x) * y_in / ycx : 0;
    }
    return simple;
}

/* Distance from pole i to the nearest other finite pole (+inf when alone). */
static double gap(const tb_pole_found *poles, size_t count, size_t i)
{
    double g = INFINITY;
    for (size_t k = 0; k < count; k++)
        if (k != i)
            g = fmin(g, cabs(poles[k].s - poles[i].s));
    return g;
}

/* What the finder works with. */
typedef struct {
    const tb_mna *mna;
    const tb_loopvec *lv;
    tb_pole_check *check;
    qz_work *q;
    double scale;
} finder;

/* Places pole i by the check on the circuit (refined s, backward error on the axis). */
static tb_status check_pole(const finder *f, tb_pole_found *poles, size_t count, size_t i)
{
    size_t n = f->mna->n;
    qz_work *q = f->q;
    double complex s = poles[i].s, r = s;
    memcpy(q->x_qz, q->x, n * sizeof(double complex));
    tb_status st = refine(f->mna, f->lv, f->check, q, s, &r);
    if (st)
        return st;
    if (!(cabs(r - s) <= 0.5 * gap(poles, count, i))) { /* it went to a neighbour: keep QZ's */
        r = s;
        memcpy(q->x, q->x_qz, n * sizeof(double complex));
    }
    if (cimag(s) == 0)
        r = creal(r);
    double eta = backward_error(f->mna, f->lv, CMPLX(0, cimag(r)), q->x, q->w, q->d);
    poles[i].s = r;
    poles[i].checked = true;
    poles[i].place = eta <= TB_POLES_AXIS_ETA ? TB_POLE_AXIS : creal(r) > 0 ? TB_POLE_RIGHT : TB_POLE_LEFT;
    return TB_OK;
}

/* Residues and place of pole i; the lower member of a pair follows the upper one. */
static tb_status place_pole(const finder *f, const tb_pole_transfer *tf, size_t ntf, tb_pole_found *poles,
                            double complex *residues, size_t count, size_t i)
{
    qz_work *q = f->q;
    eigvec(q, q->VR, q->col[i], q->x);
    eigvec(q, q->VL, q->col[i], q->y);
    poles[i].has_residue = residues_at(f->mna, q, tf, ntf, residues ? residues + i * ntf : NULL);
    bool lower = i > 0 && q->ai[q->col[i]] < 0 && q->col[i - 1] == q->col[i] - 1 && q->ai[q->col[i - 1]] > 0;
    if (lower) {
        poles[i].s = conj(poles[i - 1].s);
        poles[i].rcond = poles[i - 1].rcond;
        poles[i].place = poles[i - 1].place;
        poles[i].checked = poles[i - 1].checked;
        return TB_OK;
    }
    double re = creal(poles[i].s);
    poles[i].rcond = rcond_of(f->mna, f->lv, q);
    if (fabs(re) > TB_POLES_QZ_MARGIN * qz_bound(q, f->scale, poles[i].s, poles[i].rcond)) {
        poles[i].place = re > 0 ? TB_POLE_RIGHT : TB_POLE_LEFT;
        return TB_OK;
    }
    return check_pole(f, poles, count, i);
}

tb_status tb_poles_find(const tb_mna *mna, const tb_loopvec *lv, tb_pole_check *check,
                        const tb_pole_transfer *tf, size_t ntf, tb_pole_found *poles,
                        double complex *residues, size_t *count, double *scale)
{
    qz_work q;
    *count = 0;
    *scale = 0;
    if (mna->n == 0)
        return TB_OK;
    tb_status st = TB_ERR_NOMEM;
    if (!qz_alloc(&q, mna->n))
        goto done;
    fill_pencil(mna, lv, &q);
    *scale = q.gmax > 0 && q.cmax > 0 ? q.gmax / q.cmax : 0;
    st = TB_OK;
    if (*scale == 0 || (st = run_qz(&q)))
        goto done;
    size_t c = collect(&q, *scale, poles);
    finder f = {mna, lv, check, &q, *scale};
    for (size_t i = 0; i < c && !st; i++)
        st = place_pole(&f, tf, ntf, poles, residues, c, i);
    if (!st)
        *count = c;
done:
    qz_free(&q);
    return st;
}
