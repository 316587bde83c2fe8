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
/* A factorization on a reused pivot order is kept while its min/max |U_ii| stays above
 * this fraction of the pivoted factorization's (tb_solver_refactor_real). */
static const double PIVOT_DROP = 1e-3;

/* A sparse matrix of its own (CSC, the nonzeros of one of mna's value arrays only). */
typedef struct {
    int *p; /* n + 1 */
    int *i;
    double *x;
} csc;

/* The run's workspace, allocated before the first step; vectors are real (n values). */
typedef struct {
    const tb_mna *mna;
    tb_solver *solver;
    const tb_transient_limits *lim;
    size_t n;
    csc C;             /* mna's C and G without their structural zeros: C is often */
    csc G;             /* diagonal while the pattern holds G's entries too */
    double *Mx;        /* nnz: G + aC */
    double a_held;     /* a of the factorization held (-1: none) */
    bool pivoted;      /* the run has factored with pivoting once */
    double *x;         /* state at t */
    double *xg;        /* trapezoidal stage at t + gamma h */
    double *x1;        /* state at t + h */
    double *fx;        /* f(x) = b - G x, that is C x' at t */
    double *cx;        /* C x */
    double *cg;        /* C xg */
    double *f1;        /* f(x1) */
    double *c1;        /* C x1 */
    double *r;         /* right-hand side, then the error estimate */
    double *xdc;       /* G^-1 b */
    double *size;      /* per unknown: max |x_i| seen and |x_dc,i| */
    bool *state;       /* per unknown: its column of C is not zero (a capacitor voltage or
                        * inductor current takes part): the unknowns whose error is controlled */
    double floor;      /* 1e-3 of the largest size: the floor of every weight */
    double y_size;     /* max |c'x| seen and |c'x_dc| */
    size_t cap[3];
} run;

static void csc_free(csc *m)
{
    tb_free(m->p);
    tb_free(m->i);
    tb_free(m->x);
}

/* The nonzeros of values (on mna's pattern) into m. */
static tb_status csc_take(const tb_mna *mna, const double *values, csc *m)
{
    size_t count = 0;
    for (size_t k = 0; k < mna->nnz; k++)
        count += values[k] != 0;
    m->p = tb_malloc(mna->n + 1, sizeof(int));
    m->i = tb_malloc(count ? count : 1, sizeof(int));
    m->x = tb_malloc(count ? count : 1, sizeof(double));
    if (!m->p || !m->i || !m->x)
        return TB_ERR_NOMEM;
    int at = 0;
    for (size_t j = 0; j < mna->n; j++) {
        m->p[j] = at;
        for (int k = mna->Ap[j]; k < mna->Ap[j + 1]; k++) {
            if (values[k] == 0)
                continue;
            m->i[at] = mna->Ai[k];
            m->x[at++] = values[k];
        }
    }
    m->p[mna->n] = at;
    return TB_OK;
}

static void run_free(run *w)
{
    csc_free(&w->C);
    csc_free(&w->G);
    double *vectors[] = {w->Mx, w->x, w->xg, w->x1, w->fx, w->cx, w->cg, w->f1, w->c1, w->r, w->xdc, w->size};
    for (size_t k = 0; k < sizeof vectors / sizeof vectors[0]; k++)
        tb_free(vectors[k]);
    tb_free(w->state);
}

static tb_status run_alloc(run *w, size_t n, size_t nnz)
{
    w->Mx = tb_malloc(nnz ? nnz : 1, sizeof(double));
    double **vectors[] = {&w->x, &w->xg, &w->x1, &w->fx, &w->cx, &w->cg, &w->f1, &w->c1, &w->r, &w->xdc, &w->size};
    bool ok = w->Mx != NULL;
    for (size_t k = 0; k < sizeof vectors / sizeof vectors[0]; k++)
        ok = (*vectors[k] = tb_calloc(n ? n : 1, sizeof(double))) != NULL && ok;
    w->state = tb_calloc(n ? n : 1, sizeof(bool));
    if (!ok || !w->state || csc_take(w->mna, w->mna->Cx, &w->C) || csc_take(w->mna, w->mna->Gx, &w->G))
        return TB_ERR_NOMEM;
    for (size_t j = 0; j < n; j++)
        w->state[j] = w->C.p[j + 1] > w->C.p[j];
    return TB_OK;
}

static inline double larger(double a, double b)
{
    return a > b ? a : b;
}

/* s'x over a real vector. */
static double dot(const tb_svec *s, const double *x)
{
    double sum = 0;
    for (int i = 0; i < s->count; i++)
        sum += s->coef[i] * x[s->idx[i]];
    return sum;
}

/* out += alpha b. */
static void add_b(const run *w, double alpha, double *out)
{
    for (int i = 0; i < w->mna->b.count; i++)
        out[w->mna->b.idx[i]] += alpha * w->mna->b.coef[i];
}

