/* src/step.c: closed-loop step response in the time domain by the trapezoidal rule */
#include "step.h"

#include <math.h>
#include <string.h>

#include "alloc.h"
#include "solve.h"

/* Workspace of one step response, allocated before the time loop. */
typedef struct {
    const tb_mna *mna;
    tb_solver *solver;
    double *Mx;
    double complex *x;
    double complex *r;
} stepper;

static void stepper_free(stepper *s)
{
    tb_free(s->Mx);
    tb_free(s->x);
    tb_free(s->r);
}

/* Span of the response: 10 time constants of the slowest decaying closed-loop
 * pole (or 10/|s| of the first pole when none decays); 0 when there is none. */
static double span(const tb_result *res)
{
    const tb_stability *st = res->stab;
    if (!st || res->nloops == 0)
        return 0;
    if (st->has_poles) {
        for (size_t i = 0; i < st->pole_count; i++)
            if (creal(st->poles[i]) < 0)
                return 10.0 / -creal(st->poles[i]);
        if (st->pole_count > 0 && cabs(st->poles[0]) > 0)
            return 10.0 / cabs(st->poles[0]);
    }
    return 0;
}

/* Mx = G + alpha C, real (zero imaginary parts), factored afresh. */
static tb_status factor_real(stepper *s, double alpha)
{
    for (size_t k = 0; k < s->mna->nnz; k++) {
        s->Mx[2 * k] = s->mna->Gx[k] + alpha * s->mna->Cx[k];
        s->Mx[2 * k + 1] = 0;
    }
    size_t culprit = 0;
    return tb_solver_factor(s->solver, s->Mx, &culprit);
}

/* r = beta C x - G x + gain b. */
static void right_side(const stepper *s, double beta, double gain)
{
    const tb_mna *mna = s->mna;
    memset(s->r, 0, mna->n * sizeof(double complex));
    for (size_t j = 0; j < mna->n; j++) {
        double complex xj = s->x[j];
        if (xj == 0)
            continue;
        for (int k = mna->Ap[j]; k < mna->Ap[j + 1]; k++)
            s->r[mna->Ai[k]] += (beta * mna->Cx[k] - mna->Gx[k]) * xj;
    }
    tb_svec_axpy(&mna->b, gain, s->r);
}

/* One trapezoidal step of size h from s->x (matrix G + 2C/h factored). */
static tb_status trapezoid(stepper *s, double h)
{
    right_side(s, 2.0 / h, 2.0);
    if (tb_solver_solve(s->solver, s->r, 1))
        return TB_ERR_NUMERIC;
    memcpy(s->x, s->r, s->mna->n * sizeof(double complex));
    return TB_OK;
}

/* The time loop. The first interval is split in TB_STEP_START substeps: one
 * backward-Euler substep (G + C/d) x = b takes the jump of the algebraic unknowns
 * at t = 0 without the trapezoidal rule's ringing, the trapezoidal rule
 * (G + 2C/d) x' = (2C/d - G) x + 2b does the rest; then steps of h. */
static tb_status integrate(stepper *s, double h, double *y, size_t steps)
{
    size_t n = s->mna->n;
    double d = h / TB_STEP_START;
    memset(s->x, 0, n * sizeof(double complex));
    y[0] = 0;
    tb_status st = factor_real(s, 1.0 / d);
    if (st)
        return st;
    right_side(s, 1.0 / d, 1.0);
    if (tb_solver_solve(s->solver, s->r, 1))
        return TB_ERR_NUMERIC;
    memcpy(s->x, s->r, n * sizeof(double complex));
    if ((st = factor_real(s, 2.0 / d)))
        return st;
    for (int k = 1; k < TB_STEP_START && !st; k++)
        st = trapezoid(s, d);
    if (st || (st = factor_real(s, 2.0 / h)))
        return st;
    y[1] = creal(tb_svec_dot(&s->mna->c, s->x));
    for (size_t k = 2; k <= steps && !st; k++) {
        st = trapezoid(s, h);
        y[k] = creal(tb_svec_dot(&s->mna->c, s->x));
    }
    return st;
}

/* First time z (normalised response) reaches level, interpolated; -1 if never. */
static double first_reach(const double *t, const double *z, size_t count, double level)
{
    for (size_t k = 1; k < count; k++)
        if (z[k] >= level && z[k - 1] < level)
            return t[k - 1] + (t[k] - t[k - 1]) * (level - z[k - 1]) / (z[k] - z[k - 1]);
    return -1;
}

