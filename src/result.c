/* src/result.c: the analysis result: its type, lifetime and accessors (nothing above it is known here) */
#include "result.h"

#include <string.h>

#include "alloc.h"

tb_result *tb_result_new(size_t npoints, size_t nloops)
{
    tb_result *res = tb_calloc(1, sizeof(*res));
    if (!res)
        return NULL;
    res->npoints = npoints;
    res->nloops = nloops;
    res->freqs = tb_malloc(npoints, sizeof(double));
    res->pts = tb_calloc(npoints * nloops, sizeof(tb_point));
    res->dc = tb_calloc(nloops, sizeof(tb_point));
    if (!res->freqs || !res->pts || !res->dc) {
        tb_result_free(res);
        return NULL;
    }
    return res;
}

static void fb_free(tb_fb_data *fb)
{
    if (!fb)
        return;
    tb_free(fb->sum);
    tb_free(fb->pts);
    tb_free(fb);
}

static void zp_free(tb_z_data *zd)
{
    if (!zd)
        return;
    tb_free(zd->sum);
    tb_free(zd->pts);
    tb_free(zd);
}

void tb_spot_data_free(tb_spot_data *sd)
{
    if (!sd)
        return;
    tb_free(sd->spots);
    tb_free(sd->zp);
    tb_free(sd);
}

static void wb_free(tb_wb_data *wb)
{
    if (!wb)
        return;
    tb_free(wb->pts);
    tb_free(wb->vs);
    tb_free(wb);
}

static void dist_free(tb_dist_data *dd)
{
    if (!dd)
        return;
    tb_free(dd->loops);
    tb_free(dd->pts);
    tb_free(dd);
}

void tb_result_free(tb_result *res)
{
    if (!res)
        return;
    tb_free(res->freqs);
    tb_free(res->pts);
    tb_free(res->dc);
    tb_free(res->phase);
    tb_free(res->measures);
    tb_free(res->stab);
    tb_free(res->step_t);
    tb_free(res->step_y);
    tb_free(res->census);
    fb_free(res->fb);
    zp_free(res->zp);
    wb_free(res->wb);
    dist_free(res->dist);
    if (res->spread && res->spread_free)
        res->spread_free(res->spread);
    tb_free(res->ftype);
    tb_free(res->mid);
    tb_free(res->sens);
    tb_free(res->sens_entries);
    tb_spot_data_free(res->spot);
    tb_free(res);
}

tb_point tb_result_dc_or_first(const tb_result *res, size_t l, double *hz)
{
    *hz = res->has_dc ? 0.0 : res->freqs[0];
    return res->has_dc ? res->dc[l] : res->pts[l * res->npoints];
}

const double *tb_result_phase(const tb_result *res, size_t l)
{
    return res && res->phase && l < res->nloops ? res->phase + l * res->npoints : NULL;
}

bool tb_result_has_dc(const tb_result *res)
{
    return res && res->has_dc;
}

bool tb_result_has_io(const tb_result *res)
{
    return res && res->has_io;
}

bool tb_result_has_stability(const tb_result *res)
{
    return res && res->stab;
}

bool tb_result_has_census(const tb_result *res)
{
    return res && res->census;
}

/* ---- the public accessors (include/tbeta.h) ------------------------------ */

size_t tb_result_points(const tb_result *res)
{
    return res ? res->npoints : 0;
}

size_t tb_result_loops(const tb_result *res)
{
    return res ? res->nloops : 0;
}

const double *tb_result_freqs(const tb_result *res)
{
    return res ? res->freqs : NULL;
}

const tb_point *tb_result_loop(const tb_result *res, size_t l)
{
    return res && l < res->nloops ? res->pts + l * res->npoints : NULL;
}

bool tb_result_dc(const tb_result *res, size_t l, tb_point *out)
{
    if (!res || !res->has_dc || l >= res->nloops)
        return false;
    *out = res->dc[l];
    return true;
}

tb_status tb_result_stats(const tb_result *res, tb_stats *out)
{
    if (!res || !out)
        return TB_ERR_USAGE;
    *out = res->stats;
    return TB_OK;
}

tb_status tb_measure_loop(const tb_result *res, size_t l, tb_measures *out)
{
    if (!res || !out || l >= res->nloops || !res->measures)
        return TB_ERR_USAGE;
    *out = res->measures[l];
    return TB_OK;
}

tb_status tb_sensitivity_get(const tb_result *res, size_t l, tb_sensitivity *out)
{
    if (!res || !out || l >= res->nloops)
        return TB_ERR_USAGE;
    *out = res->sens ? res->sens[l] : (tb_sensitivity){0};
    return TB_OK;
}

tb_status tb_closed_loop_get(const tb_result *res, tb_closed_loop *out)
{
    if (!res || !out)
        return TB_ERR_USAGE;
    *out = res->cl;
    return TB_OK;
}

