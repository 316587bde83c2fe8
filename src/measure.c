/* src/measure.c: DC values and the figures derived from them, unity-gain crossing, phase margin, -3 dB point */
#include "measure.h"

#include <math.h>
#include <string.h>

#include "alloc.h"

/* Phase the unwrapping starts from: that of T(0), 0 or 180, when DC was solved. */
static double start_phase(const tb_result *res, size_t l, const tb_point *pts)
{
    if (res->has_dc && !(res->dc[l].flags & TB_PT_T_INF) && cabs(res->dc[l].T) > 0)
        return carg(res->dc[l].T) * TB_DEG_PER_RAD;
    for (size_t i = 0; i < res->npoints; i++)
        if (!(pts[i].flags & TB_PT_T_INF))
            return carg(pts[i].T) * TB_DEG_PER_RAD;
    return 0.0;
}

static void unwrap_phase(const tb_result *res, size_t l, double *deg)
{
    const tb_point *pts = tb_result_loop(res, l);
    double prev = start_phase(res, l, pts);
    bool past_pole = false; /* a point where T is infinite lies since the last finite one */
    for (size_t i = 0; i < res->npoints; i++) {
        if (pts[i].flags & TB_PT_T_INF) {
            past_pole = i > 0 || res->has_dc;
        } else {
            double d = carg(pts[i].T) * TB_DEG_PER_RAD - prev;
            prev += past_pole ? tb_phase_step_past_pole(d) : tb_wrap180(d);
            past_pole = false;
        }
        deg[i] = prev;
    }
}

/* Fraction t in [0,1] where the line from (0, y0) to (1, y1) meets level. */
static double cross_at(double y0, double y1, double level)
{
    return y0 == y1 ? 0.0 : (level - y0) / (y1 - y0);
}

double tb_grid_logf(double f0, double f1, double t)
{
    return exp(log(f0) + t * (log(f1) - log(f0)));
}

static double interp_logf(double f0, double f1, double t)
{
    return tb_grid_logf(f0, f1, t);
}

bool tb_grid_unity(tb_db_fn db_at, const void *ctx, size_t n, size_t *seg, double *t)
{
    for (size_t i = 0; i + 1 < n; i++) {
        double db0 = db_at(ctx, i);
        double db1 = db_at(ctx, i + 1);
        if (db0 >= 0.0 && db1 < 0.0) { /* false when either is absent (NaN) */
            *seg = i;
            *t = isinf(db0) ? 1.0 : cross_at(db0, db1, 0.0);
            return true;
        }
    }
    return false;
}

/* |T| of a loop's point in dB, +infinity where T is infinite. */
static double point_db(const void *ctx, size_t i)
{
    const tb_point *pts = ctx;
    return pts[i].flags & TB_PT_T_INF ? INFINITY : tb_db(pts[i].T);
}

static bool positive_feedback_dc(const tb_measures *m)
{
    return !(m->dc.flags & TB_PT_T_INF) && creal(m->dc.T) < 0 &&
           fabs(cimag(m->dc.T)) <= 1e-12 * fabs(creal(m->dc.T));
}

/* The headline crossing of the stability analysis: the unity crossing whose
 * phase margin is the headline one, so that every writer and .expect name the
 * same crossing (absent, with the stability notes saying why, when there is no
 * crossing or the margins could not be determined). */
static void exact_unity(const tb_result *res, size_t l, tb_measures *m)
{
    const tb_stability *st = &res->stab[l];
    if (positive_feedback_dc(m))
        m->notes |= 1u << TB_NOTE_POSITIVE_FB_DC;
    if (!st->has_phase_margin)
        return;
    m->has_unity = true;
    m->unity_hz = st->phase_margin_hz;
    m->has_phase_margin = true;
    m->phase_margin_deg = st->phase_margin_deg;
}

/* Without the stability analysis, the foundation's estimate: the lowest grid
 * segment where |T| falls through 1, interpolated, and 180 + the unwrapped phase
 * there (none when T(0) < 0). */
static void measure_unity(const tb_result *res, size_t l, tb_measures *m)
{
    if (res->stab && res->stab[l].computed) {
        exact_unity(res, l, m);
        return;
    }
    const tb_point *pts = tb_result_loop(res, l);
    size_t i = 0;
    double t = 0;
    if (!tb_grid_unity(point_db, pts, res->npoints, &i, &t)) {
        m->notes |= 1u << TB_NOTE_NO_UNITY;
        return;
    }
    m->has_unity = true;
    m->unity_hz = interp_logf(res->freqs[i], res->freqs[i + 1], t);
    if (positive_feedback_dc(m)) {
        m->notes |= 1u << TB_NOTE_POSITIVE_FB_DC;
        return;
    }
    const double *deg = tb_result_phase(res, l);
    m->has_phase_margin = true;
    m->phase_margin_deg = tb_wrap180(180.0 + deg[i] + t * (deg[i + 1] - deg[i])); /* as margin.c */
}

static void measure_f3db(const tb_result *res, tb_measures *m)
{
    if (!res->has_io) {
        m->notes |= 1u << TB_NOTE_NO_IO;
        return;
    }
    m->has_f3db = res->cl.has_high_edge;
    m->f3db_closed_hz = res->cl.high_edge_hz;
    if (!m->has_f3db)
        m->notes |= 1u << TB_NOTE_NO_F3DB;
}

