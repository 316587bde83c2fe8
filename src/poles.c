/* src/poles.c: natural frequencies from the dense MNA pencil det(G + sC) = 0 (LAPACK dggev) */
#include "poles.h"

#include <math.h>
#include <string.h>

#include "alloc.h"

/* LAPACK (Fortran calling convention; trailing lengths of the character arguments).
 * dggevx with BALANC = 'B' permutes and scales the pencil before QZ (R. C. Ward,
 * "Balancing the generalized eigenvalue problem", SIAM J. Sci. Stat. Comput. 2, 1981
 * (from memory)), which keeps poles far from the pencil's natural scale accurate. */
void dggevx_(const char *balanc, const char *jobvl, const char *jobvr, const char *sense,
             const int *n, double *a, const int *lda, double *b, const int *ldb, double *alphar,
             double *alphai, double *beta, double *vl, const int *ldvl, double *vr, const int *ldvr,
             int *ilo, int *ihi, double *lscale, double *rscale, double *abnrm, double *bbnrm,
             double *rconde, double *rcondv, double *work, const int *lwork, int *iwork, int *bwork,
             int *info, size_t balanc_len, size_t jobvl_len, size_t jobvr_len, size_t sense_len);

/* Dense column-major G (with lv's gain at zero) and -C, each scaled to max-norm 1. */
static void fill_pencil(const tb_mna *mna, const tb_loopvec *lv, double *A, double *B,
                        double *gmax, double *cmax)
{
    size_t n = mna->n;
    memset(A, 0, n * n * sizeof(double));
    memset(B, 0, n * n * sizeof(double));
    *gmax = 0;
    *cmax = 0;
    for (size_t j = 0; j < n; j++) {
        for (int k = mna->Ap[j]; k < mna->Ap[j + 1]; k++) {
            double g = mna->Gx[k];
            for (int o = 0; lv && o < lv->own_count; o++)
                if (lv->own_pos[o] == (size_t)k)
                    g = lv->own_g0[o];
            A[j * n + (size_t)mna->Ai[k]] = g;
            B[j * n + (size_t)mna->Ai[k]] = -mna->Cx[k];
            *gmax = fmax(*gmax, fabs(g));
            *cmax = fmax(*cmax, fabs(mna->Cx[k]));
        }
    }
    for (size_t i = 0; i < n * n; i++) {
        A[i] = *gmax > 0 ? A[i] / *gmax : A[i];
        B[i] = *cmax > 0 ? B[i] / *cmax : B[i];
    }
}

static tb_status run_qz(int n, double *A, double *B, double *ar, double *ai, double *be)
{
    int info = 0, one = 1, ilo = 0, ihi = 0;
    int lwork = 6 * n + 16;
    double abnrm = 0, bbnrm = 0, rcond_dummy[1];
    double *work = tb_malloc((size_t)lwork + 2 * (size_t)n, sizeof(double));
    int *iwork = tb_malloc((size_t)n + 6, sizeof(int));
    tb_status st = TB_ERR_NOMEM;
    if (work && iwork) {
        double *lscale = work + lwork, *rscale = lscale + n;
        dggevx_("B", "N", "N", "N", &n, A, &n, B, &n, ar, ai, be, NULL, &one, NULL, &one, &ilo, &ihi,
                lscale, rscale, &abnrm, &bbnrm, rcond_dummy, rcond_dummy, work, &lwork, iwork, NULL,
                &info, 1, 1, 1, 1);
        st = info == 0 ? TB_OK : TB_ERR_NUMERIC;
    }
    tb_free(work);
    tb_free(iwork);
    return st;
}

tb_status tb_poles_compute(const tb_mna *mna, const tb_loopvec *lv, double complex *eig,
                           size_t *count, double *scale)
{
    size_t n = mna->n;
    double *A = tb_malloc(n * n, sizeof(double));
    double *B = tb_malloc(n * n, sizeof(double));
    double *ab = tb_malloc(3 * n, sizeof(double));
    tb_status st = TB_ERR_NOMEM;
    if (!A || !B || !ab)
        goto done;
    double gmax = 0, cmax = 0;
    fill_pencil(mna, lv, A, B, &gmax, &cmax);
    *count = 0;
    *scale = gmax > 0 && cmax > 0 ? gmax / cmax : 0;
    st = TB_OK;
    if (*scale == 0 || n == 0)
        goto done;
    if ((st = run_qz((int)n, A, B, ab, ab + n, ab + 2 * n)))
        goto done;
    for (size_t i = 0; i < n; i++) {
        double complex alpha = CMPLX(ab[i], ab[n + i]);
        double beta = ab[2 * n + i];
        if (!(fabs(beta) * TB_POLES_INFINITE > cabs(alpha)))
            continue;
        eig[(*count)++] = alpha / beta * *scale;
        /* dggevx returns a complex pair as consecutive (alphai > 0, then < 0) entries
         * with one beta: keep the pair exact conjugates */
        if (ab[n + i] > 0 && i + 1 < n && ab[n + i + 1] < 0 && *count > 0 &&
            fabs(ab[2 * n + i + 1]) * TB_POLES_INFINITE > cabs(CMPLX(ab[i + 1], ab[n + i + 1]))) {
            eig[*count] = conj(eig[*count - 1]);
            (*count)++;
            i++;
        }
    }
done:
    tb_free(A);
    tb_free(B);
    tb_free(ab);
    return st;
}

bool tb_poles_on_axis(double complex s, double scale)
{
    return fabs(creal(s)) <= 1e-9 * cabs(s) + 1e-11 * scale;
}
