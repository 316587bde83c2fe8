/* src/sensitivity.c: normalized sensitivities of every loop's figures to every element (adjoint method) */
#include "sensitivity.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "alloc.h"
#include "paramsens.h"
#include "units.h"

/* The bilinear forms g' dM h one element's derivative adds, for one loop. */
typedef struct {
    const double complex *x, *w, *y, *z; /* x = M^-1 b, w = M^-1 u, y = M^-T c, z = M^-T v */
    double complex yx, yw, zx, zw;
} forms;

static void accumulate(void *ctx, size_t row, size_t col, double complex d)
{
    forms *f = ctx;
    if (f->y) {
        f->yx += f->y[row] * d * f->x[col];
        f->yw += f->y[row] * d * f->w[col];
    }
    f->zx += f->z[row] * d * f->x[col];
    f->zw += f->z[row] * d * f->w[col];
}

/* One frequency: the factorization, the loops and the adjoint vectors. */
typedef struct {
    tb_probe *probe;
    double complex *Y; /* 1 + L columns: y, then z_l */
    bool io;
} point;

static tb_status solve_at(point *pt, double f)
{
    const tb_mna *mna = pt->probe->mna;
    size_t n = mna->n, culprit = 0;
    tb_status st = tb_probe_factor(pt->probe, f, true, &culprit);
    if (!st)
        st = tb_probe_eval(pt->probe, f, &culprit);
    if (st)
        return st;
    memset(pt->Y, 0, (1 + mna->loop_count) * n * sizeof(double complex));
    if (pt->io)
        tb_svec_axpy(&mna->c, 1.0, pt->Y);
    for (size_t l = 0; l < mna->loop_count; l++)
        tb_svec_axpy(&mna->loops[l].v, 1.0, pt->Y + (l + 1) * n);
    return tb_solver_solve_transposed(pt->probe->solver, pt->Y, 1 + mna->loop_count);
}

/* dT/dp / T for element e and loop l at the point solved (its own gain: T is proportional to k). */
static double complex log_dT(const tb_circuit *ckt, const point *pt, size_t l, size_t e, double omega, forms *fm)
{
    const tb_mna *mna = pt->probe->mna;
    size_t n = mna->n;
    const tb_loopvec *lv = &mna->loops[l];
    *fm = (forms){tb_loop_work_x(pt->probe->work), tb_loop_work_w(pt->probe->work, l), pt->io ? pt->Y : NULL,
                  pt->Y + (l + 1) * n, 0, 0, 0, 0};
    tb_mna_derivative(ckt, e, omega, accumulate, fm);
    if (e == lv->elem)
        return 1.0 / lv->k;
    double complex q = lv->k * tb_svec_dot(&lv->v, fm->w);
    double complex dq = -lv->k * fm->zw;
    return dq / ((1.0 - q) * q); /* dT/T with T = q/(1 - q): dq/((1 - q)^2 T) */
}

/* d(ln T)/d(omega) of loop l at the point solved: dM/domega = jC. */
static double complex log_dT_domega(const point *pt, size_t l)
{
    const tb_mna *mna = pt->probe->mna;
    const tb_loopvec *lv = &mna->loops[l];
    const double complex *w = tb_loop_work_w(pt->probe->work, l);
    const double complex *z = pt->Y + (l + 1) * mna->n;
    double complex q = lv->k * tb_svec_dot(&lv->v, w);
    double complex dq = -lv->k * I * tb_mna_form_C(mna, z, w);
    return dq / ((1.0 - q) * q);
}

static bool usable(const tb_point *p)
{
    return !(p->flags & TB_PT_T_INF) && cabs(p->T) > 0;
}

