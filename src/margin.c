/* src/margin.c: exact crossings of T over the whole frequency axis by adaptive refinement and Brent on fresh solves; margins */
#include "margin.h"
#include "units.h"

#include <math.h>

#include "crossing.h"

/* Samples the low end may go down by: the first three, then half decades. */
#define LOW_MAX (3 + 2 * TB_MARGIN_MAX_EXTRA_DECADES)

/* One point of the path: T, its unwrapped phase, and the unwrapped phase of 1 + T. */
typedef struct {
    double f;
    double complex T;
    bool inf;
    double deg;
    double ret;
} sample;

typedef struct {
    tb_probe *probe;
    size_t l;
    tb_stability *st;
    tb_nyquist_path *path;
    double fstart;   /* the sweep's range: crossings outside it are flagged */
    double fstop;
    bool in_sweep;   /* the interval lies between two grid points: split as inside the sweep */
    bool complete;   /* nothing failed or ran out: the crossings found are all there are */
    size_t budget;   /* refinement solves left */
    bool has_up;     /* the nearest critical gains so far: |T| at the phase crossing where */
    double up_mag;   /* |T| < 1 comes closest to 1 (from below) ... */
    bool has_down;
    double down_mag; /* ... and where |T| > 1 comes closest to 1 (from above) */
    bool vm_open;    /* the best |1 + T| so far waits for its right neighbour */
    double vm_lo;
    double vm_hi;
    bool rate_known; /* rate: d(phase of T)/d(ln f) over the last leaf, degrees */
    double rate;
    bool phase_off;  /* the phase-crossing list is full and one more was seen: T's phase is no
                      * longer followed (its turns no longer counted) */
    double cap;      /* |T| below this (linear, < 1) at both ends of an interval: phase not followed */
    bool capped;     /* somewhere below the cap the phase turned or crossed -180 (mod 360) unfollowed */
    bool turns_lost; /* T's turns are no longer counted (phase_off, or turns skipped below the cap):
                      * later crossings carry the principal phase */
    bool defer;      /* phase crossings bracketed now, refined at the end (none on overflow) */
    size_t deferred;
    struct {
        sample a, b;
        double level;
    } later[TB_MAX_CROSSINGS];
} scan;

enum { ROOT_UNITY, ROOT_PHASE };


/* Continues the unwrapped phases of `from` to `to` (T known). */
static void link_phase(const sample *from, sample *to)
{
    if (to->inf) {
        to->deg = from->deg;
        to->ret = from->ret;
        return;
    }
    double d = carg(to->T) * TB_DEG_PER_RAD - from->deg;
    to->deg = from->deg + (from->inf ? tb_phase_step_past_pole(d) : tb_wrap180(d));
    to->ret = from->ret + tb_wrap180(carg(1.0 + to->T) * TB_DEG_PER_RAD - from->ret);
}

static void note(scan *sc, tb_stab_note n)
{
    sc->st->notes |= 1u << n;
}

/* Something the margins depend on failed or ran out: they are not determined. */
static void incomplete(scan *sc, tb_stab_note why)
{
    note(sc, why);
    sc->complete = false;
}

/* A fresh solve at f, unwrapped from `from`. A singular matrix (a closed-loop
 * pole on the axis) is noted and passed on for the caller to skip the point. */
static tb_status eval(scan *sc, double f, const sample *from, sample *out)
{
    size_t culprit = 0;
    tb_status st = tb_probe_eval_loop(sc->probe, f, sc->l, &culprit);
    if (st) {
        if (st != TB_ERR_NOMEM)
            incomplete(sc, TB_SNOTE_PROBE_FAILED);
        return st;
    }
    const tb_point *pt = &sc->probe->row[sc->l];
    out->f = f;
    out->inf = pt->flags & TB_PT_T_INF;
    out->T = out->inf ? 0 : pt->T;
    link_phase(from, out);
    return TB_OK;
}

static double db_of(double complex T)
{
    return 20.0 * log10(fmax(cabs(T), 1e-300));
}

