/* src/modal.c: the output's transfer function as a sum over the modes of the pencil G + sC (LAPACK dggevx) */
#include "modal.h"

#include <math.h>
#include <string.h>

#include "alloc.h"
#include "poles.h"

/* LAPACK (Fortran calling convention; trailing lengths of the character arguments). */
void dggevx_(const char *balanc, const char *jobvl, const char *jobvr, const char *sense,
             const int *n, double *a, const int *lda, double *b, const int *ldb, double *alphar,
             double *alphai, double *beta, double *vl, const int *ldvl, double *vr, const int *ldvr,
             int *ilo, int *ihi, double *lscale, double *rscale, double *abnrm, double *bbnrm,
             double *rconde, double *rcondv, double *work, const int *lwork, int *iwork, int *bwork,
             int *info, size_t balanc_len, size_t jobvl_len, size_t jobvr_len, size_t sense_len);

/* The dense pencil and its eigen-decomposition, one allocation each. */
typedef struct {
    int n;
    double *A;   /* G / max|G|, column-major */
    double *B;   /* -C / max|C| */
    double *VL;  /* left eigenvectors (columns; a complex pair as re, im columns) */
    double *VR;  /* right eigenvectors */
    double *ab;  /* alphar, alphai, beta: n each */
    double complex *x; /* one right eigenvector */
    double complex *y; /* one left eigenvector */
} pencil;

static void pencil_free(pencil *p)
{
    tb_free(p->A);
    tb_free(p->B);
    tb_free(p->VL);
    tb_free(p->VR);
    tb_free(p->ab);
    tb_free(p->x);
    tb_free(p->y);
}

static tb_status pencil_alloc(pencil *p, size_t n)
{
    *p = (pencil){.n = (int)n};
    p->A = tb_malloc(n * n, sizeof(double));
    p->B = tb_malloc(n * n, sizeof(double));
    p->VL = tb_malloc(n * n, sizeof(double));
    p->VR = tb_malloc(n * n, sizeof(double));
    p->ab = tb_malloc(3 * n, sizeof(double));
    p->x = tb_malloc(n, sizeof(double complex));
    p->y = tb_malloc(n, sizeof(double complex));
    return p->A && p->B && p->VL && p->VR && p->ab && p->x && p->y ? TB_OK : TB_ERR_NOMEM;
}

/* A = G / max|G|, B = -C / max|C|; *scale = max|G| / max|C| (0 when either is zero). */
static void pencil_fill(const tb_mna *mna, pencil *p, double *scale)
{
    size_t n = mna->n;
    double gmax = 0, cmax = 0;
    memset(p->A, 0, n * n * sizeof(double));
    memset(p->B, 0, n * n * sizeof(double));
    for (size_t k = 0; k < mna->nnz; k++) {
        gmax = fmax(gmax, fabs(mna->Gx[k]));
        cmax = fmax(cmax, fabs(mna->Cx[k]));
    }
    *scale = gmax > 0 && cmax > 0 ? gmax / cmax : 0;
    if (*scale == 0)
        return;
    for (size_t j = 0; j < n; j++)
        for (int k = mna->Ap[j]; k < mna->Ap[j + 1]; k++) {
            p->A[j * n + (size_t)mna->Ai[k]] = mna->Gx[k] / gmax;
            p->B[j * n + (size_t)mna->Ai[k]] = -mna->Cx[k] / cmax;
        }
}

/* QZ with both eigenvector sets; balancing 'B' (permute and scale), as poles.c. */
static tb_status pencil_qz(pencil *p)
{
    int n = p->n, info = 0, ilo = 0, ihi = 0, query = -1;
    double abnrm = 0, bbnrm = 0, unused[1], size = 0;
    double *ar = p->ab, *ai = p->ab + n, *be = p->ab + 2 * n;
    dggevx_("B", "V", "V", "N", &n, p->A, &n, p->B, &n, ar, ai, be, p->VL, &n, p->VR, &n, &ilo, &ihi,
            unused, unused, &abnrm, &bbnrm, unused, unused, &size, &query, NULL, NULL, &info, 1, 1, 1, 1);
    if (info != 0)
        return TB_ERR_NUMERIC;
    int lwork = (int)size > 6 * n ? (int)size : 6 * n;
    double *work = tb_malloc((size_t)lwork + 2 * (size_t)n, sizeof(double));
    int *iwork = tb_malloc((size_t)n + 6, sizeof(int));
    tb_status st = TB_ERR_NOMEM;
    if (work && iwork) {
        double *lscale = work + lwork, *rscale = lscale + n;
        dggevx_("B", "V", "V", "N", &n, p->A, &n, p->B, &n, ar, ai, be, p->VL, &n, p->VR, &n, &ilo, &ihi,
                lscale, rscale, &abnrm, &bbnrm, unused, unused, work, &lwork, iwork, NULL, &info, 1, 1, 1, 1);
        st = info == 0 ? TB_OK : TB_ERR_NUMERIC;
    }
    tb_free(work);
    tb_free(iwork);
    return st;
}