/* The DC sensitivities of every element for loop l. */
static void at_dc(const tb_circuit *ckt, const point *pt, size_t l, double omega, tb_sens_entry *out)
{
    const tb_mna *mna = pt->probe->mna;
    const tb_point *p = &pt->probe->row[l];
    const tb_loopvec *lv = &mna->loops[l];
    for (size_t i = 0, e = 0; e < ckt->elem_count; e++) {
        tb_elem_kind k = ckt->elems[e].kind;
        if (k == TB_EL_V || k == TB_EL_I)
            continue;
        tb_sens_entry *s = &out[i++];
        forms fm;
        double pv = ckt->elems[e].value;
        double complex lt = log_dT(ckt, pt, l, e, omega, &fm);
        if (usable(p)) {
            s->has_T = true;
            s->T_mag = creal(pv * lt);
            s->T_phase_deg = cimag(pv * lt) * TB_DEG_PER_RAD / 100.0;
        }
        if (!pt->io || (p->flags & TB_PT_NO_IO))
            continue;
        if (cabs(p->A) > 0) {
            s->has_A = true;
            s->A_mag = creal(pv * -fm.yx / p->A);
        }
        double complex vw = tb_svec_dot(&lv->v, fm.w), vx = tb_svec_dot(&lv->v, fm.x), cw = tb_svec_dot(&mna->c, fm.w);
        if (!(p->flags & TB_PT_AINF_NONE) && cabs(p->A_inf) > 0 && cabs(vw) > 0) {
            double complex d = -fm.yx - (-fm.yw * vx * vw + cw * -fm.zx * vw - cw * vx * -fm.zw) / (vw * vw);
            s->has_A_inf = true;
            s->A_inf_mag = creal(pv * d / p->A_inf);
        }
    }
}

/* At the headline unity crossing (pm) or phase crossing (gm): each element's effect through
 * the moved crossing frequency. */
static void at_crossing(const tb_circuit *ckt, const point *pt, size_t l, double omega, bool pm, tb_sens_entry *out)
{
    double complex lw = log_dT_domega(pt, l);
    for (size_t i = 0, e = 0; e < ckt->elem_count; e++) {
        tb_elem_kind k = ckt->elems[e].kind;
        if (k == TB_EL_V || k == TB_EL_I)
            continue;
        tb_sens_entry *s = &out[i++];
        forms fm;
        double pv = ckt->elems[e].value;
        double complex lp = log_dT(ckt, pt, l, e, omega, &fm);
        if (pm && creal(lw) != 0) {
            double dw = -creal(lp) / creal(lw); /* |T| stays 1 */
            s->has_unity = true;
            s->unity = pv * dw / omega;
            s->has_pm = true;
            s->pm_deg_pct = (cimag(lp) + cimag(lw) * dw) * TB_DEG_PER_RAD * pv / 100.0;
        } else if (!pm && cimag(lw) != 0) {
            double dw = -cimag(lp) / cimag(lw); /* the phase stays at -180 */
            s->has_gm = true;
            s->gm_db_pct = -(20.0 / log(10.0)) * (creal(lp) + creal(lw) * dw) * pv / 100.0;
        }
    }
}

/* Every element whose value enters M, in netlist order, no figure yet. */
static void name_entries(const tb_circuit *ckt, tb_sens_entry *out)
{
    for (size_t i = 0, e = 0; e < ckt->elem_count; e++)
        if (ckt->elems[e].kind != TB_EL_V && ckt->elems[e].kind != TB_EL_I)
            out[i++] = (tb_sens_entry){.element = ckt->elems[e].name, .value = ckt->elems[e].value};
}

static int by_effect(const void *pa, const void *pb)
{
    const tb_sens_entry *a = pa, *b = pb;
    double ka = a->has_pm ? fabs(a->pm_deg_pct) : -1, kb = b->has_pm ? fabs(b->pm_deg_pct) : -1;
    if (ka != kb)
        return ka > kb ? -1 : 1;
    double ta = a->has_T ? fabs(a->T_mag) : -1, tb = b->has_T ? fabs(b->T_mag) : -1;
    if (ta != tb)
        return ta > tb ? -1 : 1;
    return strcmp(a->element, b->element);
}

