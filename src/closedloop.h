/* src/closedloop.h: the closed-loop gain A(jw): reference gain, -3 dB band edges and peaking by root finding */
#ifndef TB_CLOSEDLOOP_H
#define TB_CLOSEDLOOP_H

#include "probe.h"
#include "result.h"

/* Six decades beyond the sweep at two points per decade, where an edge is
 * searched when the sweep does not hold it. */
#define TB_CL_EXT_DECADES 6

/* Fills res->cl (and res->mid, every loop at midband, when A(0) = 0) from the
 * sweep table, refining on fresh solves through probe: the midband maximum and
 * the peak by Brent minimization in log f, the -3 dB edges by Brent on
 * ln|A| in log f. Errors: TB_ERR_NOMEM. */
tb_status tb_closed_loop_run(tb_probe *probe, tb_result *res, bool peak_refine);

#endif
