/* src/poles.h: natural frequencies from the dense MNA pencil (LAPACK dggevx), placed left of, on or right of the axis */
#ifndef TB_POLES_H
#define TB_POLES_H

#include <complex.h>

#include "solve.h"

/* Eigenvalues above this in the pencil's scaled units (frequencies this many times
 * max|G|/max|C|) are the infinite ones of a singular C and are dropped. */
#define TB_POLES_INFINITE 1e9
/* QZ alone places a pole when |Re s| exceeds this many times its error bound. */
#define TB_POLES_QZ_MARGIN 10.0
/* A pole checked on the circuit is on the axis when a relative change of at most
 * this much in each entry of G and C puts it there (componentwise backward error). */
#define TB_POLES_AXIS_ETA 1e-12
/* Steps of inverse iteration in the check on the circuit. */
#define TB_POLES_REFINE_STEPS 12

/* One finite natural frequency. */
typedef struct {
    double complex s;     /* rad/s */
    tb_pole_place place;
    bool checked;         /* placed by the check on the circuit (s refined there) */
    bool has_residue;     /* the residues of this pole exist (a simple eigenvalue) */
    double rcond;         /* reciprocal condition number of the eigenvalue in the balanced,
                           * scaled pencil (LAPACK's RCONDE), from QZ's eigenvectors */
} tb_pole_found;

/* A transfer function H(s) = gain out' (G + sC)^-1 in whose residues are wanted. */
typedef struct {
    const tb_svec *in;
    const tb_svec *out;
    double gain;
} tb_pole_transfer;

/* The sparse solver lent for the check on the circuit (it holds nothing of value
 * for the caller afterwards) and a value buffer of 2*nnz doubles. */
typedef struct {
    tb_solver *solver;
    double *Mx;
    size_t factorizations; /* counted up, one per checked pole */
} tb_pole_check;

/* Finite roots s (rad/s) of det(G + sC) = 0, with G taken with loop lv's gain at
 * zero (its own CSC entries replaced by own_g0) when lv is not NULL, each placed
 * left of, on or right of the j-omega axis:
 * 1. QZ on the dense pencil, scaled to unit max-norms and balanced (dggevx), with
 *    left and right eigenvectors, from which each eigenvalue's reciprocal condition
 *    number (rcond) and error bound; eigenvalues above TB_POLES_INFINITE in scaled
 *    units are dropped. A pole with |Re s| above TB_POLES_QZ_MARGIN times its error
 *    bound is placed by its sign.
 * 2. Every other pole is checked on the circuit: inverse iteration on a fresh
 *    sparse complex factorization of G + s C at QZ's s (check->solver) refines s
 *    and its eigenvector x; the pole is on the axis when the componentwise
 *    backward error of (j Im s, x) is at most TB_POLES_AXIS_ETA, else placed by
 *    the sign of the refined Re s.
 * residues (count * ntf values, pole-major, may be NULL when ntf = 0) receive the
 * residue of each transfer tf[t] at each pole. poles and residues hold room for
 * mna->n poles; *count the finite ones. *scale = max|G|/max|C| (0 when C is zero:
 * no finite roots). Errors: TB_ERR_NOMEM, TB_ERR_NUMERIC (QZ did not converge). */
tb_status tb_poles_find(const tb_mna *mna, const tb_loopvec *lv, tb_pole_check *check,
                        const tb_pole_transfer *tf, size_t ntf, tb_pole_found *poles,
                        double complex *residues, size_t *count, double *scale);

#endif