/* Outside the sweep, false when a phase crossing between a and b could set no
 * gain margin: |T| at both ends lies TB_MARGIN_FAR_DB further from 1 than at a
 * critical gain already found on that side. There the phase of T is neither
 * refined nor searched (a loop with hundreds of poles above its sweep turns its
 * phase thousands of degrees where |T| is astronomically small). */
static bool phase_matters(const scan *sc, const sample *a, const sample *b)
{
    if (sc->in_sweep)
        return true;
    double far = pow(10.0, TB_MARGIN_FAR_DB / 20.0);
    double lo = fmin(cabs(a->T), cabs(b->T)), hi = fmax(cabs(a->T), cabs(b->T));
    return !(sc->has_up && hi * far < sc->up_mag) && !(sc->has_down && lo > sc->down_mag * far);
}

/* Both ends below the gain-margin cap (and far from 0 dB): T's phase is not followed there. */
static bool under_cap(const scan *sc, const sample *a, const sample *b)
{
    return !a->inf && !b->inf && cabs(a->T) < sc->cap && cabs(b->T) < sc->cap;
}

/* Between grid points every rule applies, coarser where |T| is far from 0 dB;
 * outside the sweep the |T| rule only near 0 dB, where it sharpens the brackets
 * of unity crossings. The phase of T only where it matters (the phase of 1 + T
 * always, for the Nyquist count). */
static bool needs_split(const scan *sc, const sample *a, const sample *b)
{
    if (a->inf || b->inf)
        return false;
    double da = db_of(a->T), db = db_of(b->T);
    bool near = fmin(fabs(da), fabs(db)) < TB_MARGIN_NEAR_DB || (da < 0) != (db < 0);
    /* coarse only where the phase's rate over the last leaf also predicts a small change:
     * a wrapped difference of 60 degrees may hide a true one of 300 */
    bool far = sc->in_sweep && !near && sc->rate_known &&
               fabs(sc->rate * log(b->f / a->f)) <= TB_MARGIN_SPLIT_DEG_FAR;
    double split_deg = far ? TB_MARGIN_SPLIT_DEG_FAR : TB_MARGIN_SPLIT_DEG;
    double split_db = far ? TB_MARGIN_SPLIT_DB_FAR : TB_MARGIN_SPLIT_DB;
    /* past an overflowing crossing list, where |T| lies far below 1 at both ends, only |T| < 1
     * throughout is asked: then 1 + T stays in the right half-plane and its phase needs no
     * following; a rise to 0 dB must exceed TB_MARGIN_RISE_FACTOR times the change seen.
     * Near or above 1 the phase of T is followed as before: 1 + T turns with it. */
    bool below = (sc->phase_off || under_cap(sc, a, b)) && !near && da < 0;
    if (below)
        split_db = fmax(TB_MARGIN_SPLIT_DB_FAR, fmin(fabs(da), fabs(db)) / TB_MARGIN_RISE_FACTOR);
    return (!below && fabs(b->deg - a->deg) > split_deg && phase_matters(sc, a, b)) ||
           fabs(b->ret - a->ret) > TB_MARGIN_SPLIT_RET || ((near || sc->in_sweep) && fabs(db - da) > split_db);
}

/* A phase crossing with |T| = mag: the nearest critical gains so far. */
static void critical(scan *sc, double mag)
{
    if (mag <= 1.0 && (!sc->has_up || mag > sc->up_mag)) {
        sc->has_up = true;
        sc->up_mag = mag;
    } else if (mag > 1.0 && (!sc->has_down || mag < sc->down_mag)) {
        sc->has_down = true;
        sc->down_mag = mag;
    }
}

static tb_sweep_side side_of(const scan *sc, double f)
{
    return f < sc->fstart ? TB_SWEEP_BELOW : f > sc->fstop ? TB_SWEEP_ABOVE : TB_SWEEP_INSIDE;
}

/* Degrees of lag that take T through -1 at a unity crossing with phase margin pm. */
static double lag_deg(double pm)
{
    return pm >= 0 ? pm : pm + 360.0;
}

