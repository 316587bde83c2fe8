/* src/sweep.h: the point loop: one factorization of M per frequency, handed to every per-point hook */
#ifndef TB_SWEEP_H
#define TB_SWEEP_H

#include "probe.h"

/* The index a hook sees at DC (f = 0). */
#define TB_SWEEP_DC SIZE_MAX

/* Grid points per chunk, at most (tb_sweep_chunk). The grid is cut into chunks of
 * consecutive points, the same for any number of threads, and threads take whole
 * chunks.
 * Every point refactors with the reference pivot order (a pivoted factorization
 * at the first grid point, made once on each lane); where that order degrades,
 * the point pivots afresh and the rest of its chunk reuses the new order, and
 * the next chunk starts from the reference again. So a point's numbers depend
 * only on its chunk, whichever thread takes it. */
#define TB_SWEEP_CHUNK 16

/* At most this many threads in one point loop. */
#define TB_SWEEP_MAX_LANES 64

/* One frequency point as the hooks see it: the solver holds the factorization
 * of M(omega); a hook solves on it (any number of right-hand sides) but never
 * refactors it. lane is the calling thread's slot: the hook's workspace for
 * this call is its lane's, never shared with another thread. */
typedef struct {
    size_t index;            /* grid index, or TB_SWEEP_DC */
    double f;                /* Hz */
    double omega;            /* 2 pi f */
    const tb_mna *mna;
    tb_solver *solver;
    const double *Mx;        /* M's values at omega (2*nnz doubles) */
    const tb_point *loops;   /* every loop's T, A, A_inf, A0, a here (mna->loop_count) */
    const tb_loop_work *work; /* x = M^-1 b and w_l = M^-1 u_l (tb_loop_work_x, tb_loop_work_w) */
    size_t lane;             /* 0 .. tb_sweep_lanes() - 1 */
} tb_sweep_point;

/* A per-point analysis: at() is called at DC (when it was solved) on lane 0
 * before any grid point, then once at every grid point. With more than one
 * lane, grid points are visited concurrently by several threads, in no fixed
 * order across chunks (ascending within a chunk): at() may run on different
 * lanes at once, for different points. So a hook keeps one workspace per lane
 * (allocated when it is set up, for tb_sweep_lanes() lanes), writes only into
 * its lane's workspace and the storage of pt->index, and makes any pass that
 * needs the points in order (running maxima, unwrapped phases, brackets) after
 * the sweep, from the stored points. self is the analysis's own state. A non-OK
 * status stops the sweep. */
typedef struct {
    void *self;
    tb_status (*at)(void *self, const tb_sweep_point *pt);
} tb_sweep_hook;

/* The point loop's resources: the stamped circuit, one symbolic analysis, and
 * per lane a numeric factorization, M's values, the loop workspace and row. */
typedef struct tb_sweep tb_sweep;

/* Points per chunk of a grid of npoints: npoints/8 (about eight chunks, so that
 * two or three threads end close together), at least 4 and at most
 * TB_SWEEP_CHUNK (a re-pivoting lasts to the end of its chunk). */
size_t tb_sweep_chunk(size_t npoints);

/* The lanes (threads) a point loop over npoints grid points uses for jobs
 * asked (0: one per online core): at most one per chunk, at most
 * TB_SWEEP_MAX_LANES, at least 1. */
size_t tb_sweep_lanes_for(unsigned jobs, size_t npoints);

/* Stamps ckt and analyses M's pattern once; sets up lanes lanes (>= 1). On
 * success *out owns a new sweep (free with tb_sweep_free); ckt and diag must
 * outlive it. Errors: TB_ERR_NOMEM, TB_ERR_INPUT (too many unknowns, with a
 * diagnostic), TB_ERR_NUMERIC, TB_ERR_USAGE (lanes 0). */
tb_status tb_sweep_new(const tb_circuit *ckt, double rcond_drop, size_t lanes, tb_diag *diag,
                       tb_sweep **out);
void tb_sweep_free(tb_sweep *sweep);

const tb_mna *tb_sweep_mna(const tb_sweep *sweep);
size_t tb_sweep_lanes(const tb_sweep *sweep);

/* DC first (when dc is set and M(0) is non-singular; *has_dc says whether it
 * was), on lane 0; then every frequency of freqs (npoints, ascending), chunk
 * by chunk (tb_sweep_chunk), the chunks shared among the lanes' threads: M
 * written and factored once per point (pivoting at DC and at the first grid
 * point, tb_solver_refactor with that reference order elsewhere), every loop
 * evaluated, then every hook called in order. The numbers at a point do not
 * depend on the number of lanes. A singular M at a grid point is an error
 * naming the unknown (the lowest such point, as one thread would find it); a
 * singular M(0) is a warning (DC values then come from the lowest point).
 * Afterwards the probe's solver holds the reference order. Errors:
 * TB_ERR_SINGULAR, TB_ERR_NOMEM, TB_ERR_NUMERIC, those of the hooks (the one
 * at the lowest point). */
tb_status tb_sweep_run(tb_sweep *sweep, const double *freqs, size_t npoints, bool dc,
                       const tb_sweep_hook *hooks, size_t nhooks, bool *has_dc);

/* Tells fn(ctx, done, npoints) of the grid points started as tb_sweep_run takes each chunk
 * (from whichever thread takes it, one call at a time); fn NULL: nothing is told. */
void tb_sweep_set_progress(tb_sweep *sweep, tb_progress_fn fn, void *ctx);

/* Fresh solves at new frequencies (root finding, the Nyquist path) on lane 0's
 * solver; valid while the sweep lives. */
tb_probe *tb_sweep_probe(tb_sweep *sweep);

/* Work done so far on every lane's solver (the probe's included). */
tb_solver_counts tb_sweep_counts(const tb_sweep *sweep);

#endif