/* out = m v. */
static void mul(const csc *m, size_t n, const double *v, double *out)
{
    memset(out, 0, n * sizeof(double));
    for (size_t j = 0; j < n; j++) {
        double vj = v[j];
        if (vj == 0)
            continue;
        for (int k = m->p[j]; k < m->p[j + 1]; k++)
            out[m->i[k]] += m->x[k] * vj;
    }
}

/* C x and f(x) = b - G x into cx and fx. */
static void derive(const run *w, const double *x, double *cx, double *fx)
{
    mul(&w->C, w->n, x, cx);
    mul(&w->G, w->n, x, fx);
    for (size_t i = 0; i < w->n; i++)
        fx[i] = -fx[i];
    add_b(w, 1.0, fx);
}

/* The solver holds G + aC (a real factorization on the last pivot order, pivoted
 * afresh when its pivots degrade: tb_solver_refactor_real). */
static tb_status factor(run *w, double a)
{
    if (w->a_held == a)
        return TB_OK;
    w->a_held = -1;
    for (size_t k = 0; k < w->mna->nnz; k++)
        w->Mx[k] = w->mna->Gx[k] + a * w->mna->Cx[k];
    size_t culprit = 0;
    /* the run's first factorization pivots: the run does not depend on what the solver held */
    tb_status st = w->pivoted ? tb_solver_refactor_real(w->solver, w->Mx, PIVOT_DROP, &culprit)
                              : tb_solver_factor_real(w->solver, w->Mx, &culprit);
    w->pivoted = w->pivoted || st == TB_OK;
    if (st == TB_OK)
        w->a_held = a;
    return st;
}

static tb_status solve(run *w, double *into)
{
    tb_status st = tb_solver_solve_real(w->solver, w->r, 1);
    if (!st && into)
        memcpy(into, w->r, w->n * sizeof(double));
    return st;
}

/* One TR-BDF2 step of size h from w->x (C x and f(x) in w->cx and w->fx) into w->xg
 * and w->x1 (C x1 and f(x1) into w->c1 and w->f1); w->r holds the filtered local
 * error estimate (G + C/(D h))^-1 (C times the error)/(D h). Three solves and two
 * sparse products (C xg, C x1) a step: f comes from the stages, without G. */
static tb_status trbdf2(run *w, double h)
{
    size_t n = w->n;
    double a = 1.0 / (D * h);
    tb_status st = factor(w, a);
    if (st)
        return st;
    /* (G + aC) xg = a C x + f(x) + b, from C (xg - x) = D h (f(x) + f(xg)) */
    for (size_t i = 0; i < n; i++)
        w->r[i] = a * w->cx[i] + w->fx[i];
    add_b(w, 1.0, w->r);
    if ((st = solve(w, w->xg)))
        return st;
    /* (G + aC) x1 = a C (A1 xg - A0 x) + b */
    mul(&w->C, n, w->xg, w->cg);
    for (size_t i = 0; i < n; i++)
        w->r[i] = a * (A1 * w->cg[i] - A0 * w->cx[i]);
    add_b(w, 1.0, w->r);
    if ((st = solve(w, w->x1)))
        return st;
    /* f(x1) from the BDF2 stage, C (x1 - A1 xg + A0 x) = D h f(x1): one product fewer than
     * b - G x1, and exactly 0 in the algebraic rows (a consistent state) */
    mul(&w->C, n, w->x1, w->c1);
    for (size_t i = 0; i < n; i++)
        w->f1[i] = a * (w->c1[i] - A1 * w->cg[i] + A0 * w->cx[i]);
    /* C times the error ~ K h^3 (C x)''' ~ 2 K h [f(x)/gamma - f(xg)/(gamma (1 - gamma))
     * + f(x1)/(1 - gamma)] (the second difference of f = C x' over the three nodes), with
     * f(xg) = a C (xg - x) - f(x) from the trapezoidal stage; then through the matrix */
    const double ex = 1 / GAMMA, eg = -1 / (GAMMA * (1 - GAMMA)), e1 = 1 / (1 - GAMMA);
    for (size_t i = 0; i < n; i++) {
        double fg = a * (w->cg[i] - w->cx[i]) - w->fx[i];
        w->r[i] = 2.0 * K / D * (ex * w->fx[i] + eg * fg + e1 * w->f1[i]);
    }
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
    double nan = worst * 0; /* NaN when some ratio is */
    for (size_t i = 0; i < w->n; i++) {
        if (!w->state[i])
            continue;
        double ratio = fabs(e[i]) / (w->size[i] + w->floor);
        nan += ratio * 0;
        worst = larger(worst, ratio / tol);
    }
    return worst + nan;
}

