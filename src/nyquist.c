/* src/nyquist.c: encirclements of -1 by T(jw) and the verdict that weighs them against the poles */
#include "nyquist.h"

#include <math.h>

bool tb_nyquist_count(const tb_nyquist_path *path, long *n)
{
    if (!path->ok || path->near_minus1)
        return false;
    double turns = -(2.0 * path->turn_deg + path->arc_deg) / 360.0;
    double nearest = round(turns);
    if (fabs(turns - nearest) > 0.05)
        return false;
    *n = (long)nearest;
    return true;
}

/* The verdict of the closed-loop count alone: a right-half-plane pole outranks everything. */
static tb_verdict pole_verdict(const tb_stability *st)
{
    return st->cl_rhp > 0 ? TB_VERDICT_UNSTABLE : st->cl_axis > 0 ? TB_VERDICT_MARGINAL : TB_VERDICT_STABLE;
}

/* The closed-loop count decides, checked against N + P when P is known. */
static void with_closed_count(tb_stability *st, bool ol_known, bool ol_axis_away)
{
    st->pole_verdict = pole_verdict(st);
    st->verdict = st->pole_verdict;
    if (st->cl_axis > 0 || ol_axis_away) {
        if (st->has_nyquist)
            st->notes |= 1u << TB_SNOTE_NYQUIST_ON_AXIS;
        return; /* the plain contour runs through poles on the axis: no count to compare */
    }
    long z = st->nyquist_n + (long)st->ol_rhp;
    if (ol_known && st->has_nyquist && z != (long)st->cl_rhp) {
        st->counts_disagree = true;
        st->notes |= 1u << TB_SNOTE_COUNTS_DISAGREE;
        if (z > 0)
            st->verdict = TB_VERDICT_UNSTABLE;
    }
}

/* Z = N + P (H. Nyquist, "Regeneration theory", Bell Syst. Tech. J. 11, 1932; the
 * return-difference form det M = det M0 (1 + T) of H. W. Bode, 1945). When the two
 * counts disagree, the worse verdict stands: N + P > 0 says unstable whatever the
 * poles say; N + P < 0 is no count at all (the poles' verdict stands). The
 * closed-loop count comes from the poles or from the argument principle
 * (cl_count_by); without it, N + P decides, with P = ol_rhp where the open loop
 * was counted and P = 0 assumed (and said) where it was not. */
void tb_nyquist_verdict(tb_stability *st, bool ol_axis_away)
{
    bool ol_known = st->has_poles || st->ol_count_by != TB_COUNT_NONE;
    if (st->has_poles || st->cl_count_by != TB_COUNT_NONE) {
        with_closed_count(st, ol_known, ol_axis_away);
        return;
    }
    if (!st->has_nyquist || (ol_known && ol_axis_away)) {
        st->verdict = TB_VERDICT_UNKNOWN;
        return;
    }
    if (!ol_known)
        st->notes |= 1u << TB_SNOTE_NYQUIST_ASSUMES_P0;
    long z = st->nyquist_n + (ol_known ? (long)st->ol_rhp : 0);
    st->verdict = z > 0 ? TB_VERDICT_UNSTABLE : z == 0 ? TB_VERDICT_STABLE : TB_VERDICT_UNKNOWN;
}
