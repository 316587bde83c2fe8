/* src/probe.h: every loop's feedback quantities at one arbitrary frequency by a fresh factorization */
#ifndef TB_PROBE_H
#define TB_PROBE_H

#include "loop.h"

/* Borrowed pieces of an analysis (the sweep's): the probe allocates nothing. */
typedef struct {
    const tb_mna *mna;
    tb_solver *solver;
    tb_loop_work *work;
    double *Mx;        /* 2*nnz doubles */
    tb_point *row;     /* mna->loop_count points, written by tb_probe_eval */
    double rcond_drop; /* as tb_options.refactor_rcond_drop */
    size_t evaluations;
} tb_probe;

/* Writes M(j 2 pi f), factors it (the last pivot order, or afresh with pivoting
 * when the pivots degrade: tb_solver_refactor) and evaluates every loop into
 * probe->row. Errors: TB_ERR_SINGULAR (zero pivot at unknown *culprit),
 * TB_ERR_NOMEM, TB_ERR_NUMERIC. */
tb_status tb_probe_eval(tb_probe *probe, double f, size_t *culprit);

#endif