typedef struct {
    scan *sc;
    const sample *a;
    int kind;
    double level;
} root_ctx;

static tb_status root_fn(void *ctx, double x, double *y)
{
    root_ctx *rc = ctx;
    sample s;
    tb_status st = eval(rc->sc, exp(x), rc->a, &s);
    if (st)
        return st;
    if (s.inf)
        return TB_ERR_NUMERIC;
    *y = rc->kind == ROOT_UNITY ? log(fmax(cabs(s.T), 1e-300)) : s.deg - rc->level;
    return TB_OK;
}

static void append(scan *sc, tb_crossing *list, size_t *count, const tb_crossing *c)
{
    if (*count >= TB_MAX_CROSSINGS) {
        incomplete(sc, TB_SNOTE_TRUNCATED);
        return;
    }
    list[(*count)++] = *c;
}

/* ln|T| of a sample for the unity search: an infinite T (a pole of T on the axis, at a
 * lossless resonance) stands as |T| = 1e300, far above 1. */
static double ln_mag(const sample *s)
{
    return s->inf ? log(1e300) : log(fmax(cabs(s->T), 1e-300));
}

/* Brent between a and b on the unity or phase function; records the crossing. */
static tb_status refine_root(scan *sc, const sample *a, const sample *b, int kind, double level)
{
    root_ctx rc = {sc, a, kind, level};
    double fa = kind == ROOT_UNITY ? ln_mag(a) : a->deg - level;
    double fb = kind == ROOT_UNITY ? ln_mag(b) : b->deg - level;
    double x = 0;
    sample s;
    tb_status st = tb_brent_root(root_fn, &rc, log(a->f), log(b->f), fa, fb, 1e-13, 100, &x);
    if (!st)
        st = eval(sc, exp(x), a, &s);
    if (st == TB_ERR_NUMERIC || st == TB_ERR_USAGE)
        incomplete(sc, TB_SNOTE_PROBE_FAILED);
    if (st)
        return st == TB_ERR_NOMEM ? st : TB_OK; /* noted; the crossing is skipped */
    tb_crossing c = {.hz = s.f, .T_db = db_of(s.T), .phase_deg = s.deg, .sweep = side_of(sc, s.f)};
    if (kind == ROOT_UNITY) {
        c.direction = ln_mag(b) > ln_mag(a) ? 1 : -1;
        c.margin = tb_wrap180(s.deg + 180.0);
        if (sc->turns_lost) /* T's turns are no longer counted: the principal phase, in (-360, 0] */
            c.phase_deg = c.margin - 180.0;
        c.delay_s = lag_deg(c.margin) / 360.0 / s.f;
        append(sc, sc->st->unity, &sc->st->unity_count, &c);
    } else {
        c.direction = b->deg > a->deg ? 1 : -1;
        c.margin = -c.T_db;
        if (sc->turns_lost)
            c.phase_deg = -180.0;
        critical(sc, cabs(s.T));
        append(sc, sc->st->phase, &sc->st->phase_count, &c);
    }
    return TB_OK;
}

static void track_vector(scan *sc, const sample *a, const sample *b)
{
    if (sc->vm_open) {
        sc->vm_hi = b->f;
        sc->vm_open = false;
    }
    if (b->inf)
        return;
    double d = cabs(1.0 + b->T);
    if (d < 1e-9)
        sc->path->near_minus1 = true;
    if (sc->st->has_vector_margin && d >= sc->st->vector_margin)
        return;
    sc->st->has_vector_margin = true;
    sc->st->vector_margin = d;
    sc->st->vector_margin_hz = b->f;
    sc->vm_lo = a->f;
    sc->vm_hi = b->f;
    sc->vm_open = true;
}

