/* src/winding.c: right-half-plane zeros of det M(s) and det M0(s), counted by the argument principle along the jw axis */
#include "winding.h"

#include <math.h>

#include "units.h"

#define PI (TB_TWO_PI / 2)
#define LN10 2.30258509299404568401799145468436421
/* Both phases may move by at most this much over one step. */
#define STEP_LIMIT (PI / 4)
/* A step this narrow (in ln f) whose phase still jumps straddles a zero on the axis. */
#define MIN_WIDTH 1e-10
/* An end decade has settled when the slope of ln|det| is within this of a whole
 * number and the phase moves by at most this many radians over it. */
#define SETTLED 0.05
/* At the low end, where det at s = 0 is known: ln|det| and the phase within this of it. */
#define SETTLED_DC 0.01

enum { CLOSED, OPEN, KINDS };

/* det M and det M0 at one frequency: ln|det| and arg det (wrapped). */
typedef struct {
    double lnf;
    double L[KINDS];
    double phi[KINDS];
} sample;

typedef struct {
    tb_probe *probe;
    size_t l;
    size_t evals;
    size_t jumps[KINDS]; /* phase jumps of about pi no halving resolved: zeros on the axis */
} walk;

/* Ran out of evaluations: internal, becomes a count that was not made. */
#define GAVE_UP TB_ERR_NOT_FOUND

static double wrap(double a)
{
    return remainder(a, TB_TWO_PI);
}

/* ln|det M0| and arg det M0 at f from a factorization of M0 itself (loop l's
 * gain at zero): where 1 - q vanishes to rounding, det M / (1 + T) is lost. */
static tb_status open_direct(walk *w, double f, double *L, double *phi)
{
    if (w->evals >= TB_WINDING_MAX_EVALS)
        return GAVE_UP;
    w->evals++;
    size_t culprit = 0;
    tb_status st = tb_probe_factor_gain(w->probe, f, w->l, -1.0, &culprit);
    return st ? st : tb_solver_log_det(w->probe->solver, L, phi);
}

/* Both determinants at f = exp(lnf), or a hair above it where M or M0 is
 * singular (a zero on the axis at that very frequency). */
static tb_status sample_at(walk *w, double lnf, sample *out)
{
    for (int attempt = 0; attempt < 4; attempt++) {
        if (w->evals >= TB_WINDING_MAX_EVALS)
            return GAVE_UP;
        w->evals++;
        double f = exp(lnf) * (1.0 + 1e-7 * attempt);
        size_t culprit = 0;
        tb_status st = tb_probe_eval(w->probe, f, &culprit);
        double L = 0, phi = 0;
        if (!st)
            st = tb_solver_log_det(w->probe->solver, &L, &phi);
        const tb_point *pt = &w->probe->row[w->l];
        double complex diff = 1.0 + pt->T; /* return difference: det M / det M0 */
        *out = (sample){log(f), {L, L - log(cabs(diff))}, {phi, wrap(phi - carg(diff))}};
        if (!st && (pt->flags & TB_PT_T_INF))
            st = open_direct(w, f, &out->L[OPEN], &out->phi[OPEN]);
        if (st == TB_ERR_SINGULAR)
            continue;
        return st;
    }
    return TB_ERR_SINGULAR;
}

/* The change of both phases from a to b, into acc: halves the step until each
 * phase moves by at most STEP_LIMIT; a jump that survives down to MIN_WIDTH is a
 * zero on the axis, taken as +pi (the path passes it on the right, so it counts
 * with the left half-plane). */
static tb_status step(walk *w, const sample *a, const sample *b, double acc[KINDS])
{
    double d[KINDS];
    bool big = false;
    for (int k = 0; k < KINDS; k++) {
        d[k] = wrap(b->phi[k] - a->phi[k]);
        big = big || fabs(d[k]) > STEP_LIMIT;
    }
    sample mid;
    tb_status st = TB_OK;
    bool narrow = b->lnf - a->lnf <= MIN_WIDTH;
    if (big && !narrow && !(st = sample_at(w, 0.5 * (a->lnf + b->lnf), &mid)) && mid.lnf > a->lnf &&
        mid.lnf < b->lnf) {
        st = step(w, a, &mid, acc);
        return st ? st : step(w, &mid, b, acc);
    }
    if (st)
        return st;
    for (int k = 0; k < KINDS; k++) {
        bool jump = fabs(d[k]) > STEP_LIMIT;
        acc[k] += jump ? PI : d[k];
        w->jumps[k] += jump;
    }
    return TB_OK;
}

