/* src/feedback.c: the hand estimate's error breakdown and the desensitivity of every loop */
#include "feedback.h"

#include <math.h>
#include <string.h>

#include "alloc.h"
#include "crossing.h"


/* Default tolerance of the estimate and spread of the amplifier's gain, percent
 * (common practice: 1 % gain accuracy; +-5 % gain over process, supply, temperature). */
#define DEFAULT_TOL_PCT 1.0
#define DEFAULT_SPREAD_PCT 5.0



tb_breakdown_point tb_feedback_breakdown(const tb_point *pt, bool has_estimate, double G)
{
    tb_breakdown_point b = {0};
    if (pt->flags & TB_PT_NO_IO)
        return b;
    bool t_inf = pt->flags & TB_PT_T_INF;
    b.has_S = true;
    b.S = t_inf ? 0 : 1.0 / (1.0 + pt->T);
    if (cabs(pt->A) > 0) {
        b.has_S_A = true;
        b.S_A = t_inf ? 0 : (1.0 - pt->A0 / pt->A) * b.S;
    }
    if (!has_estimate)
        return b;
    b.total = pt->A - G;
    if (pt->flags & TB_PT_AINF_NONE)
        return b;
    b.has_parts = true;
    b.part[TB_PART_LOADING] = pt->A_inf - G;
    b.part[TB_PART_LOOP_GAIN] = t_inf ? 0 : -pt->A_inf * b.S;
    b.part[TB_PART_FEEDTHROUGH] = t_inf ? 0 : pt->A0 * b.S;
    return b;
}

static tb_part dominant(const tb_breakdown_point *b)
{
    tb_part best = TB_PART_LOADING;
    for (int p = 1; p < TB_PART_COUNT; p++)
        if (cabs(b->part[p]) > cabs(b->part[best]))
            best = (tb_part)p;
    return best;
}

/* |A - G|/|G| - tol at frequency f, from a fresh solve. */
typedef struct {
    tb_probe *probe;
    size_t l;
    double G;
    double tol;
} limit_ctx;

static tb_status excess(void *ctx, double f, double *y)
{
    limit_ctx *lc = ctx;
    size_t culprit = 0;
    tb_status st = tb_probe_eval_loop(lc->probe, f, lc->l, &culprit);
    if (st)
        return st;
    *y = cabs(lc->probe->row[lc->l].A - lc->G) / fabs(lc->G) - lc->tol;
    return TB_OK;
}

/* The lowest sweep frequency where the estimate stops holding, refined by Brent
 * between it and the point before (DC, or the grid point below). */
static tb_status find_limit(tb_probe *probe, const tb_result *res, size_t l, tb_feedback_summary *s)
{
    const tb_point *pts = tb_result_loop(res, l);
    double tol = s->tol_pct / 100.0;
    limit_ctx lc = {probe, l, s->estimate, tol};
    size_t first = s->dc_hz > 0 ? 1 : 0; /* the lowest point stands in for DC */
    double lo = s->dc_hz;
    double y_lo = s->error_dc_pct / 100.0 - tol;
    for (size_t i = first; i < res->npoints; i++) {
        double y_hi = cabs(pts[i].A - s->estimate) / fabs(s->estimate) - tol;
        if (y_hi <= 0) {
            lo = res->freqs[i];
            y_lo = y_hi;
            continue;
        }
        double f = 0;
        tb_status st = tb_brent_root(excess, &lc, lo, res->freqs[i], y_lo, y_hi, 1e-13 * res->freqs[i], 200, &f);
        if (st == TB_ERR_NOMEM)
            return st;
        if (st) /* a singular point in the bracket: the grid point stands */
            f = res->freqs[i];
        size_t culprit = 0;
        if ((st = tb_probe_eval_loop(probe, f, l, &culprit)))
            return st == TB_ERR_NOMEM ? st : TB_OK;
        s->has_limit = true;
        s->limit_hz = f;
        s->at_limit = tb_feedback_breakdown(&probe->row[l], true, s->estimate);
        s->dominant_limit = dominant(&s->at_limit);
        return TB_OK;
    }
    s->notes |= 1u << TB_FNOTE_HOLDS_IN_SWEEP;
    return TB_OK;
}

/* A at frequency f with loop l's gain k changed to k (1 + d): a fresh
 * factorization of M + dk u v' (the source's own stamp positions) and one solve. */
static tb_status resolve(tb_probe *probe, size_t l, double f, double d, double complex *x, double complex *A)
{
    const tb_mna *mna = probe->mna;
    size_t culprit = 0;
    tb_status st = tb_probe_factor_gain(probe, f, l, d, &culprit);
    if (st)
        return st;
    memset(x, 0, mna->n * sizeof(double complex));
    tb_svec_axpy(&mna->b, 1.0, x);
    if ((st = tb_solver_solve(probe->solver, x, 1)))
        return st;
    *A = tb_svec_dot(&mna->c, x);
    return TB_OK;
}

