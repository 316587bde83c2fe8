/* src/winding.c: right-half-plane zeros of det M(s) and det M0(s), counted by the argument principle along the jw axis */
#include "winding.h"

#include <math.h>

#include "units.h"

#define PI (TB_TWO_PI / 2)
#define LN10 2.30258509299404568401799145468436421
/* Over half a step each phase may move by at most twice this, and by at most this
 * from what the last step's rate predicts; the slope of ln|det| may differ by at
 * most SLOPE_LIMIT between the halves. */
#define STEP_LIMIT (PI / 4)
#define SLOPE_LIMIT 1.0
/* Halves narrower than SLOPE_WIDTH / d^2 (in ln f, d the degree of det; at most
 * 1e-4) are judged by their phases alone: near a zero on or close to the axis the
 * slope varies without bound, and a halving on the slope would never end. The
 * zeros of a long RC line crowd towards its top frequency like (k/d)^2, so about
 * one of them lies within such a width of another. */
#define SLOPE_WIDTH 0.1
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
    size_t max_evals;    /* the budget */
    size_t jumps[KINDS]; /* phase jumps of about pi no halving resolved: zeros on the axis */
    double slope_width;  /* halves at least this wide (ln f) are also judged by their slopes */
    bool rate_known;     /* rate holds the phases' rate over the last step taken */
    double rate[KINDS];  /* d arg det / d ln f there */
    bool first_known;    /* first_rate holds the rate over the walk's first step */
    double first_rate[KINDS];
} walk;

/* Ran out of evaluations: internal, becomes a count that was not made. */
#define GAVE_UP TB_ERR_NOT_FOUND
/* More zeros than the budget allows, known before the walk: likewise. */
#define TOO_MANY TB_ERR_INPUT
/* The walk takes at least about this many evaluations per zero of det (1.7 to 1.9
 * on generated RC lines of 10^3 to 10^4 sections). */
#define EVALS_PER_ZERO 1.5

static double wrap(double a)
{
    return remainder(a, TB_TWO_PI);
}

/* ln|det M0| and arg det M0 at f from a factorization of M0 itself (loop l's
 * gain at zero): where 1 - q vanishes to rounding, det M / (1 + T) is lost. */
static tb_status open_direct(walk *w, double f, double *L, double *phi)
{
    if (w->evals >= w->max_evals)
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
        if (w->evals >= w->max_evals)
            return GAVE_UP;
        w->evals++;
        double f = exp(lnf) * (1.0 + 1e-7 * attempt);
        size_t culprit = 0;
        double complex q = 0;
        tb_status st = tb_probe_q(w->probe, f, w->l, &q, &culprit);
        double L = 0, phi = 0;
        if (!st)
            st = tb_solver_log_det(w->probe->solver, &L, &phi);
        double complex diff = 1.0 - q; /* det M0 / det M: the inverse of the return difference */
        *out = (sample){log(f), {L, L + log(cabs(diff))}, {phi, wrap(phi + carg(diff))}};
        if (!st && !(cabs(diff) > TB_LOOP_INF_TOL))
            st = open_direct(w, f, &out->L[OPEN], &out->phi[OPEN]);
        if (st == TB_ERR_SINGULAR)
            continue;
        return st;
    }
    return TB_ERR_SINGULAR;
}

/* The change of phase k from x to y (either way along the axis), taking the
 * branch nearest the change that the last step's rate predicts; false when the
 * wrapped value strays from the prediction by more than STEP_LIMIT. */
static bool change(const walk *w, const sample *x, const sample *y, int k, double *d)
{
    double predicted = w->rate_known ? w->rate[k] * (y->lnf - x->lnf) : 0.0;
    double off = wrap(y->phi[k] - x->phi[k] - predicted);
    *d = predicted + off;
    return fabs(off) <= STEP_LIMIT && fabs(*d) <= 2 * STEP_LIMIT;
}