/* From a to b (a.lnf < b.lnf) in TB_WINDING_STEPS steps a decade. */
static tb_status span(walk *w, const sample *a, const sample *b, double acc[KINDS])
{
    double width = LN10 / TB_WINDING_STEPS;
    size_t steps = (size_t)ceil((b->lnf - a->lnf) / width - 1e-9);
    sample prev = *a;
    for (size_t i = 1; i <= steps; i++) {
        sample next = *b;
        double lnf = a->lnf + (b->lnf - a->lnf) * (double)i / (double)steps;
        tb_status st = i == steps ? TB_OK : sample_at(w, lnf, &next);
        if (!st)
            st = step(w, &prev, &next, acc);
        if (st)
            return st;
        prev = next;
    }
    return TB_OK;
}

/* det at s = 0 where it is not zero: there the phase is known exactly (0 or pi,
 * the determinant of a real matrix), so no zero of the walk below the sweep can
 * be mistaken for one at the origin. */
typedef struct {
    bool known;
    double L0;
    double phi0;
} origin;

/* det M(0) and det M0(0) = det M(0) / (1 + T(0)); unknown where they are zero. */
static tb_status at_origin(walk *w, origin o[KINDS])
{
    o[CLOSED] = o[OPEN] = (origin){false, 0, 0};
    if (w->evals >= TB_WINDING_MAX_EVALS)
        return GAVE_UP;
    w->evals++;
    size_t culprit = 0;
    double L = 0, phi = 0;
    tb_status st = tb_probe_eval(w->probe, 0.0, &culprit);
    if (!st)
        st = tb_solver_log_det(w->probe->solver, &L, &phi);
    if (st)
        return st == TB_ERR_SINGULAR ? TB_OK : st;
    o[CLOSED] = (origin){true, L, phi};
    const tb_point *pt = &w->probe->row[w->l];
    double complex diff = 1.0 + pt->T;
    if (!(pt->flags & TB_PT_T_INF) && cabs(diff) > 0)
        o[OPEN] = (origin){true, L - log(cabs(diff)), wrap(phi - carg(diff))};
    return TB_OK;
}

/* The slope of ln|det| of kind k over a decade from a to b when it is within
 * SETTLED of a whole number >= 0 and the phase moved by at most SETTLED; else -1. */
static double settled_slope(const sample *a, const sample *b, double moved, int k)
{
    double s = (b->L[k] - a->L[k]) / (b->lnf - a->lnf);
    double whole = round(s);
    return fabs(s - whole) <= SETTLED && whole >= 0 && fabs(moved) <= SETTLED ? whole : -1;
}

/* Whether kind k has reached its low-frequency limit at lo (the decade above it
 * from lo to up): at its value at s = 0 where that is known (*m = 0), else a
 * settled slope *m >= 1 at least TB_WINDING_ORIGIN_DECADES below f_start. */
static bool low_settled(const sample *lo, const sample *up, double moved, const origin *o, int k, double f_start,
                        double *m)
{
    if (o->known) {
        *m = 0;
        return fabs(lo->L[k] - o->L0) <= SETTLED_DC && fabs(wrap(lo->phi[k] - o->phi0)) <= SETTLED_DC;
    }
    *m = settled_slope(lo, up, moved, k);
    return *m >= 1 && lo->lnf <= log(f_start) - TB_WINDING_ORIGIN_DECADES * LN10;
}

/* Walks on by decades above *end until both determinants settle; *end moves to the
 * new end, total takes the phase change, d the degrees. */
static tb_status extend_up(walk *w, sample *end, double total[KINDS], double d[KINDS], bool *ok)
{
    *ok = false;
    for (int dec = 0; dec < TB_WINDING_MAX_DECADES && !*ok; dec++) {
        sample next;
        double moved[KINDS] = {0, 0};
        tb_status st = sample_at(w, end->lnf + LN10, &next);
        if (!st)
            st = span(w, end, &next, moved);
        if (st)
            return st;
        *ok = true;
        for (int k = 0; k < KINDS; k++) {
            d[k] = settled_slope(end, &next, moved[k], k);
            *ok = *ok && d[k] >= 0;
            total[k] += moved[k];
        }
        *end = next;
    }
    return TB_OK;
}

