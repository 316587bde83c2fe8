/* src/impedance.c: port impedances with and without feedback (Blackman's formula) */
#include "impedance.h"
#include "units.h"

#include <math.h>
#include <string.h>

#include "alloc.h"
#include "loop.h"


/* One lane's workspace: the point being evaluated and its solutions. */
typedef struct {
    double complex *Y;   /* P columns: y_p = M^-1 r_p (w_l = M^-1 u_l comes from the loop evaluation) */
    const tb_loop_work *work; /* the sweep's w_l = M^-1 u_l at the current point */
    double complex *Y0;  /* P x L + L columns: M0^-1 r_p of loop l, then w0_l = M0^-1 u_l */
    double complex *D;   /* as many columns: residuals, then corrections */
    tb_zpoint *Z;        /* P x L, loop-major: the point's figures */
} zlane;

/* The pass's state and workspace, allocated before the point loop. */
struct tb_impedance {
    const tb_circuit *ckt;
    const tb_mna *mna;
    size_t npoints;
    size_t P;            /* ports */
    size_t L;            /* loops */
    tb_z_data *zd;       /* what the result receives from tb_impedance_end */
    tb_svec *r;          /* P port vectors: unit test current into node a, out of node b */
    bool *at_source;     /* P: the port is a V source's terminals (r = e_j) */
    size_t lanes;
    zlane *lane;         /* one workspace per lane of the sweep */
};
typedef struct tb_impedance zpass;

/* w_l = M^-1 u_l at the current point. */
static const double complex *loop_w(const zlane *zl, size_t l)
{
    return tb_loop_work_w(zl->work, l);
}

/* r_p of every port from the names tb_circuit_finish resolved: e_j of the
 * source's branch for i(V), else e_a - e_b. */
static void port_vectors(const tb_circuit *ckt, tb_svec *r)
{
    for (size_t p = 0; p < ckt->zport_count; p++) {
        const tb_zport_spec *zp = &ckt->zports[p];
        r[p] = (tb_svec){0, {0, 0}, {0, 0}};
        if (zp->at_source) {
            r[p] = (tb_svec){1, {tb_mna_branch_unknown(ckt, &ckt->elems[zp->source_elem]), 0}, {1.0, 0}};
            continue;
        }
        size_t ia = tb_mna_node_unknown(zp->a), ib = tb_mna_node_unknown(zp->b);
        if (ia != SIZE_MAX)
            r[p].idx[r[p].count] = ia, r[p].coef[r[p].count++] = 1.0;
        if (ib != SIZE_MAX)
            r[p].idx[r[p].count] = ib, r[p].coef[r[p].count++] = -1.0;
    }
}

/* Column c of Y0/D: c < P*L is the pair (p, l) = (c / L, c % L), y0 = M0^-1 r_p; c = P*L + l
 * is w0 = M0^-1 u_l of loop l (for T and r'w0 when T is large). */
static size_t col_loop(const zpass *z, size_t c)
{
    return c < z->P * z->L ? c % z->L : c - z->P * z->L;
}

static const tb_svec *col_rhs(const zpass *z, size_t c)
{
    return c < z->P * z->L ? &z->r[c / z->L] : &z->mna->loops[c - z->P * z->L].u;
}

/* M0^-1 of every column's right-hand side by Sherman-Morrison from M's solutions,
 * refined once against M0's exact entries (one batched solve). Loops with 1 - q = 0
 * are left unrefined (their figures are absent). */
