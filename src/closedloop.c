/* src/closedloop.c: the closed-loop gain A(jw): reference gain, -3 dB band edges and peaking by root finding */
#include "closedloop.h"

#include <math.h>
#include <string.h>

#include "alloc.h"
#include "crossing.h"

/* A at one frequency by a fresh solve (A is the same for every loop: row 0). */
typedef struct {
    tb_probe *probe;
    double ln_level; /* ln of the -3 dB level */
    double complex A;
    tb_status failed; /* the first non-NOMEM failure of a solve */
    bool peak_refine; /* a peak that is not the reference refined between grid points */
} cl_eval;

static tb_status gain_at(cl_eval *ce, double f, double complex *A)
{
    size_t culprit = 0;
    tb_status st = tb_probe_eval_loop(ce->probe, f, 0, &culprit);
    if (st)
        return st;
    *A = ce->probe->row[0].A;
    return TB_OK;
}

/* ln|A| - ln level at f = e^x: zero on the -3 dB edge. */
static tb_status edge_fn(void *ctx, double x, double *y)
{
    cl_eval *ce = ctx;
    tb_status st = gain_at(ce, exp(x), &ce->A);
    if (st)
        return st;
    *y = log(fmax(cabs(ce->A), 1e-300)) - ce->ln_level;
    return TB_OK;
}

/* -ln|A| at f = e^x: minimal at a peak of |A|. */
static tb_status peak_fn(void *ctx, double x, double *y)
{
    cl_eval *ce = ctx;
    tb_status st = gain_at(ce, exp(x), &ce->A);
    if (st)
        return st;
    *y = -log(fmax(cabs(ce->A), 1e-300));
    return TB_OK;
}

static double grid_ln(const tb_result *res, size_t i)
{
    return log(fmax(cabs(res->pts[i].A), 1e-300));
}

/* Where the edge function changes sign: the frequencies and its values there (from the grid,
 * or from the fresh samples that found it: no frequency is solved twice). */
typedef struct {
    double lo, hi;
    double y_lo, y_hi;
} bracket;

/* The bracket of grid points i - 1 and i. */
static bracket grid_bracket(const cl_eval *ce, const tb_result *res, size_t i)
{
    return (bracket){res->freqs[i - 1], res->freqs[i], grid_ln(res, i - 1) - ce->ln_level,
                     grid_ln(res, i) - ce->ln_level};
}

/* Brent on the edge inside the bracket. */
static tb_status refine_edge(cl_eval *ce, const bracket *b, double *edge)
{
    tb_status st = tb_brent_root(edge_fn, ce, log(b->lo), log(b->hi), b->y_lo, b->y_hi, 1e-13, 200, edge);
    if (!st)
        *edge = exp(*edge);
    return st;
}

/* Fresh samples beyond the sweep, half a decade apart, from f0 outward (up: step > 1),
 * until the edge function changes sign: the bracket in *b. false when it does not. */
static bool bracket_beyond(cl_eval *ce, double f0, double y0, double step, bracket *b, tb_status *st)
{
    double f = f0, y = y0;
    for (int k = 1; k <= 2 * TB_CL_EXT_DECADES; k++) {
        double fn = f * step, yn = 0;
        if ((*st = edge_fn(ce, log(fn), &yn)))
            return false;
        if ((yn < 0) != (y < 0)) {
            *b = step > 1 ? (bracket){f, fn, y, yn} : (bracket){fn, f, yn, y};
            return true;
        }
        f = fn;
        y = yn;
    }
    return false;
}

/* Records an edge search's outcome: found (at *edge), not found (note), or failed. */
static tb_status settle(tb_closed_loop *cl, tb_status st, bool found, tb_cl_note missing)
{
    if (st == TB_ERR_NOMEM)
        return st;
    if (st) {
        cl->notes |= 1u << TB_CNOTE_PROBE_FAILED;
        return TB_OK;
    }
    if (!found)
        cl->notes |= 1u << missing;
    return TB_OK;
}

/* The lowest frequency above grid index `from` (or above DC when from is SIZE_MAX)
 * where |A| falls through the level. */
static tb_status high_edge(cl_eval *ce, const tb_result *res, size_t from, tb_closed_loop *cl)
{
    size_t n = res->npoints;
    bracket b = {0};
    bool found = false;
    tb_status st = TB_OK;
    size_t first = from == SIZE_MAX ? 1 : from + 1;
    if (from == SIZE_MAX && grid_ln(res, 0) < ce->ln_level) {
        /* between DC and the first point: search downward from it */
        found = bracket_beyond(ce, res->freqs[0], grid_ln(res, 0) - ce->ln_level, pow(10.0, -0.5), &b, &st);
        cl->high_edge_outside = found;
    }
    for (size_t i = first; i < n && !found && !st; i++) {
        if (grid_ln(res, i - 1) >= ce->ln_level && grid_ln(res, i) < ce->ln_level) {
            b = grid_bracket(ce, res, i);
            found = true;
        }
    }
    if (!found && !st && grid_ln(res, n - 1) >= ce->ln_level) {
        found = bracket_beyond(ce, res->freqs[n - 1], grid_ln(res, n - 1) - ce->ln_level, pow(10.0, 0.5), &b, &st);
        cl->high_edge_outside = found;
    }
    if (found && !st)
        st = refine_edge(ce, &b, &cl->high_edge_hz);
    cl->has_high_edge = found && !st;
    cl->high_edge_outside = cl->high_edge_outside && cl->has_high_edge;
    return settle(cl, st, found, TB_CNOTE_NO_HIGH_EDGE);
}

