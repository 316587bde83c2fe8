/* src/step.c: closed-loop step response: exact sum over the modes, else TR-BDF2 with error control; its figures */
#include "step.h"

#include <math.h>
#include <pthread.h>
#include <stdlib.h>
#include <string.h>

#include "alloc.h"
#include "crossing.h"
#include "modal.h"
#include "transient.h"
#include "units.h"

/* Sampling of the modal sum: at most KAPPA / |s_k| between samples while mode k still
 * matters (about 60 samples per period of an oscillating mode), at most RHO t otherwise
 * (about 46 per decade of time); a mode matters while |r_k / s_k| e^(Re s_k t) exceeds
 * ALIVE times the waveform's scale; the waveform ends when the sum of those envelopes
 * falls below TAIL times |A(0)|. */
static const double KAPPA = 0.1;
static const double RHO = 0.05;
static const double ALIVE = 1e-7;
static const double TAIL = 1e-5;

/* The sampled waveform: between samples y comes from the modes (exact) or from the cubic
 * through the neighbouring samples and slopes. */
typedef struct {
    size_t count;
    size_t cap[3];
    double *t;
    double *y;
    double *dy;
    const tb_modal *modal; /* exact evaluation when not NULL */
    double final;          /* A(0) */
    double scale;          /* max(|A(0)|, |y(0+)|): the unit of error */
    double error;          /* estimated largest error of the samples, in units of scale */
    bool settled;          /* the samples reach the final value and stay there */
    const char *method;
} wave;

static void wave_free(wave *w)
{
    tb_free(w->t);
    tb_free(w->y);
    tb_free(w->dy);
    w->t = w->y = w->dy = NULL;
    w->count = 0;
}

static tb_status wave_add(wave *w, double t, double y, double dy)
{
    size_t need = w->count + 1;
    if (tb_grow(&w->t, &w->cap[0], need, sizeof(double), TB_STEP_MAX_SAMPLES) ||
        tb_grow(&w->y, &w->cap[1], need, sizeof(double), TB_STEP_MAX_SAMPLES) ||
        tb_grow(&w->dy, &w->cap[2], need, sizeof(double), TB_STEP_MAX_SAMPLES))
        return TB_ERR_NOMEM;
    w->t[w->count] = t;
    w->y[w->count] = y;
    w->dy[w->count++] = dy;
    return TB_OK;
}

/* y at t: exact from the modes, or the cubic Hermite through the samples around t
 * (a straight line in the first interval, whose left slope is not known). */
static double wave_at(const wave *w, double t)
{
    if (w->modal) {
        double y = 0, dy = 0;
        tb_modal_step(w->modal, w->final, t, &y, &dy);
        return y;
    }
    size_t lo = 0, hi = w->count - 1;
    if (t <= w->t[0] || hi == 0)
        return w->y[0];
    if (t >= w->t[hi])
        return w->y[hi];
    while (hi - lo > 1) {
        size_t mid = lo + (hi - lo) / 2;
        *(w->t[mid] <= t ? &lo : &hi) = mid;
    }
    double h = w->t[hi] - w->t[lo], u = (t - w->t[lo]) / h;
    if (lo == 0)
        return w->y[lo] + u * (w->y[hi] - w->y[lo]);
    double v = 1 - u;
    return (1 + 2 * u) * v * v * w->y[lo] + u * v * v * h * w->dy[lo] + u * u * (3 - 2 * u) * w->y[hi] -
           u * u * v * h * w->dy[hi];
}

/* ---- the exact route: a sum over the closed-loop modes ---------------- */

static const char METHOD_MODES[] = "sum over the closed-loop modes";
static const char METHOD_LIMIT[] =
    "TR-BDF2 with error control (no poles: more unknowns than the pole limit)";
static const char METHOD_CHECK[] =
    "TR-BDF2 with error control (the sum over the modes failed its check against H(jw))";
static const char METHOD_DEFECT[] =
    "TR-BDF2 with error control (a defective closed-loop pole: no sum over the modes)";
static const char METHOD_NODC[] =
    "TR-BDF2 with error control (G is singular: no sum over the modes)";
static const char NO_DYNAMICS[] =
    "no finite closed-loop poles: the output follows the input at once, there is no time scale";
