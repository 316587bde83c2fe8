/* src/margin.c: exact crossings of T by adaptive refinement and Brent on fresh solves; margins */
#include "margin.h"
#include "units.h"

#include <math.h>

#include "alloc.h"
#include "crossing.h"



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
    bool record;     /* inside the sweep: crossings and the vector margin are recorded */
    size_t budget;   /* refinement solves left */
    bool vm_open;    /* the best |1 + T| so far waits for its right neighbour */
    double vm_lo;
    double vm_hi;
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
    to->deg = from->deg + tb_wrap180(carg(to->T) * TB_DEG_PER_RAD - from->deg);
    to->ret = from->ret + tb_wrap180(carg(1.0 + to->T) * TB_DEG_PER_RAD - from->ret);
}

static void note(scan *sc, tb_stab_note n)
{
    sc->st->notes |= 1u << n;
}

/* A fresh solve at f, unwrapped from `from`. A singular matrix (a closed-loop
 * pole on the axis) is noted and passed on for the caller to skip the point. */
static tb_status eval(scan *sc, double f, const sample *from, sample *out)
{
    size_t culprit = 0;
    tb_status st = tb_probe_eval(sc->probe, f, &culprit);
    if (st) {
        if (st != TB_ERR_NOMEM)
            note(sc, TB_SNOTE_PROBE_FAILED);
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

/* Outside the sweep only the Nyquist turn matters: split on the phase of 1 + T alone. */
static bool needs_split(const scan *sc, const sample *a, const sample *b)
{
    if (a->inf || b->inf)
        return false;
    if (!sc->record)
        return fabs(b->ret - a->ret) > TB_MARGIN_SPLIT_RET;
    return fabs(b->deg - a->deg) > TB_MARGIN_SPLIT_DEG ||
           fabs(b->ret - a->ret) > TB_MARGIN_SPLIT_RET ||
           fabs(db_of(b->T) - db_of(a->T)) > TB_MARGIN_SPLIT_DB;
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
        note(sc, TB_SNOTE_TRUNCATED);
        return;
    }
    list[(*count)++] = *c;
}

/* Brent between a and b on the unity or phase function; records the crossing. */
static tb_status refine_root(scan *sc, const sample *a, const sample *b, int kind, double level)
{
    root_ctx rc = {sc, a, kind, level};
    double fa = kind == ROOT_UNITY ? log(fmax(cabs(a->T), 1e-300)) : a->deg - level;
    double fb = kind == ROOT_UNITY ? log(fmax(cabs(b->T), 1e-300)) : b->deg - level;
    double x = 0;
    sample s;
    tb_status st = tb_brent_root(root_fn, &rc, log(a->f), log(b->f), fa, fb, 1e-13, 100, &x);
    if (!st)
        st = eval(sc, exp(x), a, &s);
    if (st)
        return st == TB_ERR_NOMEM ? st : TB_OK; /* noted; the crossing is skipped */
    tb_crossing c = {.hz = s.f, .T_db = db_of(s.T), .phase_deg = s.deg};
    if (kind == ROOT_UNITY) {
        c.direction = db_of(b->T) > db_of(a->T) ? 1 : -1;
        c.margin = tb_wrap180(s.deg + 180.0);
        c.has_delay = c.margin > 0;
        c.delay_s = c.has_delay ? c.margin / TB_DEG_PER_RAD / (TB_TWO_PI * s.f) : 0;
        append(sc, sc->st->unity, &sc->st->unity_count, &c);
    } else {
        c.direction = b->deg > a->deg ? 1 : -1;
        c.margin = -c.T_db;
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
    if (!sc->record || (sc->st->has_vector_margin && d >= sc->st->vector_margin))
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
    if (!sc->record || a->inf || b->inf)
        return TB_OK;
    tb_status st = TB_OK;
    if ((cabs(a->T) < 1.0) != (cabs(b->T) < 1.0))
        st = refine_root(sc, a, b, ROOT_UNITY, 0);
    double lo = fmin(a->deg, b->deg), hi = fmax(a->deg, b->deg);
    for (double k = ceil((lo - 180.0) / 360.0); !st && 180.0 + 360.0 * k <= hi; k++) {
        double level = 180.0 + 360.0 * k;
        if ((a->deg < level) != (b->deg < level))
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
            note(sc, TB_SNOTE_REFINE_BUDGET);
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

/* Probes f and steps there; a failed solve leaves the path broken. */
static tb_status probe_step(scan *sc, sample *cur, double f)
{
    sample next;
    tb_status st = eval(sc, f, cur, &next);
    if (st) {
        sc->path->ok = false;
        return st == TB_ERR_NOMEM ? st : TB_OK;
    }
    return step_to(sc, cur, next);
}

/* From DC (or the small arc around s = 0 when T is infinite there) up to just
 * below the sweep, TB_MARGIN_EXT_DECADES decades at two points per decade. */
static tb_status low_leg(scan *sc, const tb_result *res, double f0, sample *cur, double *ret0)
{
    double f_low = f0 * pow(10.0, -TB_MARGIN_EXT_DECADES);
    sample zero = {0};
    tb_status st;
    if (!res->has_dc) { /* M(0) singular: a closed-loop pole at s = 0 */
        sc->path->ok = false;
        st = eval(sc, f_low, &zero, cur);
    } else if (!(res->dc[sc->l].flags & TB_PT_T_INF)) {
        sample dc = {.f = 0, .T = res->dc[sc->l].T};
        dc.deg = carg(dc.T) * TB_DEG_PER_RAD;
        dc.ret = carg(1.0 + dc.T) * TB_DEG_PER_RAD;
        *ret0 = dc.ret;
        st = eval(sc, f_low, &dc, cur);
    } else { /* T ~ K/s^m near 0: along the arc arg(1 + T) turns by -m 180 degrees */
        sample up;
        st = eval(sc, f_low, &zero, cur);
        if (!st)
            st = eval(sc, f_low * sqrt(10.0), cur, &up);
        if (!st && !cur->inf && !up.inf && cabs(up.T) > 0) {
            double m = round(-2.0 * log10(cabs(up.T) / cabs(cur->T)));
            sc->path->arc_deg = -m * 180.0;
        } else if (!st) {
            sc->path->ok = false;
        }
        cur->ret = carg(1.0 + cur->T) * TB_DEG_PER_RAD;
        *ret0 = cur->ret;
    }
    if (st) {
        sc->path->ok = false;
        return st == TB_ERR_NOMEM ? st : TB_OK;
    }
    for (int k = 1; k < 2 * TB_MARGIN_EXT_DECADES && !st; k++)
        st = probe_step(sc, cur, f_low * pow(10.0, k / 2.0));
    return st;
}

static tb_status sweep_leg(scan *sc, const tb_result *res, const double *deg, sample *cur)
{
    const tb_point *pts = tb_result_loop(res, sc->l);
    tb_status st = TB_OK;
    for (size_t i = 0; i < res->npoints && !st; i++) {
        bool inf = pts[i].flags & TB_PT_T_INF;
        sample next = {.f = res->freqs[i], .T = inf ? 0 : pts[i].T, .inf = inf};
        sc->record = i > 0;
        st = step_to(sc, cur, next);
        if (i == 0)
            cur->deg = deg[0]; /* the phase the foundation's table is unwrapped to */
    }
    sc->record = false;
    return st;
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
    if (!st->has_vector_margin || !(sc->vm_lo < sc->vm_hi))
        return TB_OK;
    min_ctx mc = {sc};
    double x = 0, y = 0;
    tb_status s = tb_golden_min(distance_fn, &mc, log(sc->vm_lo), log(sc->vm_hi), 1e-10, 80, &x, &y);
    if (s)
        return s == TB_ERR_NOMEM ? s : TB_OK;
    if (y < st->vector_margin) {
        st->vector_margin = y;
        st->vector_margin_hz = exp(x);
    }
    return TB_OK;
}

/* The phase and gain margins of smallest magnitude (signed), the delay margin, notes. */
static void summarize(tb_stability *st)
{
    bool all_positive = true;
    for (size_t i = 0; i < st->unity_count; i++) {
        const tb_crossing *c = &st->unity[i];
        if (!st->has_phase_margin || fabs(c->margin) < fabs(st->phase_margin_deg)) {
            st->has_phase_margin = true;
            st->phase_margin_deg = c->margin;
            st->phase_margin_hz = c->hz;
        }
        all_positive = all_positive && c->has_delay;
        if (c->has_delay && (!st->has_delay_margin || c->delay_s < st->delay_margin_s)) {
            st->has_delay_margin = true;
            st->delay_margin_s = c->delay_s;
        }
    }
    if (!all_positive) {
        st->has_delay_margin = false;
        st->notes |= 1u << TB_SNOTE_DELAY_NONPOSITIVE;
    }
    for (size_t i = 0; i < st->phase_count; i++) {
        const tb_crossing *c = &st->phase[i];
        if (!st->has_gain_margin || fabs(c->margin) < fabs(st->gain_margin_db)) {
            st->has_gain_margin = true;
            st->gain_margin_db = c->margin;
            st->gain_margin_hz = c->hz;
        }
    }
    if (st->unity_count == 0)
        st->notes |= 1u << TB_SNOTE_NO_UNITY;
    if (st->unity_count > 1)
        st->notes |= 1u << TB_SNOTE_MULTIPLE_UNITY;
    if (st->phase_count == 0)
        st->notes |= 1u << TB_SNOTE_NO_PHASE_CROSSING;
}

tb_status tb_margin_scan(tb_probe *probe, const tb_result *res, size_t l, tb_stability *st,
                         tb_nyquist_path *path)
{
    const double *deg = tb_result_phase(res, l);
    size_t before = probe->evaluations;
    *path = (tb_nyquist_path){.ok = true};
    scan sc = {.probe = probe, .l = l, .st = st, .path = path, .budget = TB_MARGIN_BUDGET};
    sample cur = {0};
    double ret0 = 0;
    double ftop = res->freqs[res->npoints - 1];
    tb_status s = low_leg(&sc, res, res->freqs[0], &cur, &ret0);
    if (!s)
        s = sweep_leg(&sc, res, deg, &cur);
    for (int k = 1; k <= 2 * TB_MARGIN_EXT_DECADES && !s; k++)
        s = probe_step(&sc, &cur, ftop * pow(10.0, k / 2.0));
    path->turn_deg = cur.ret - ret0;
    if (!s)
        s = refine_vector(&sc);
    if (s)
        return s;
    summarize(st);
    st->evaluations = probe->evaluations - before;
    return TB_OK;
}
