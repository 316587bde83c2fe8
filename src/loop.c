/* src/loop.c: return ratio, asymptotic gain, feedthrough and closed-loop gain at one frequency */
#include "loop.h"

#include <string.h>

#include "alloc.h"

/* A vector being refined against M0 of one loop: x0 = M0^-1 b or w0 = M0^-1 u. */
typedef struct {
    size_t loop;
    const tb_svec *rhs;
    const tb_svec *probe; /* the functional read from y: c (for A0) or v (for T) */
    double floor;         /* a change below this is rounding noise (A0 may be exactly 0) */
    double complex *y;
    bool has_residual;    /* its residual is already in the step's column */
} refinement;

struct tb_loop_work {
    size_t n;
    size_t loops;
    double complex *rhs;  /* (1 + loops) columns: x, then w_l */
    double complex *vec0; /* 2 * loops columns: x0 and w0 of each loop */
    double complex *res;  /* 2 * loops columns: residuals, then corrections */
    refinement *pending;  /* 2 * loops */
    double *scale;        /* 2 * n: the backward error's row scales */
    bool *refined;        /* 2 * loops: A0 of loop l comes from a refined x0 (2l), T from a refined w0 (2l + 1) */
};

tb_status tb_loop_work_new(const tb_mna *mna, tb_loop_work **out)
{
    tb_loop_work *w = tb_calloc(1, sizeof(*w));
    if (!w)
        return TB_ERR_NOMEM;
    w->n = mna->n;
    w->loops = mna->loop_count;
    w->rhs = tb_malloc((w->loops + 1) * w->n, sizeof(double complex));
    w->vec0 = tb_malloc(2 * w->loops * w->n, sizeof(double complex));
    w->res = tb_malloc(2 * w->loops * w->n, sizeof(double complex));
    w->pending = tb_malloc(2 * w->loops, sizeof(refinement));
    w->scale = tb_malloc(2 * w->n, sizeof(double));
    w->refined = tb_calloc(w->loops ? 2 * w->loops : 1, sizeof(bool));
    if (!w->rhs || !w->vec0 || !w->res || !w->pending || !w->scale || !w->refined) {
        tb_loop_work_free(w);
        return TB_ERR_NOMEM;
    }
    *out = w;
    return TB_OK;
}

void tb_loop_work_free(tb_loop_work *work)
{
    if (!work)
        return;
    tb_free(work->rhs);
    tb_free(work->vec0);
    tb_free(work->res);
    tb_free(work->pending);
    tb_free(work->scale);
    tb_free(work->refined);
    tb_free(work);
}

const double complex *tb_loop_work_x(const tb_loop_work *work)
{
    return work->rhs;
}

const double complex *tb_loop_work_w(const tb_loop_work *work, size_t l)
{
    return work->rhs + (l + 1) * work->n;
}

static void scatter(const tb_svec *s, double complex *col, size_t n)
{
    memset(col, 0, n * sizeof(double complex));
    tb_svec_axpy(s, 1.0, col);
}

void tb_loop_sherman_morrison(const tb_loopvec *lv, const double complex *w, double complex q,
                              const double complex *d, const double complex *base,
                              double complex *out, size_t n)
{
    double complex alpha = lv->k * tb_svec_dot(&lv->v, d) / (1.0 - q);
    for (size_t i = 0; i < n; i++)
        out[i] = (base ? base[i] : 0) + (d[i] + alpha * w[i]);
}

/* T, A, A_inf and a of one loop from x and w (design.md "The algebra"). */
static void evaluate(const tb_mna *mna, const tb_loopvec *lv, const double complex *x,
                     const double complex *w, tb_point *pt)
{
    double complex vw = tb_svec_dot(&lv->v, w);
    double complex q = lv->k * vw;
    *pt = (tb_point){0};
    if (cabs(1.0 - q) <= TB_LOOP_INF_TOL)
        pt->flags |= TB_PT_T_INF | TB_PT_A0_NONE;
    else
        pt->T = q / (1.0 - q);
    if (!mna->has_io) {
        pt->flags |= TB_PT_NO_IO;
        return;
    }
    pt->A = tb_svec_dot(&mna->c, x);
    if (cabs(q) <= TB_LOOP_ZERO_TOL) {
        pt->flags |= TB_PT_AINF_NONE;
        return;
    }
    if (pt->flags & TB_PT_T_INF) { /* A = A_inf exactly when T is infinite */
        pt->A_inf = pt->A;
        return;
    }
    pt->A_inf = pt->A - tb_svec_dot(&mna->c, w) * tb_svec_dot(&lv->v, x) / vw;
    pt->a = pt->A_inf * pt->T;
}

