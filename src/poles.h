/* src/poles.h: natural frequencies from the dense MNA pencil det(G + sC) = 0 (LAPACK dggevx) */
#ifndef TB_POLES_H
#define TB_POLES_H

#include <complex.h>

#include "mna.h"

/* Finite roots s (rad/s) of det(G + sC) = 0, with G taken with loop lv's gain at
 * zero (its own CSC entries replaced by own_g0) when lv is not NULL. The pencil
 * is scaled to unit max-norms, balanced and solved by QZ (dggevx); eigenvalues above
 * TB_POLES_INFINITE in those units are the infinite ones of a singular C and are
 * dropped. eig holds mna->n entries; *count the finite ones, *scale = max|G|/max|C|
 * (the frequency unit of the tolerances; 0 when C is zero: no finite roots).
 * Errors: TB_ERR_NOMEM, TB_ERR_NUMERIC (QZ did not converge). */
#define TB_POLES_INFINITE 1e9
tb_status tb_poles_compute(const tb_mna *mna, const tb_loopvec *lv, double complex *eig,
                           size_t *count, double *scale);

/* true when s lies on the j-omega axis within the tolerance of the computation:
 * |Re s| <= 1e-9 |s| + 1e-11 scale. */
bool tb_poles_on_axis(double complex s, double scale);

#endif
