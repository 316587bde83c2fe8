/* src/modal.h: the output's transfer function as a sum over the modes of the pencil G + sC */
#ifndef TB_MODAL_H
#define TB_MODAL_H

#include <complex.h>

#include "mna.h"

/* H(s) = c'(G + sC)^-1 b = d0 + sum_k r_k / (s - s_k) over the finite
 * eigenvalues s_k of the pencil (a pencil with only simple finite eigenvalues
 * and an index-1 infinite part; tb_modal_check says whether that held). */
typedef struct {
    size_t count;        /* finite eigenvalues */
    double complex *s;   /* count poles, rad/s; conjugate pairs adjacent and exact */
    double complex *r;   /* count residues, conjugate where the poles are */
    double scale;        /* max|G| / max|C|: the pencil's frequency unit (0 when C = 0) */
} tb_modal;

/* Eigenvalues with right and left eigenvectors of the dense pencil (G, -C),
 * scaled to unit max-norms and balanced (LAPACK dggevx), and the residue of H at
 * each finite simple eigenvalue s_k with right and left eigenvectors x_k, y_k,
 * (G + s_k C) x_k = 0 and y_k^H (G + s_k C) = 0:
 *     r_k = (c'x_k)(y_k^H b) / (y_k^H C x_k).
 * Eigenvalues above TB_POLES_INFINITE in the scaled units are infinite (as in
 * poles.c) and left out. On success *out owns s and r (tb_modal_free).
 * Errors: TB_ERR_NOMEM; TB_ERR_NUMERIC (QZ failed, or y^H C x vanished: a
 * defective eigenvalue). */
tb_status tb_modal_compute(const tb_mna *mna, tb_modal *out);
void tb_modal_free(tb_modal *m);

/* d0 + sum_k r_k / (s - s_k). */
double complex tb_modal_transfer(const tb_modal *m, double d0, double complex s);

/* Step response y(t) = final + sum_k (r_k / s_k) e^(s_k t) and its slope
 * sum_k r_k e^(s_k t), for t >= 0 (final = H(0); no s_k may be 0). */
void tb_modal_step(const tb_modal *m, double final, double t, double *y, double *dy);

#endif