static tb_status one_loop(const tb_circuit *ckt, point *pt, tb_result *res, size_t l, tb_sens_entry *out)
{
    tb_sensitivity *s = &res->sens[l];
    *s = (tb_sensitivity){.computed = true, .count = res->sens_per_loop, .entries = out};
    double f0 = 0;
    (void)tb_result_dc_or_first(res, l, &f0);
    s->dc_hz = f0;
    name_entries(ckt, out);
    tb_status st = solve_at(pt, f0);
    if (st == TB_ERR_NOMEM)
        return st;
    if (!st)
        at_dc(ckt, pt, l, TB_TWO_PI * f0, out);
    const tb_stability *stab = res->stab ? &res->stab[l] : NULL;
    if (stab && stab->computed && stab->has_phase_margin) {
        s->has_pm_hz = true;
        s->pm_hz = stab->phase_margin_hz;
        st = solve_at(pt, s->pm_hz);
        if (st == TB_ERR_NOMEM)
            return st;
        if (!st) /* a singular point on the axis leaves these figures out */
            at_crossing(ckt, pt, l, TB_TWO_PI * s->pm_hz, true, out);
    }
    if (stab && stab->computed && stab->has_gain_margin_up) {
        s->has_gm_hz = true;
        s->gm_hz = stab->gain_margin_up_hz;
        st = solve_at(pt, s->gm_hz);
        if (st == TB_ERR_NOMEM)
            return st;
        if (!st)
            at_crossing(ckt, pt, l, TB_TWO_PI * s->gm_hz, false, out);
    }
    st = tb_paramsens_fill(ckt, out, out + s->count - tb_paramsens_count(ckt));
    if (!st)
        qsort(out, s->count, sizeof(tb_sens_entry), by_effect);
    return st;
}

tb_status tb_sensitivity_run(const tb_circuit *ckt, tb_probe *probe, tb_result *res)
{
    size_t per = tb_sensitivity_count(ckt);
    size_t L = res->nloops, n = probe->mna->n;
    size_t total = L * per;
    res->sens_per_loop = per;
    res->sens = tb_calloc(L ? L : 1, sizeof(tb_sensitivity));
    res->sens_entries = tb_calloc(total > 0 ? total : 1, sizeof(tb_sens_entry));
    point pt = {.probe = probe, .Y = tb_malloc((1 + L) * (n ? n : 1), sizeof(double complex)), .io = res->has_io};
    tb_status st = res->sens && res->sens_entries && pt.Y ? TB_OK : TB_ERR_NOMEM;
    for (size_t l = 0; l < L && !st; l++)
        st = one_loop(ckt, &pt, res, l, res->sens_entries + l * per);
    tb_free(pt.Y);
    return st;
}

size_t tb_sensitivity_count(const tb_circuit *ckt)
{
    size_t per = tb_paramsens_count(ckt);
    for (size_t e = 0; e < ckt->elem_count; e++)
        per += ckt->elems[e].kind != TB_EL_V && ckt->elems[e].kind != TB_EL_I;
    return per;
}

tb_status tb_sensitivity_at(const tb_circuit *ckt, tb_probe *probe, size_t l, double f, tb_sens_entry *out)
{
    const tb_mna *mna = probe->mna;
    if (l >= mna->loop_count || !(f >= 0))
        return TB_ERR_USAGE;
    size_t n = mna->n;
    point pt = {.probe = probe, .Y = tb_malloc((1 + mna->loop_count) * (n ? n : 1), sizeof(double complex)),
                .io = mna->has_io};
    if (!pt.Y)
        return TB_ERR_NOMEM;
    name_entries(ckt, out);
    tb_status st = solve_at(&pt, f);
    if (!st)
        at_dc(ckt, &pt, l, TB_TWO_PI * f, out); /* the same forms hold at any frequency */
    if (!st)
        st = tb_paramsens_fill(ckt, out, out + tb_sensitivity_count(ckt) - tb_paramsens_count(ckt));
    tb_free(pt.Y);
    return st;
}
