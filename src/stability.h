/* src/stability.h: per-loop margins, poles, Nyquist count, dominant pair and verdict */
#ifndef TB_STABILITY_H
#define TB_STABILITY_H

#include "probe.h"
#include "result.h"

/* Fills res->stab (one tb_stability per loop) using probe's fresh solves, the
 * dense pencil of probe->mna (up to opt->pole_limit unknowns) and the sweep
 * table. Errors: TB_ERR_NOMEM. */
tb_status tb_stability_run(tb_probe *probe, const tb_options *opt, tb_result *res);

#endif