/* The sizes grow to v's; the floor is 1e-3 of the largest state (of the largest unknown
 * while every state is still zero): an algebraic unknown can be far larger than the
 * dynamics (the branch current of a gain of 1e7) and must not loosen every weight. */
static void grow_sizes(run *w, const double *v)
{
    w->y_size = larger(w->y_size, fabs(dot(&w->mna->c, v)));
    double top_state = 0, top = 0;
    for (size_t i = 0; i < w->n; i++) {
        double s = larger(fabs(v[i]), w->size[i]);
        w->size[i] = s;
        top = larger(top, s);
        if (w->state[i])
            top_state = larger(top_state, s);
    }
    w->floor = larger(w->floor, 1e-3 * (top_state > 0 ? top_state : top));
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
    memset(w->r, 0, w->n * sizeof(double));
    add_b(w, 1.0, w->r);
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
    memset(w->r, 0, w->n * sizeof(double));
    add_b(w, 1.0, w->r);
    if ((st = solve(w, w->x)))
        return st;
    derive(w, w->x, w->cx, w->fx);
    grow_sizes(w, w->x);
    return record(w, out, 0, dot(&w->mna->c, w->x), 0);
}

/* The step sizes are h_first 2^(k/LEVELS) for whole k: one factorization per level. */
enum { LEVELS = 1 };

/* The level after a step at level k with error err: on a rejected step (err > 1, or NaN)
 * at least one level down, to where the estimate (which scales as h^3) would be 0.9^3
 * of the tolerance, and at most 10 octaves; after an accepted one up by as many levels
 * (at most 2 octaves) as keep it below 0.9^3, when may_grow. */
static int next_level(int k, double err, bool may_grow)
{
    const double target = 0.729;
    double per_level = exp2(3.0 / LEVELS); /* the estimate's growth a level up */
    if (!(err <= 1)) {
        int down = 1;
        double e = err / per_level;
        while (down < 10 * LEVELS && e > target) {
            e /= per_level;
            down++;
        }
        return k - down;
    }
    int up = 0;
    while (may_grow && up < 2 * LEVELS && err * per_level <= target) {
        err *= per_level;
        up++;
    }
    return k + up;
}

static double level_h(const run *w, int k)
{
    return w->lim->h_first * exp2((double)k / LEVELS);
}

/* After an accepted step: settled (every unknown within 10 tol of x_dc) or diverged (grown
 * 1000-fold since ref, the largest |x_i| at half the time or less: an exponential, not a ramp).
 * Returns the largest |x_i| now. */
static double judge(const run *w, double ref, tb_transient *out)
{
    double off = 0, top = 0, nan = 0;
    for (size_t i = 0; i < w->n; i++) {
        double a = fabs(w->x[i]);
        nan += a * 0; /* NaN when some entry is not finite */
        off = larger(off, fabs(w->x[i] - w->xdc[i]) / (w->size[i] + w->floor));
        top = larger(top, a);
    }
    out->diverged = nan != 0 || !(top <= 1e3 * ref);
    out->settled = out->has_dc && !out->diverged && off <= 10 * w->lim->tol;
    return top;
}

static void swap(double **a, double **b)
{
    double *keep = *a;
    *a = *b;
    *b = keep;
}

/* Accepts the step just taken: time, sizes, the output's error and its sample; x1 (with
 * C x1 and f(x1)) becomes x. */
static tb_status accept(run *w, tb_transient *out, double *t, double h)
{
    const tb_svec *c = &w->mna->c;
    out->y_error += fabs(dot(c, w->r));
    double slope = (dot(c, w->x1) - A1 * dot(c, w->xg) + A0 * dot(c, w->x)) / (D * h);
    swap(&w->x, &w->x1);
    swap(&w->cx, &w->c1);
    swap(&w->fx, &w->f1);
    *t += h;
    out->steps++;
    grow_sizes(w, w->x);
    return record(w, out, *t, dot(c, w->x), slope);
}

static tb_status integrate(run *w, tb_transient *out)
{
    const tb_transient_limits *lim = w->lim;
    int level = 0;
    double t = 1e-3 * lim->h_first;
    tb_status st = start(w, t, out);
    double ref = 0, t_ref = t; /* the largest |x_i| at t_ref */
    for (size_t i = 0; i < w->n; i++)
        ref = larger(ref, w->size[i]);
    bool may_grow = true;
    while (!st && out->steps < lim->max_steps && out->rejected < lim->max_steps) {
        double h = level_h(w, level);
        if ((st = trbdf2(w, h)))
            break;
        double err = error_norm(w, w->r, lim->tol);
        if (!(err <= 1)) {
            out->rejected++;
            level = next_level(level, err, false);
            may_grow = false;
            if (level_h(w, level) < 1e-15 * t)
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
            ref = larger(top, 1e-300);
        }
        level = next_level(level, err, may_grow);
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