static const char TOO_MANY[] = "the waveform needs more samples than the limit (a very lightly damped mode)";

/* |r_k / s_k| e^(Re s_k t): how much mode k still moves the output at t. */
static double envelope(const tb_modal *m, size_t k, double t)
{
    return cabs(m->r[k] / m->s[k]) * exp(creal(m->s[k]) * t);
}

/* Largest |s_k| of the modes that still matter at t (0 when none). */
static double fastest_alive(const tb_modal *m, double t, double floor)
{
    double top = 0;
    for (size_t k = 0; k < m->count; k++)
        if (creal(m->s[k]) >= 0 || envelope(m, k, t) > floor)
            top = fmax(top, cabs(m->s[k]));
    return top;
}

static double tail(const tb_modal *m, double t)
{
    double sum = 0;
    for (size_t k = 0; k < m->count; k++)
        if (creal(m->s[k]) < 0)
            sum += envelope(m, k, t);
    return sum;
}

/* End of the waveform: where the decaying modes' envelopes sum to thr (doubling, then
 * bisection), and at least 20/|s| of every mode that does not decay. */
static double horizon(const tb_modal *m, double thr)
{
    double fast = 0, t_grow = 0;
    for (size_t k = 0; k < m->count; k++) {
        fast = fmax(fast, cabs(m->s[k]));
        if (creal(m->s[k]) >= 0)
            t_grow = fmax(t_grow, 20.0 / cabs(m->s[k]));
    }
    double lo = 0, hi = 1.0 / fast;
    for (int i = 0; i < 400 && tail(m, hi) > thr; i++) {
        lo = hi;
        hi *= 2;
    }
    for (int i = 0; i < 60; i++) {
        double mid = 0.5 * (lo + hi);
        *(tail(m, mid) > thr ? &lo : &hi) = mid;
    }
    return fmax(hi, t_grow);
}

static tb_status add_exact(wave *w, double t)
{
    double y = 0, dy = 0;
    tb_modal_step(w->modal, w->final, t, &y, &dy);
    return wave_add(w, t, y, dy);
}

/* Samples from t = 0 to the horizon, spaced to resolve every mode while it matters. */
static tb_status modal_samples(wave *w, const char **why)
{
    const tb_modal *m = w->modal;
    double floor = ALIVE * w->scale;
    double t_end = horizon(m, TAIL * (w->final != 0 ? fabs(w->final) : w->scale));
    double f0 = fastest_alive(m, 0, floor);
    double h_first = f0 > 0 ? KAPPA / f0 : t_end / 100;
    double t = 0;
    tb_status st = add_exact(w, 0);
    while (!st && t < t_end) {
        if (w->count >= TB_STEP_MAX_SAMPLES) {
            *why = TOO_MANY;
            return TB_OK;
        }
        double f = fastest_alive(m, t, floor);
        double h = fmax(RHO * t, h_first);
        if (f > 0)
            h = fmin(h, KAPPA / f);
        t = fmin(t + h, t_end);
        st = add_exact(w, t);
    }
    return st;
}

static int by_value(const void *pa, const void *pb)
{
    double a = *(const double *)pa, b = *(const double *)pb;
    return (a > b) - (a < b);
}

/* Angular frequencies at which the sum is checked: |s_k| of every pole (and |Im s_k|
 * of an oscillating one), and two per decade from 1/100 of the slowest to 100 times
 * the fastest; sorted. *count of them into w (2 m->count + 64 entries). */
static void check_omegas(const tb_modal *m, double *w, size_t *count)
{
    size_t n = 0;
    double lo = INFINITY, hi = 0;
    for (size_t k = 0; k < m->count; k++) {
        double mag = cabs(m->s[k]);
        if (cimag(m->s[k]) < 0 || mag == 0)
            continue;
        lo = fmin(lo, mag);
        hi = fmax(hi, mag);
        w[n++] = mag;
        if (cimag(m->s[k]) > fabs(creal(m->s[k])))
            w[n++] = cimag(m->s[k]);
    }
    for (double x = lo / 100; hi > 0 && x <= hi * 100 && n < 2 * m->count + 64; x *= sqrt(10.0))
        w[n++] = x;
    qsort(w, n, sizeof(double), by_value);
    *count = n;
}