/* Walks on by decades below *end until both determinants reach their
 * low-frequency limit; total takes the phase change from s = 0 (the last bit
 * from the known value at 0 where there is one), m the zeros at the origin. */
static tb_status extend_down(walk *w, sample *end, const origin o[KINDS], double f_start, double total[KINDS],
                             double m[KINDS], bool *ok)
{
    *ok = false;
    for (int dec = 0; dec < TB_WINDING_MAX_DECADES && !*ok; dec++) {
        sample next;
        double moved[KINDS] = {0, 0};
        tb_status st = sample_at(w, end->lnf - LN10, &next);
        if (!st)
            st = span(w, &next, end, moved);
        if (st)
            return st;
        *ok = true;
        for (int k = 0; k < KINDS; k++) {
            *ok = low_settled(&next, end, moved[k], &o[k], k, f_start, &m[k]) && *ok;
            total[k] += moved[k];
        }
        *end = next;
    }
    for (int k = 0; k < KINDS && *ok; k++)
        total[k] += o[k].known ? wrap(end->phi[k] - o[k].phi0) : 0;
    return TB_OK;
}

static tb_winding_count not_counted(const char *why)
{
    return (tb_winding_count){.counted = false, .why = why};
}

/* Z = (d - m)/2 - change/pi, which must come out a whole number in [0, d - m]. */
static tb_winding_count count(double d, double m, double change, size_t jumps)
{
    double z = (d - m) / 2 - change / PI;
    double whole = round(z);
    if (d < m || fabs(z - whole) > 0.2 || whole < 0 || whole + 2.0 * (double)jumps > d - m)
        return not_counted("the phase of the determinant along the axis does not add up to a whole count");
    return (tb_winding_count){.counted = true, .rhp = (size_t)whole, .degree = (size_t)d, .at_origin = (size_t)m,
                              .on_axis = 2 * jumps, .half_turns = change / PI};
}

static void give_up(tb_winding *out, const char *why)
{
    out->closed = not_counted(why);
    out->open = not_counted(why);
}

tb_status tb_winding_run(tb_probe *probe, size_t l, double f_start, double f_stop, tb_winding *out)
{
    if (!probe || !out || l >= probe->mna->loop_count || !(f_start > 0) || !(f_stop > f_start) || !isfinite(f_stop))
        return TB_ERR_USAGE;
    walk w = {.probe = probe, .l = l};
    sample lo = {0}, hi = {0};
    origin o[KINDS];
    double total[KINDS] = {0, 0};
    double top[KINDS] = {0, 0}, bottom[KINDS] = {0, 0};
    bool up_ok = false, down_ok = false;
    tb_status st = at_origin(&w, o);
    if (!st)
        st = sample_at(&w, log(f_start), &lo);
    if (!st)
        st = sample_at(&w, log(f_stop), &hi);
    if (!st)
        st = span(&w, &lo, &hi, total);
    if (!st)
        st = extend_up(&w, &hi, total, top, &up_ok);
    if (!st)
        st = extend_down(&w, &lo, o, f_start, total, bottom, &down_ok);
    tb_winding res = {.f_low = exp(lo.lnf), .f_high = exp(hi.lnf), .evaluations = w.evals};
    if (st == GAVE_UP || st == TB_ERR_SINGULAR) {
        give_up(&res, st == GAVE_UP ? "the phase of the determinant winds too fast: more evaluations than allowed"
                                    : "the circuit matrix is singular all around a frequency of the walk");
        st = TB_OK;
    } else if (!st && (!up_ok || !down_ok)) {
        give_up(&res, "the slope of ln|det| did not settle to a whole number at the ends of the walk");
    } else if (!st) {
        res.closed = count(top[CLOSED], bottom[CLOSED], total[CLOSED], w.jumps[CLOSED]);
        res.open = count(top[OPEN], bottom[OPEN], total[OPEN], w.jumps[OPEN]);
    }
    if (st)
        return st;
    *out = res;
    return TB_OK;
}
