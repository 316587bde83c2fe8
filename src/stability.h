/* src/stability.h: per-loop margins, poles, Nyquist count, dominant pair and verdict */
#ifndef TB_STABILITY_H
#define TB_STABILITY_H

#include "probe.h"
#include "result.h"

/* Fills res->stab (one tb_stability per loop) using probe's fresh solves, the
 * dense pencil of probe->mna (up to opt->pole_limit unknowns) and the sweep
 * table. Errors: TB_ERR_NOMEM. */
tb_status tb_stability_run(tb_probe *probe, const tb_options *opt, tb_result *res);

/* Sets st's pair_* fields: the dominant pair's second-order overshoot against the
 * computed step response's (step may be NULL or not computed), its peaking against
 * the closed-loop peaking of A over the sweep; pair_disagrees (and the note
 * TB_SNOTE_PAIR_DISAGREES) when either misses by more than 2x (docs/stability.md).
 * Nothing to compare without a dominant pair. */
void tb_stability_vs_step(const tb_step_figures *step, tb_stability *st);

#endif