/* Largest |H(jw) - sum| / max(scale, |H(jw)|) over the check frequencies, H from a fresh
 * factorization of M(jw) by the probe (a frequency where M is singular, a pole on the
 * axis, is skipped); scale is the size of the step response. x: n complex workspace. */
static tb_status modal_check(tb_probe *probe, const tb_modal *m, double d0, double scale,
                             double complex *x, double *worst)
{
    const tb_mna *mna = probe->mna;
    double *omegas = tb_malloc(2 * m->count + 64, sizeof(double));
    if (!omegas)
        return TB_ERR_NOMEM;
    size_t count = 0;
    check_omegas(m, omegas, &count);
    tb_status st = TB_OK;
    *worst = 0;
    for (size_t i = 0; i < count && !st; i++) {
        if (i > 0 && omegas[i] <= omegas[i - 1] * (1 + 1e-3))
            continue;
        size_t culprit = 0;
        st = tb_probe_factor(probe, omegas[i] / TB_TWO_PI, false, &culprit);
        if (st == TB_ERR_SINGULAR) {
            st = TB_OK;
            continue;
        }
        memset(x, 0, mna->n * sizeof(double complex));
        tb_svec_axpy(&mna->b, 1.0, x);
        if (st || (st = tb_solver_solve(probe->solver, x, 1) ? TB_ERR_NUMERIC : TB_OK))
            break;
        double complex H = tb_svec_dot(&mna->c, x);
        double complex sum = tb_modal_transfer(m, d0, CMPLX(0, omegas[i]));
        double size = fmax(scale, cabs(H));
        *worst = fmax(*worst, size > 0 ? cabs(H - sum) / size : cabs(H - sum));
    }
    tb_free(omegas);
    return st;
}

/* The exact route. On return *why is NULL when w holds the waveform; otherwise the
 * method the caller falls back to, or a reason the response is absent. */
static tb_status modal_route(tb_probe *probe, double final, tb_modal *m, wave *w, const char **why)
{
    tb_status st = tb_modal_compute(probe->mna, m);
    *why = st == TB_ERR_NUMERIC ? METHOD_DEFECT : NULL;
    if (st)
        return st == TB_ERR_NUMERIC ? TB_OK : st;
    if (m->count == 0) {
        *why = NO_DYNAMICS;
        return TB_OK;
    }
    double d0 = final, terms = 0; /* y(0+) = A(0) + sum r_k/s_k */
    for (size_t k = 0; k < m->count; k++) {
        d0 += creal(m->r[k] / m->s[k]);
        terms += cabs(m->r[k] / m->s[k]);
    }
    w->scale = fmax(fabs(final), fabs(d0));
    if (w->scale <= 1e-9 * terms) /* no DC gain and no jump (d0 only rounding): a band-pass response */
        w->scale = terms;
    double complex *x = tb_malloc(probe->mna->n, sizeof(double complex));
    double err = 0;
    st = x ? modal_check(probe, m, d0, w->scale, x, &err) : TB_ERR_NOMEM;
    tb_free(x);
    if (st == TB_ERR_NOMEM)
        return st;
    err += 1e-15 * terms / w->scale; /* rounding in the sum of the modes */
    if (st || !(err <= TB_STEP_TOL)) {
        *why = METHOD_CHECK;
        return TB_OK;
    }
    *w = (wave){.modal = m, .final = final, .scale = w->scale, .error = err, .method = METHOD_MODES};
    w->settled = true;
    for (size_t k = 0; k < m->count; k++)
        w->settled = w->settled && creal(m->s[k]) < 0;
    return modal_samples(w, why);
}

/* ---- the time-stepping route --------------------------------------------- */

/* Accumulated output error (relative to the scale) that time stepping may have. */
static const double TRANSIENT_TOL = 5e-4;
/* Local error tolerance per step, relative to each unknown's size. */
static const double LOCAL_TOL = 1e-5;

/* Drops the flat tail after the output settled: keeps samples up to twice the time
 * of the last sample farther than TAIL of the scale from the final value. */
