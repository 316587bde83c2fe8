/* src/transient.c: step response by variable-step TR-BDF2 with local error control on G + aC */
#include "transient.h"

#include <math.h>
#include <string.h>

#include "alloc.h"

/* TR-BDF2 with gamma = 2 - sqrt 2 (R. E. Bank et al., IEEE Trans. CAD 4(4), 1985, from
 * memory). Trapezoidal stage over gamma h: C (xg - x) = (gamma h / 2)(f(x) + f(xg)); BDF2
 * stage through x, xg, x1: x1 - A1 xg + A0 x = D h C^-1 f(x1), with f(x) = b - G x. Both
 * stages use the matrix C + D h G, since gamma / 2 = D = (1 - gamma)/(2 - gamma)
 * = 1 - 1/sqrt 2. Derived here from the interpolating quadratic through the three nodes. */
static const double GAMMA = 0.58578643762690495119831127579030192; /* 2 - sqrt 2 */
static const double D = 0.29289321881345247559915563789515096;     /* 1 - 1/sqrt 2 */
static const double A1 = 1.2071067811865475244008443621048490;     /* 1/(gamma (2 - gamma)) */
static const double A0 = 0.20710678118654752440084436210484904;    /* (1 - gamma)^2/(gamma (2 - gamma)) */
/* Local error of one step on x' = lambda x: R(z) - e^z = K z^3 + O(z^4), z = lambda h, R the
 * method's stability function from the two stages above; K = (3 gamma^2 - 4 gamma + 2)/(12 (2 - gamma))
 * matches (R(z) - e^z)/z^3 evaluated as z -> 0. tests/test_transient.c checks the consequences:
 * the summed estimate stays within a small factor of the true error, and the error goes as tol^(2/3). */
static const double K = 0.040440114519880862;

/* The run's workspace, allocated before the first step; vectors are real (n values). */
typedef struct {
    const tb_mna *mna;
    tb_solver *solver;
    const tb_transient_limits *lim;
    size_t n;
    double *Mx;        /* nnz: G + aC */
    double a_held;     /* a of the factorization held (-1: none) */
    double *x;         /* state at t */
    double *xg;        /* trapezoidal stage at t + gamma h */
    double *x1;        /* state at t + h */
    double *r;         /* right-hand side, then the error estimate */
    double *xdc;       /* G^-1 b */
    double *size;      /* per unknown: max |x_i| seen and |x_dc,i| */
    double *comb;      /* the combination of states in the error estimate */
    bool *state;       /* per unknown: its column of C is not zero (a capacitor voltage or
                        * inductor current takes part): the unknowns whose error is controlled */
    double floor;      /* 1e-3 of the largest size: the floor of every weight */
    double y_size;     /* max |c'x| seen and |c'x_dc| */
    size_t cap[3];
} run;

static void run_free(run *w)
{
    tb_free(w->Mx);
    tb_free(w->x);
    tb_free(w->xg);
    tb_free(w->x1);
    tb_free(w->r);
    tb_free(w->xdc);
    tb_free(w->size);
    tb_free(w->comb);
    tb_free(w->state);
}

static tb_status run_alloc(run *w, size_t n, size_t nnz)
{
    w->Mx = tb_malloc(nnz ? nnz : 1, sizeof(double));
    w->x = tb_calloc(n, sizeof(double));
    w->xg = tb_malloc(n, sizeof(double));
    w->x1 = tb_malloc(n, sizeof(double));
    w->r = tb_malloc(n, sizeof(double));
    w->xdc = tb_calloc(n, sizeof(double));
    w->size = tb_calloc(n, sizeof(double));
    w->comb = tb_malloc(n, sizeof(double));
    w->state = tb_calloc(n, sizeof(bool));
    if (!w->Mx || !w->x || !w->xg || !w->x1 || !w->r || !w->xdc || !w->size || !w->comb || !w->state)
        return TB_ERR_NOMEM;
    const tb_mna *mna = w->mna;
    for (size_t j = 0; j < n; j++)
        for (int k = mna->Ap[j]; k < mna->Ap[j + 1]; k++)
            w->state[j] = w->state[j] || mna->Cx[k] != 0;
    return TB_OK;
}

/* s'x over a real vector. */
static double dot(const tb_svec *s, const double *x)
{
    double sum = 0;
    for (int i = 0; i < s->count; i++)
        sum += s->coef[i] * x[s->idx[i]];
    return sum;
}

/* r = alpha b. */
static void set_b(const run *w, double alpha)
{
    memset(w->r, 0, w->n * sizeof(double));
    for (int i = 0; i < w->mna->b.count; i++)
        w->r[w->mna->b.idx[i]] += alpha * w->mna->b.coef[i];
}

/* The solver holds G + aC (a real factorization with pivoting when a changed). */
static tb_status factor(run *w, double a)
{
    if (w->a_held == a)
        return TB_OK;
    w->a_held = -1;
    for (size_t k = 0; k < w->mna->nnz; k++)
        w->Mx[k] = w->mna->Gx[k] + a * w->mna->Cx[k];
    size_t culprit = 0;
    tb_status st = tb_solver_factor_real(w->solver, w->Mx, &culprit);
    if (st == TB_OK)
        w->a_held = a;
    return st;
}