/* The crossings inside one interval that needs no further splitting. */
static tb_status leaf(scan *sc, const sample *a, const sample *b)
{
    track_vector(sc, a, b);
    sc->rate_known = !a->inf && !b->inf && b->f > a->f;
    if (sc->rate_known)
        sc->rate = (b->deg - a->deg) / log(b->f / a->f);
    if (a->inf && b->inf)
        return TB_OK;
    if (a->inf || b->inf) { /* |T| rises without bound towards the infinite end: from below 1, it crosses 1 */
        const sample *finite = a->inf ? b : a;
        return cabs(finite->T) < 1.0 ? refine_root(sc, a, b, ROOT_UNITY, 0) : TB_OK;
    }
    tb_status st = TB_OK;
    if ((cabs(a->T) < 1.0) != (cabs(b->T) < 1.0))
        st = refine_root(sc, a, b, ROOT_UNITY, 0);
    if (st || sc->phase_off || !phase_matters(sc, a, b))
        return st;
    double lo = fmin(a->deg, b->deg), hi = fmax(a->deg, b->deg);
    if (under_cap(sc, a, b)) { /* a crossing here would set a gain margin above the cap */
        if (hi - lo > TB_MARGIN_SPLIT_DEG || floor((hi - 180.0) / 360.0) != floor((lo - 180.0) / 360.0)) {
            sc->capped = true;
            sc->turns_lost = true;
        }
        return st;
    }
    for (double k = ceil((lo - 180.0) / 360.0); !st && 180.0 + 360.0 * k <= hi; k++) {
        double level = 180.0 + 360.0 * k;
        if ((a->deg < level) == (b->deg < level))
            continue;
        if (sc->defer && sc->in_sweep && sc->st->phase_count + sc->deferred < TB_MAX_CROSSINGS) {
            sc->later[sc->deferred].a = *a;
            sc->later[sc->deferred].b = *b;
            sc->later[sc->deferred++].level = level;
        } else if (sc->st->phase_count + sc->deferred >= TB_MAX_CROSSINGS) {
            /* the list is full: the crossing would not be kept, nor would any later one, and the
             * margins are not determined; from here T's phase need not be followed */
            incomplete(sc, TB_SNOTE_TRUNCATED);
            sc->phase_off = sc->turns_lost = true;
            break;
        }
            st = refine_root(sc, a, b, ROOT_PHASE, level);
    }
    return st;
}

/* Bisects [a, b] in log f while T or 1 + T changes fast, then scans the leaves.
 * b must be linked to a; on return its unwrapped phases follow the leaves. */
static tb_status interval(scan *sc, const sample *a, sample *b, int depth)
{
    if (depth < TB_MARGIN_MAX_DEPTH && needs_split(sc, a, b)) {
        if (sc->budget == 0) {
            incomplete(sc, TB_SNOTE_REFINE_BUDGET);
        } else {
            sc->budget--;
            sample m;
            tb_status st = eval(sc, sqrt(a->f * b->f), a, &m);
            if (st == TB_ERR_NOMEM)
                return st;
            if (st == TB_OK) {
                if ((st = interval(sc, a, &m, depth + 1)))
                    return st;
                link_phase(&m, b);
                return interval(sc, &m, b, depth + 1);
            }
        }
    }
    return leaf(sc, a, b);
}

/* Moves the path from *cur to next (T known), refining in between. */
static tb_status step_to(scan *sc, sample *cur, sample next)
{
    link_phase(cur, &next);
    tb_status st = interval(sc, cur, &next, 0);
    *cur = next;
    return st;
}

/* Probes f and steps there (*stepped says so); a failed solve leaves the path broken. */
static tb_status probe_step(scan *sc, sample *cur, double f, bool *stepped)
{
    sample next;
    *stepped = false;
    tb_status st = eval(sc, f, cur, &next);
    if (st) {
        sc->path->ok = false;
        return st == TB_ERR_NOMEM ? st : TB_OK;
    }
    *stepped = true;
    return step_to(sc, cur, next);
}

/* Fits |T| ~ c f^n with a constant phase to three ascending samples: *n the
 * nearest integer slope, true when both slopes lie within TB_MARGIN_SETTLE_SLOPE
 * of it and the phase moves less than TB_MARGIN_SETTLE_DEG per step. */