/* Peak, overshoot, 10-90 % rise and 2 % settling of the samples. */
static void figures(tb_step_figures *fig, const double *t, double *z, size_t count)
{
    double final = fig->final_value;
    size_t peak = 0;
    for (size_t k = 0; k < count; k++) {
        z[k] /= final; /* normalised in place (y is rewritten below) */
        if (z[k] > z[peak])
            peak = k;
    }
    fig->has_peak = true;
    fig->peak_value = z[peak] * final;
    fig->peak_s = t[peak];
    fig->has_overshoot = true;
    fig->overshoot_pct = z[peak] > 1 ? 100.0 * (z[peak] - 1) : 0;
    double t10 = first_reach(t, z, count, 0.1), t90 = first_reach(t, z, count, 0.9);
    fig->has_rise = t10 >= 0 && t90 >= t10;
    fig->rise_s = fig->has_rise ? t90 - t10 : 0;
    size_t last_out = 0;
    for (size_t k = 0; k < count; k++)
        if (fabs(z[k] - 1) > 0.02)
            last_out = k;
    fig->has_settling = last_out + 1 < count;
    if (fig->has_settling && last_out > 0) { /* where |z - 1| meets 0.02 on the last exit */
        double a = fabs(z[last_out] - 1), b = fabs(z[last_out + 1] - 1);
        double frac = a > b ? (a - 0.02) / (a - b) : 1.0;
        fig->settling_s = t[last_out] + frac * (t[last_out + 1] - t[last_out]);
    } else {
        fig->settling_s = fig->has_settling ? t[last_out + 1] : 0;
    }
    for (size_t k = 0; k < count; k++)
        z[k] *= final;
}

tb_status tb_step_run(tb_probe *probe, tb_result *res)
{
    const tb_mna *mna = probe->mna;
    tb_step_figures *fig = &res->step;
    *fig = (tb_step_figures){.why_absent = "no .io directive: no input to step"};
    if (!mna->has_io)
        return TB_OK;
    fig->why_absent = "no closed-loop poles to choose the time step from (more unknowns than the pole limit?)";
    if (!res->stab || !res->stab->has_poles)
        return TB_OK;
    double t_end = span(res);
    if (!(t_end > 0) || !isfinite(t_end))
        return TB_OK;
    double want = ceil(2.0 * t_end * res->stab->fastest_rad_s);
    size_t steps = want > TB_STEP_MAX_STEPS ? TB_STEP_MAX_STEPS
                   : want > TB_STEP_STEPS  ? (size_t)want
                                           : TB_STEP_STEPS;
    double h = t_end / (double)steps;
    stepper s = {.mna = mna, .solver = tb_probe_take_solver(probe)};
    tb_status st = TB_OK;
    {
        s.Mx = tb_malloc(2 * mna->nnz, sizeof(double));
        s.x = tb_malloc(mna->n, sizeof(double complex));
        s.r = tb_malloc(mna->n, sizeof(double complex));
        res->step_t = tb_malloc(steps + 1, sizeof(double));
        res->step_y = tb_malloc(steps + 1, sizeof(double));
        st = s.Mx && s.x && s.r && res->step_t && res->step_y ? TB_OK : TB_ERR_NOMEM;
    }
    if (st == TB_OK)
        st = integrate(&s, h, res->step_y, steps);
    stepper_free(&s);
    if (st == TB_ERR_SINGULAR || st == TB_ERR_NUMERIC) {
        fig->why_absent = "the time-step matrix G + 2C/h is singular";
        return TB_OK;
    }
    if (st)
        return st;
    for (size_t k = 0; k <= steps; k++)
        res->step_t[k] = h * (double)k;
    fig->computed = true;
    fig->why_absent = NULL;
    fig->points = steps + 1;
    fig->dt_s = h;
    fig->t_end_s = t_end;
    fig->final_value = res->has_dc ? creal(res->dc[0].A) : res->step_y[steps];
    bool stable = res->stab && res->stab[0].verdict == TB_VERDICT_STABLE;
    if (stable && fig->final_value != 0 && isfinite(fig->final_value))
        figures(fig, res->step_t, res->step_y, steps + 1);
    return TB_OK;
}