/* Whether the step a -> m -> b is fine enough to take the phase change as the sum
 * of the two halves: each half moves each phase by at most 2 STEP_LIMIT and by
 * STEP_LIMIT at most from what the rate of the last step predicts (a phase that
 * drifts by whole turns within a step, as det does above a crowd of zeros, is
 * followed from the rate), and the slope of ln|det| differs between the halves by
 * at most SLOPE_LIMIT (about one zero of det nearby; many zeros within a step could
 * otherwise turn the phase by whole turns that no wrapped difference shows).
 * Rounding of ln|det| (about 1e-12 of its size) is allowed for in the slopes of
 * narrow steps. */
static bool fine_enough(walk *w, const sample *a, const sample *m, const sample *b, double d1[KINDS],
                        double d2[KINDS])
{
    bool fine = true;
    for (int k = 0; k < KINDS; k++) {
        fine = change(w, a, m, k, &d1[k]) && fine;
        fine = change(w, m, b, k, &d2[k]) && fine;
        double s1 = (m->L[k] - a->L[k]) / (m->lnf - a->lnf);
        double s2 = (b->L[k] - m->L[k]) / (b->lnf - m->lnf);
        double half = fabs(m->lnf - a->lnf);
        double noise = 1e-12 * (fabs(a->L[k]) + fabs(b->L[k]) + 1.0) / half;
        fine = fine && (half < w->slope_width || fabs(s1 - s2) <= SLOPE_LIMIT + noise);
    }
    return fine;
}

/* A step too narrow to halve: the wrapped change, or, where a phase still jumps,
 * a zero on the axis, taken as +pi going up the axis (the path passes it on the
 * right, so it counts with the left half-plane). */
static void narrow_step(walk *w, const sample *a, const sample *b, double acc[KINDS])
{
    for (int k = 0; k < KINDS; k++) {
        double d = wrap(b->phi[k] - a->phi[k]);
        bool jump = fabs(d) > STEP_LIMIT;
        acc[k] += jump ? (b->lnf > a->lnf ? PI : -PI) : d;
        w->jumps[k] += jump;
    }
}

/* The change of both phases from a to b (either way along the axis), into acc,
 * halving the step until it is fine enough (fine_enough) or MIN_WIDTH narrow. */
static tb_status step(walk *w, const sample *a, const sample *b, double acc[KINDS])
{
    if (fabs(b->lnf - a->lnf) <= MIN_WIDTH) {
        narrow_step(w, a, b, acc);
        return TB_OK;
    }
    sample m;
    tb_status st = sample_at(w, 0.5 * (a->lnf + b->lnf), &m);
    if (st)
        return st;
    if (!(fabs(m.lnf - a->lnf) < fabs(b->lnf - a->lnf) && (m.lnf - a->lnf) * (b->lnf - m.lnf) > 0)) {
        narrow_step(w, a, b, acc); /* stepped around a singular point: as narrow */
        return TB_OK;
    }
    double d1[KINDS], d2[KINDS];
    if (fine_enough(w, a, &m, b, d1, d2)) {
        for (int k = 0; k < KINDS; k++) {
            acc[k] += d1[k] + d2[k];
            w->rate[k] = d2[k] / (b->lnf - m.lnf);
            w->first_rate[k] = w->first_known ? w->first_rate[k] : d1[k] / (m.lnf - a->lnf);
        }
        w->rate_known = w->first_known = true;
        return TB_OK;
    }
    st = step(w, a, &m, acc);
    return st ? st : step(w, &m, b, acc);
}

/* From a to b (either way along the axis) in TB_WINDING_STEPS steps a decade;
 * acc takes the change from a to b. */
