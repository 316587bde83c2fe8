/* src/transient.h: step response by variable-step TR-BDF2 with local error control on G + aC */
#ifndef TB_TRANSIENT_H
#define TB_TRANSIENT_H

#include "solve.h"

/* Limits of one run. */
typedef struct {
    double h_first;   /* first TR-BDF2 step, s (error control changes it by powers of 2) */
    double t_cap;     /* stop at this time at the latest, s */
    double tol;       /* local error per step, relative to each unknown's size */
    size_t max_steps; /* accepted steps at most (also the limit on samples) */
} tb_transient_limits;

/* Samples of the output y = c'x and its slope, and what the run found. */
typedef struct {
    size_t count;
    double *t;
    double *y;
    double *dy;
    bool has_dc;      /* G is non-singular: x_dc = G^-1 b, the state the run settles to */
    double y_dc;      /* c'x_dc */
    bool settled;     /* every unknown came within tol of x_dc (the run stopped there) */
    bool diverged;    /* the state grew 1000-fold within a doubling of t (the run stopped) */
    double y_error;   /* sum over the steps of |c' e|, e the local error estimate */
    size_t steps;
    size_t rejected;
} tb_transient;

/* Integrates G x + C dx/dt = b for t > 0 from x(0-) = 0 on real factorizations
 * of G + aC by solver (one numeric factorization per distinct a: the step size
 * changes by powers of 2 only; each on the pivot order of the last pivoted one
 * while its pivots hold, tb_solver_refactor_real). A step costs three solves and
 * the sparse products C xg and C x1 (on a copy of C without the pattern's
 * structural zeros); C x and f(x) = C x' carry over from the step before, and
 * f at the stages follows from the stage equations (b - G x only at the start). The jump of the algebraic unknowns at t = 0 is
 * taken by one backward-Euler step of h_first/1000; then TR-BDF2 (trapezoidal
 * stage to t + gamma h, BDF2 to t + h, gamma = 2 - sqrt 2: both stages on one
 * matrix) with an embedded estimate of the local error from the three stage
 * slopes, filtered through the same matrix so that stiff parts do not inflate
 * it. Steps whose estimate exceeds tol (weighted per state unknown, and on the
 * output) are repeated at half the size or less. Stops when settled, at t_cap, after max_steps, or when the
 * state diverges. On success *out owns t, y, dy (tb_transient_free).
 * Errors: TB_ERR_NOMEM; TB_ERR_SINGULAR (G + aC singular); TB_ERR_NUMERIC. */
tb_status tb_transient_run(const tb_mna *mna, tb_solver *solver, const tb_transient_limits *lim,
                           tb_transient *out);
void tb_transient_free(tb_transient *tr);

#endif