static tb_status port_m0(const zpass *z, zlane *zl, const tb_sweep_point *pt)
{
    size_t n = z->mna->n;
    size_t cols = z->P * z->L + z->L;
    for (size_t c = 0; c < cols; c++) {
        size_t l = col_loop(z, c);
        const tb_loopvec *lv = &z->mna->loops[l];
        const double complex *w = loop_w(zl, l);
        double complex *y0 = zl->Y0 + c * n;
        double complex q = lv->k * tb_svec_dot(&lv->v, w);
        bool inf = cabs(1.0 - q) <= TB_LOOP_INF_TOL;
        if (c < z->P * z->L) {
            const double complex *y = zl->Y + (c / z->L) * n;
            if (inf)
                memcpy(y0, y, n * sizeof(double complex));
            else
                tb_loop_sherman_morrison(lv, w, q, y, NULL, y0, n);
        } else {
            for (size_t i = 0; i < n; i++)
                y0[i] = inf ? 0 : w[i] / (1.0 - q);
        }
        tb_mna_residual0(z->mna, pt->Mx, pt->omega, lv, col_rhs(z, c), y0, zl->D + c * n);
    }
    if (tb_solver_solve(pt->solver, zl->D, cols))
        return TB_ERR_NUMERIC;
    for (size_t c = 0; c < cols; c++) {
        size_t l = col_loop(z, c);
        const tb_loopvec *lv = &z->mna->loops[l];
        const double complex *w = loop_w(zl, l);
        const double complex *d = zl->D + c * n;
        double complex *y0 = zl->Y0 + c * n;
        double complex q = lv->k * tb_svec_dot(&lv->v, w);
        if (cabs(1.0 - q) <= TB_LOOP_INF_TOL)
            continue;
        tb_loop_sherman_morrison(lv, w, q, d, y0, y0, n);
    }
    return TB_OK;
}

/* A port at V's terminals: V driving 1 V gives s = M^-1 e_j with i(V) = s_j, so the circuit
 * takes -s_j and Z = -1/s_j (likewise Z0 from M0). V as it is is the port shorted (T_sc = T);
 * with V open the branch row e_p - e_n becomes e_j, a rank-one change whose determinant
 * factor is s_j, so 1 + T_oc = (1 + T) Z0/Z (matrix determinant lemma). */
static tb_zpoint evaluate_source(const zpass *z, const zlane *zl, size_t p, size_t l)
{
    size_t n = z->mna->n;
    const tb_loopvec *lv = &z->mna->loops[l];
    const tb_svec *r = &z->r[p];
    const double complex *w = loop_w(zl, l);
    tb_zpoint zp = {0};
    double complex sj = tb_svec_dot(r, zl->Y + p * n);
    if (cabs(sj) == 0)
        return zp; /* the source sees an open circuit */
    zp.has_Z = true;
    zp.Z = -1.0 / sj;
    double complex q = lv->k * tb_svec_dot(&lv->v, w);
    double complex s0 = tb_svec_dot(r, zl->Y0 + (p * z->L + l) * n);
    if (cabs(1.0 - q) <= TB_LOOP_INF_TOL || cabs(s0) == 0)
        return zp;
    zp.has_T_sc = true;
    zp.T_sc = lv->k * tb_svec_dot(&lv->v, zl->Y0 + (z->P * z->L + l) * n); /* T = k v'w0 */
    zp.has_Z0 = true;
    zp.Z0 = -1.0 / s0;
    zp.has_T_oc = true;
    zp.T_oc = (1.0 + zp.T_sc) * zp.Z0 / zp.Z - 1.0;
    zp.has_blackman = true;
    zp.Z_blackman = zp.Z0 * (1.0 + zp.T_sc) / (1.0 + zp.T_oc);
    return zp;
}

static tb_zpoint evaluate(const zpass *z, const zlane *zl, size_t p, size_t l)
{
    size_t n = z->mna->n;
    const tb_loopvec *lv = &z->mna->loops[l];
    const tb_svec *r = &z->r[p];
    const double complex *w = loop_w(zl, l);
    const double complex *y0 = zl->Y0 + (p * z->L + l) * n;
    tb_zpoint zp = {.has_Z = true, .Z = tb_svec_dot(r, zl->Y + p * n)};
    double complex q = lv->k * tb_svec_dot(&lv->v, w);
    if (cabs(1.0 - q) <= TB_LOOP_INF_TOL)
        return zp; /* T infinite: Z0 (the circuit at k = 0) is singular */
    const double complex *w0 = zl->Y0 + (z->P * z->L + l) * n;
    zp.has_T_oc = true;
    zp.T_oc = lv->k * tb_svec_dot(&lv->v, w0); /* T = k v'w0, w0 = M0^-1 u refined */
    zp.has_Z0 = true;
    zp.Z0 = tb_svec_dot(r, y0);
    if (cabs(zp.Z0) == 0)
        return zp; /* the port is a short at k = 0: shorting it changes nothing to solve for */
    /* port shorted: the bordered M0 gives M0sc^-1 u = w0 - y0 (r'w0)/Z0 */
    double complex rw0 = tb_svec_dot(r, w0);
    zp.has_T_sc = true;
    zp.T_sc = zp.T_oc - lv->k * tb_svec_dot(&lv->v, y0) * rw0 / zp.Z0;
    zp.has_blackman = true;
    zp.Z_blackman = zp.Z0 * (1.0 + zp.T_sc) / (1.0 + zp.T_oc);
    return zp;
}

