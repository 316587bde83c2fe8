/* src/impedance.c: port impedances with and without feedback (Blackman's formula) */
#include "impedance.h"

#include <math.h>
#include <string.h>

#include "alloc.h"
#include "diag.h"
#include "loop.h"

static const double TWO_PI = 6.28318530717958647692528676655900577;

void tb_impedance_free(tb_z_data *zd)
{
    if (!zd)
        return;
    tb_free(zd->sum);
    tb_free(zd->pts);
    tb_free(zd);
}

/* Workspace of the pass, allocated before the frequency loop. */
typedef struct {
    const tb_mna *mna;
    tb_solver *solver;
    double *Mx;
    size_t P;            /* ports */
    size_t L;            /* loops */
    tb_svec *r;          /* P port vectors: unit test current into node a, out of node b */
    bool *at_source;     /* P: the port is a V source's terminals (r = e_j) */
    double complex *YW;  /* P + L columns: y_p = M^-1 r_p, then w_l = M^-1 u_l */
    double complex *Y0;  /* P x L + L columns: M0^-1 r_p of loop l, then w0_l = M0^-1 u_l */
    double complex *D;   /* as many columns: residuals, then corrections */
} zpass;

/* The unknown of node i (mna.c numbering: node i > 0 is unknown i - 1). */
static void put_node(tb_svec *sv, int node, double coef)
{
    if (node == 0)
        return;
    sv->idx[sv->count] = (size_t)node - 1;
    sv->coef[sv->count++] = coef;
}

static tb_status port_error(const tb_circuit *ckt, tb_diag *diag, const tb_zport_spec *zp, const char *node)
{
    size_t len = 0;
    const char *line = tb_circuit_source_line(ckt, zp->loc.file, zp->loc.line, &len);
    tb_status st = node ? tb_diag_add(diag, TB_SEV_ERROR, zp->loc.file, zp->loc.line, zp->loc.col, line, len,
                                      ".zport %s: node '%s' does not exist", zp->name, node)
                        : tb_diag_add(diag, TB_SEV_ERROR, zp->loc.file, zp->loc.line, zp->loc.col, line, len,
                                      ".zport %s: the port's two nodes are the same node", zp->name);
    return st ? st : TB_ERR_INPUT;
}

static tb_status source_error(const tb_circuit *ckt, tb_diag *diag, const tb_zport_spec *zp)
{
    size_t len = 0;
    const char *line = tb_circuit_source_line(ckt, zp->loc.file, zp->loc.line, &len);
    tb_status st = tb_diag_add(diag, TB_SEV_ERROR, zp->loc.file, zp->loc.line, zp->loc.col, line, len,
                               ".zport %s: i(%s) needs a voltage source of that name", zp->name, zp->node_a);
    return st ? st : TB_ERR_INPUT;
}

/* r_p of every port (e_j of the source's branch for i(V)); TB_ERR_INPUT (with a diagnostic) for a node that does not exist. */
static tb_status port_vectors(const tb_circuit *ckt, tb_diag *diag, tb_svec *r)
{
    tb_status first = TB_OK;
    for (size_t p = 0; p < ckt->zport_count; p++) {
        const tb_zport_spec *zp = &ckt->zports[p];
        int a = 0, b = 0;
        tb_status st = TB_OK;
        r[p] = (tb_svec){0, {0, 0}, {0, 0}};
        if (zp->at_source) {
            size_t e = 0;
            if (!tb_circuit_find_element(ckt, zp->node_a, &e) || ckt->elems[e].kind != TB_EL_V)
                st = source_error(ckt, diag, zp);
            else
                r[p] = (tb_svec){1, {ckt->node_count - 1 + (size_t)ckt->elems[e].branch, 0}, {1.0, 0}};
            first = first ? first : st;
            continue;
        }
        if (!tb_circuit_find_node(ckt, zp->node_a, strlen(zp->node_a), &a))
            st = port_error(ckt, diag, zp, zp->node_a);
        else if (zp->node_b && !tb_circuit_find_node(ckt, zp->node_b, strlen(zp->node_b), &b))
            st = port_error(ckt, diag, zp, zp->node_b);
        else if (a == b)
            st = port_error(ckt, diag, zp, NULL);
        put_node(&r[p], a, 1.0);
        put_node(&r[p], b, -1.0);
        first = first ? first : st;
    }
    return first;
}

