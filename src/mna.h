/* src/mna.h: modified nodal analysis: G and C on one CSC pattern, and the loop vectors */
#ifndef TB_MNA_H
#define TB_MNA_H

#include <complex.h>
#include <stddef.h>

#include "circuit.h"

/* C11's CMPLX, which glibc defines only for gcc; clang (the fuzz build) has the builtin. */
#ifndef CMPLX
#define CMPLX(re, im) __builtin_complex((double)(re), (double)(im))
#endif

/* A sparse vector with at most two entries (e_p - e_n and the like). */
typedef struct {
    int count;
    size_t idx[2];
    double coef[2];
} tb_svec;

/* The gain k of one controlled source enters as M = M0 + k u v' (design.md). */
typedef struct {
    size_t elem; /* the controlled source */
    double k;
    tb_svec u;   /* where the source's output enters */
    tb_svec v;   /* v'x is the controlling variable */
    /* M0 = M with this source's gain at zero differs from M only at these CSC
     * positions; g0 holds G there summed without the source's own stamp, so
     * M0 products are exact even when k dwarfs the other entries. */
    int own_count;
    size_t own_pos[4];
    double own_g0[4];
    /* With .io: A0 = c'M0^-1 b is zero by the circuit's structure (src/zeropath.c),
     * so that it needs no x0; set by tb_mna_build for the .loop sources. */
    bool feed_nil;
} tb_loopvec;

typedef struct {
    size_t n;    /* unknowns: nodes other than ground, then branch currents */
    size_t nnz;
    int *Ap;     /* n + 1 column pointers */
    int *Ai;     /* nnz row indices, sorted within each column */
    double *Gx;  /* nnz conductance-like values */
    double *Cx;  /* nnz capacitance-like values (M = G + jwC) */
    tb_loopvec *loops; /* one per .loop, in netlist order */
    size_t loop_count;
    bool has_io;
    tb_svec b;   /* unit excitation of the .io input source */
    tb_svec c;   /* output selector: A = c'x */
    size_t nodes; /* unknowns 0 .. nodes-1 are node voltages, the rest branch currents */
} tb_mna;

/* Stamps the finished circuit. On success *out owns a new tb_mna (free with
 * tb_mna_free). Errors: TB_ERR_NOMEM; TB_ERR_INPUT when the matrix would pass
 * KLU's int index range (with a diagnostic). */
tb_status tb_mna_build(const tb_circuit *ckt, tb_diag *diag, tb_mna **out);
void tb_mna_free(tb_mna *mna);

/* The unknown numbering, owned here: node i > 0 is unknown i - 1 (ground has
 * none: SIZE_MAX); the branch currents of V, L, E, H follow the nodes. */
size_t tb_mna_node_unknown(int node);
size_t tb_mna_branch_unknown(const tb_circuit *ckt, const tb_element *e);
/* What MNA unknown i is, for people: "node 'NAME'" or "the branch current of NAME", in buf. */
const char *tb_mna_unknown_name(const tb_circuit *ckt, size_t i, char *buf, size_t size);

/* u, v and k of controlled source elem (tb_elem_is_controlled): M = M0 + k u v'
 * (design.md "The algebra"); own_* are left empty (tb_mna_build fills them for
 * the .loop sources). */
tb_loopvec tb_mna_source_vectors(const tb_circuit *ckt, size_t elem);

/* Index of entry (row, col) in the CSC value arrays, or SIZE_MAX when the pattern has none. */
size_t tb_mna_position(const tb_mna *mna, size_t row, size_t col);

/* Writes M(jw) = G + jwC into Mx (2*nnz doubles, real/imag interleaved, KLU's layout). */
void tb_mna_values(const tb_mna *mna, double omega, double *Mx);

/* dM/dp for element elem's value p (R ohms, C farads, L henries, E/G/F/H gain, K coupling) at
 * angular frequency omega: visit(ctx, row, col, d) for each non-zero entry d (ground rows and
 * columns left out; an inductor's entries include the mutual terms of every K coupling it).
 * Independent sources do not enter M: no visit. */
typedef void (*tb_mna_visit)(void *ctx, size_t row, size_t col, double complex d);
void tb_mna_derivative(const tb_circuit *ckt, size_t elem, double omega, tb_mna_visit visit, void *ctx);

/* g' C h over complex vectors (C: the capacitance-like values; dM/domega = jC). */
double complex tb_mna_form_C(const tb_mna *mna, const double complex *g, const double complex *h);

/* M(jw) with loop lv's source gain changed by dk (k -> k + dk) at its own
 * positions, into Mx as tb_mna_values writes it. */
void tb_mna_values_gain(const tb_mna *mna, double omega, const tb_loopvec *lv, double dk, double *Mx);

/* Dense column-major copy of M(jw) into M (n*n), for tests and small dense work. */
void tb_mna_dense(const tb_mna *mna, double omega, double complex *M);

/* y = r - M0 x, with M0 the matrix of loop lv's circuit at gain zero (M = G + jwC
 * in Mx, as written by tb_mna_values). x and y are n complex values. */
void tb_mna_residual0(const tb_mna *mna, const double *Mx, double omega, const tb_loopvec *lv,
                      const tb_svec *r, const double complex *x, double complex *y);

/* As tb_mna_residual0 (y = r - M0 x), and returns the componentwise backward error of x
 * as a solution of M0 x = r (Oettli and Prager 1964): the smallest w such that
 * (M0 + E) x = r + f with |E| <= w |M0| and |f| <= w |r|, max_i |y_i| / (|M0||x| + |r|)_i,
 * with the complex magnitudes taken as |Re| + |Im| (within a factor sqrt 2). A row whose
 * (|M0||x| + |r|)_i is below 1000 n 2^-52 times max_j |M0_ij| max|x| is scaled by that
 * product instead (Arioli, Demmel and Duff 1989), so that rows where x has decayed to
 * rounding level of its largest entry do not dominate. D and N are workspaces of n
 * doubles; INFINITY when a non-zero residual meets a zero scale. */
double tb_mna_residual0_berr(const tb_mna *mna, const double *Mx, double omega, const tb_loopvec *lv,
                             const tb_svec *r, const double complex *x, double complex *y, double *D,
                             double *N);

/* Sparse dot product s'x over a complex vector x. */
static inline double complex tb_svec_dot(const tb_svec *s, const double complex *x)
{
    double complex sum = 0;
    for (int i = 0; i < s->count; i++)
        sum += s->coef[i] * x[s->idx[i]];
    return sum;
}

/* x += alpha * s (scatter). */
static inline void tb_svec_axpy(const tb_svec *s, double complex alpha, double complex *x)
{
    for (int i = 0; i < s->count; i++)
        x[s->idx[i]] += alpha * s->coef[i];
}

#endif
