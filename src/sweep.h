/* src/sweep.h: the point loop: one factorization of M per frequency, handed to every per-point hook */
#ifndef TB_SWEEP_H
#define TB_SWEEP_H

#include "probe.h"

/* The index a hook sees at DC (f = 0). */
#define TB_SWEEP_DC SIZE_MAX

/* One frequency point as the hooks see it: the solver holds the factorization
 * of M(omega); a hook solves on it (any number of right-hand sides) but never
 * refactors it. */
typedef struct {
    size_t index;            /* grid index, or TB_SWEEP_DC */
    double f;                /* Hz */
    double omega;            /* 2 pi f */
    const tb_mna *mna;
    tb_solver *solver;
    const double *Mx;        /* M's values at omega (2*nnz doubles) */
    const tb_point *loops;   /* every loop's T, A, A_inf, A0, a here (mna->loop_count) */
    const tb_loop_work *work; /* x = M^-1 b and w_l = M^-1 u_l (tb_loop_work_x, tb_loop_work_w) */
} tb_sweep_point;

/* A per-point analysis: at() is called at DC (when it was solved) and at every
 * grid point in ascending order; self is the analysis's own state (set up
 * before the sweep, summarised after it). A non-OK status stops the sweep. */
typedef struct {
    void *self;
    tb_status (*at)(void *self, const tb_sweep_point *pt);
} tb_sweep_hook;

/* The point loop's resources: the stamped circuit, the solver (one symbolic
 * analysis), the loop workspace. */
typedef struct tb_sweep tb_sweep;

/* Stamps ckt and analyses M's pattern. On success *out owns a new sweep (free
 * with tb_sweep_free); ckt and diag must outlive it. Errors: TB_ERR_NOMEM,
 * TB_ERR_INPUT (too many unknowns, with a diagnostic), TB_ERR_NUMERIC. */
tb_status tb_sweep_new(const tb_circuit *ckt, double rcond_drop, tb_diag *diag, tb_sweep **out);
void tb_sweep_free(tb_sweep *sweep);

const tb_mna *tb_sweep_mna(const tb_sweep *sweep);

/* DC first (when dc is set and M(0) is non-singular; *has_dc says whether it
 * was), then every frequency of freqs (npoints, ascending): M written and
 * factored once per point (pivoting at DC and at the first grid point,
 * tb_solver_refactor after), every loop evaluated, then every hook called in
 * order. A singular M at a grid point is an error naming the unknown; a
 * singular M(0) is a warning (DC values then come from the lowest point).
 * Errors: TB_ERR_SINGULAR, TB_ERR_NOMEM, TB_ERR_NUMERIC, those of the hooks. */
tb_status tb_sweep_run(tb_sweep *sweep, const double *freqs, size_t npoints, bool dc,
                       const tb_sweep_hook *hooks, size_t nhooks, bool *has_dc);

/* Fresh solves at new frequencies (root finding, the Nyquist path) on the
 * sweep's solver; valid while the sweep lives. */
tb_probe *tb_sweep_probe(tb_sweep *sweep);

/* Work done so far on the sweep's solver (the probe's included). */
tb_solver_counts tb_sweep_counts(const tb_sweep *sweep);

#endif
