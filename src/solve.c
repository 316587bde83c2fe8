/* src/solve.c: the only file that includes klu.h: analyse once, refactor per point, solve */
#include "solve.h"

#include <klu.h>
#include <limits.h>
#include <stdint.h>

#include "alloc.h"

struct tb_solver {
    const tb_mna *mna;
    klu_common common;
    klu_symbolic *symbolic;
    klu_numeric *numeric;
    klu_numeric *real_numeric; /* a real matrix factored beside M (tb_solver_factor_real) */
    double rcond;         /* min/max |U_ii| of the last pivoted factorization */
    tb_solver_counts counts;
};

tb_status tb_solver_new(const tb_mna *mna, tb_solver **out)
{
    tb_solver *s = tb_calloc(1, sizeof(*s));
    if (!s)
        return TB_ERR_NOMEM;
    s->mna = mna;
    klu_defaults(&s->common);
    s->common.halt_if_singular = 1;
    s->symbolic = klu_analyze((int)mna->n, mna->Ap, mna->Ai, &s->common);
    if (!s->symbolic) {
        tb_status st = s->common.status == KLU_OUT_OF_MEMORY ? TB_ERR_NOMEM : TB_ERR_NUMERIC;
        tb_solver_free(s);
        return st;
    }
    *out = s;
    return TB_OK;
}

void tb_solver_free(tb_solver *solver)
{
    if (!solver)
        return;
    if (solver->numeric)
        klu_z_free_numeric(&solver->numeric, &solver->common);
    if (solver->real_numeric)
        klu_free_numeric(&solver->real_numeric, &solver->common);
    if (solver->symbolic)
        klu_free_symbolic(&solver->symbolic, &solver->common);
    tb_free(solver);
}

static tb_status singular(tb_solver *s, size_t *culprit)
{
    int col = s->common.singular_col;
    *culprit = col >= 0 && (size_t)col < s->mna->n ? (size_t)col : 0;
    return TB_ERR_SINGULAR;
}

tb_status tb_solver_factor(tb_solver *s, const double *Mx, size_t *culprit)
{
    if (s->numeric)
        klu_z_free_numeric(&s->numeric, &s->common);
    /* KLU's API takes non-const arrays but does not modify A */
    double *Ax = (double *)(uintptr_t)Mx;
    s->counts.numeric++;
    s->numeric = klu_z_factor(s->mna->Ap, s->mna->Ai, Ax, s->symbolic, &s->common);
    if (!s->numeric) {
        if (s->common.status == KLU_OUT_OF_MEMORY)
            return TB_ERR_NOMEM;
        if (s->common.status == KLU_SINGULAR)
            return singular(s, culprit);
        return TB_ERR_NUMERIC;
    }
    if (s->common.status == KLU_SINGULAR) {
        klu_z_free_numeric(&s->numeric, &s->common);
        return singular(s, culprit);
    }
    s->counts.pivoted++;
    if (!klu_z_rcond(s->symbolic, s->numeric, &s->common))
        return TB_ERR_NUMERIC;
    s->rcond = s->common.rcond;
    return TB_OK;
}

tb_status tb_solver_refactor(tb_solver *s, const double *Mx, double rcond_drop, size_t *culprit)
{
    if (!s->numeric)
        return tb_solver_factor(s, Mx, culprit);
    double *Ax = (double *)(uintptr_t)Mx;
    s->counts.numeric++;
    int ok = klu_z_refactor(s->mna->Ap, s->mna->Ai, Ax, s->symbolic, s->numeric, &s->common);
    /* A reused pivot that has become small shows as a collapse of min/max |U_ii|.
     * klu_z_rcond is O(n); klu_z_rgrowth would cost about half a refactor. */
    if (ok && s->common.status == KLU_OK && klu_z_rcond(s->symbolic, s->numeric, &s->common) &&
        s->common.rcond >= rcond_drop * s->rcond)
        return TB_OK;
    if (s->common.status == KLU_OUT_OF_MEMORY)
        return TB_ERR_NOMEM;
    return tb_solver_factor(s, Mx, culprit);
}

tb_status tb_solver_solve(tb_solver *s, double complex *B, size_t nrhs)
{
    if (nrhs == 0)
        return TB_OK;
    if (nrhs > (size_t)INT_MAX || s->mna->n > (size_t)INT_MAX / 2)
        return TB_ERR_NUMERIC;
    /* double complex has the layout of KLU's interleaved (re, im) pairs (C11 6.2.5) */
    double *Bx = (double *)B;
    s->counts.solves++;
    s->counts.columns += nrhs;
    if (!klu_z_solve(s->symbolic, s->numeric, (int)s->mna->n, (int)nrhs, Bx, &s->common))
        return TB_ERR_NUMERIC;
    return TB_OK;
}

tb_status tb_solver_factor_real(tb_solver *s, const double *Ax, size_t *culprit)
{
    if (s->real_numeric)
        klu_free_numeric(&s->real_numeric, &s->common);
    double *A = (double *)(uintptr_t)Ax; /* not modified, as above */
    s->counts.numeric++;
    s->real_numeric = klu_factor(s->mna->Ap, s->mna->Ai, A, s->symbolic, &s->common);
    if (!s->real_numeric) {
        if (s->common.status == KLU_OUT_OF_MEMORY)
            return TB_ERR_NOMEM;
        return s->common.status == KLU_SINGULAR ? singular(s, culprit) : TB_ERR_NUMERIC;
    }
    if (s->common.status == KLU_SINGULAR) {
        klu_free_numeric(&s->real_numeric, &s->common);
        return singular(s, culprit);
    }
    s->counts.pivoted++;
    return TB_OK;
}

tb_status tb_solver_solve_real(tb_solver *s, double *B, size_t nrhs)
{
    if (nrhs == 0)
        return TB_OK;
    if (!s->real_numeric || nrhs > (size_t)INT_MAX || s->mna->n > (size_t)INT_MAX)
        return TB_ERR_NUMERIC;
    s->counts.solves++;
    s->counts.columns += nrhs;
    if (!klu_solve(s->symbolic, s->real_numeric, (int)s->mna->n, (int)nrhs, B, &s->common))
        return TB_ERR_NUMERIC;
    return TB_OK;
}

size_t tb_solver_factor_count(const tb_solver *solver)
{
    return solver->counts.pivoted;
}

tb_solver_counts tb_solver_get_counts(const tb_solver *solver)
{
    return solver->counts;
}

tb_status tb_solver_solve_transposed(tb_solver *s, double complex *B, size_t nrhs)
{
    if (nrhs == 0)
        return TB_OK;
    if (nrhs > (size_t)INT_MAX || s->mna->n > (size_t)INT_MAX / 2)
        return TB_ERR_NUMERIC;
    double *Bx = (double *)B;
    s->counts.solves++;
    s->counts.columns += nrhs;
    if (!klu_z_tsolve(s->symbolic, s->numeric, (int)s->mna->n, (int)nrhs, Bx, 0, &s->common))
        return TB_ERR_NUMERIC;
    return TB_OK;
}