/* Column j of V as a complex vector: real, or (for the first of a pair) re + i im. */
static void column(const double *V, size_t n, size_t j, bool pair, double complex *v)
{
    for (size_t i = 0; i < n; i++)
        v[i] = pair ? CMPLX(V[j * n + i], V[(j + 1) * n + i]) : V[j * n + i];
}

/* r = (c'x)(y^H b) / (y^H C x); TB_ERR_NUMERIC when y^H C x vanishes. */
static tb_status residue(const tb_mna *mna, const double complex *x, const double complex *y,
                         double complex *r)
{
    double complex ycx = 0;
    double size = 0;
    for (size_t j = 0; j < mna->n; j++)
        for (int k = mna->Ap[j]; k < mna->Ap[j + 1]; k++) {
            double complex term = conj(y[mna->Ai[k]]) * mna->Cx[k] * x[j];
            ycx += term;
            size += cabs(term);
        }
    double complex yb = 0;
    for (int i = 0; i < mna->b.count; i++)
        yb += mna->b.coef[i] * conj(y[mna->b.idx[i]]);
    double complex cx = tb_svec_dot(&mna->c, x);
    if (!(cabs(ycx) > 1e-14 * size))
        return TB_ERR_NUMERIC;
    *r = cx * yb / ycx;
    return isfinite(creal(*r)) && isfinite(cimag(*r)) ? TB_OK : TB_ERR_NUMERIC;
}

/* The finite eigenvalues and their residues into m (pairs as exact conjugates). */
static tb_status collect(const tb_mna *mna, pencil *p, tb_modal *m)
{
    size_t n = mna->n;
    const double *ar = p->ab, *ai = p->ab + n, *be = p->ab + 2 * n;
    for (size_t j = 0; j < n; j++) {
        bool pair = ai[j] > 0 && j + 1 < n;
        if (fabs(be[j]) * TB_POLES_INFINITE > cabs(CMPLX(ar[j], ai[j]))) {
            column(p->VR, n, j, pair, p->x);
            column(p->VL, n, j, pair, p->y);
            double complex r = 0;
            tb_status st = residue(mna, p->x, p->y, &r);
            if (st)
                return st;
            m->s[m->count] = CMPLX(ar[j], ai[j]) / be[j] * m->scale;
            m->r[m->count++] = r;
            if (pair) {
                m->s[m->count] = conj(m->s[m->count - 1]);
                m->r[m->count++] = conj(r);
            }
        }
        if (pair)
            j++;
    }
    return TB_OK;
}

tb_status tb_modal_compute(const tb_mna *mna, tb_modal *out)
{
    size_t n = mna->n;
    tb_modal m = {0};
    pencil p = {0};
    tb_status st = TB_ERR_NOMEM;
    m.s = tb_malloc(n ? n : 1, sizeof(double complex));
    m.r = tb_malloc(n ? n : 1, sizeof(double complex));
    if (!m.s || !m.r || (n > 0 && pencil_alloc(&p, n)))
        goto fail;
    st = TB_OK;
    if (n == 0)
        goto done;
    pencil_fill(mna, &p, &m.scale);
    if (m.scale == 0)
        goto done;
    if ((st = pencil_qz(&p)) || (st = collect(mna, &p, &m)))
        goto fail;
done:
    pencil_free(&p);
    *out = m;
    return TB_OK;
fail:
    pencil_free(&p);
    tb_modal_free(&m);
    return st;
}

void tb_modal_free(tb_modal *m)
{
    if (!m)
        return;
    tb_free(m->s);
    tb_free(m->r);
    *m = (tb_modal){0};
}

double complex tb_modal_transfer(const tb_modal *m, double d0, double complex s)
{
    double complex h = d0;
    for (size_t k = 0; k < m->count; k++)
        h += m->r[k] / (s - m->s[k]);
    return h;
}

void tb_modal_step(const tb_modal *m, double final, double t, double *y, double *dy)
{
    double complex sum = 0, slope = 0;
    for (size_t k = 0; k < m->count; k++) {
        double complex e = m->r[k] * cexp(m->s[k] * t);
        sum += e / m->s[k];
        slope += e;
    }
    *y = final + creal(sum);
    *dy = creal(slope);
}