/* AC-coupled: the highest frequency below grid index `peak` where |A| rises through the level. */
static tb_status low_edge(cl_eval *ce, const tb_result *res, size_t peak, tb_closed_loop *cl)
{
    bracket b = {0};
    bool found = false;
    tb_status st = TB_OK;
    for (size_t i = peak; i > 0 && !found; i--) {
        if (grid_ln(res, i - 1) < ce->ln_level && grid_ln(res, i) >= ce->ln_level) {
            b = grid_bracket(ce, res, i);
            found = true;
        }
    }
    if (!found) {
        found = bracket_beyond(ce, res->freqs[0], grid_ln(res, 0) - ce->ln_level, pow(10.0, -0.5), &b, &st);
        cl->low_edge_outside = found;
    }
    if (found && !st)
        st = refine_edge(ce, &b, &cl->low_edge_hz);
    cl->has_low_edge = found && !st;
    cl->low_edge_outside = cl->low_edge_outside && cl->has_low_edge;
    return settle(cl, st, found, TB_CNOTE_NO_LOW_EDGE);
}

/* The largest |A| near grid index i, by Brent minimization between its neighbours. */
static tb_status peak_near(cl_eval *ce, const tb_result *res, size_t i, double *hz, double complex *A)
{
    size_t n = res->npoints;
    *hz = res->freqs[i];
    *A = res->pts[i].A;
    if (n < 3 || i == 0 || i == n - 1)
        return TB_OK; /* at an end of the sweep: the grid point stands */
    double x = 0, y = 0;
    tb_status st = TB_OK;
    if (res->a_peak.known && res->a_peak.index == i) { /* the stability's search, the same one */
        x = res->a_peak.x;
        y = -log(fmax(res->a_peak.abs_a, 1e-300));
    } else {
        st = tb_line_min(peak_fn, ce, log(res->freqs[i - 1]), log(res->freqs[i + 1]), TB_PEAK_XTOL, 200, &x, &y);
    }
    if (st)
        return st;
    if (-y > log(cabs(*A))) {
        *hz = exp(x);
        return gain_at(ce, *hz, A);
    }
    return TB_OK;
}

static size_t grid_peak(const tb_result *res)
{
    size_t best = 0;
    for (size_t i = 1; i < res->npoints; i++)
        if (cabs(res->pts[i].A) > cabs(res->pts[best].A))
            best = i;
    return best;
}

/* Every loop at midband, for the gains referred to it. */
static tb_status midband_points(tb_probe *probe, tb_result *res)
{
    size_t culprit = 0;
    res->mid = tb_calloc(res->nloops ? res->nloops : 1, sizeof(tb_point));
    if (!res->mid)
        return TB_ERR_NOMEM;
    tb_status st = tb_probe_eval(probe, res->cl.ref_hz, &culprit);
    if (st)
        return st;
    memcpy(res->mid, probe->row, res->nloops * sizeof(tb_point));
    return TB_OK;
}

static tb_status run(cl_eval *ce, tb_result *res)
{
    tb_closed_loop *cl = &res->cl;
    double complex A_dc = tb_result_dc_or_first(res, 0, &cl->ref_hz).A;
    size_t peak = grid_peak(res);
    cl->ac_coupled = res->has_dc && cabs(A_dc) <= 1e-9 * cabs(res->pts[peak].A) && cabs(res->pts[peak].A) > 0;
    cl->A_ref = A_dc;
    tb_status st = TB_OK;
    if (cl->ac_coupled) {
        cl->notes |= 1u << TB_CNOTE_AC_COUPLED;
        if ((st = peak_near(ce, res, peak, &cl->ref_hz, &cl->A_ref)) || (st = midband_points(ce->probe, res)))
            return st == TB_ERR_NOMEM ? st : settle(cl, st, true, TB_CNOTE_NO_HIGH_EDGE);
    } else if (cabs(res->pts[peak].A) > cabs(cl->A_ref) * (1.0 + 1e-9)) {
        double complex A_peak = res->pts[peak].A;
        cl->peak_hz = res->freqs[peak];
        if (ce->peak_refine && (st = peak_near(ce, res, peak, &cl->peak_hz, &A_peak)))
            return settle(cl, st, true, TB_CNOTE_NO_HIGH_EDGE);
        cl->peak_db = 20.0 * log10(cabs(A_peak) / cabs(cl->A_ref));
        cl->has_peak = cl->peak_db > 0.001;
    }
    if (!(cabs(cl->A_ref) > 0))
        return TB_OK; /* A = 0 everywhere: no edge to find */
    ce->ln_level = log(cabs(cl->A_ref)) - 0.5 * log(2.0);
    if ((st = high_edge(ce, res, cl->ac_coupled ? peak : SIZE_MAX, cl)))
        return st;
    if (cl->ac_coupled && (st = low_edge(ce, res, peak, cl)))
        return st;
    if (cl->high_edge_outside || cl->low_edge_outside)
        cl->notes |= 1u << TB_CNOTE_EDGE_OUTSIDE;
    return TB_OK;
}

tb_status tb_closed_loop_run(tb_probe *probe, tb_result *res, bool peak_refine)
{
    res->cl = (tb_closed_loop){0};
    if (!res->has_io || res->nloops == 0 || res->npoints == 0) {
        res->cl.notes |= 1u << TB_CNOTE_NO_IO;
        return TB_OK;
    }
    res->cl.computed = true;
    cl_eval ce = {.probe = probe, .peak_refine = peak_refine};
    return run(&ce, res);
}