/* The relative change of A at DC for k -> k (1 +- spread): first order (S_A d),
 * exact from the model (T is proportional to k, A_inf and A0 do not depend on it),
 * and by a fresh factorization. */
static tb_status desensitivity(tb_probe *probe, size_t l, const tb_point *pt, double complex *x,
                               tb_feedback_summary *s)
{
    if (!s->dc.has_S_A) {
        s->notes |= 1u << TB_FNOTE_A_ZERO_DC;
        return TB_OK;
    }
    bool t_inf = pt->flags & TB_PT_T_INF;
    if (!t_inf && (pt->flags & TB_PT_AINF_NONE))
        return TB_OK;
    s->has_change = true;
    s->has_resolved = true;
    for (int side = 0; side < 2; side++) {
        double d = (side == 0 ? 1.0 : -1.0) * s->spread_pct / 100.0;
        s->change_first_order[side] = s->dc.S_A * d;
        double complex T1 = pt->T * (1.0 + d);
        s->change_model[side] = t_inf ? 0 : (pt->A_inf * T1 + pt->A0) / (1.0 + T1) / pt->A - 1.0;
        double complex A1 = 0;
        tb_status st = resolve(probe, l, s->dc_hz, d, x, &A1);
        if (st == TB_ERR_NOMEM)
            return st;
        if (st) {
            s->has_resolved = false;
            s->notes |= 1u << TB_FNOTE_RESOLVE_FAILED;
            continue;
        }
        s->change_resolved[side] = A1 / pt->A - 1.0;
    }
    return TB_OK;
}

static tb_status run_loop(const tb_circuit *ckt, tb_probe *probe, tb_result *res, size_t l, double complex *x)
{
    tb_fb_data *fb = res->fb;
    tb_feedback_summary *s = &fb->sum[l];
    const tb_ideal_spec *id = &ckt->ideal;
    *s = (tb_feedback_summary){
        .tol_pct = id->has_tol ? id->tol_pct : DEFAULT_TOL_PCT,
        .spread_pct = id->has_spread ? id->spread_pct : DEFAULT_SPREAD_PCT,
    };
    if (!res->has_io) {
        s->notes |= 1u << TB_FNOTE_NO_IO;
        return TB_OK;
    }
    s->computed = true;
    s->has_estimate = id->given;
    s->estimate = id->given ? (id->as_beta ? 1.0 / id->value : id->value) : 0;
    if (!id->given)
        s->notes |= 1u << TB_FNOTE_NO_ESTIMATE;
    const tb_point *pts = tb_result_loop(res, l);
    tb_breakdown_point *out = fb->pts + l * res->npoints;
    for (size_t i = 0; i < res->npoints; i++) {
        out[i] = tb_feedback_breakdown(&pts[i], s->has_estimate, s->estimate);
        if (s->has_estimate && !out[i].has_parts)
            s->notes |= 1u << TB_FNOTE_POINTS_ABSENT;
    }
    tb_point dc = tb_result_dc_or_first(res, l, &s->dc_hz);
    s->dc = tb_feedback_breakdown(&dc, s->has_estimate, s->estimate);
    if (s->has_estimate && !s->dc.has_parts)
        s->notes |= 1u << TB_FNOTE_POINTS_ABSENT;
    tb_status st = TB_OK;
    if (s->has_estimate) {
        s->error_dc_pct = cabs(dc.A - s->estimate) / fabs(s->estimate) * 100.0;
        s->holds_at_dc = s->error_dc_pct <= s->tol_pct;
        if (s->dc.has_parts)
            s->dominant_dc = dominant(&s->dc);
        if (!s->holds_at_dc)
            s->notes |= 1u << TB_FNOTE_MISSES_AT_DC;
        else if ((st = find_limit(probe, res, l, s)))
            return st;
    }
    return desensitivity(probe, l, &dc, x, s);
}

tb_status tb_feedback_run(const tb_circuit *ckt, tb_probe *probe, tb_result *res)
{
    size_t nloops = res->nloops ? res->nloops : 1;
    res->fb = tb_calloc(1, sizeof(tb_fb_data));
    if (!res->fb)
        return TB_ERR_NOMEM;
    res->fb->sum = tb_calloc(nloops, sizeof(tb_feedback_summary));
    res->fb->pts = tb_calloc(nloops * (res->npoints ? res->npoints : 1), sizeof(tb_breakdown_point));
    double complex *x = tb_malloc(probe->mna->n ? probe->mna->n : 1, sizeof(double complex));
    tb_status st = TB_ERR_NOMEM;
    if (res->fb->sum && res->fb->pts && x) {
        st = TB_OK;
        for (size_t l = 0; l < res->nloops && !st; l++)
            st = run_loop(ckt, probe, res, l, x);
    }
    tb_free(x);
    return st;
}