static void trim(wave *w)
{
    size_t last = 0;
    for (size_t k = 0; k < w->count; k++)
        if (fabs(w->y[k] - w->final) > TAIL * w->scale)
            last = k;
    if (last + 1 >= w->count)
        return;
    double keep = 2 * w->t[last + 1];
    size_t k = last + 1;
    while (k + 1 < w->count && w->t[k] < keep)
        k++;
    w->count = k + 1;
}

/* One TR-BDF2 run (transient.c) into w, its error estimate relative to the scale. */
static tb_status transient_once(const tb_mna *mna, tb_solver *solver, const tb_transient_limits *lim,
                                bool has_final, double final, wave *w)
{
    tb_transient tr = {0};
    tb_status st = tb_transient_run(mna, solver, lim, &tr);
    if (st)
        return st;
    *w = (wave){.count = tr.count, .cap = {tr.count, tr.count, tr.count}, .t = tr.t, .y = tr.y,
                .dy = tr.dy, .final = has_final ? final : 0, .settled = tr.settled && has_final};
    double top = 0;
    for (size_t k = 0; k < w->count; k++)
        top = fmax(top, fabs(w->y[k]));
    w->scale = fmax(fabs(w->final), top);
    if (w->scale == 0)
        w->scale = 1;
    w->error = tr.y_error / w->scale;
    return TB_OK;
}

/* TR-BDF2 on the probe's solver: first step from the top of the sweep, at most
 * 1e4 / (2 pi f_lo) long; when the summed error estimate exceeds TRANSIENT_TOL, again
 * with a local tolerance 10 times tighter (twice at most, and not after a run that used
 * up its steps). *why as modal_route. */
static tb_status transient_route(const tb_mna *mna, tb_solver *solver, double f_lo, double f_hi, bool has_final,
                                 double final, wave *w, const char **why)
{
    tb_transient_limits lim = {.h_first = 1e-3 / (TB_TWO_PI * f_hi),
                               .t_cap = 1e4 / (TB_TWO_PI * f_lo),
                               .tol = LOCAL_TOL,
                               .max_steps = TB_STEP_MAX_STEPS};
    tb_status st = TB_OK;
    *why = NULL;
    for (int attempt = 0; attempt < 3 && !st; attempt++, lim.tol /= 10) {
        wave_free(w);
        st = transient_once(mna, solver, &lim, has_final, final, w);
        if (!st && (w->error <= TRANSIENT_TOL || w->count > lim.max_steps))
            break; /* good enough, or out of steps: a tighter run would not get further */
    }
    if (st == TB_ERR_SINGULAR || st == TB_ERR_NUMERIC) {
        *why = "time stepping failed: the step size fell below the resolution of the time axis";
        return TB_OK;
    }
    if (st)
        return st;
    if (!(w->error <= TRANSIENT_TOL)) {
        *why = "the time-stepping error estimate exceeds the tolerance: the waveform is not trustworthy";
        return TB_OK;
    }
    if (w->settled)
        trim(w);
    return TB_OK;
}

/* ---- figures ------------------------------------------------------------- */

/* z(t) = y(t)/A(0) - level, or |z(t) - 1| - level (band). */
typedef struct {
    const wave *w;
    double level;
    bool band;
} level_fn;

static tb_status level_at(void *ctx, double t, double *out)
{
    const level_fn *f = ctx;
    double z = wave_at(f->w, t) / f->w->final;
    *out = f->band ? fabs(z - 1) - f->level : z - f->level;
    return TB_OK;
}

static tb_status minus_z(void *ctx, double t, double *out)
{
    const wave *w = ctx;
    *out = -wave_at(w, t) / w->final;
    return TB_OK;
}

/* z of sample k. */
static double z_at(const wave *w, size_t k)
{
    return w->y[k] / w->final;
}

/* First time z reaches level (0 when it starts there), refined between the samples that
 * bracket it; false when it never does. */
static bool first_reach(const wave *w, double level, double *at)
{
    for (size_t k = 0; k < w->count; k++) {
        if (z_at(w, k) < level)
            continue;
        *at = 0;
        if (k == 0)
            return true;
        level_fn f = {w, level, false};
        double a = w->t[k - 1], b = w->t[k];
        if (tb_brent_root(level_at, &f, a, b, z_at(w, k - 1) - level, z_at(w, k) - level, 1e-14 * b, 200, at))
            *at = b;
        return true;
    }
    return false;
}