/* A0 = c'x0 from Sherman-Morrison, x0 = x + alpha w with alpha = k v'x/(1 - q), formed
 * from the two scalars c'x and c'w, into *A0; true when it already holds to the refinement's
 * own goal (TB_LOOP_CONVERGED relative, above the noise floor), so that a step of refinement
 * would not move it: its rounding error is bounded by TB_LOOP_ROUNDING times the terms it is
 * formed from, S = |c'x| + |alpha c'w|, grown by 1 + |q|/|1 - q| (alpha's error, from 1 - q
 * formed out of q). A0 much smaller than S (a cancellation: large T, or A0 = 0) is refined,
 * and only then is the vector x0 formed. */
static bool A0_is_accurate(const tb_mna *mna, const tb_loopvec *lv, const double complex *x,
                           const double complex *w, double complex q, double noise, double complex *A0)
{
    double complex alpha = lv->k * tb_svec_dot(&lv->v, x) / (1.0 - q);
    double complex cx = tb_svec_dot(&mna->c, x), cw = alpha * tb_svec_dot(&mna->c, w);
    double S = cabs(cx) + cabs(cw);
    double bound = TB_LOOP_ROUNDING * S * (1.0 + cabs(q) / cabs(1.0 - q));
    *A0 = cx + cw;
    return bound <= TB_LOOP_CONVERGED * cabs(*A0) + noise;
}

/* Whether w0 = w/(1 - q) = M0^-1 u from the rank-one update may have lost digits of T:
 * only where 1 - q cancels (|T| above TB_LOOP_CHECK_T) is w0 formed, its residual against
 * M0 put in res, and a step asked for when its backward error exceeds TB_LOOP_BERR
 * (docs/algebra.md, "Accuracy"). */
static bool w0_needs_step(const tb_mna *mna, const double *Mx, double omega, tb_loop_work *work,
                          const tb_loopvec *lv, const double complex *w, double complex q, double complex *w0,
                          double complex *res)
{
    if (cabs(q) <= TB_LOOP_CHECK_T * cabs(1.0 - q))
        return false;
    double complex scale = 1.0 / (1.0 - q);
    for (size_t i = 0; i < mna->n; i++)
        w0[i] = w[i] * scale;
    double berr = tb_mna_residual0_berr(mna, Mx, omega, lv, &lv->u, w0, res, work->scale, work->scale + mna->n);
    return !(berr <= TB_LOOP_BERR);
}

/* Queues the M0 vectors of loop l: x0 when A0 exists, is not nil by structure and its
 * formula may have lost digits, w0 when its backward error says T did. */
static size_t start_vectors(const tb_mna *mna, const double *Mx, double omega, tb_loop_work *work, size_t l,
                            tb_point *pt, size_t count)
{
    size_t n = mna->n;
    const tb_loopvec *lv = &mna->loops[l];
    const double complex *w = work->rhs + (l + 1) * n;
    double complex q = lv->k * tb_svec_dot(&lv->v, w);
    work->refined[2 * l] = false;
    work->refined[2 * l + 1] = false;
    if (pt->flags & TB_PT_T_INF)
        return count;
    if (mna->has_io && !lv->feed_nil) {
        double complex *x0 = work->vec0 + 2 * l * n;
        const double complex *x = work->rhs;
        double noise = 1e-15 * cabs(tb_svec_dot(&mna->c, x));
        if (!A0_is_accurate(mna, lv, x, w, q, noise, &pt->A0)) {
            tb_loop_sherman_morrison(lv, w, q, x, NULL, x0, n);
            work->refined[2 * l] = true;
            work->pending[count++] = (refinement){l, &mna->b, &mna->c, noise, x0, false};
        }
    }
    double complex *w0 = work->vec0 + (2 * l + 1) * n;
    if (w0_needs_step(mna, Mx, omega, work, lv, w, q, w0, work->res + count * n)) {
        work->refined[2 * l + 1] = true;
        work->pending[count++] = (refinement){l, &lv->u, &lv->v, 0.0, w0, true};
    }
    return count;
}

/* One step of iterative refinement of every pending vector against its loop's
 * M0: r = rhs - M0 y (exact M0 entries), one multi-RHS solve, y += M0^-1 r.
 * Keeps pending only the vectors whose probed value the step still moved by
 * more than TB_LOOP_CONVERGED relative (above the noise floor); returns their
 * count in *left. */