/* Solves for y_p and w_l at omega, then queues the M0 solves y0 = M0^-1 r_p. */
static tb_status solve_point(zpass *z, double omega, bool fresh, double rcond_drop)
{
    size_t n = z->mna->n;
    size_t culprit = 0;
    tb_mna_values(z->mna, omega, z->Mx);
    tb_status st = fresh ? tb_solver_factor(z->solver, z->Mx, &culprit)
                         : tb_solver_refactor(z->solver, z->Mx, rcond_drop, &culprit);
    if (st)
        return st;
    memset(z->YW, 0, (z->P + z->L) * n * sizeof(double complex));
    for (size_t p = 0; p < z->P; p++)
        tb_svec_axpy(&z->r[p], 1.0, z->YW + p * n);
    for (size_t l = 0; l < z->L; l++)
        tb_svec_axpy(&z->mna->loops[l].u, 1.0, z->YW + (z->P + l) * n);
    return tb_solver_solve(z->solver, z->YW, z->P + z->L);
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
static tb_status port_m0(zpass *z, double omega)
{
    size_t n = z->mna->n;
    size_t cols = z->P * z->L + z->L;
    for (size_t c = 0; c < cols; c++) {
        size_t l = col_loop(z, c);
        const tb_loopvec *lv = &z->mna->loops[l];
        const double complex *w = z->YW + (z->P + l) * n;
        double complex *y0 = z->Y0 + c * n;
        double complex q = lv->k * tb_svec_dot(&lv->v, w);
        bool inf = cabs(1.0 - q) <= TB_LOOP_INF_TOL;
        if (c < z->P * z->L) {
            const double complex *y = z->YW + (c / z->L) * n;
            if (inf)
                memcpy(y0, y, n * sizeof(double complex));
            else
                tb_loop_sherman_morrison(lv, w, q, y, NULL, y0, n);
        } else {
            for (size_t i = 0; i < n; i++)
                y0[i] = inf ? 0 : w[i] / (1.0 - q);
        }
        tb_mna_residual0(z->mna, z->Mx, omega, lv, col_rhs(z, c), y0, z->D + c * n);
    }
    if (tb_solver_solve(z->solver, z->D, cols))
        return TB_ERR_NUMERIC;
    for (size_t c = 0; c < cols; c++) {
        size_t l = col_loop(z, c);
        const tb_loopvec *lv = &z->mna->loops[l];
        const double complex *w = z->YW + (z->P + l) * n;
        const double complex *d = z->D + c * n;
        double complex *y0 = z->Y0 + c * n;
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
static tb_zpoint evaluate_source(const zpass *z, size_t p, size_t l)
{
    size_t n = z->mna->n;
    const tb_loopvec *lv = &z->mna->loops[l];
    const tb_svec *r = &z->r[p];
    const double complex *w = z->YW + (z->P + l) * n;
    tb_zpoint zp = {0};
    double complex sj = tb_svec_dot(r, z->YW + p * n);
    if (cabs(sj) == 0)
        return zp; /* the source sees an open circuit */
    zp.has_Z = true;
    zp.Z = -1.0 / sj;
    double complex q = lv->k * tb_svec_dot(&lv->v, w);
    double complex s0 = tb_svec_dot(r, z->Y0 + (p * z->L + l) * n);
    if (cabs(1.0 - q) <= TB_LOOP_INF_TOL || cabs(s0) == 0)
        return zp;
    zp.has_T_sc = true;
    zp.T_sc = lv->k * tb_svec_dot(&lv->v, z->Y0 + (z->P * z->L + l) * n); /* T = k v'w0 */
    zp.has_Z0 = true;
    zp.Z0 = -1.0 / s0;
    zp.has_T_oc = true;
    zp.T_oc = (1.0 + zp.T_sc) * zp.Z0 / zp.Z - 1.0;
    zp.has_blackman = true;
    zp.Z_blackman = zp.Z0 * (1.0 + zp.T_sc) / (1.0 + zp.T_oc);
    return zp;
}

static tb_zpoint evaluate(const zpass *z, size_t p, size_t l)
{
    size_t n = z->mna->n;
    const tb_loopvec *lv = &z->mna->loops[l];
    const tb_svec *r = &z->r[p];
    const double complex *w = z->YW + (z->P + l) * n;
    const double complex *y0 = z->Y0 + (p * z->L + l) * n;
    tb_zpoint zp = {.has_Z = true, .Z = tb_svec_dot(r, z->YW + p * n)};
    double complex q = lv->k * tb_svec_dot(&lv->v, w);
    if (cabs(1.0 - q) <= TB_LOOP_INF_TOL)
        return zp; /* T infinite: Z0 (the circuit at k = 0) is singular */
    const double complex *w0 = z->Y0 + (z->P * z->L + l) * n;
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

/* Everything at one frequency into slot `at` (SIZE_MAX: the DC summaries). */
static tb_status at_frequency(zpass *z, tb_z_data *zd, const tb_result *res, double f, bool fresh,
                              double rcond_drop, size_t at)
{
    tb_status st = solve_point(z, TWO_PI * f, fresh, rcond_drop);
    if (!st)
        st = port_m0(z, TWO_PI * f);
    if (st)
        return st;
    for (size_t p = 0; p < z->P; p++) {
        for (size_t l = 0; l < z->L; l++) {
            tb_zpoint zp = z->at_source[p] ? evaluate_source(z, p, l) : evaluate(z, p, l);
            tb_zport_summary *s = &zd->sum[p * z->L + l];
            if (at == SIZE_MAX) {
                s->dc = zp;
                s->dc_hz = f;
            } else {
                zd->pts[(p * z->L + l) * res->npoints + at] = zp;
            }
            if (zp.has_blackman && cabs(zp.Z) > 0) {
                double diff = cabs(zp.Z_blackman - zp.Z) / cabs(zp.Z);
                s->max_rel_diff = s->has_max_diff ? fmax(s->max_rel_diff, diff) : diff;
                s->has_max_diff = true;
            }
        }
    }
    return TB_OK;
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

static tb_status sweep(zpass *z, tb_z_data *zd, const tb_circuit *ckt, double rcond_drop, tb_result *res)
{
    tb_status st = TB_OK;
    if (res->has_dc)
        st = at_frequency(z, zd, res, 0.0, true, rcond_drop, SIZE_MAX);
    for (size_t i = 0; i < res->npoints && !st; i++)
        st = at_frequency(z, zd, res, res->freqs[i], i == 0, rcond_drop, i);
    if (st)
        return st;
    for (size_t p = 0; p < z->P; p++) {
        for (size_t l = 0; l < z->L; l++) {
            tb_zport_summary *s = &zd->sum[p * z->L + l];
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
    return TB_OK;
}

tb_status tb_impedance_run(const tb_circuit *ckt, const tb_mna *mna, tb_solver *solver, double *Mx,
                           double rcond_drop, tb_diag *diag, tb_result *res)
{
    if (ckt->zport_count == 0 || mna->loop_count == 0)
        return TB_OK;
    size_t P = ckt->zport_count, L = mna->loop_count, n = mna->n;
    zpass z = {mna, solver, Mx, P, L, NULL, NULL, NULL, NULL, NULL};
    tb_z_data *zd = tb_calloc(1, sizeof(*zd));
    tb_status st = TB_ERR_NOMEM;
    if (!zd)
        return st;
    res->zp = zd;
    zd->ports = P;
    zd->loops = L;
    zd->sum = tb_calloc(P * L, sizeof(tb_zport_summary));
    zd->pts = tb_calloc(P * L * (res->npoints ? res->npoints : 1), sizeof(tb_zpoint));
    z.r = tb_calloc(P, sizeof(tb_svec));
    z.at_source = tb_calloc(P, sizeof(bool));
    z.YW = tb_malloc((P + L) * n, sizeof(double complex));
    z.Y0 = tb_malloc((P * L + L) * n, sizeof(double complex));
    z.D = tb_malloc((P * L + L) * n, sizeof(double complex));
    if (zd->sum && zd->pts && z.r && z.at_source && z.YW && z.Y0 && z.D) {
        for (size_t p = 0; p < P; p++)
            z.at_source[p] = ckt->zports[p].at_source;
        st = port_vectors(ckt, diag, z.r);
        if (!st)
            st = sweep(&z, zd, ckt, rcond_drop, res);
    }
    tb_free(z.r);
    tb_free(z.at_source);
    tb_free(z.YW);
    tb_free(z.Y0);
    tb_free(z.D);
    return st;
}

size_t tb_zport_count(const tb_result *res)
{
    return res && res->zp ? res->zp->ports : 0;
}

tb_status tb_zport_loop(const tb_result *res, size_t port, size_t l, tb_zport_summary *out,
                        const tb_zpoint **pts)
{
    if (!res || !out || !res->zp || port >= res->zp->ports || l >= res->zp->loops)
        return TB_ERR_USAGE;
    *out = res->zp->sum[port * res->zp->loops + l];
    if (pts)
        *pts = res->zp->pts + (port * res->zp->loops + l) * res->npoints;
    return TB_OK;
}

static const char *const side_text[] = {"no feedback", "series", "shunt", "mixed"};
_Static_assert(sizeof(side_text) / sizeof(side_text[0]) == TB_SIDE_MIXED + 1, "side_text in step");

const char *tb_side_str(tb_side side)
{
    return (unsigned)side <= TB_SIDE_MIXED ? side_text[side] : "unknown";
}