/* Peak: the largest sample, refined by Brent minimization between its neighbours. */
static void peak(const wave *w, tb_step_figures *fig)
{
    size_t best = 0;
    for (size_t k = 1; k < w->count; k++)
        if (z_at(w, k) > z_at(w, best))
            best = k;
    double t = w->t[best], z = z_at(w, best);
    if (best > 0 && best + 1 < w->count) {
        double tm = t, mz = -z;
        if (!tb_line_min(minus_z, (void *)w, w->t[best - 1], w->t[best + 1], 1e-13 * t, 200, &tm, &mz) &&
            -mz > z) {
            t = tm;
            z = -mz;
        }
    }
    fig->has_peak = true;
    fig->peak_value = z * w->final;
    fig->peak_s = t;
    fig->has_overshoot = true;
    fig->overshoot_pct = z > 1 ? 100.0 * (z - 1) : 0;
}

/* 2 % settling: where |z - 1| last falls to 0.02, refined between the samples. */
static void settling(const wave *w, tb_step_figures *fig)
{
    size_t last = 0;
    bool out = false;
    for (size_t k = 0; k < w->count; k++)
        if (fabs(z_at(w, k) - 1) > 0.02) {
            last = k;
            out = true;
        }
    fig->has_settling = w->settled && last + 1 < w->count;
    fig->settling_s = 0;
    if (!fig->has_settling || !out)
        return;
    level_fn f = {w, 0.02, true};
    double a = w->t[last], b = w->t[last + 1];
    if (tb_brent_root(level_at, &f, a, b, fabs(z_at(w, last) - 1) - 0.02, fabs(z_at(w, last + 1) - 1) - 0.02,
                      1e-14 * b, 200, &fig->settling_s))
        fig->settling_s = b;
}

static void figures(const wave *w, tb_step_figures *fig)
{
    peak(w, fig);
    double t10 = 0, t90 = 0;
    fig->has_rise = first_reach(w, 0.1, &t10) && first_reach(w, 0.9, &t90);
    fig->rise_s = fig->has_rise ? t90 - t10 : 0;
    settling(w, fig);
}

/* ---- the run --------------------------------------------------------------- */

/* Why a computed waveform has no figures (NULL: it has them). */
static const char *no_figures(const tb_result *res, bool has_final, const wave *w)
{
    if (res->stab[0].verdict != TB_VERDICT_STABLE)
        return "figures only for a stable closed loop";
    if (!has_final)
        return "no DC solution (a closed-loop pole at s = 0): no final value";
    if (w->final == 0)
        return "the DC gain is zero: no final value to measure against";
    if (!w->settled)
        return "the response had not settled at the end of the run";
    return NULL;
}

/* The samples and figures of w into res (the samples change owner). */
static void keep(tb_result *res, bool has_final, wave *w)
{
    tb_step_figures *fig = &res->step;
    *fig = (tb_step_figures){.computed = true, .method = w->method, .error_estimate = w->error,
                             .points = w->count, .t_end_s = w->t[w->count - 1]};
    fig->final_value = has_final ? w->final : w->y[w->count - 1];
    fig->why_no_figures = no_figures(res, has_final, w);
    if (!fig->why_no_figures)
        figures(w, fig);
    res->step_t = w->t;
    res->step_y = w->y;
    w->t = w->y = NULL;
}

/* A route's outcome into res: w's samples and figures, or why there are none. */
static void settle(tb_result *res, bool has_final, wave *w, const char *why)
{
    if (!why && w->count > 0)
        keep(res, has_final, w);
    else
        res->step.why_absent = why ? why : "no samples";
}

static bool has_capacitance(const tb_mna *mna)
{
    for (size_t k = 0; k < mna->nnz; k++)
        if (mna->Cx[k] != 0)
            return true;
    return false;
}

/* The route: the sum over the modes when the poles are known, else (or when it fails
 * its check) time stepping. *why: NULL when w holds a waveform, else the reason. */