static bool power_law(const sample *s, int *n)
{
    *n = 0;
    if (s[0].inf || s[1].inf || s[2].inf)
        return false;
    double m0 = cabs(s[0].T), m1 = cabs(s[1].T), m2 = cabs(s[2].T);
    if (m0 == 0 && m1 == 0 && m2 == 0)
        return true; /* T vanishes here: no loop, no crossing */
    if (m0 == 0 || m1 == 0 || m2 == 0)
        return false;
    double k1 = log(m1 / m0) / log(s[1].f / s[0].f);
    double k2 = log(m2 / m1) / log(s[2].f / s[1].f);
    double k = round(0.5 * (k1 + k2));
    *n = (int)k;
    return fabs(k1 - k) <= TB_MARGIN_SETTLE_SLOPE && fabs(k2 - k) <= TB_MARGIN_SETTLE_SLOPE &&
           fabs(carg(s[1].T / s[0].T)) * TB_DEG_PER_RAD <= TB_MARGIN_SETTLE_DEG &&
           fabs(carg(s[2].T / s[1].T)) * TB_DEG_PER_RAD <= TB_MARGIN_SETTLE_DEG;
}

/* true when three ascending samples show T on its asymptote at one end of the
 * axis (end < 0: towards DC, end > 0: towards infinity) and the asymptote carries
 * |T| away from 1 there: no crossing lies beyond them. */
static bool settled(const sample *s, int end, int *n)
{
    if (!power_law(s, n))
        return false;
    double mag = cabs(s[end < 0 ? 0 : 2].T);
    int outward = end < 0 ? -*n : *n; /* the sign of d ln|T| moving outwards */
    return !(outward > 0 && mag < 1.0) && !(outward < 0 && mag > 1.0);
}

/* The low asymptote agrees with DC: T(0) itself (to 1 %), an integrator's
 * infinity, or T's zero at s = 0. */
static bool meets_dc(const tb_result *res, size_t l, const sample *bottom, int n)
{
    if (!res->has_dc)
        return true;
    const tb_point *dc = &res->dc[l];
    if (dc->flags & TB_PT_T_INF)
        return n < 0;
    if (cabs(dc->T) == 0)
        return n > 0 || cabs(bottom->T) == 0;
    return n == 0 && cabs(bottom->T / dc->T - 1.0) <= 1e-2;
}

/* DC itself: |1 + T(0)| for the vector margin, and a critical point of the gain
 * when T(0) is real and negative (K T(0) = -1 at K = 1/|T(0)|). */
static void dc_point(scan *sc, const sample *z)
{
    double d = cabs(1.0 + z->T);
    tb_stability *st = sc->st;
    if (!st->has_vector_margin || d < st->vector_margin) {
        st->has_vector_margin = true;
        st->vector_margin = d;
        st->vector_margin_hz = 0;
    }
    if (creal(z->T) < 0 && fabs(cimag(z->T)) <= 1e-12 * fabs(creal(z->T))) {
        tb_crossing c = {.hz = 0, .T_db = db_of(z->T), .phase_deg = z->deg, .sweep = TB_SWEEP_BELOW};
        c.margin = -c.T_db;
        critical(sc, cabs(z->T));
        append(sc, st->phase, &st->phase_count, &c);
    }
}

/* The phases of the lowest sample: continued from T(0); or its own when T is
 * infinite at DC (the arc round s = 0 then turns arg(1 + T) by n 180 degrees,
 * T ~ K s^n, n < 0) or M(0) is singular (a closed-loop pole at s = 0). */
