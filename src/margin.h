/* src/margin.h: exact crossings of T over the whole frequency axis by adaptive refinement and Brent on fresh solves; margins */
#ifndef TB_MARGIN_H
#define TB_MARGIN_H

#include "probe.h"
#include "result.h"

/* Bisections of one interval at most this deep, and at most this many
 * refinement solves per loop (the roots come on top). */
#define TB_MARGIN_MAX_DEPTH 12
#define TB_MARGIN_BUDGET 4000
/* Phase margins closer than this (degrees) are equally bad: the headline is the lower crossing. */
#define TB_MARGIN_TIE_DEG 1e-9
/* An interval is split when T's phase moves more than this many degrees, |T|
 * more than TB_MARGIN_SPLIT_DB, or the phase of 1 + T more than TB_MARGIN_SPLIT_RET.
 * Outside the sweep the |T| rule applies only within TB_MARGIN_NEAR_DB of 0 dB.
 * Between grid points where |T| lies TB_MARGIN_NEAR_DB or more from 0 dB at both
 * ends (on one side), the phase and |T| rules split at TB_MARGIN_SPLIT_DEG_FAR and
 * TB_MARGIN_SPLIT_DB_FAR instead: there they only keep the unwrapped phase of T
 * (about 6.6 degrees per dB on a diffusive RC line) and bracket its crossings of
 * -180 + 360 k degrees, which lie 360 degrees apart; no unity crossing is near.
 * Only where the phase's rate over the last leaf predicts at most
 * TB_MARGIN_SPLIT_DEG_FAR for the interval too: a wrapped difference of 60 degrees
 * may hide a true one of 300 (a chain of buffered RC segments turns that fast). */
#define TB_MARGIN_SPLIT_DEG 12.0
#define TB_MARGIN_SPLIT_DB 3.0
#define TB_MARGIN_SPLIT_RET 20.0
#define TB_MARGIN_NEAR_DB 20.0
#define TB_MARGIN_SPLIT_DEG_FAR 60.0
#define TB_MARGIN_SPLIT_DB_FAR 9.0
/* Once the phase-crossing list is full and one more crossing was seen (the margins are
 * then not determined and no later crossing would be listed), the phase of T is no
 * longer followed between samples where |T| lies more than TB_MARGIN_NEAR_DB below 0 dB
 * at both ends (1 + T then stays in the right half-plane), and the |T| rule there splits
 * at a change of the larger of TB_MARGIN_SPLIT_DB_FAR and the distance from 0 dB over
 * TB_MARGIN_RISE_FACTOR: a unity crossing between two such samples would need |T| to
 * rise above them by more than this factor times the change seen across the interval
 * (an assumption of smoothness, as every sampling rule here). Near or above 0 dB the
 * phase is followed as before: 1 + T turns with T there. */
#define TB_MARGIN_RISE_FACTOR 4.0
/* Where |T| lies more than tb_scan_wants.gm_cap_db below 0 dB at both ends of an interval
 * (and TB_MARGIN_NEAR_DB at least), T's phase is treated as after an overflowing list: not
 * followed, its crossings neither bracketed nor listed. A gain margin there would exceed the
 * cap: when no phase crossing is listed on the rising side, the margin is given as a bound. */
/* Outside the sweep the phase of T is not followed where |T| lies this much further
 * from 1 than at a critical gain already found on the same side of 1. */
#define TB_MARGIN_FAR_DB 20.0
/* The path runs at least this many decades below and above the sweep ... */
#define TB_MARGIN_EXT_DECADES 6
/* ... and on, at most this many decades further, until T has settled to its
 * asymptote |T| ~ c f^n with a constant phase (TB_MARGIN_SETTLE_SLOPE, _DEG per
 * half decade) on the side where it moves away from |T| = 1. */
#define TB_MARGIN_MAX_EXTRA_DECADES 30
#define TB_MARGIN_SETTLE_SLOPE 0.05
#define TB_MARGIN_SETTLE_DEG 1.0

/* What the scan of one loop leaves for the Nyquist count. */
typedef struct {
    bool ok;            /* the path was followed from DC (or near it) to far above the sweep */
    bool near_minus1;   /* |1 + T| vanished somewhere on the path */
    double turn_deg;    /* change of arg(1 + T) from w = 0+ to the top of the path */
    double arc_deg;     /* change of arg(1 + T) along the small arc around s = 0 (T infinite at DC) */
} tb_nyquist_path;

/* Follows loop l's T from DC (the small arc round s = 0 when T is infinite there)
 * through the sweep to far above it, until T has settled to its asymptote at
 * both ends, and finds every unity crossing and every crossing of the unwrapped
 * phase through an odd multiple of 180 degrees (and DC itself when T(0) < 0),
 * each refined by Brent on fresh solves after adaptive bisection; the gain
 * margins up and down, the vector margin, and arg(1 + T) along the Nyquist path
 * (what is refined: *wants).
 * Fills the crossing and margin fields of *st (all but the headline phase and
 * delay margins, which need the verdict: tb_margin_judge) and *path.
 * Errors: TB_ERR_NOMEM. */
typedef struct {
    bool vector_refine; /* the vector margin refined between samples (else the best sample's) */
    double gm_cap_db;   /* > 0: phase crossings where |T| lies further below 0 dB are not followed
                         * (the gain margin then "more than gm_cap_db"); 0: every one */
    bool crossing_list; /* phase crossings refined as found; false: bracketed, refined at the end,
                         * none when more turn up than the list keeps (the margins are then not
                         * determined, and no list is wanted: spread samples) */
} tb_scan_wants;

tb_status tb_margin_scan(tb_probe *probe, const tb_result *res, size_t l, const tb_scan_wants *wants,
                         tb_stability *st, tb_nyquist_path *path);

/* Once st->verdict is known: the headline phase margin (the crossing of smallest
 * |margin| in a stable loop, smallest signed margin otherwise), the delay margin
 * (stable loops only), and whether the thresholds pm_min_deg and gm_min_db hold
 * (st->pm_ok, st->gm_ok; both false when the margins are not determined). */
void tb_margin_judge(tb_stability *st, double pm_min_deg, double gm_min_db);

#endif
