/* src/margin.h: exact crossings of T by adaptive refinement and Brent on fresh solves; margins */
#ifndef TB_MARGIN_H
#define TB_MARGIN_H

#include "probe.h"
#include "result.h"

/* Bisections of one sweep interval at most this deep, and at most this many
 * refinement solves per loop (the roots come on top). */
#define TB_MARGIN_MAX_DEPTH 12
#define TB_MARGIN_BUDGET 4000
/* An interval is split when T's phase moves more than this many degrees, |T|
 * more than TB_MARGIN_SPLIT_DB, or the phase of 1 + T more than TB_MARGIN_SPLIT_RET. */
#define TB_MARGIN_SPLIT_DEG 12.0
#define TB_MARGIN_SPLIT_DB 3.0
#define TB_MARGIN_SPLIT_RET 20.0
/* The Nyquist path runs this many decades below and above the sweep. */
#define TB_MARGIN_EXT_DECADES 6

/* What the scan of one loop leaves for the Nyquist count. */
typedef struct {
    bool ok;            /* the path was followed from DC (or near it) to far above the sweep */
    bool near_minus1;   /* |1 + T| vanished somewhere on the path */
    double turn_deg;    /* change of arg(1 + T) from w = 0+ to the top of the path */
    double arc_deg;     /* change of arg(1 + T) along the small arc around s = 0 (T infinite at DC) */
} tb_nyquist_path;

/* Finds every unity crossing and every crossing of the unwrapped phase through
 * an odd multiple of 180 degrees in loop l's sweep, each refined by Brent on
 * fresh solves after adaptive bisection of fast-changing intervals; the phase,
 * gain, delay and vector margins; and follows arg(1 + T) along the Nyquist path.
 * Fills the crossing and margin fields of *st and *path. Errors: TB_ERR_NOMEM. */
tb_status tb_margin_scan(tb_probe *probe, const tb_result *res, size_t l, tb_stability *st,
                         tb_nyquist_path *path);

#endif