/* Every port seen by every loop at pt into zl->Z (loop-major), in pt->lane's workspace. */
static tb_status ports_at(const zpass *z, zlane *zl, const tb_sweep_point *pt)
{
    size_t n = z->mna->n;
    memset(zl->Y, 0, z->P * n * sizeof(double complex));
    for (size_t p = 0; p < z->P; p++)
        tb_svec_axpy(&z->r[p], 1.0, zl->Y + p * n);
    zl->work = pt->work;
    tb_status st = tb_solver_solve(pt->solver, zl->Y, z->P);
    if (!st)
        st = port_m0(z, zl, pt);
    if (st)
        return st;
    for (size_t p = 0; p < z->P; p++)
        for (size_t l = 0; l < z->L; l++)
            zl->Z[l * z->P + p] = z->at_source[p] ? evaluate_source(z, zl, p, l) : evaluate(z, zl, p, l);
    return TB_OK;
}

tb_status tb_impedance_eval(tb_impedance *z, tb_probe *probe, double f, tb_zpoint *out)
{
    if (!probe->held || probe->held_f != f || !probe->row_valid)
        return TB_ERR_USAGE;
    tb_sweep_point pt = {.index = TB_SWEEP_DC, .f = f, .omega = TB_TWO_PI * f, .mna = probe->mna,
                         .solver = probe->solver, .Mx = probe->Mx, .loops = probe->row, .work = probe->work,
                         .lane = 0};
    tb_status st = ports_at(z, &z->lane[0], &pt);
    if (!st)
        memcpy(out, z->lane[0].Z, z->P * z->L * sizeof(tb_zpoint));
    return st;
}

tb_status tb_impedance_at(void *self, const tb_sweep_point *pt)
{
    zpass *z = self;
    zlane *zl = &z->lane[pt->lane];
    tb_status st = ports_at(z, zl, pt);
    if (st)
        return st;
    for (size_t p = 0; p < z->P; p++) {
        for (size_t l = 0; l < z->L; l++) {
            tb_zpoint zp = zl->Z[l * z->P + p];
            if (pt->index == TB_SWEEP_DC) {
                tb_zport_summary *s = &z->zd->sum[p * z->L + l];
                s->dc = zp;
                s->dc_hz = pt->f;
            } else {
                z->zd->pts[(p * z->L + l) * z->npoints + pt->index] = zp;
            }
        }
    }
    return TB_OK;
}

/* The largest |Z_blackman - Z|/|Z| over DC (when solved) and the grid. */
static void blackman_difference(tb_zport_summary *s, const tb_zpoint *pts, size_t npoints, bool has_dc)
{
    for (size_t i = 0; i <= npoints; i++) {
        if (i == 0 && !has_dc)
            continue;
        const tb_zpoint *zp = i == 0 ? &s->dc : &pts[i - 1];
        if (zp->has_blackman && cabs(zp->Z) > 0) {
            double diff = cabs(zp->Z_blackman - zp->Z) / cabs(zp->Z);
            s->max_rel_diff = s->has_max_diff ? fmax(s->max_rel_diff, diff) : diff;
            s->has_max_diff = true;
        }
    }
}

/* Which side: does the feedback raise or lower the impedance (docs/feedback.md)? */
static tb_side side_of(const tb_zpoint *zp, double *purity)
{
    *purity = 1.0;
    if (!zp->has_T_sc || !zp->has_T_oc)
        return TB_SIDE_NONE; /* Blackman's form does not apply (Z0 = 0 or T infinite) */
    double sc = cabs(zp->T_sc), oc = cabs(zp->T_oc);
    if (sc <= 1e-9 && oc <= 1e-9)
        return TB_SIDE_NONE;
    *purity = fmin(sc, oc) / fmax(sc, oc);
    double up = cabs(1.0 + zp->T_sc), down = cabs(1.0 + zp->T_oc);
    if (fabs(up - down) <= 1e-9 * fmax(up, down))
        return TB_SIDE_MIXED;
    return up > down ? TB_SIDE_SERIES : TB_SIDE_SHUNT;
}

