/* src/stability.c: per-loop margins, poles, Nyquist count, dominant pair and verdict */
#include "stability.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "alloc.h"
#include "margin.h"
#include "nyquist.h"
#include "poles.h"

static const double PI = 3.14159265358979323846264338327950288;

/* Closed-loop or open-loop poles and how many lie right of / on the axis. */
typedef struct {
    double complex *eig; /* n entries */
    size_t count;
    double scale;
    size_t rhp;
    size_t axis;
    size_t axis_away;    /* on the axis, away from s = 0 */
} pole_set;

static tb_status pole_set_fill(const tb_mna *mna, const tb_loopvec *lv, pole_set *ps)
{
    tb_status st = tb_poles_compute(mna, lv, ps->eig, &ps->count, &ps->scale);
    if (st)
        return st;
    ps->rhp = ps->axis = ps->axis_away = 0;
    for (size_t i = 0; i < ps->count; i++) {
        if (tb_poles_on_axis(ps->eig[i], ps->scale)) {
            ps->axis++;
            if (cabs(ps->eig[i]) > 1e-11 * ps->scale)
                ps->axis_away++;
        } else if (creal(ps->eig[i]) > 0) {
            ps->rhp++;
        }
    }
    return TB_OK;
}

/* Largest real part first (least damped first), then upper half-plane first. */
static int by_real_desc(const void *pa, const void *pb)
{
    double complex a = *(const double complex *)pa, b = *(const double complex *)pb;
    if (creal(a) != creal(b))
        return creal(a) > creal(b) ? -1 : 1;
    return cimag(a) > cimag(b) ? -1 : cimag(a) < cimag(b);
}

/* The least damped complex pair: zeta, Q, peaking and step estimates of a
 * second-order system (references: Franklin, Powell, Emami-Naeini; Ogata). */
static void dominant_pair(const pole_set *cl, tb_stability *st)
{
    double best = INFINITY;
    for (size_t i = 0; i < cl->count; i++) {
        double complex s = cl->eig[i];
        if (cimag(s) <= 1e-9 * cabs(s) || creal(s) >= 0)
            continue;
        double zeta = -creal(s) / cabs(s);
        if (zeta < best) {
            best = zeta;
            st->dominant = s;
        }
    }
    if (!isfinite(best))
        return;
    double wn = cabs(st->dominant);
    st->has_dominant = true;
    st->zeta = best;
    st->q = 1.0 / (2.0 * best);
    st->fn_hz = wn / (2.0 * PI);
    st->has_overshoot = true;
    st->overshoot_pct = 100.0 * exp(-PI * best / sqrt(1.0 - best * best));
    st->settling_s = 4.0 / (best * wn);
    if (best < sqrt(0.5)) {
        st->has_peaking = true;
        st->peaking_db = -20.0 * log10(2.0 * best * sqrt(1.0 - best * best));
        st->peaking_hz = st->fn_hz * sqrt(1.0 - 2.0 * best * best);
    }
}

static void keep_poles(pole_set *cl, tb_stability *st)
{
    qsort(cl->eig, cl->count, sizeof(double complex), by_real_desc);
    st->cl_finite = cl->count;
    st->cl_rhp = cl->rhp;
    st->cl_axis = cl->axis;
    for (size_t i = 0; i < cl->count; i++)
        st->fastest_rad_s = fmax(st->fastest_rad_s, cabs(cl->eig[i]));
    st->pole_count = cl->count < TB_MAX_POLES ? cl->count : TB_MAX_POLES;
    memcpy(st->poles, cl->eig, st->pole_count * sizeof(double complex));
    dominant_pair(cl, st);
}

/* The headline margins once the verdict is known, and the user's thresholds:
 * every margin that exists, wherever it lies on the axis, is checked; margins
 * that could not be determined fail (tb_margin_judge). */
static void thresholds(const tb_options *opt, tb_stability *st)
{
    st->pm_min_deg = opt->pm_min_deg;
    st->gm_min_db = opt->gm_min_db;
    tb_margin_judge(st, opt->pm_min_deg, opt->gm_min_db);
}

/* One loop: margins by the scan, open-loop poles, Nyquist count, verdict. */
static tb_status one_loop(tb_probe *probe, const tb_options *opt, tb_result *res, size_t l,
                          const pole_set *cl, tb_stab_note no_poles, pole_set *ol,
                          tb_stability *st)
{
    tb_nyquist_path path;
    tb_status s = tb_margin_scan(probe, res, l, st, &path);
    if (s)
        return s;
    st->computed = true;
    st->unknowns = probe->mna->n;
    st->pole_limit = opt->pole_limit;
    bool ol_axis_away = false;
    if (cl) {
        s = pole_set_fill(probe->mna, &probe->mna->loops[l], ol);
        if (s == TB_ERR_NOMEM)
            return s;
        st->has_poles = s == TB_OK;
        if (s)
            st->notes |= 1u << TB_SNOTE_POLES_FAILED;
        st->ol_rhp = ol->rhp;
        st->ol_axis = ol->axis;
        ol_axis_away = ol->axis_away > 0;
        memcpy(ol->eig, cl->eig, cl->count * sizeof(double complex)); /* sorted closed loop */
        pole_set sorted = *cl;
        sorted.eig = ol->eig;
        if (st->has_poles)
            keep_poles(&sorted, st);
    } else {
        st->notes |= 1u << no_poles;
    }
    st->has_nyquist = tb_nyquist_count(&path, &st->nyquist_n);
    tb_nyquist_verdict(st, ol_axis_away);
    thresholds(opt, st);
    return TB_OK;
}

tb_status tb_stability_run(tb_probe *probe, const tb_options *opt, tb_result *res)
{
    size_t n = probe->mna->n;
    bool poles = n <= opt->pole_limit;
    res->stab = tb_calloc(res->nloops, sizeof(tb_stability));
    pole_set cl = {0}, ol = {0};
    tb_status s = TB_ERR_NOMEM;
    if (!res->stab)
        return s;
    if (poles) {
        cl.eig = tb_malloc(n ? n : 1, sizeof(double complex));
        ol.eig = tb_malloc(n ? n : 1, sizeof(double complex));
        if (!cl.eig || !ol.eig)
            goto done;
        s = pole_set_fill(probe->mna, NULL, &cl);
        if (s == TB_ERR_NOMEM)
            goto done;
        poles = s == TB_OK;
    }
    tb_stab_note why = poles || n <= opt->pole_limit ? TB_SNOTE_POLES_FAILED : TB_SNOTE_POLES_TOO_BIG;
    s = TB_OK;
    for (size_t l = 0; l < res->nloops && !s; l++)
        s = one_loop(probe, opt, res, l, poles ? &cl : NULL, why, &ol, &res->stab[l]);
done:
    tb_free(cl.eig);
    tb_free(ol.eig);
    return s;
}
