/* src/stability.c: per-loop margins, poles, Nyquist count, dominant pair and verdict */
#include "stability.h"

#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "alloc.h"
#include "crossing.h"
#include "margin.h"
#include "nyquist.h"
#include "passive.h"
#include "poles.h"
#include "units.h"
#include "winding.h"
#include "krylov.h"

static const double PI = 3.14159265358979323846264338327950288;

/* Poles wanted near each shift above the pole limit. */
#define TB_NEAR_WANT 6

/* Dominance (docs/stability.md): a pole whose weight is at most this fraction of
 * the pair's is negligible; one of larger weight must lie at least this many
 * times farther left (|Re s|) than the pair. */
#define DOMINANT_NEGLIGIBLE 0.1
#define DOMINANT_SEPARATION 5.0
/* The pair's predictions disagree with the computed figures when the larger is
 * more than this many times the smaller and they differ by more than the floor. */
#define PAIR_FACTOR 2.0
#define PAIR_FLOOR_PCT 1.0
#define PAIR_FLOOR_DB 0.5

/* Closed-loop or open-loop poles and how many lie right of / on the axis. */
typedef struct {
    tb_pole_found *p;       /* n entries */
    double complex *res;    /* n * ntf residues (closed loop), or NULL */
    size_t ntf;
    size_t count;
    double scale;
    size_t rhp;
    size_t axis;
    size_t axis_away;       /* on the axis, away from s = 0 */
    size_t checked;
} pole_set;

/* One closed-loop pole with the residue of the transfer a loop looks at. */
typedef struct {
    double complex s;
    tb_pole_place place;
    bool checked;
    bool has_residue;
    double complex residue;
    double weight;          /* |residue| / |Re s|, 0 on the axis */
} kept_pole;

static tb_status pole_set_fill(const tb_mna *mna, const tb_loopvec *lv, tb_pole_check *check,
                               const tb_pole_transfer *tf, pole_set *ps)
{
    tb_status st = tb_poles_find(mna, lv, check, tf, ps->ntf, ps->p, ps->res, &ps->count, &ps->scale);
    if (st)
        return st;
    ps->rhp = ps->axis = ps->axis_away = ps->checked = 0;
    for (size_t i = 0; i < ps->count; i++) {
        const tb_pole_found *p = &ps->p[i];
        ps->checked += p->checked;
        ps->rhp += p->place == TB_POLE_RIGHT;
        ps->axis += p->place == TB_POLE_AXIS;
        ps->axis_away += p->place == TB_POLE_AXIS && cimag(p->s) != 0;
    }
    return TB_OK;
}

/* Largest real part first, then upper half-plane first. */
static int by_real_desc(const void *pa, const void *pb)
{
    double complex a = ((const kept_pole *)pa)->s, b = ((const kept_pole *)pb)->s;
    if (creal(a) != creal(b))
        return creal(a) > creal(b) ? -1 : 1;
    return cimag(a) > cimag(b) ? -1 : cimag(a) < cimag(b);
}

/* The closed-loop poles with residue column col (SIZE_MAX: none), sorted into kp. */
static bool sort_poles(const pole_set *cl, size_t col, kept_pole *kp)
{
    bool weights = col != SIZE_MAX;
    for (size_t i = 0; i < cl->count; i++) {
        const tb_pole_found *p = &cl->p[i];
        double complex r = col != SIZE_MAX ? cl->res[i * cl->ntf + col] : 0;
        kp[i] = (kept_pole){.s = p->s, .place = p->place, .checked = p->checked,
                            .has_residue = col != SIZE_MAX && p->has_residue, .residue = r};
        kp[i].weight = p->place != TB_POLE_AXIS && creal(p->s) != 0 ? cabs(r) / fabs(creal(p->s)) : 0;
        weights = weights && kp[i].has_residue;
    }
    qsort(kp, cl->count, sizeof(kept_pole), by_real_desc);
    return weights;
}