/* Whether the loop was shown stable, and for an unstable one what it will do: oscillate
 * near the rightmost right-half-plane pair's frequency, or run away on a real pole. */
static void measure_instability(const tb_result *res, size_t l, tb_measures *m)
{
    const tb_stability *st = res->stab ? &res->stab[l] : NULL;
    m->stability_shown = !st || !st->computed || st->verdict == TB_VERDICT_STABLE;
    if (!st || !st->computed || st->verdict != TB_VERDICT_UNSTABLE || !st->has_poles)
        return;
    for (size_t i = 0; i < st->pole_count; i++) { /* largest real part first */
        if (st->pole_place[i] != TB_POLE_RIGHT)
            continue;
        if (cimag(st->poles[i]) != 0) {
            m->has_oscillation = true;
            m->oscillation_hz = fabs(cimag(st->poles[i])) / TB_TWO_PI;
        } else {
            m->runaway = true;
        }
        return;
    }
}

/* The largest sensitivity |1/(1+T)|, 1/(vector margin). */
static void measure_sensitivity(const tb_result *res, size_t l, tb_measures *m)
{
    const tb_stability *st = res->stab ? &res->stab[l] : NULL;
    if (!st || !st->computed || !st->has_vector_margin || !(st->vector_margin > 0))
        return;
    m->has_max_sensitivity = true;
    m->max_sensitivity_db = -20.0 * log10(st->vector_margin);
    m->max_sensitivity_hz = st->vector_margin_hz;
}

/* What exists at the DC point, and beta and the gain error, once for every reader. */
static tb_dc_figures dc_figures(const tb_point *dc)
{
    unsigned fl = dc->flags;
    tb_dc_figures f = {0};
    bool io = !(fl & TB_PT_NO_IO);
    f.has_T = !(fl & TB_PT_T_INF);
    f.has_T_db = f.has_T && cabs(dc->T) > 0;
    f.T_db = f.has_T_db ? tb_db(dc->T) : 0;
    f.has_A = io;
    f.has_A_inf = io && !(fl & TB_PT_AINF_NONE);
    f.has_A0 = io && !(fl & TB_PT_A0_NONE);
    f.has_a = f.has_A_inf && f.has_T;
    f.has_beta = f.has_A_inf && cabs(dc->A_inf) > 0;
    f.beta = f.has_beta ? 1.0 / dc->A_inf : 0;
    f.has_gain_error = f.has_beta;
    f.gain_error_pct = f.has_beta ? (dc->A - dc->A_inf) / dc->A_inf * 100.0 : 0;
    return f;
}

static void measure_dc(const tb_result *res, size_t l, tb_measures *m)
{
    const tb_point *pts = tb_result_loop(res, l);
    m->dc = tb_result_dc_or_first(res, l, &m->dc_hz);
    if (!res->has_dc)
        m->notes |= 1u << TB_NOTE_DC_FROM_SWEEP;
    m->fig = dc_figures(&m->dc);
    if (m->dc.flags & TB_PT_T_INF)
        m->notes |= 1u << TB_NOTE_T_INF_DC;
    if (m->dc.flags & TB_PT_AINF_NONE)
        m->notes |= 1u << TB_NOTE_AINF_NONE_DC;
    bool loop_seen = false;
    for (size_t i = 0; i < res->npoints; i++)
        loop_seen = loop_seen || !(pts[i].flags & TB_PT_AINF_NONE) || !res->has_io;
    if (!loop_seen)
        m->notes |= 1u << TB_NOTE_NOT_IN_LOOP;
    for (size_t i = res->npoints; i-- > 0;)
        if (pts[i].flags & TB_PT_T_INF) {
            m->t_inf_points++;
            m->t_inf_first_hz = res->freqs[i];
        }
    if (m->t_inf_points > 0)
        m->notes |= 1u << TB_NOTE_T_INF_SWEEP;
    if (res->has_io && !(m->dc.flags & (TB_PT_T_INF | TB_PT_A0_NONE)) &&
        cabs(m->dc.A0 / (1.0 + m->dc.T)) > 0.01 * cabs(m->dc.A))
        m->notes |= 1u << TB_NOTE_FEEDTHROUGH;
}

tb_status tb_measure_phase_run(tb_result *res)
{
    size_t count = res->nloops * res->npoints;
    res->phase = tb_malloc(count > 0 ? count : 1, sizeof(double));
    if (!res->phase)
        return TB_ERR_NOMEM;
    for (size_t l = 0; l < res->nloops; l++)
        unwrap_phase(res, l, res->phase + l * res->npoints);
    return TB_OK;
}

tb_status tb_measure_run(tb_result *res)
{
    res->measures = tb_calloc(res->nloops ? res->nloops : 1, sizeof(tb_measures));
    if (!res->measures)
        return TB_ERR_NOMEM;
    for (size_t l = 0; l < res->nloops; l++) {
        tb_measures *m = &res->measures[l];
        measure_dc(res, l, m);
        measure_unity(res, l, m);
        measure_f3db(res, m);
        measure_sensitivity(res, l, m);
        measure_instability(res, l, m);
        if (res->mid) {
            m->has_mid = true;
            m->mid = res->mid[l];
            m->mid_hz = res->cl.ref_hz;
            m->mid_fig = dc_figures(&m->mid);
        }
    }
    return TB_OK;
}
