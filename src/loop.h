/* src/loop.h: return ratio, asymptotic gain, feedthrough and closed-loop gain at one frequency */
#ifndef TB_LOOP_H
#define TB_LOOP_H

#include "mna.h"
#include "solve.h"

/* 1 - q at or below this (q = k v'w) means det M0 = 0: T is infinite. */
#define TB_LOOP_INF_TOL 1e-13
/* |q| at or below this means the source does not see its own output (v'w = 0). */
#define TB_LOOP_ZERO_TOL 1e-14
/* Where |q| exceeds this times |1 - q| (|T| above about 1), 1 - q cancels and
 * w0 = w/(1 - q) = M0^-1 u is checked by its residual against M0; a componentwise
 * backward error above TB_LOOP_BERR refines it, for T (docs/algebra.md, "Accuracy"). */
#define TB_LOOP_CHECK_T 1.0
#define TB_LOOP_BERR 1e-13
/* At most this many steps of iterative refinement of x0 (and w0) against M0's
 * exact entries; a vector whose probed value (c'x0, v'w0) a step moved by no
 * more than TB_LOOP_CONVERGED relative needs no further step. */
#define TB_LOOP_REFINE_STEPS 3
#define TB_LOOP_CONVERGED 1e-9
/* A bound on the relative rounding error of one Sherman-Morrison term (about 500 units
 * in the last place, to cover the solves' own errors): x0 is refined only when this
 * bound, grown by the cancellation, can exceed TB_LOOP_CONVERGED of A0. */
#define TB_LOOP_ROUNDING 1e-13

/* M0^-1 r from d = M^-1 r by Sherman-Morrison (M0 = M - k u v', w = M^-1 u,
 * q = k v'w, 1 - q != 0): out[i] = base[i] + (d[i] + k (v'd)/(1 - q) w[i]),
 * base NULL for none; out may be base. n entries each. */
void tb_loop_sherman_morrison(const tb_loopvec *lv, const double complex *w, double complex q,
                              const double complex *d, const double complex *base,
                              double complex *out, size_t n);

/* Everything one frequency point needs, allocated once before a sweep. */
typedef struct tb_loop_work tb_loop_work;

tb_status tb_loop_work_new(const tb_mna *mna, tb_loop_work **out);
void tb_loop_work_free(tb_loop_work *work);

/* After tb_loop_eval: x = M^-1 b (n values; meaningful only with .io) and
 * w_l = M^-1 u_l of loop l (n values), on the factorization it used. */
const double complex *tb_loop_work_x(const tb_loop_work *work);
const double complex *tb_loop_work_w(const tb_loop_work *work, size_t l);

/* Evaluates every loop of mna at angular frequency omega, whose matrix values
 * are Mx and whose factorization is held by solver: one multi-RHS solve for
 * x = M^-1 b and w_l = M^-1 u_l, then T, A, A_inf, A0, a (docs/algebra.md).
 * x0 = M0^-1 b (for A0), and w0 = M0^-1 u (for T) when T is large, come from
 * Sherman-Morrison and up to TB_LOOP_REFINE_STEPS steps of refinement against
 * M0's exact entries (usually one), batched in one multi-RHS solve per step. out has
 * mna->loop_count entries. Errors: TB_ERR_NUMERIC. */
tb_status tb_loop_eval(const tb_mna *mna, tb_solver *solver, const double *Mx, double omega,
                       tb_loop_work *work, tb_point *out);

/* As tb_loop_eval for loop l alone (the same numbers for it): solves for x (with .io) and
 * w_l only, writes out[l] only; afterwards tb_loop_work_w is valid for l alone. Work at a
 * new frequency for one loop costs two solves, whatever the number of loops. */
tb_status tb_loop_eval_one(const tb_mna *mna, tb_solver *solver, const double *Mx, double omega,
                           tb_loop_work *work, size_t l, tb_point *out);

/* q = k v'M^-1 u of loop l (l < mna->loop_count) from one solve on the factorization
 * solver holds, so that 1 - q = det M0 / det M (the return difference 1 + T = 1/(1 - q)),
 * without refinement: for work that needs only the determinants. Overwrites work's
 * column of w_l. Errors: TB_ERR_NUMERIC. */
tb_status tb_loop_q(const tb_mna *mna, tb_solver *solver, tb_loop_work *work, size_t l, double complex *q);

#endif