static void keep_poles(const pole_set *cl, const kept_pole *kp, bool weights, tb_stability *st)
{
    st->cl_finite = cl->count;
    st->cl_rhp = cl->rhp;
    st->cl_axis = cl->axis;
    st->cl_checked = cl->checked;
    st->has_weights = weights;
    for (size_t i = 0; i < cl->count; i++)
        st->fastest_rad_s = fmax(st->fastest_rad_s, cabs(kp[i].s));
    st->pole_count = cl->count < TB_MAX_POLES ? cl->count : TB_MAX_POLES;
    for (size_t i = 0; i < st->pole_count; i++) {
        st->poles[i] = kp[i].s;
        st->pole_place[i] = kp[i].place;
        st->pole_checked[i] = kp[i].checked;
        st->pole_residue[i] = weights ? kp[i].residue : 0;
        st->pole_weight[i] = weights ? kp[i].weight : 0;
    }
}

/* Second-order figures of the pair s = -zeta wn + j wn sqrt(1 - zeta^2): Q, peaking
 * of wn^2/(s^2 + 2 zeta wn s + wn^2), overshoot and 2 % settling of its step
 * (standard control texts: Franklin, Powell, Emami-Naeini; Ogata; from memory). */
static void second_order(double complex s, tb_stability *st)
{
    double wn = cabs(s), zeta = -creal(s) / wn;
    st->dominant = s;
    st->zeta = zeta;
    st->q = 1.0 / (2.0 * zeta);
    st->fn_hz = wn / (2.0 * PI);
    st->has_overshoot = true;
    st->overshoot_pct = 100.0 * exp(-PI * zeta / sqrt(1.0 - zeta * zeta));
    st->settling_s = 4.0 / (zeta * wn);
    if (zeta < sqrt(0.5)) {
        st->has_peaking = true;
        st->peaking_db = -20.0 * log10(2.0 * zeta * sqrt(1.0 - zeta * zeta));
        st->peaking_hz = st->fn_hz * sqrt(1.0 - 2.0 * zeta * zeta);
    }
}

/* The heaviest complex pair (upper member) in kp, or SIZE_MAX. */
static size_t heaviest_pair(const kept_pole *kp, size_t count)
{
    size_t best = SIZE_MAX;
    for (size_t i = 0; i < count; i++)
        if (cimag(kp[i].s) > 0 && kp[i].weight > 0 && (best == SIZE_MAX || kp[i].weight > kp[best].weight))
            best = i;
    return best;
}

/* The dominant pair (docs/stability.md): the heaviest complex pair by weight |R|/|Re s|
 * (the pole's peak contribution to |H(jw)|: the dominance measure of the dominant-pole
 * algorithms of N. Martins and of J. Rommes, from memory), when no other pole weighs as
 * much and every other pole of more than DOMINANT_NEGLIGIBLE of its weight lies at least
 * DOMINANT_SEPARATION times farther left (Ogata's rule of thumb, from memory). */