static void start_path(scan *sc, const tb_result *res, sample *bottom, int n, double *ret0)
{
    const tb_point *dc = res->has_dc ? &res->dc[sc->l] : NULL;
    if (dc && !(dc->flags & TB_PT_T_INF)) {
        sample z = {.f = 0, .T = dc->T};
        z.deg = carg(z.T) * TB_DEG_PER_RAD;
        z.ret = carg(1.0 + z.T) * TB_DEG_PER_RAD;
        *ret0 = z.ret;
        link_phase(&z, bottom);
        dc_point(sc, &z);
        return;
    }
    if (!dc)
        sc->path->ok = false;
    else
        sc->path->arc_deg = n * 180.0;
    bottom->deg = carg(bottom->T) * TB_DEG_PER_RAD;
    bottom->ret = carg(1.0 + bottom->T) * TB_DEG_PER_RAD;
    *ret0 = bottom->ret;
}

/* From DC up to just below the sweep: three points from TB_MARGIN_EXT_DECADES
 * decades below it, then half decades further down until T has settled there
 * (the samples kept, so none is solved twice), then the path up from the lowest
 * at two points per decade. Leaves cur->f = 0 when the first solves fail. */
static tb_status low_leg(scan *sc, const tb_result *res, sample *cur, double *ret0)
{
    sample s[LOW_MAX];
    size_t lo = LOW_MAX - 3; /* s[lo..LOW_MAX) ascending */
    double f_low = sc->fstart * pow(10.0, -TB_MARGIN_EXT_DECADES);
    sample zero = {0};
    tb_status st = TB_OK;
    for (size_t i = 0; i < 3 && !st; i++)
        st = eval(sc, f_low * pow(10.0, i / 2.0), &zero, &s[lo + i]);
    if (st) {
        sc->path->ok = false;
        return st == TB_ERR_NOMEM ? st : TB_OK;
    }
    int n = 0;
    while (!(settled(s + lo, -1, &n) && meets_dc(res, sc->l, &s[lo], n))) {
        if (lo == 0) {
            incomplete(sc, TB_SNOTE_UNSETTLED_LOW);
            break;
        }
        st = eval(sc, s[lo].f / sqrt(10.0), &zero, &s[lo - 1]);
        if (st == TB_ERR_NOMEM)
            return st;
        if (st)
            break; /* noted: the margins are not determined */
        lo--;
    }
    sc->st->search_lo_hz = s[lo].f;
    start_path(sc, res, &s[lo], n, ret0);
    *cur = s[lo];
    st = TB_OK;
    for (size_t i = lo + 1; i < LOW_MAX && !st; i++)
        st = step_to(sc, cur, s[i]);
    bool stepped = false;
    for (int k = 4; k < 2 * TB_MARGIN_EXT_DECADES && !st; k += 2) /* whole decades: the split rules refine */
        st = probe_step(sc, cur, f_low * pow(10.0, k / 2.0), &stepped);
    return st;
}

static tb_status sweep_leg(scan *sc, const tb_result *res, sample *cur)
{
    const tb_point *pts = tb_result_loop(res, sc->l);
    tb_status st = TB_OK;
    for (size_t i = 0; i < res->npoints && !st; i++) {
        bool inf = pts[i].flags & TB_PT_T_INF;
        sample next = {.f = res->freqs[i], .T = inf ? 0 : pts[i].T, .inf = inf};
        if (cur->f == 0) { /* no low leg: start here, with the table's phase */
            next.deg = tb_result_phase(res, sc->l)[i];
            next.ret = carg(1.0 + next.T) * TB_DEG_PER_RAD;
            *cur = next;
            continue;
        }
        sc->in_sweep = i > 0;
        st = step_to(sc, cur, next);
    }
    sc->in_sweep = false;
    return st;
}

/* Above the sweep, half a decade at a time: at least TB_MARGIN_EXT_DECADES
 * decades, then on until the last three points show T settled. */
static tb_status high_leg(scan *sc, sample *cur)
{
    sample last[3];
    size_t have = 0;
    int n = 0;
    for (int k = 1; k <= 2 * (TB_MARGIN_EXT_DECADES + TB_MARGIN_MAX_EXTRA_DECADES); k += k < 2 ? 1 : 2) {
        bool stepped = false;
        tb_status st = probe_step(sc, cur, sc->fstop * pow(10.0, k / 2.0), &stepped);
        if (st)
            return st;
        if (!stepped) {
            have = 0;
            continue;
        }
        last[0] = last[1];
        last[1] = last[2];
        last[2] = *cur;
        if (have < 3)
            have++;
        sc->st->search_hi_hz = cur->f;
        if (k >= 2 * TB_MARGIN_EXT_DECADES && have == 3 && settled(last, 1, &n))
            return TB_OK;
    }
    incomplete(sc, TB_SNOTE_UNSETTLED_HIGH);
    return TB_OK;
}

