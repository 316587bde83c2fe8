/* src/spreadrun.h: runs of the circuit at changed values, shared among threads on one symbolic analysis */
#ifndef TB_SPREADRUN_H
#define TB_SPREADRUN_H

#include "spread.h"

/* Sets the element values (values[elem_count], preset to the netlist's) and the parameter
 * columns (params[set->params]) of run `run` of a plan, with work (the plan's workspace,
 * one per thread); false when the run has no values (an expression of a parameter fails
 * there). Must be a pure function of its arguments: runs are shared among threads in no
 * fixed order. */
typedef bool (*tb_spread_fill)(const void *plan, size_t run, double *values, double *params, double *work);

/* Runs rows first .. first + count - 1 of set: each analysed (opt->analysis, one thread
 * per run) on the symbolic analysis of the nominal circuit, its figures, status and A at
 * set's probe frequencies recorded. A run whose analysis fails (a singular matrix at its
 * values), whose fill fails or that gives an element a value no analysis takes
 * (tb_spreadcard_value_ok) keeps TB_RUN_ERROR. opt->jobs threads share the runs, each
 * with `work` doubles of workspace for fill. Errors: TB_ERR_NOMEM, those of stamping the
 * nominal circuit (with diag). */
tb_status tb_spreadrun_all(const tb_circuit *ckt, const tb_spread_options *opt, tb_diag *diag, tb_spread_fill fill,
                           const void *plan, size_t work, size_t first, size_t count, tb_spreadset *set);

/* Chooses set's probe frequencies from ckt's grid: DC and up to TB_SPREAD_PROBES - 1 grid
 * points spread evenly over it. Errors: TB_ERR_NOMEM. */
tb_status tb_spreadrun_probes(const tb_circuit *ckt, tb_spreadset *set);

/* The nominal circuit's T (every loop) and A at set's probe frequencies, into set->T_nom and
 * set->A_nom (set->has_nominal). Errors: those of tb_analyse. */
tb_status tb_spreadrun_nominal(const tb_circuit *ckt, const tb_spread_options *opt, tb_diag *diag,
                               tb_spreadset *set);

#endif