static void dominant_pair(const kept_pole *kp, size_t count, bool weights, tb_stability *st)
{
    st->dominance = !weights ? TB_DOMINANT_NO_WEIGHTS
                    : st->verdict != TB_VERDICT_STABLE ? TB_DOMINANT_NOT_STABLE
                                                       : TB_DOMINANT_NO_PAIR;
    size_t p = weights && st->verdict == TB_VERDICT_STABLE ? heaviest_pair(kp, count) : SIZE_MAX;
    if (p == SIZE_MAX)
        return;
    double wp = kp[p].weight, re_p = fabs(creal(kp[p].s)), runner = 0, nearest = INFINITY;
    for (size_t i = 0; i < count; i++) {
        if (i == p || cimag(kp[i].s) < 0)
            continue; /* each pair once, by its upper member */
        runner = fmax(runner, kp[i].weight);
        if (kp[i].weight > DOMINANT_NEGLIGIBLE * wp)
            nearest = fmin(nearest, fabs(creal(kp[i].s)) / re_p);
    }
    st->dominant_weight = wp;
    st->has_weight_ratio = runner > 0;
    st->weight_ratio = runner > 0 ? wp / runner : 0;
    st->has_separation = isfinite(nearest);
    st->separation = isfinite(nearest) ? nearest : 0;
    st->dominant = kp[p].s;
    if (runner >= wp)
        st->dominance = TB_DOMINANT_OUTWEIGHED;
    else if (isfinite(nearest) && nearest < DOMINANT_SEPARATION)
        st->dominance = TB_DOMINANT_CROWDED;
    else
        st->dominance = TB_DOMINANT_PAIR;
    st->has_dominant = st->dominance == TB_DOMINANT_PAIR;
    if (st->has_dominant)
        second_order(kp[p].s, st);
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

/* Everything the loops share, allocated once. */
typedef struct {
    tb_probe *probe;
    const tb_options *opt;
    bool poles;               /* the closed-loop poles exist */
    tb_stab_note why_none;    /* why not */
    pole_set cl;
    pole_set ol;
    kept_pole *kept;          /* n */
    tb_pole_transfer *tf;     /* cl.ntf */
    tb_pole_check check;
    bool has_peaking;         /* closed-loop peaking of A (the same for every loop) */
    double peaking_db;
    double peaking_hz;
} stab_work;

static void work_free(stab_work *w)
{
    tb_free(w->cl.p);
    tb_free(w->cl.res);
    tb_free(w->ol.p);
    tb_free(w->kept);
    tb_free(w->tf);
    tb_free(w->check.Mx);
}

/* The pole sets and their workspace (only up to the pole limit). The residues are
 * those of A = c'(G + sC)^-1 b with .io, else of each loop's T/(1 + T) = k v'(G + sC)^-1 u. */
static tb_status work_alloc(stab_work *w, const tb_result *res)
{
    const tb_mna *mna = w->probe->mna;
    size_t n = mna->n ? mna->n : 1;
    if (mna->n > w->opt->pole_limit)
        return TB_OK;
    w->cl.ntf = mna->has_io ? 1 : res->nloops;
    w->cl.p = tb_malloc(n, sizeof(tb_pole_found));
    w->cl.res = tb_malloc(n, (w->cl.ntf ? w->cl.ntf : 1) * sizeof(double complex));
    w->ol.p = tb_malloc(n, sizeof(tb_pole_found));
    w->kept = tb_malloc(n, sizeof(kept_pole));
    w->tf = tb_malloc(w->cl.ntf ? w->cl.ntf : 1, sizeof(tb_pole_transfer));
    w->check.Mx = tb_malloc(mna->nnz ? mna->nnz : 1, 2 * sizeof(double));
    if (!w->cl.p || !w->cl.res || !w->ol.p || !w->kept || !w->tf || !w->check.Mx)
        return TB_ERR_NOMEM;
    for (size_t t = 0; t < w->cl.ntf; t++) {
        const tb_loopvec *lv = &mna->loops[t];
        w->tf[t] = mna->has_io ? (tb_pole_transfer){&mna->b, &mna->c, 1.0}
                               : (tb_pole_transfer){&lv->u, &lv->v, lv->k};
    }
    return TB_OK;
}

/* After checks on the circuit the solver holds a nearly singular factorization whose
 * tiny pivots would become the yardstick of later refactorizations (tb_solver_refactor
 * compares against the last pivoted one): factor afresh, with pivoting, at the lowest
 * sweep frequency, which the sweep has factored before. */
static tb_status reanchor(stab_work *w, const tb_result *res, size_t before)
{
    size_t culprit = 0;
    if (w->check.factorizations == before || res->npoints == 0)
        return TB_OK;
    tb_status s = tb_probe_factor(w->probe, res->freqs[0], true, &culprit);
    return s == TB_ERR_NOMEM ? s : TB_OK;
}

static tb_status closed_loop_poles(stab_work *w, const tb_result *res)
{
    const tb_mna *mna = w->probe->mna;
    w->why_none = mna->n <= w->opt->pole_limit ? TB_SNOTE_POLES_FAILED : TB_SNOTE_POLES_TOO_BIG;
    if (mna->n > w->opt->pole_limit)
        return TB_OK;
    w->check.solver = tb_probe_take_solver(w->probe);
    tb_status s = pole_set_fill(mna, NULL, &w->check, w->tf, &w->cl);
    if (s == TB_ERR_NOMEM)
        return s;
    w->poles = s == TB_OK;
    return reanchor(w, res, 0);
}

/* -|A| at f = e^x on a fresh solve (ctx: the probe). */
static tb_status minus_abs_a(void *ctx, double x, double *y)
{
    tb_probe *probe = ctx;
    size_t culprit = 0;
    tb_status st = tb_probe_eval_loop(probe, exp(x), 0, &culprit); /* A: every loop's */
    if (st)
        return st;
    *y = -cabs(probe->row[0].A);
    return TB_OK;
}

/* Closed-loop peaking: the largest |A| over the sweep against |A(0)| (DC, or the
 * lowest sweep point), refined by Brent minimization on fresh solves between
 * the best grid point's neighbours; 0 dB when |A| never rises above |A(0)|. */
static tb_status closed_loop_peaking(stab_work *w, tb_result *res)
{
    double f0 = 0;
    if (!res->has_io || res->nloops == 0 || res->npoints == 0)
        return TB_OK;
    tb_point ref = tb_result_dc_or_first(res, 0, &f0);
    double a0 = cabs(ref.A);
    if (!(a0 > 0) || !isfinite(a0) || (ref.flags & TB_PT_NO_IO))
        return TB_OK;
    size_t best = 0;
    for (size_t i = 1; i < res->npoints; i++)
        if (cabs(res->pts[i].A) > cabs(res->pts[best].A))
            best = i;
    double peak = cabs(res->pts[best].A), at = res->freqs[best];
    if (best > 0 && best + 1 < res->npoints && w->opt->peak_refine) {
        double x = 0, y = 0;
        tb_status s = tb_line_min(minus_abs_a, w->probe, log(res->freqs[best - 1]), log(res->freqs[best + 1]),
                                  TB_PEAK_XTOL, 200, &x, &y);
        if (s == TB_ERR_NOMEM)
            return s;
        if (s == TB_OK && isfinite(y)) {
            res->a_peak.known = true;
            res->a_peak.index = best;
            res->a_peak.x = x;
            res->a_peak.abs_a = -y;
        }
        if (s == TB_OK && -y > peak && isfinite(y)) {
            peak = -y;
            at = exp(x);
        }
    }
    w->has_peaking = isfinite(peak);
    w->peaking_db = peak > a0 ? 20.0 * log10(peak / a0) : 0;
    w->peaking_hz = peak > a0 ? at : f0;
    return TB_OK;
}

/* The open-loop poles of loop l (P of Nyquist) and the closed-loop poles as this
 * loop sees them (residues of its transfer); *ol_axis_away for the verdict. */
static tb_status loop_poles(stab_work *w, const tb_result *res, size_t l, tb_stability *st, bool *weights,
                            bool *ol_axis_away)
{
    const tb_mna *mna = w->probe->mna;
    size_t before = w->check.factorizations;
    w->check.solver = tb_probe_take_solver(w->probe);
    tb_status s = pole_set_fill(mna, &mna->loops[l], &w->check, NULL, &w->ol);
    if (s == TB_ERR_NOMEM || (s == TB_OK && (s = reanchor(w, res, before))))
        return s;
    st->has_poles = s == TB_OK;
    if (s)
        st->notes |= 1u << TB_SNOTE_POLES_FAILED;
    if (!st->has_poles)
        return TB_OK;
    st->cl_count_by = st->ol_count_by = TB_COUNT_POLES;
    st->ol_rhp = w->ol.rhp;
    st->ol_axis = w->ol.axis;
    st->ol_checked = w->ol.checked;
    *ol_axis_away = w->ol.axis_away > 0;
    size_t col = w->cl.ntf == 0 ? SIZE_MAX : mna->has_io ? 0 : l;
    *weights = sort_poles(&w->cl, col, w->kept);
    st->weights_of_a = mna->has_io;
    keep_poles(&w->cl, w->kept, *weights, st);
    return TB_OK;
}

/* Whether T is finite at some sweep point: det M0 = det M / (1 + T) is then not zero at
 * every s, the passivity argument's one proviso (docs/stability.md). */
static bool m0_regular(const tb_result *res, size_t l)
{
    const tb_point *pts = tb_result_loop(res, l);
    for (size_t i = 0; pts && i < res->npoints; i++)
        if (!(pts[i].flags & TB_PT_T_INF) && isfinite(creal(pts[i].T)) && isfinite(cimag(pts[i].T)))
            return true;
    return false;
}

/* Above the pole limit: P = 0 when every diagonal block of M0 is passive (tb_passive_open_loop),
 * in O(nnz), without factorizations; *proven says whether it holds. */
static tb_status open_loop_passive(stab_work *w, const tb_result *res, size_t l, tb_stability *st, bool *proven)
{
    const tb_mna *mna = w->probe->mna;
    tb_passive pv;
    tb_status s = tb_passive_open_loop(mna, &mna->loops[l], &pv);
    *proven = false;
    if (s)
        return s == TB_ERR_NOMEM ? s : TB_OK;
    st->passive_blocks = pv.blocks;
    st->passive_active = pv.active_blocks;
    if (!pv.proven || !m0_regular(res, l))
        return TB_OK;
    *proven = true;
    st->ol_count_by = TB_COUNT_PASSIVE_BLOCKS;
    st->ol_rhp = 0;
    st->ol_axis = 0;
    st->notes |= 1u << TB_SNOTE_RHP_BY_PASSIVE;
    return TB_OK;
}

/* The argument principle's walk would take about two factorizations per zero of det M,
 * at most one zero per column of C: twice the columns of C that hold a non-zero. */
static size_t walk_estimate(const tb_mna *mna)
{
    size_t cols = 0;
    for (size_t j = 0; j < mna->n; j++) {
        bool any = false;
        for (int k = mna->Ap[j]; k < mna->Ap[j + 1] && !any; k++)
            any = mna->Cx[k] != 0;
        cols += any;
    }
    return 2 * cols;
}

/* The walk's counts into st. With P proven (proven), the open loop's count stays the
 * proof's, and the walk adds the open-loop poles on the axis when it agrees. */
static void take_counts(const tb_winding *wd, bool proven, tb_stability *st, bool *ol_axis_away)
{
    if (wd->closed.counted) {
        st->cl_count_by = TB_COUNT_WINDING;
        st->cl_rhp = wd->closed.rhp;
        st->cl_axis = wd->closed.on_axis + wd->closed.at_origin;
        st->cl_finite = wd->closed.degree;
    }
    if (wd->open.counted && (!proven || wd->open.rhp == 0)) {
        st->ol_count_by = proven ? TB_COUNT_PASSIVE_BLOCKS : TB_COUNT_WINDING;
        st->ol_rhp = wd->open.rhp;
        st->ol_axis = wd->open.on_axis + wd->open.at_origin;
        st->ol_axis_counted = proven;
        *ol_axis_away = wd->open.on_axis > 0;
    }
    st->winding_why = !wd->closed.counted ? wd->closed.why : !wd->open.counted ? wd->open.why : NULL;
    if (!proven)
        st->notes |= 1u << (st->winding_why ? TB_SNOTE_WINDING_FAILED : TB_SNOTE_RHP_BY_WINDING);
    else if (wd->closed.counted)
        st->notes |= 1u << TB_SNOTE_RHP_BY_WINDING;
}

/* Above the pole limit: the right-half-plane counts of det M and det M0 by the
 * argument principle along the sweep's range and beyond (tb_winding_run), within
 * budget factorizations, then a pivoted factorization at the lowest sweep frequency,
 * as after the poles' checks. proven: P is known already (a check walk; its failure
 * is no note). */
static tb_status loop_winding(stab_work *w, const tb_result *res, size_t l, size_t budget, bool proven,
                              tb_stability *st, bool *ol_axis_away)
{
    unsigned failed = proven ? 0 : 1u << TB_SNOTE_WINDING_FAILED;
    if (res->npoints < 2 || !(res->freqs[0] > 0)) {
        st->winding_why = "the sweep has no range to start the walk on";
        st->notes |= failed;
        return TB_OK;
    }
    tb_winding wd;
    tb_status s = tb_winding_run_budget(w->probe, l, res->freqs[0], res->freqs[res->npoints - 1], budget, &wd);
    if (s == TB_ERR_NOMEM)
        return s;
    size_t culprit = 0;
    tb_status again = tb_probe_factor(w->probe, res->freqs[0], true, &culprit);
    if (again == TB_ERR_NOMEM)
        return again;
    if (s) {
        st->winding_why = "a factorization of the walk failed";
        st->notes |= failed;
        return TB_OK;
    }
    st->winding_evaluations = wd.evaluations;
    take_counts(&wd, proven, st, ol_axis_away);
    return TB_OK;
}

/* Above the pole limit (or where QZ failed): P by the passive blocks, else from the
 * nominal circuit when given, else by the argument principle; with P proven, the walk
 * runs as a check only when its estimate fits tb_options.rhp_check_limit. */
static tb_status open_loop_count(stab_work *w, const tb_result *res, size_t l, tb_stability *st,
                                 bool *ol_axis_away)
{
    bool proven = false;
    tb_status s = open_loop_passive(w, res, l, st, &proven);
    size_t limit = w->opt->rhp_count_limit;
    if (s)
        return s;
    if (proven) {
        size_t check = w->opt->rhp_check_limit < limit ? w->opt->rhp_check_limit : limit;
        if (check > 0 && walk_estimate(w->probe->mna) <= check)
            return loop_winding(w, res, l, check, true, st, ol_axis_away);
        return TB_OK;
    }
    if (w->opt->ol_rhp_given) {
        st->ol_count_by = TB_COUNT_GIVEN; /* a small change of a counted circuit: P carried over */
        st->ol_rhp = w->opt->ol_rhp_given[l];
        return TB_OK;
    }
    return limit > 0 ? loop_winding(w, res, l, limit, false, st, ol_axis_away) : TB_OK;
}

/* Poles found near one shift join st's list, each once. */
static void keep_near(const tb_krylov_found *k, bool open, tb_stability *st)
{
    for (size_t i = 0; i < k->count && st->near_count < TB_MAX_NEAR_POLES; i++) {
        double complex s = k->poles[i].s;
        bool seen = false;
        for (size_t j = 0; j < st->near_count && !seen; j++)
            seen = st->near_open[j] == open && cabs(st->near_poles[j] - s) <= 1e-9 * cabs(s);
        if (seen)
            continue;
        st->near_poles[st->near_count] = s;
        st->near_open[st->near_count] = open;
        st->near_shift_hz[st->near_count] = k->shift_hz;
        st->near_count++;
    }
}

/* Above the pole limit: the closed- and open-loop poles nearest s = 0 and the
 * headline unity crossing (tb_krylov_near), then a pivoted factorization at the
 * lowest sweep frequency, as after the poles' checks. A search that fails leaves
 * its poles out (near_complete false). */
static tb_status near_poles(stab_work *w, const tb_result *res, size_t l, tb_stability *st)
{
    double shifts[2] = {0, st->has_phase_margin ? st->phase_margin_hz : -1};
    st->near_complete = true;
    for (int i = 0; i < 2; i++) {
        for (int open = 0; open < 2 && shifts[i] >= 0; open++) {
            tb_krylov_found k;
            tb_status s = tb_krylov_near(w->probe, shifts[i], open ? l : SIZE_MAX, TB_NEAR_WANT, &k);
            if (s == TB_ERR_NOMEM)
                return s;
            st->near_complete = st->near_complete && !s && k.converged;
            if (s)
                continue;
            st->near_solves += k.solves;
            keep_near(&k, open, st);
        }
    }
    size_t culprit = 0;
    tb_status s = res->npoints ? tb_probe_factor(w->probe, res->freqs[0], true, &culprit) : TB_OK;
    return s == TB_ERR_NOMEM ? s : TB_OK;
}

/* One loop: margins by the scan, open-loop poles, Nyquist count, verdict, dominant pair. */
static tb_status one_loop(stab_work *w, tb_result *res, size_t l, tb_stability *st)
{
    tb_nyquist_path path;
    tb_scan_wants wants = {.vector_refine = w->opt->vector_refine, .crossing_list = w->opt->crossing_list,
                          .gm_cap_db = w->opt->gm_cap_db};
    tb_status s = tb_margin_scan(w->probe, res, l, &wants, st, &path);
    if (s)
        return s;
    st->computed = true;
    st->unknowns = w->probe->mna->n;
    st->pole_limit = w->opt->pole_limit;
    bool ol_axis_away = false, weights = false;
    if (w->poles)
        s = loop_poles(w, res, l, st, &weights, &ol_axis_away);
    else
        st->notes |= 1u << w->why_none;
    if (!s && !st->has_poles)
        s = open_loop_count(w, res, l, st, &ol_axis_away);
    if (!s && !st->has_poles && w->opt->near_poles && w->probe->mna->n > w->opt->pole_limit)
        s = near_poles(w, res, l, st);
    if (s)
        return s;
    st->has_nyquist = tb_nyquist_count(&path, &st->nyquist_n);
    tb_nyquist_verdict(st, ol_axis_away);
    st->dominance = TB_DOMINANT_NO_WEIGHTS;
    if (st->has_poles)
        dominant_pair(w->kept, w->cl.count, weights, st);
    st->has_cl_peaking = w->has_peaking && st->verdict == TB_VERDICT_STABLE; /* a measurable response */
    st->cl_peaking_db = w->peaking_db;
    st->cl_peaking_hz = w->peaking_hz;
    thresholds(w->opt, st);
    return TB_OK;
}

tb_status tb_stability_run(tb_probe *probe, const tb_options *opt, tb_result *res)
{
    stab_work w = {.probe = probe, .opt = opt};
    res->stab = tb_calloc(res->nloops, sizeof(tb_stability));
    tb_status s = res->stab ? work_alloc(&w, res) : TB_ERR_NOMEM;
    if (!s)
        s = closed_loop_poles(&w, res);
    if (!s)
        s = closed_loop_peaking(&w, res);
    for (size_t l = 0; l < res->nloops && !s; l++)
        s = one_loop(&w, res, l, &res->stab[l]);
    probe->factorizations += w.check.factorizations;
    work_free(&w);
    return s;
}

/* true when predicted and computed differ by more than PAIR_FACTOR (and the floor). */
static bool pair_misses(double predicted, double computed, double floor)
{
    double lo = fmin(predicted, computed), hi = fmax(predicted, computed);
    return hi - lo > floor && hi > PAIR_FACTOR * lo;
}

void tb_stability_vs_step(const tb_step_figures *step, tb_stability *st)
{
    st->pair_checked = false;
    st->pair_disagrees = false;
    st->has_step_overshoot = step && step->computed && step->has_overshoot;
    st->step_overshoot_pct = st->has_step_overshoot ? step->overshoot_pct : 0;
    if (!st->computed || !st->has_dominant)
        return;
    bool off = st->has_step_overshoot && pair_misses(st->overshoot_pct, step->overshoot_pct, PAIR_FLOOR_PCT);
    if (st->has_cl_peaking)
        off = off || pair_misses(st->has_peaking ? st->peaking_db : 0, st->cl_peaking_db, PAIR_FLOOR_DB);
    st->pair_checked = st->has_step_overshoot || st->has_cl_peaking;
    st->pair_disagrees = off;
    if (off)
        st->notes |= 1u << TB_SNOTE_PAIR_DISAGREES;
}