static tb_status span(walk *w, const sample *a, const sample *b, double acc[KINDS])
{
    double width = LN10 / TB_WINDING_STEPS;
    size_t steps = (size_t)ceil(fabs(b->lnf - a->lnf) / width - 1e-9);
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
    if (w->evals >= w->max_evals)
        return GAVE_UP;
    w->evals++;
    size_t culprit = 0;
    double L = 0, phi = 0;
    tb_status st = tb_probe_eval_loop(w->probe, 0.0, w->l, &culprit);
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

/* The larger degree of the two determinants, from the slope of ln|det| at two
 * samples a decade apart, going up from lnf until two decades agree on a whole
 * number (no phase walked: only to size the walk's slope test). */
static tb_status degree_guess(walk *w, double lnf, double *d)
{
    sample a, b;
    double last[KINDS] = {-1, -1};
    tb_status st = sample_at(w, lnf, &a);
    for (int dec = 0; !st && dec < TB_WINDING_MAX_DECADES; dec++) {
        if ((st = sample_at(w, a.lnf + LN10, &b)))
            break;
        bool agree = true;
        for (int k = 0; k < KINDS; k++) {
            double s = settled_slope(&a, &b, 0.0, k);
            agree = agree && s >= 0 && s == last[k];
            last[k] = s;
        }
        if (agree) {
            *d = fmax(last[CLOSED], last[OPEN]);
            return TB_OK;
        }
        a = b;
    }
    *d = -1; /* no settled slope: the walk will say so */
    return st;
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
            st = span(w, end, &next, moved); /* downward: the rate carries on from above */
        if (st)
            return st;
        *ok = true;
        for (int k = 0; k < KINDS; k++) {
            *ok = low_settled(&next, end, -moved[k], &o[k], k, f_start, &m[k]) && *ok;
            total[k] -= moved[k];
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
    return tb_winding_run_budget(probe, l, f_start, f_stop, TB_WINDING_MAX_EVALS, out);
}

tb_status tb_winding_run_budget(tb_probe *probe, size_t l, double f_start, double f_stop, size_t budget,
                                tb_winding *out)
{
    if (!probe || !out || l >= probe->mna->loop_count || !(f_start > 0) || !(f_stop > f_start) ||
        !isfinite(f_stop) || budget == 0)
        return TB_ERR_USAGE;
    walk w = {.probe = probe, .l = l, .max_evals = budget};
    sample lo = {0}, hi = {0};
    origin o[KINDS];
    double total[KINDS] = {0, 0};
    double top[KINDS] = {0, 0}, bottom[KINDS] = {0, 0};
    bool up_ok = false, down_ok = false;
    double d = 0;
    tb_status st = at_origin(&w, o);
    if (!st)
        st = degree_guess(&w, log(f_stop), &d);
    w.slope_width = d > 0 ? fmin(1e-4, SLOPE_WIDTH / (d * d)) : 1e-4;
    if (!st && d * EVALS_PER_ZERO > (double)w.max_evals)
        st = TOO_MANY; /* the walk would give up after spending its whole budget */
    if (!st)
        st = sample_at(&w, log(f_start), &lo);
    if (!st)
        st = sample_at(&w, log(f_stop), &hi);
    if (!st)
        st = span(&w, &lo, &hi, total);
    if (!st)
        st = extend_up(&w, &hi, total, top, &up_ok);
    /* below the range the rate carries on from the walk's first step, at f_start */
    for (int k = 0; k < KINDS; k++)
        w.rate[k] = w.first_rate[k];
    w.rate_known = w.first_known;
    if (!st)
        st = extend_down(&w, &lo, o, f_start, total, bottom, &down_ok);
    tb_winding res = {.f_low = exp(lo.lnf), .f_high = exp(hi.lnf), .evaluations = w.evals};
    if (st == GAVE_UP || st == TB_ERR_SINGULAR || st == TOO_MANY) {
        give_up(&res, st == GAVE_UP ? "the phase of the determinant winds too fast: more evaluations than allowed"
                      : st == TOO_MANY ? "the determinant has more zeros than the walk's budget of evaluations allows"
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