/* out += gc C v + gg G v (sparse products over the CSC pattern). */
static void mul_add(const tb_mna *mna, double gc, double gg, const double *v, double *out)
{
    for (size_t j = 0; j < mna->n; j++) {
        double vj = v[j];
        if (vj == 0)
            continue;
        for (int k = mna->Ap[j]; k < mna->Ap[j + 1]; k++)
            out[mna->Ai[k]] += (gc * mna->Cx[k] + gg * mna->Gx[k]) * vj;
    }
}

static tb_status solve(run *w, double *into)
{
    tb_status st = tb_solver_solve_real(w->solver, w->r, 1);
    if (!st && into)
        memcpy(into, w->r, w->n * sizeof(double));
    return st;
}

/* One TR-BDF2 step of size h from w->x into w->xg and w->x1; w->r holds the
 * filtered local error estimate (G + C/(D h))^-1 (C times the error)/(D h). */
static tb_status trbdf2(run *w, double h)
{
    const tb_mna *mna = w->mna;
    double dh = D * h;
    tb_status st = factor(w, 1.0 / dh);
    if (st)
        return st;
    set_b(w, 2.0);
    mul_add(mna, 1.0 / dh, -1.0, w->x, w->r); /* (C/dh - G) x + 2 b */
    if ((st = solve(w, w->xg)))
        return st;
    for (size_t i = 0; i < w->n; i++) /* x1 as scratch: A1 xg - A0 x */
        w->x1[i] = A1 * w->xg[i] - A0 * w->x[i];
    set_b(w, 1.0);
    mul_add(mna, 1.0 / dh, 0, w->x1, w->r); /* C (A1 xg - A0 x)/dh + b */
    if ((st = solve(w, w->x1)))
        return st;
    /* C times the error ~ K h^3 (C x)''' ~ 2 K h [f(x)/gamma - f(xg)/(gamma (1 - gamma))
     * + f(x1)/(1 - gamma)] (second difference of f = C x' over the three nodes); the b
     * parts cancel, leaving -G times the same combination of states */
    double *v = w->comb;
    for (size_t i = 0; i < w->n; i++)
        v[i] = w->x[i] / GAMMA - w->xg[i] / (GAMMA * (1 - GAMMA)) + w->x1[i] / (1 - GAMMA);
    memset(w->r, 0, w->n * sizeof(double));
    mul_add(mna, 0, -2.0 * K / D, v, w->r);
    return solve(w, NULL);
}

/* Largest |e_i| / (tol (size_i + floor)) over the state unknowns, and the output's
 * |c'e| / (tol (y_size + floor |c|)): the step is accepted when <= 1 (a NaN is never
 * accepted). The algebraic unknowns follow from the states; one that is the derivative of a
 * state (the current of a source that drives a capacitor) has an error that does not shrink
 * as h^3, and would hold the step size down for nothing. */
static double error_norm(const run *w, const double *e, double tol)
{
    double c_sum = 0;
    for (int i = 0; i < w->mna->c.count; i++)
        c_sum += fabs(w->mna->c.coef[i]);
    double worst = fabs(dot(&w->mna->c, e)) / (tol * (w->y_size + w->floor * c_sum));
    for (size_t i = 0; i < w->n; i++) {
        if (!w->state[i])
            continue;
        double ratio = fabs(e[i]) / (tol * (w->size[i] + w->floor));
        worst = ratio > worst || ratio != ratio ? ratio : worst;
    }
    return worst;
}

/* The sizes grow to v's; the floor is 1e-3 of the largest state (of the largest unknown
 * while every state is still zero): an algebraic unknown can be far larger than the
 * dynamics (the branch current of a gain of 1e7) and must not loosen every weight. */
static void grow_sizes(run *w, const double *v)
{
    w->y_size = fmax(w->y_size, fabs(dot(&w->mna->c, v)));
    double top_state = 0, top = 0;
    for (size_t i = 0; i < w->n; i++) {
        double a = fabs(v[i]);
        if (a > w->size[i])
            w->size[i] = a;
        top = fmax(top, w->size[i]);
        if (w->state[i])
            top_state = fmax(top_state, w->size[i]);
    }
    w->floor = fmax(w->floor, 1e-3 * (top_state > 0 ? top_state : top));
}

static tb_status record(run *w, tb_transient *out, double t, double y, double dy)
{
    size_t need = out->count + 1, limit = w->lim->max_steps + 2;
    if (tb_grow(&out->t, &w->cap[0], need, sizeof(double), limit) ||
        tb_grow(&out->y, &w->cap[1], need, sizeof(double), limit) ||
        tb_grow(&out->dy, &w->cap[2], need, sizeof(double), limit))
        return TB_ERR_NOMEM;
    out->t[out->count] = t;
    out->y[out->count] = y;
    out->dy[out->count++] = dy;
    return TB_OK;
}