tb_status tb_stability_loop(const tb_result *res, size_t l, tb_stability *out)
{
    if (!res || !out || l >= res->nloops)
        return TB_ERR_USAGE;
    if (res->stab)
        *out = res->stab[l];
    else
        memset(out, 0, sizeof *out);
    return TB_OK;
}

tb_status tb_census_get(const tb_result *res, const tb_census_entry **entries, size_t *count)
{
    if (!res || !entries || !count)
        return TB_ERR_USAGE;
    *entries = res->census;
    *count = res->census ? res->census_count : 0;
    return TB_OK;
}

tb_status tb_step_figures_get(const tb_result *res, tb_step_figures *out)
{
    if (!res || !out)
        return TB_ERR_USAGE;
    *out = res->step;
    return TB_OK;
}

tb_status tb_step_samples(const tb_result *res, const double **t, const double **y, size_t *n)
{
    if (!res || !t || !y || !n)
        return TB_ERR_USAGE;
    *t = res->step_t;
    *y = res->step_y;
    *n = res->step.computed ? res->step.points : 0;
    return TB_OK;
}

tb_status tb_feedback_loop(const tb_result *res, size_t l, tb_feedback_summary *out)
{
    if (!res || !out || l >= res->nloops || !res->fb)
        return TB_ERR_USAGE;
    *out = res->fb->sum[l];
    return TB_OK;
}

tb_status tb_feedback_points(const tb_result *res, size_t l, const tb_breakdown_point **pts)
{
    if (!res || !pts || l >= res->nloops || !res->fb)
        return TB_ERR_USAGE;
    *pts = res->fb->pts + l * res->npoints;
    return TB_OK;
}

size_t tb_zport_count(const tb_result *res)
{
    return res && res->zp ? res->zp->ports : 0;
}

tb_status tb_zport_loop(const tb_result *res, size_t port, size_t l, tb_zport_summary *out,
                        const tb_zpoint **pts)
{
    if (!res || !out || !res->zp || port >= res->zp->ports || l >= res->zp->loops)
        return TB_ERR_USAGE;
    *out = res->zp->sum[port * res->zp->loops + l];
    if (pts)
        *pts = res->zp->pts + (port * res->zp->loops + l) * res->npoints;
    return TB_OK;
}

tb_status tb_feedback_type_loop(const tb_result *res, size_t l, tb_feedback_type *out)
{
    if (!res || !out || l >= res->nloops)
        return TB_ERR_USAGE;
    *out = res->ftype ? res->ftype[l] : (tb_feedback_type){0};
    return TB_OK;
}

tb_status tb_break_vs_loop_get(const tb_result *res, size_t l, tb_break_vs_loop *out)
{
    if (!res || !out || l >= res->nloops)
        return TB_ERR_USAGE;
    *out = res->wb && res->wb->vs ? res->wb->vs[l] : (tb_break_vs_loop){0};
    return TB_OK;
}

tb_status tb_break_get(const tb_result *res, tb_break_summary *out, const tb_break_point **pts)
{
    if (!res || !out)
        return TB_ERR_USAGE;
    if (!res->wb) {
        *out = (tb_break_summary){0};
        if (pts)
            *pts = NULL;
        return TB_OK;
    }
    *out = res->wb->sum;
    if (pts)
        *pts = res->wb->pts;
    return TB_OK;
}

tb_status tb_distortion_get(const tb_result *res, tb_distortion *out)
{
    if (!res || !out)
        return TB_ERR_USAGE;
    if (res->dist)
        *out = res->dist->sum;
    else
        *out = (tb_distortion){.computed = false, .why_absent = "no .volterra directive"};
    return TB_OK;
}

tb_status tb_distortion_loop_get(const tb_result *res, size_t l, tb_distortion_loop *out,
                                 const tb_dist_sweep_point **pts, size_t *count)
{
    if (!res || !out || l >= res->nloops)
        return TB_ERR_USAGE;
    const tb_dist_data *dd = res->dist;
    if (dd && dd->loops)
        *out = dd->loops[l];
    else
        *out = (tb_distortion_loop){.computed = false,
                                    .why_absent = dd ? dd->sum.why_absent : "no .volterra directive"};
    size_t n = dd && dd->pts ? dd->sum.sweep_points : 0;
    if (pts)
        *pts = n ? dd->pts + l * n : NULL;
    if (count)
        *count = n;
    return TB_OK;
}

size_t tb_spot_count(const tb_result *res)
{
    return res && res->spot ? res->spot->count : 0;
}

tb_status tb_spot_get(const tb_result *res, size_t i, size_t l, tb_spot *out)
{
    if (!res || !out || !res->spot || i >= res->spot->count || l >= res->spot->loops)
        return TB_ERR_USAGE;
    const tb_spot_data *sd = res->spot;
    *out = sd->spots[i * sd->loops + l];
    out->ports = sd->ports;
    out->zports = sd->ports ? sd->zp + (i * sd->loops + l) * sd->ports : NULL;
    return TB_OK;
}

const struct tb_spread_part *tb_result_spread(const tb_result *res)
{
    return res ? res->spread : NULL;
}