static tb_status compute(tb_probe *probe, const tb_result *res, bool has_final, double final, tb_modal *m,
                         wave *w, const char **why)
{
    const char *method = res->stab[0].has_poles ? METHOD_NODC : METHOD_LIMIT;
    tb_status st = TB_OK;
    if (!has_capacitance(probe->mna)) {
        *why = NO_DYNAMICS;
        return TB_OK;
    }
    if (res->stab[0].has_poles && has_final) {
        st = modal_route(probe, final, m, w, why);
        if (st || !*why || *why == NO_DYNAMICS || *why == TOO_MANY)
            return st;
        wave_free(w);
        method = *why;
    }
    st = transient_route(probe->mna, tb_probe_take_solver(probe), res->freqs[0], res->freqs[res->npoints - 1],
                         has_final, final, w, why);
    w->method = method;
    return st;
}

tb_status tb_step_run(tb_probe *probe, tb_result *res)
{
    tb_step_figures *fig = &res->step;
    *fig = (tb_step_figures){.why_absent = "no .io directive: no input to step"};
    if (!probe->mna->has_io)
        return TB_OK;
    fig->why_absent = "the stability analysis did not run";
    if (!res->stab || res->nloops == 0)
        return TB_OK;
    bool has_final = res->has_dc;
    double final = has_final ? creal(res->dc[0].A) : 0;
    tb_modal m = {0};
    wave w = {0};
    const char *why = NULL;
    tb_status st = compute(probe, res, has_final, final, &m, &w, &why);
    if (!st)
        settle(res, has_final, &w, why);
    wave_free(&w);
    tb_modal_free(&m);
    return st;
}

/* ---- the time-stepped response beside the other analyses ------------------- */

struct tb_step_job {
    const tb_mna *mna;
    tb_solver *solver; /* its own numeric factorizations over the sweep's symbolic analysis */
    double f_lo, f_hi;
    bool has_final;
    double final;
    wave w;
    const char *why;
    tb_status st;
    pthread_t thread;
    bool threaded;
};

static void *job_main(void *arg)
{
    tb_step_job *job = arg;
    job->st = transient_route(job->mna, job->solver, job->f_lo, job->f_hi, job->has_final, job->final, &job->w,
                              &job->why);
    return NULL;
}

static void job_free(tb_step_job *job)
{
    wave_free(&job->w);
    tb_solver_free(job->solver);
    tb_free(job);
}

tb_status tb_step_start(tb_probe *probe, const tb_result *res, size_t pole_limit, tb_step_job **out)
{
    *out = NULL;
    const tb_mna *mna = probe->mna;
    if (!mna->has_io || res->nloops == 0 || mna->n <= pole_limit || !has_capacitance(mna))
        return TB_OK; /* tb_step_run decides, after the stability analysis */
    tb_step_job *job = tb_calloc(1, sizeof(*job));
    if (!job)
        return TB_ERR_NOMEM;
    *job = (tb_step_job){.mna = mna, .f_lo = res->freqs[0], .f_hi = res->freqs[res->npoints - 1],
                         .has_final = res->has_dc, .final = res->has_dc ? creal(res->dc[0].A) : 0};
    tb_status st = tb_solver_new_sharing(probe->solver, &job->solver);
    if (st) {
        job_free(job);
        return st;
    }
    job->threaded = pthread_create(&job->thread, NULL, job_main, job) == 0;
    if (!job->threaded)
        job_main(job); /* no thread to be had: the same work, here and now */
    *out = job;
    return TB_OK;
}

tb_status tb_step_finish(tb_step_job *job, tb_result *res, size_t *factorizations)
{
    if (!job)
        return TB_OK;
    if (job->threaded)
        pthread_join(job->thread, NULL);
    if (factorizations)
        *factorizations = tb_solver_get_counts(job->solver).numeric;
    tb_status st = job->st;
    if (res && !st) {
        tb_step_figures *fig = &res->step;
        *fig = (tb_step_figures){.why_absent = "the stability analysis did not run"};
        job->w.method = METHOD_LIMIT;
        if (res->stab)
            settle(res, job->has_final, &job->w, job->why);
    }
    job_free(job);
    return st;
}
