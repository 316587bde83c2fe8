/* src/probe.h: fresh factorizations at new frequencies on the sweep's solver, never the same matrix twice */
#ifndef TB_PROBE_H
#define TB_PROBE_H

#include "loop.h"

/* Borrowed pieces of the sweep (its mna, solver and workspace): the probe
 * allocates nothing. The fields below `row` are the probe's own bookkeeping. */
typedef struct {
    const tb_mna *mna;
    tb_solver *solver;
    tb_loop_work *work;
    double *Mx;        /* 2*nnz doubles */
    tb_point *row;     /* mna->loop_count points, written by tb_probe_eval */
    double rcond_drop; /* as tb_options.refactor_rcond_drop */
    size_t evaluations; /* loop evaluations (tb_probe_eval calls) */
    size_t factorizations; /* numeric factorizations the probe asked for */
    bool held;         /* the solver holds M(j 2 pi held_f) (pivoted when held_pivoted) */
    double held_f;
    bool held_pivoted;
    bool row_valid;    /* row holds the loops at held_f */
    bool one_valid;    /* row[one] holds loop `one` at held_f (tb_probe_eval_loop) */
    size_t one;
} tb_probe;

/* A probe over borrowed pieces, holding nothing yet. */
tb_probe tb_probe_make(const tb_mna *mna, tb_solver *solver, tb_loop_work *work, double *Mx, tb_point *row,
                       double rcond_drop);

/* Makes the solver hold the factorization of M(j 2 pi f): nothing when it holds
 * it already; else writes M into probe->Mx and refactors with the last pivot
 * order (pivot false: tb_solver_refactor, which pivots afresh when the pivots
 * degrade) or factors with pivoting (pivot true). Errors: TB_ERR_SINGULAR (zero
 * pivot at unknown *culprit), TB_ERR_NOMEM, TB_ERR_NUMERIC. */
tb_status tb_probe_factor(tb_probe *probe, double f, bool pivot, size_t *culprit);

/* tb_probe_factor(probe, f, false), then every loop into probe->row (kept while
 * the solver holds the same matrix). Errors as tb_probe_factor. */
tb_status tb_probe_eval(tb_probe *probe, double f, size_t *culprit);

/* As tb_probe_eval for loop l alone: tb_probe_factor(probe, f, false), then loop l into
 * probe->row[l] (the same numbers as tb_probe_eval's), by two solves whatever the number of
 * loops; the other entries of row are not current. Errors as tb_probe_factor. */
tb_status tb_probe_eval_loop(tb_probe *probe, double f, size_t l, size_t *culprit);

/* tb_probe_factor(probe, f, false), then loop l's q = k v'M^-1 u from one solve
 * (tb_loop_q: 1 - q = det M0 / det M), for the argument principle. probe->row is
 * left as it was; the loops' w is not. Errors as tb_probe_factor, TB_ERR_NUMERIC. */
tb_status tb_probe_q(tb_probe *probe, double f, size_t l, double complex *q, size_t *culprit);
/* Factors, with pivoting, M(j 2 pi f) with loop l's source gain k changed to
 * k (1 + d) (tb_mna_values_gain). Errors as tb_probe_factor. */
tb_status tb_probe_factor_gain(tb_probe *probe, double f, size_t l, double d, size_t *culprit);

/* The solver, for work of another kind (the time-step matrix): the probe
 * forgets what it held. */
tb_solver *tb_probe_take_solver(tb_probe *probe);

#endif