void tb_impedance_free(tb_impedance *z)
{
    if (!z)
        return;
    if (z->zd) {
        tb_free(z->zd->sum);
        tb_free(z->zd->pts);
        tb_free(z->zd);
    }
    tb_free(z->r);
    tb_free(z->at_source);
    for (size_t l = 0; z->lane && l < z->lanes; l++) {
        tb_free(z->lane[l].Y);
        tb_free(z->lane[l].Y0);
        tb_free(z->lane[l].D);
        tb_free(z->lane[l].Z);
    }
    tb_free(z->lane);
    tb_free(z);
}

static bool lanes_new(zpass *z, size_t lanes)
{
    size_t P = z->P, L = z->L, n = z->mna->n;
    z->lane = tb_calloc(lanes, sizeof(zlane));
    if (!z->lane)
        return false;
    z->lanes = lanes;
    for (size_t l = 0; l < lanes; l++) {
        zlane *zl = &z->lane[l];
        zl->Y = tb_malloc(P * n, sizeof(double complex));
        zl->Y0 = tb_malloc((P * L + L) * n, sizeof(double complex));
        zl->D = tb_malloc((P * L + L) * n, sizeof(double complex));
        zl->Z = tb_calloc(P * L > 0 ? P * L : 1, sizeof(tb_zpoint));
        if (!zl->Y || !zl->Y0 || !zl->D || !zl->Z)
            return false;
    }
    return true;
}

tb_status tb_impedance_begin(const tb_circuit *ckt, const tb_mna *mna, size_t npoints, size_t lanes,
                             tb_impedance **out)
{
    size_t P = ckt->zport_count, L = mna->loop_count;
    zpass *z = tb_calloc(1, sizeof(*z));
    if (!z)
        return TB_ERR_NOMEM;
    *z = (zpass){.ckt = ckt, .mna = mna, .npoints = npoints, .P = P, .L = L};
    z->zd = tb_calloc(1, sizeof(tb_z_data));
    if (z->zd) {
        z->zd->ports = P;
        z->zd->loops = L;
        z->zd->sum = tb_calloc(P * L, sizeof(tb_zport_summary));
        z->zd->pts = tb_calloc(P * L * (npoints ? npoints : 1), sizeof(tb_zpoint));
    }
    z->r = tb_calloc(P, sizeof(tb_svec));
    z->at_source = tb_calloc(P, sizeof(bool));
    if (!z->zd || !z->zd->sum || !z->zd->pts || !z->r || !z->at_source || !lanes_new(z, lanes)) {
        tb_impedance_free(z);
        return TB_ERR_NOMEM;
    }
    for (size_t p = 0; p < P; p++)
        z->at_source[p] = ckt->zports[p].at_source;
    port_vectors(ckt, z->r);
    *out = z;
    return TB_OK;
}

void tb_impedance_end(tb_impedance *z, tb_result *res)
{
    const tb_circuit *ckt = z->ckt;
    tb_z_data *zd = z->zd;
    for (size_t p = 0; p < z->P; p++) {
        for (size_t l = 0; l < z->L; l++) {
            tb_zport_summary *s = &zd->sum[p * z->L + l];
            blackman_difference(s, zd->pts + (p * z->L + l) * res->npoints, res->npoints, res->has_dc);
            if (!res->has_dc && res->npoints > 0) {
                s->dc = zd->pts[(p * z->L + l) * res->npoints];
                s->dc_hz = res->freqs[0];
            }
            s->name = ckt->zports[p].name;
            s->at_source = ckt->zports[p].at_source;
            s->node_a = ckt->zports[p].node_a;
            s->node_b = ckt->zports[p].node_b;
            s->side = side_of(&s->dc, &s->purity);
        }
    }
    res->zp = zd;
    z->zd = NULL;
}