typedef struct {
    scan *sc;
} min_ctx;

static tb_status distance_fn(void *ctx, double x, double *y)
{
    min_ctx *mc = ctx;
    sample zero = {0}, s;
    tb_status st = eval(mc->sc, exp(x), &zero, &s);
    if (st)
        return st;
    *y = s.inf ? INFINITY : cabs(1.0 + s.T);
    return TB_OK;
}

/* Golden-section search for min |1 + T| between the neighbours of the best sample. */
static tb_status refine_vector(scan *sc)
{
    tb_stability *st = sc->st;
    if (!st->has_vector_margin || !(sc->vm_lo > 0 && sc->vm_lo < sc->vm_hi))
        return TB_OK;
    min_ctx mc = {sc};
    double x = 0, y = 0;
    tb_status s = tb_line_min(distance_fn, &mc, log(sc->vm_lo), log(sc->vm_hi), 1e-10, 80, &x, &y);
    if (s)
        return s == TB_ERR_NOMEM ? s : TB_OK;
    if (y < st->vector_margin) {
        st->vector_margin = y;
        st->vector_margin_hz = exp(x);
    }
    return TB_OK;
}

/* The gain margins both ways (the nearest critical gains above and below the
 * present one), and the notes on what exists. */
static void summarize(scan *sc)
{
    tb_stability *st = sc->st;
    bool outside = false;
    for (size_t i = 0; i < st->phase_count; i++) {
        const tb_crossing *c = &st->phase[i];
        outside = outside || c->sweep != TB_SWEEP_INSIDE;
        if (c->margin >= 0 && (!st->has_gain_margin_up || c->margin < st->gain_margin_up_db)) {
            st->has_gain_margin_up = true;
            st->gain_margin_up_db = c->margin;
            st->gain_margin_up_hz = c->hz;
        } else if (c->margin < 0 && (!st->has_gain_margin_down || -c->margin < st->gain_margin_down_db)) {
            st->has_gain_margin_down = true;
            st->gain_margin_down_db = -c->margin;
            st->gain_margin_down_hz = c->hz;
        }
    }
    for (size_t i = 0; i < st->unity_count; i++)
        outside = outside || st->unity[i].sweep != TB_SWEEP_INSIDE;
    if (outside)
        note(sc, TB_SNOTE_OUTSIDE_SWEEP);
    if (st->unity_count == 0)
        note(sc, TB_SNOTE_NO_UNITY);
    if (st->unity_count > 1)
        note(sc, TB_SNOTE_MULTIPLE_UNITY);
    if (sc->capped) {
        note(sc, TB_SNOTE_BELOW_GM_CAP);
        st->gm_cap_db = -20.0 * log10(sc->cap);
        st->has_gain_margin_up_above = !st->has_gain_margin_up;
    }
    if (st->phase_count == 0 && !sc->capped)
        note(sc, TB_SNOTE_NO_PHASE_CROSSING);
    else if (!st->has_gain_margin_up && !sc->capped)
        note(sc, TB_SNOTE_NO_GAIN_UP);
    else if (!st->has_gain_margin_down)
        note(sc, TB_SNOTE_NO_GAIN_DOWN);
    st->margins_determined = sc->complete;
}

/* The phase crossings deferred between grid points, refined in the order found at the end
 * of the sweep (so that the critical gains they set steer the search above it as when they
 * are refined at once); none once the list overflowed: the margins are not determined then,
 * and nothing unrefined is listed. */
