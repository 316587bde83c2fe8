/* src/krylov.h: poles of a large circuit near a shift, by shift-invert Krylov-Schur on KLU's factors */
#ifndef TB_KRYLOV_H
#define TB_KRYLOV_H

#include <stdint.h>

#include "probe.h"

/* Dimension of the Krylov subspace, and the Schur vectors kept at each restart. */
#define TB_KRYLOV_DIM 30
#define TB_KRYLOV_KEEP 16
/* At most this many restarts for one shift. */
#define TB_KRYLOV_RESTARTS 20
/* A Ritz pair (mu, y) of OP has converged when ||OP y - mu y|| <= this * |mu| ||y||. */
#define TB_KRYLOV_TOL 1e-12
/* A Ritz value mu below this times the largest is C's null space (an infinite
 * eigenvalue of the pencil) in rounding, or a pole too far to be called near. */
#define TB_KRYLOV_FAR 1e-10
/* A pole is kept only when its Ritz pair is an eigenpair of the pencil itself to
 * this row-wise backward error (a Ritz value of OP made of rounding is not). */
#define TB_KRYLOV_BACKWARD 1e-13
/* A Ritz pair above TB_KRYLOV_BACKWARD but below this is refined by inverse
 * iteration on the pencil (one factorization at the pole). */
#define TB_KRYLOV_REFINE 1e-8
/* Poles wanted near one shift (at most). */
#define TB_KRYLOV_WANT 8

/* One pole found near the shift. */
typedef struct {
    double complex s;    /* rad/s: (G + s C) x = 0, with the loop's gain at zero for the open loop */
    double residual;     /* ||OP y - mu y|| / (|mu| ||y||) of its Ritz pair */
    double backward;     /* the pencil's row-wise backward error of (s, y):
                          * max_r |((G + s C) y)_r| / (sum_c (|G| + |s| |C|)_rc ||y||_inf) */
} tb_krylov_pole;

/* What one run found. */
typedef struct {
    double shift_hz;     /* the shift used: sigma = j 2 pi shift_hz */
    size_t count;        /* poles[0..count), nearest sigma first */
    tb_krylov_pole poles[TB_KRYLOV_WANT];
    size_t solves;       /* right-hand sides solved */
    size_t restarts;
    bool converged;      /* every one of want converged (or the whole invariant subspace found) */
} tb_krylov_found;

/* The natural frequencies of the circuit nearest sigma = j 2 pi f: eigenvalues s
 * of the pencil (G + s C) x = 0 (open_loop SIZE_MAX), or of the same with loop
 * open_loop's source gain at zero, by shift and invert: the eigenvalues mu of
 * OP = (G + sigma C)^-1 C largest in magnitude, s = sigma - 1/mu (the eigenvalues
 * of C's null space, mu = 0, are the pencil's infinite ones and never come near).
 * OP is applied by one product with C and one solve on the probe's fresh
 * factorization of M(sigma) (KLU, the sweep's symbolic analysis); its eigenvalues
 * come from a Krylov-Schur iteration (G. W. Stewart, "A Krylov-Schur algorithm
 * for large eigenproblems", SIAM J. Matrix Anal. Appl. 23(3), 2001, from memory):
 * TB_KRYLOV_DIM Arnoldi vectors (classical Gram-Schmidt, twice), the Rayleigh
 * quotient's Schur form by LAPACK zgees, the wanted Ritz values moved to its top
 * by ztrsen and TB_KRYLOV_KEEP Schur vectors kept at each restart. Up to want
 * (<= TB_KRYLOV_WANT) poles whose Ritz pairs converged to TB_KRYLOV_TOL and are
 * eigenpairs of the pencil itself to TB_KRYLOV_BACKWARD (after inverse iteration
 * on the pencil where OP's solves left them short) are returned, nearest sigma
 * first. When M(sigma) is singular (sigma = 0 with an
 * integrator, or a pole on the axis at f), f moves to 1e-3 Hz from 0, else up
 * by a factor 1 + 1e-6, three times at most.
 * The start vector is fixed, so a run is repeatable. The probe's solver then
 * holds M(sigma) (or M0). Memory: (TB_KRYLOV_DIM + 4) n complex values.
 * Errors: TB_ERR_USAGE (bad arguments), TB_ERR_NOMEM, TB_ERR_SINGULAR (no
 * shift near f factors), TB_ERR_NUMERIC (LAPACK or the solver failed). */
tb_status tb_krylov_near(tb_probe *probe, double f, size_t open_loop, size_t want, tb_krylov_found *out);

#endif
