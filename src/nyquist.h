/* src/nyquist.h: encirclements of -1 by T(jw) and the verdict that weighs them against the poles */
#ifndef TB_NYQUIST_H
#define TB_NYQUIST_H

#include "margin.h"

/* N = net clockwise encirclements of -1 by T(jw), w from -inf to inf, from the
 * turn of arg(1 + T) along w >= 0 (doubled by conjugate symmetry) and the arc
 * around s = 0: N = -(2 turn + arc)/360. false when the path is broken, passes
 * through -1, or the count is not within 0.05 of an integer. */
bool tb_nyquist_count(const tb_nyquist_path *path, long *n);

/* The verdict of *st from its pole counts and Nyquist count (fields has_poles,
 * cl_rhp, cl_axis, ol_rhp, has_nyquist, nyquist_n), with notes: the poles' own
 * verdict in pole_verdict; when Z = cl_rhp differs from N + P, counts_disagree
 * and the worse of the two verdicts. ol_axis_away tells that the open loop has
 * poles on the axis other than s = 0 (the path's small arc goes round s = 0
 * only): then, as with closed-loop poles on the axis, the counts are not compared.
 * Without poles, the counts of the argument principle (cl_count_by, ol_count_by
 * TB_COUNT_WINDING) take their place; with neither, P = 0 is assumed and noted. */
void tb_nyquist_verdict(tb_stability *st, bool ol_axis_away);

#endif