static tb_status refine_later(scan *sc)
{
    tb_status st = TB_OK;
    for (size_t i = 0; i < sc->deferred && !sc->phase_off && !st; i++)
        st = refine_root(sc, &sc->later[i].a, &sc->later[i].b, ROOT_PHASE, sc->later[i].level);
    sc->deferred = 0;
    return st;
}

tb_status tb_margin_scan(tb_probe *probe, const tb_result *res, size_t l, const tb_scan_wants *wants,
                         tb_stability *st, tb_nyquist_path *path)
{
    size_t before = probe->evaluations;
    *path = (tb_nyquist_path){.ok = true};
    scan sc = {.probe = probe, .l = l, .st = st, .path = path, .complete = true, .budget = TB_MARGIN_BUDGET,
               .fstart = res->freqs[0], .fstop = res->freqs[res->npoints - 1], .defer = !wants->crossing_list,
               .cap = wants->gm_cap_db > 0 ? fmin(pow(10.0, -wants->gm_cap_db / 20.0), pow(10.0, -TB_MARGIN_NEAR_DB / 20.0)) : 0};
    sample cur = {0};
    double ret0 = 0;
    tb_status s = low_leg(&sc, res, &cur, &ret0);
    if (!s)
        s = sweep_leg(&sc, res, &cur);
    if (!s)
        s = refine_later(&sc);
    if (!s)
        s = high_leg(&sc, &cur);
    path->turn_deg = cur.ret - ret0;
    if (!s && wants->vector_refine)
        s = refine_vector(&sc);
    if (s)
        return s;
    summarize(&sc);
    st->evaluations = probe->evaluations - before;
    return TB_OK;
}

/* Smaller is worse: |margin| in a stable loop (lead or lag alike), the signed margin otherwise. */
static double pm_key(const tb_crossing *c, bool stable)
{
    return stable ? fabs(c->margin) : c->margin;
}

void tb_margin_judge(tb_stability *st, double pm_min_deg, double gm_min_db)
{
    bool stable = st->verdict == TB_VERDICT_STABLE;
    st->has_phase_margin = false;
    st->has_delay_margin = false;
    for (size_t i = 0; i < st->unity_count; i++) {
        const tb_crossing *c = &st->unity[i];
        /* a tie to rounding (a symmetric pair about a pole on the axis) keeps the lower crossing */
        if (!st->has_phase_margin ||
            pm_key(c, stable) < pm_key(&st->unity[st->phase_margin_index], stable) - TB_MARGIN_TIE_DEG) {
            st->has_phase_margin = true;
            st->phase_margin_index = i;
        }
        if (stable && (!st->has_delay_margin || c->delay_s < st->delay_margin_s)) {
            st->has_delay_margin = true;
            st->delay_margin_s = c->delay_s;
            st->delay_margin_hz = c->hz;
        }
    }
    if (!stable && (st->unity_count > 0 || st->phase_count > 0))
        st->notes |= 1u << TB_SNOTE_NOT_STABLE;
    if (!st->margins_determined) {
        st->has_phase_margin = st->has_delay_margin = false;
        st->has_gain_margin_up = st->has_gain_margin_down = false;
        st->pm_ok = st->gm_ok = false;
        return;
    }
    if (st->has_phase_margin) {
        const tb_crossing *c = &st->unity[st->phase_margin_index];
        st->phase_margin_deg = c->margin;
        st->phase_margin_hz = c->hz;
    }
    double key = st->has_phase_margin ? pm_key(&st->unity[st->phase_margin_index], stable) : 0;
    st->pm_ok = !st->has_phase_margin || (key >= pm_min_deg && (stable || key > 0));
    bool up = !st->has_gain_margin_up || st->gain_margin_up_db >= gm_min_db;
    if (!st->has_gain_margin_up && st->has_gain_margin_up_above) /* only a bound: "more than the cap" */
        up = st->gm_cap_db >= gm_min_db;
    bool down = !st->has_gain_margin_down || st->gain_margin_down_db >= gm_min_db;
    st->gm_ok = up && down && (stable || (!st->has_gain_margin_up && !st->has_gain_margin_down));
}