/* x_dc = G^-1 b when G is non-singular; the sizes start from it. */
static tb_status dc_state(run *w, tb_transient *out)
{
    tb_status st = factor(w, 0);
    if (st == TB_ERR_SINGULAR)
        return TB_OK;
    set_b(w, 1.0);
    if (st || (st = solve(w, w->xdc)))
        return st;
    out->has_dc = true;
    out->y_dc = dot(&w->mna->c, w->xdc);
    grow_sizes(w, w->xdc);
    return TB_OK;
}

/* The jump at t = 0: one backward-Euler step (G + C/h) x = b from x(0-) = 0. */
static tb_status start(run *w, double h, tb_transient *out)
{
    tb_status st = factor(w, 1.0 / h);
    if (st)
        return st;
    set_b(w, 1.0);
    if ((st = solve(w, w->x)))
        return st;
    grow_sizes(w, w->x);
    return record(w, out, 0, dot(&w->mna->c, w->x), 0);
}

/* The next step size, a power of 2 times h (one factorization per size): at most 4 times
 * larger when the error allows (the estimate scales as h^3, safety factor 0.9), at least
 * halved after a rejected step. */
static double next_h(double h, double err, bool may_grow)
{
    if (!(err <= 1)) {
        double f = 0.9 / cbrt(err);
        int k = 1;
        while (k < 10 && ldexp(1.0, -k) > f)
            k++;
        return ldexp(h, -k);
    }
    if (!may_grow)
        return h;
    return err <= 0.0114 ? 4 * h : err <= 0.091 ? 2 * h : h;
}

/* After an accepted step: settled (every unknown within 10 tol of x_dc) or diverged (grown
 * 1000-fold since ref, the largest |x_i| at half the time or less: an exponential, not a ramp).
 * Returns the largest |x_i| now. */
static double judge(const run *w, double ref, tb_transient *out)
{
    double off = 0, top = 0;
    bool finite = true;
    for (size_t i = 0; i < w->n; i++) {
        finite = finite && isfinite(w->x[i]);
        off = fmax(off, fabs(w->x[i] - w->xdc[i]) / (w->size[i] + w->floor));
        top = fmax(top, fabs(w->x[i]));
    }
    out->diverged = !finite || !(top <= 1e3 * ref);
    out->settled = out->has_dc && !out->diverged && off <= 10 * w->lim->tol;
    return top;
}

/* Accepts the step just taken: time, sizes, the output's error and its sample. */
static tb_status accept(run *w, tb_transient *out, double *t, double h)
{
    const tb_svec *c = &w->mna->c;
    out->y_error += fabs(dot(c, w->r));
    double slope = (dot(c, w->x1) - A1 * dot(c, w->xg) + A0 * dot(c, w->x)) / (D * h);
    memcpy(w->x, w->x1, w->n * sizeof(double));
    *t += h;
    out->steps++;
    grow_sizes(w, w->x);
    return record(w, out, *t, dot(c, w->x), slope);
}

static tb_status integrate(run *w, tb_transient *out)
{
    const tb_transient_limits *lim = w->lim;
    double h = lim->h_first, t = 1e-3 * h;
    tb_status st = start(w, t, out);
    double ref = 0, t_ref = t; /* the largest |x_i| at t_ref */
    for (size_t i = 0; i < w->n; i++)
        ref = fmax(ref, w->size[i]);
    bool may_grow = true;
    while (!st && out->steps < lim->max_steps && out->rejected < lim->max_steps) {
        if ((st = trbdf2(w, h)))
            break;
        double err = error_norm(w, w->r, lim->tol);
        if (!(err <= 1)) {
            out->rejected++;
            h = next_h(h, err, false);
            may_grow = false;
            if (h < 1e-15 * t)
                st = TB_ERR_NUMERIC; /* the step size has underflowed: no accuracy to be had */
            continue;
        }
        if ((st = accept(w, out, &t, h)))
            break;
        double top = judge(w, ref, out);
        if (out->settled || out->diverged || t >= lim->t_cap)
            break;
        if (t >= 2 * t_ref) {
            t_ref = t;
            ref = fmax(top, 1e-300);
        }
        h = next_h(h, err, may_grow);
        may_grow = true;
    }
    return st;
}

tb_status tb_transient_run(const tb_mna *mna, tb_solver *solver, const tb_transient_limits *lim,
                           tb_transient *out)
{
    run w = {.mna = mna, .solver = solver, .lim = lim, .n = mna->n, .a_held = -1};
    tb_transient tr = {0};
    tb_status st = run_alloc(&w, mna->n, mna->nnz);
    if (!st)
        st = dc_state(&w, &tr);
    if (!st)
        st = integrate(&w, &tr);
    run_free(&w);
    if (st) {
        tb_transient_free(&tr);
        return st;
    }
    *out = tr;
    return TB_OK;
}

void tb_transient_free(tb_transient *tr)
{
    if (!tr)
        return;
    tb_free(tr->t);
    tb_free(tr->y);
    tb_free(tr->dy);
    *tr = (tb_transient){0};
}