static tb_status refine(const tb_mna *mna, tb_solver *solver, const double *Mx, double omega,
                        tb_loop_work *work, size_t count, size_t *left)
{
    size_t n = mna->n;
    for (size_t r = 0; r < count; r++) {
        const refinement *p = &work->pending[r];
        if (!p->has_residual)
            tb_mna_residual0(mna, Mx, omega, &mna->loops[p->loop], p->rhs, p->y, work->res + r * n);
    }
    if (tb_solver_solve(solver, work->res, count))
        return TB_ERR_NUMERIC;
    *left = 0;
    for (size_t r = 0; r < count; r++) {
        refinement p = work->pending[r];
        const tb_loopvec *lv = &mna->loops[p.loop];
        const double complex *w = work->rhs + (p.loop + 1) * n;
        const double complex *d = work->res + r * n;
        double complex q = lv->k * tb_svec_dot(&lv->v, w);
        double complex before = tb_svec_dot(p.probe, p.y);
        tb_loop_sherman_morrison(lv, w, q, d, p.y, p.y, n);
        double complex after = tb_svec_dot(p.probe, p.y);
        p.has_residual = false;
        if (cabs(after - before) > TB_LOOP_CONVERGED * cabs(after) + p.floor)
            work->pending[(*left)++] = p;
    }
    return TB_OK;
}

/* A0 from the refined x0 (0 where nil by structure), and T = k v'w0 where w0 was refined. */
static void finish_loop(const tb_mna *mna, const tb_loop_work *work, size_t l, tb_point *pt)
{
    size_t n = mna->n;
    const tb_loopvec *lv = &mna->loops[l];
    if (pt->flags & TB_PT_T_INF)
        return;
    if (mna->has_io && lv->feed_nil)
        pt->A0 = 0;
    else if (work->refined[2 * l])
        pt->A0 = tb_svec_dot(&mna->c, work->vec0 + 2 * l * n);
    if (work->refined[2 * l + 1]) {
        pt->T = lv->k * tb_svec_dot(&lv->v, work->vec0 + (2 * l + 1) * n);
        if (mna->has_io && !(pt->flags & TB_PT_AINF_NONE))
            pt->a = pt->A_inf * pt->T;
    }
}

/* Loops lo..hi-1 from x and their w_l (solved): T, A, A_inf, a, then x0 and w0 refined
 * against each loop's M0 where needed, A0 and the refined T. */
static tb_status finish_points(const tb_mna *mna, tb_solver *solver, const double *Mx, double omega,
                               tb_loop_work *work, size_t lo, size_t hi, tb_point *out)
{
    size_t n = mna->n;
    const double complex *x = work->rhs;
    size_t count = 0;
    for (size_t l = lo; l < hi; l++) {
        evaluate(mna, &mna->loops[l], x, work->rhs + (l + 1) * n, &out[l]);
        count = start_vectors(mna, Mx, omega, work, l, &out[l], count);
    }
    for (int step = 0; step < TB_LOOP_REFINE_STEPS && count > 0; step++)
        if (refine(mna, solver, Mx, omega, work, count, &count))
            return TB_ERR_NUMERIC;
    for (size_t l = lo; l < hi; l++)
        finish_loop(mna, work, l, &out[l]);
    return TB_OK;
}

tb_status tb_loop_eval(const tb_mna *mna, tb_solver *solver, const double *Mx, double omega,
                       tb_loop_work *work, tb_point *out)
{
    size_t n = mna->n;
    size_t first = mna->has_io ? 0 : 1; /* column 0 is x, needed only with .io */
    if (mna->has_io)
        scatter(&mna->b, work->rhs, n);
    for (size_t l = 0; l < mna->loop_count; l++)
        scatter(&mna->loops[l].u, work->rhs + (l + 1) * n, n);
    if (tb_solver_solve(solver, work->rhs + first * n, mna->loop_count + 1 - first))
        return TB_ERR_NUMERIC;
    return finish_points(mna, solver, Mx, omega, work, 0, mna->loop_count, out);
}

tb_status tb_loop_eval_one(const tb_mna *mna, tb_solver *solver, const double *Mx, double omega,
                           tb_loop_work *work, size_t l, tb_point *out)
{
    size_t n = mna->n;
    double complex *w = work->rhs + (l + 1) * n;
    scatter(&mna->loops[l].u, w, n);
    if (mna->has_io) {
        scatter(&mna->b, work->rhs, n);
        if (tb_solver_solve(solver, work->rhs, 1))
            return TB_ERR_NUMERIC;
    }
    if (tb_solver_solve(solver, w, 1))
        return TB_ERR_NUMERIC;
    return finish_points(mna, solver, Mx, omega, work, l, l + 1, out);
}

tb_status tb_loop_q(const tb_mna *mna, tb_solver *solver, tb_loop_work *work, size_t l, double complex *q)
{
    size_t n = mna->n;
    double complex *w = work->rhs + (l + 1) * n;
    scatter(&mna->loops[l].u, w, n);
    if (tb_solver_solve(solver, w, 1))
        return TB_ERR_NUMERIC;
    *q = mna->loops[l].k * tb_svec_dot(&mna->loops[l].v, w);
    return TB_OK;
}
