/* src/spot.c: every loop's figures at chosen frequencies (--at), each by a fresh factorization */
#include "spot.h"

#include <math.h>

#include "alloc.h"
#include "feedback.h"
#include "units.h"

tb_status tb_spot_check(const double *at, size_t count)
{
    if (count > TB_AT_MAX || (count > 0 && !at))
        return TB_ERR_USAGE;
    for (size_t i = 0; i < count; i++)
        if (!isfinite(at[i]) || at[i] < 0)
            return TB_ERR_USAGE;
    return TB_OK;
}

/* The sweep point nearest f on a log scale (the first for f = 0). */
static size_t nearest_point(const tb_result *res, double f)
{
    size_t best = 0;
    for (size_t i = 1; f > 0 && i < res->npoints; i++)
        if (fabs(log(res->freqs[i] / f)) < fabs(log(res->freqs[best] / f)))
            best = i;
    return best;
}

/* The figures derived from loop l's point at f: T in dB, its phase on the branch nearest the
 * sweep's unwrapped phase, |1 + T|, the breakdown. */
static void derive(const tb_result *res, size_t l, tb_spot *s)
{
    const tb_point *pt = &s->pt;
    s->has_T = !(pt->flags & TB_PT_T_INF) && isfinite(creal(pt->T)) && isfinite(cimag(pt->T));
    if (s->has_T) {
        s->return_difference = cabs(1.0 + pt->T);
        s->has_T_db = cabs(pt->T) > 0;
    }
    if (s->has_T_db) {
        s->T_db = tb_db(pt->T);
        s->T_phase_deg = carg(pt->T) * TB_DEG_PER_RAD;
        const double *phase = tb_result_phase(res, l);
        if (phase && res->npoints > 0) {
            double ref = phase[nearest_point(res, s->f_hz)];
            s->T_phase_deg += 360.0 * round((ref - s->T_phase_deg) / 360.0);
        }
    }
    bool has_estimate = false;
    double G = 0;
    if (res->fb && res->fb->sum[l].computed && res->fb->sum[l].has_estimate) {
        has_estimate = true;
        G = res->fb->sum[l].estimate;
    }
    s->breakdown = tb_feedback_breakdown(pt, has_estimate, G);
}

static tb_spot_data *data_new(size_t count, size_t loops, size_t ports)
{
    tb_spot_data *sd = tb_calloc(1, sizeof(*sd));
    if (!sd)
        return NULL;
    *sd = (tb_spot_data){.count = count, .loops = loops, .ports = ports};
    sd->spots = tb_calloc(count * loops > 0 ? count * loops : 1, sizeof(tb_spot));
    sd->zp = tb_calloc(count * loops * ports > 0 ? count * loops * ports : 1, sizeof(tb_zpoint));
    if (!sd->spots || !sd->zp) {
        tb_spot_data_free(sd);
        return NULL;
    }
    return sd;
}

tb_status tb_spot_run(tb_probe *probe, tb_impedance *ports, size_t nports, const double *at, size_t count,
                      tb_result *res)
{
    if (count == 0)
        return TB_OK;
    size_t L = res->nloops, P = ports ? nports : 0;
    tb_spot_data *sd = data_new(count, L, P);
    if (!sd)
        return TB_ERR_NOMEM;
    tb_status st = TB_OK;
    for (size_t i = 0; i < count && !st; i++) {
        size_t culprit = 0;
        st = tb_probe_eval(probe, at[i], &culprit);
        for (size_t l = 0; l < L; l++)
            sd->spots[i * L + l] = (tb_spot){.f_hz = at[i], .solved = st == TB_OK};
        if (st == TB_ERR_SINGULAR) {
            st = TB_OK; /* said by solved = false */
            continue;
        }
        for (size_t l = 0; l < L && !st; l++) {
            tb_spot *s = &sd->spots[i * L + l];
            s->pt = probe->row[l];
            derive(res, l, s);
        }
        if (!st && P > 0)
            st = tb_impedance_eval(ports, probe, at[i], sd->zp + i * L * P);
    }
    if (st) {
        tb_spot_data_free(sd);
        return st;
    }
    res->spot = sd;
    return TB_OK;
}
