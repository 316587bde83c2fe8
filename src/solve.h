/* src/solve.h: sparse LU of M(jw) on KLU: analyse once, refactor per point, multi-RHS solves */
#ifndef TB_SOLVE_H
#define TB_SOLVE_H

#include <complex.h>
#include <stddef.h>

#include "mna.h"

typedef struct tb_solver tb_solver;

/* Symbolic analysis of mna's pattern (once per circuit). The solver keeps a
 * pointer to mna, which must outlive it. Errors: TB_ERR_NOMEM, TB_ERR_NUMERIC.
 * A structurally singular pattern is reported by the first factorization. */
tb_status tb_solver_new(const tb_mna *mna, tb_solver **out);

/* A second solver over base's symbolic analysis, with its own numeric
 * factorization, KLU settings and counts: one per thread of a sweep. KLU only
 * reads the symbolic analysis while it factors, refactors and solves (its
 * factorization revises the analysis's fill estimates only after a COLAMD
 * ordering; ours is AMD, klu_defaults). base must outlive it and neither may
 * be freed while the other is in use. Errors: TB_ERR_NOMEM. */
tb_status tb_solver_new_sharing(const tb_solver *base, tb_solver **out);
void tb_solver_free(tb_solver *solver);

/* Factors M = Mx (2*nnz interleaved) with pivoting: this factorization's pivot
 * order becomes the solver's reference order. TB_ERR_SINGULAR with the unknown
 * index of the zero pivot in *culprit when M is singular. */
tb_status tb_solver_factor(tb_solver *solver, const double *Mx, size_t *culprit);

/* Refactors with the pivot order of the last pivoted factorization: the
 * reference order, or the re-pivoted one made since. When the pivots degrade
 * (KLU's cheap min/max |U_ii| ratio falls below rcond_drop times that of the
 * pivoted factorization whose order was reused) or a pivot vanishes, factors
 * again with pivoting into a re-pivoted factorization, and keeps the reference
 * for tb_solver_restart. With no factorization held (none yet, or after
 * tb_solver_release), factors with pivoting. Errors as tb_solver_factor. */
tb_status tb_solver_refactor(tb_solver *solver, const double *Mx, double rcond_drop,
                             size_t *culprit);

/* Back to the reference order: drops the re-pivoted factorization, if any, so
 * that the next refactor reuses the reference's pivots and baseline whatever
 * was refactored since (a refactor's result depends only on the pivot order
 * and the matrix). */
void tb_solver_restart(tb_solver *solver);

/* Drops every factorization held, so that the next refactor pivots afresh. */
void tb_solver_release(tb_solver *solver);

/* Solves M X = B in place for nrhs right-hand sides stored one after the other
 * (each n complex values). Errors: TB_ERR_NUMERIC. */
tb_status tb_solver_solve(tb_solver *solver, double complex *B, size_t nrhs);

/* Solves M' X = B (the transpose, not conjugated) in place on the same factorization:
 * the adjoint systems of sensitivity analysis. Errors: TB_ERR_NUMERIC. */
tb_status tb_solver_solve_transposed(tb_solver *solver, double complex *B, size_t nrhs);

/* Factors the real matrix Ax (nnz values on mna's pattern, the same symbolic
 * analysis) with pivoting, beside the complex factorization of M, which it leaves
 * alone; for real work such as the time-step matrices G + aC. Errors as
 * tb_solver_factor. */
tb_status tb_solver_factor_real(tb_solver *solver, const double *Ax, size_t *culprit);

/* As tb_solver_factor_real, on the pivot order of the real factorization held (KLU's
 * refactor, without the pivot search), when its min/max |U_ii| stays at or above
 * rcond_drop times that of the factorization pivoted last; otherwise (or with none
 * held) with pivoting. Errors as tb_solver_factor. */
tb_status tb_solver_refactor_real(tb_solver *solver, const double *Ax, double rcond_drop, size_t *culprit);

/* Solves with the last real factorization, in place (nrhs real vectors of n values
 * one after the other). Errors: TB_ERR_NUMERIC (also when none is held). */
tb_status tb_solver_solve_real(tb_solver *solver, double *B, size_t nrhs);
/* The determinant of the matrix whose factorization the solver holds, from
 * KLU's factors P (R^-1 M) Q = L U (L unit lower triangular, R = diag(Rs) the
 * row scale factors, P and Q permutations):
 *   det M = det R * sign(P) * sign(Q) * prod U_ii.
 * *log_abs = ln|det M| = sum ln Rs_i + sum ln|U_ii| (no overflow at any size);
 * *arg = arg det M = sum arg U_ii + pi [P odd] + pi [Q odd], reduced to
 * (-pi, pi]. Both are set only on success. Uses the solver's own O(n)
 * workspace for the parity of P, so one solver is not used by two threads. Errors: TB_ERR_NOT_FOUND (no
 * factorization held), TB_ERR_SINGULAR (a zero pivot: det M = 0). */
tb_status tb_solver_log_det(tb_solver *solver, double *log_abs, double *arg);

/* Number of pivoted factorizations so far (first one included). */
size_t tb_solver_factor_count(const tb_solver *solver);

/* Work done so far: numeric factorizations (every KLU factor or refactor call,
 * a refactor that falls back to pivoting counting twice), of them pivoted ones,
 * solve calls and right-hand sides solved. */
typedef struct {
    size_t numeric;
    size_t pivoted;
    size_t solves;
    size_t columns;
} tb_solver_counts;
tb_solver_counts tb_solver_get_counts(const tb_solver *solver);

/* a + b, field by field. */
tb_solver_counts tb_solver_counts_add(tb_solver_counts a, tb_solver_counts b);

#endif
