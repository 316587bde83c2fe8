/* src/mna.c: stamps elements into triplets and compresses them to one CSC pattern for G + jwC */
#include "mna.h"

#include <limits.h>
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <string.h>

#include "alloc.h"
#include "diag.h"
#include "zeropath.h"

typedef struct {
    size_t row;
    size_t col;
    double g;
    double c;
    size_t elem; /* the element that stamped it; SIZE_MAX for the structural diagonal
                  * and a VCVS's branch incidence, which is not its gain (own_entries) */
} triplet;

typedef struct {
    triplet *t;
    size_t count;
    size_t cap;
    size_t nodes; /* unknowns that are node voltages */
    size_t elem;  /* the element being stamped */
} stamper;

size_t tb_mna_node_unknown(int node)
{
    return node == 0 ? SIZE_MAX : (size_t)node - 1;
}

size_t tb_mna_branch_unknown(const tb_circuit *ckt, const tb_element *e)
{
    return ckt->node_count - 1 + (size_t)e->branch;
}

size_t tb_circuit_unknowns(const tb_circuit *ckt)
{
    return ckt ? ckt->node_count - 1 + ckt->branch_count : 0;
}

const char *tb_mna_unknown_name(const tb_circuit *ckt, size_t i, char *buf, size_t size)
{
    size_t nodes = ckt->node_count - 1;
    if (i < nodes) {
        snprintf(buf, size, "node '%s'", ckt->node_names[i + 1]);
        return buf;
    }
    for (size_t e = 0; e < ckt->elem_count; e++) {
        if (ckt->elems[e].branch >= 0 && (size_t)ckt->elems[e].branch == i - nodes) {
            snprintf(buf, size, "the branch current of %s", ckt->elems[e].name);
            return buf;
        }
    }
    snprintf(buf, size, "unknown %zu", i);
    return buf;
}

static size_t node_unknown(int node)
{
    return tb_mna_node_unknown(node);
}

static size_t branch_unknown(const stamper *s, const tb_element *e)
{
    return s->nodes + (size_t)e->branch;
}

static tb_status add(stamper *s, size_t row, size_t col, double g, double c)
{
    if (row == SIZE_MAX || col == SIZE_MAX)
        return TB_OK;
    if (tb_grow(&s->t, &s->cap, s->count + 1, sizeof(triplet), (size_t)INT_MAX))
        return TB_ERR_NOMEM;
    s->t[s->count++] = (triplet){row, col, g, c, s->elem};
    return TB_OK;
}

/* Adds the outer product g*(e_a - e_b)(e_ca - e_cb)' to G (or c* to C). */
static tb_status stamp_pair(stamper *s, int a, int b, int ca, int cb, double g, double c)
{
    size_t ra = node_unknown(a), rb = node_unknown(b);
    size_t xa = node_unknown(ca), xb = node_unknown(cb);
    if (add(s, ra, xa, g, c) || add(s, ra, xb, -g, -c) || add(s, rb, xa, -g, -c) ||
        add(s, rb, xb, g, c))
        return TB_ERR_NOMEM;
    return TB_OK;
}

/* Branch current j leaves node p and enters node n; row j reads v_p - v_n. */
static tb_status stamp_branch(stamper *s, size_t j, int p, int n)
{
    size_t rp = node_unknown(p), rn = node_unknown(n);
    if (add(s, rp, j, 1, 0) || add(s, rn, j, -1, 0) || add(s, j, rp, 1, 0) ||
        add(s, j, rn, -1, 0))
        return TB_ERR_NOMEM;
    return TB_OK;
}

/* stamp_branch tagged as no source's gain, so that own_entries keeps it in G0 when
 * a VCVS reads one of its own nodes (the follower E out 0 in out k). */
static tb_status stamp_incidence(stamper *s, size_t j, int p, int n)
{
    size_t elem = s->elem;
    s->elem = SIZE_MAX;
    tb_status st = stamp_branch(s, j, p, n);
    s->elem = elem;
    return st;
}

static tb_status stamp_element(stamper *s, const tb_circuit *ckt, const tb_element *e)
{
    const int *nd = e->node;
    switch (e->kind) {
    case TB_EL_R:
        return stamp_pair(s, nd[0], nd[1], nd[0], nd[1], 1.0 / e->value, 0);
    case TB_EL_C:
        return stamp_pair(s, nd[0], nd[1], nd[0], nd[1], 0, e->value);
    case TB_EL_G:
        return stamp_pair(s, nd[0], nd[1], nd[2], nd[3], e->value, 0);
    case TB_EL_I:
        return TB_OK;
    case TB_EL_L: {
        size_t j = branch_unknown(s, e);
        if (stamp_branch(s, j, nd[0], nd[1]))
            return TB_ERR_NOMEM;
        return add(s, j, j, 0, -e->value);
    }
    case TB_EL_V:
        return stamp_branch(s, branch_unknown(s, e), nd[0], nd[1]);
    case TB_EL_E: {
        size_t j = branch_unknown(s, e);
        if (stamp_incidence(s, j, nd[0], nd[1]) || add(s, j, node_unknown(nd[2]), -e->value, 0) ||
            add(s, j, node_unknown(nd[3]), e->value, 0))
            return TB_ERR_NOMEM;
        return TB_OK;
    }
    case TB_EL_F: {
        size_t js = branch_unknown(s, &ckt->elems[e->ctrl]);
        if (add(s, node_unknown(nd[0]), js, e->value, 0) ||
            add(s, node_unknown(nd[1]), js, -e->value, 0))
            return TB_ERR_NOMEM;
        return TB_OK;
    }
    case TB_EL_H: {
        size_t j = branch_unknown(s, e);
        size_t js = branch_unknown(s, &ckt->elems[e->ctrl]);
        if (stamp_branch(s, j, nd[0], nd[1]) || add(s, j, js, -e->value, 0))
            return TB_ERR_NOMEM;
        return TB_OK;
    }
    case TB_EL_K: {
        /* mutual inductance M = k sqrt(L1 L2): each inductor's row
         * v_p - v_n - jw L i - jw M i_other = 0 */
        const tb_element *l1 = &ckt->elems[e->ctrl];
        const tb_element *l2 = &ckt->elems[e->ctrl2];
        double M = e->value * sqrt(l1->value * l2->value);
        size_t j1 = branch_unknown(s, l1);
        size_t j2 = branch_unknown(s, l2);
        if (add(s, j1, j2, 0, -M) || add(s, j2, j1, 0, -M))
            return TB_ERR_NOMEM;
        return TB_OK;
    }
    case TB_EL_COUNT:
        break;
    }
    return TB_OK;
}

/* Appends coef*e_idx to sv, skipping ground. */
static void svec_put(tb_svec *sv, size_t idx, double coef)
{
    if (idx == SIZE_MAX)
        return;
    sv->idx[sv->count] = idx;
    sv->coef[sv->count] = coef;
    sv->count++;
}

static tb_svec node_diff(int p, int n)
{
    tb_svec sv = {0, {0, 0}, {0, 0}};
    svec_put(&sv, node_unknown(p), 1.0);
    svec_put(&sv, node_unknown(n), -1.0);
    return sv;
}

static tb_svec unit(size_t idx, double coef)
{
    tb_svec sv = {0, {0, 0}, {0, 0}};
    svec_put(&sv, idx, coef);
    return sv;
}

tb_loopvec tb_mna_source_vectors(const tb_circuit *ckt, size_t elem)
{
    const tb_element *e = &ckt->elems[elem];
    tb_loopvec lv = {.elem = elem, .k = e->value};
    switch (e->kind) {
    case TB_EL_G:
        lv.u = node_diff(e->node[0], e->node[1]);
        lv.v = node_diff(e->node[2], e->node[3]);
        break;
    case TB_EL_E:
        lv.u = unit(tb_mna_branch_unknown(ckt, e), -1.0);
        lv.v = node_diff(e->node[2], e->node[3]);
        break;
    case TB_EL_F:
        lv.u = node_diff(e->node[0], e->node[1]);
        lv.v = unit(tb_mna_branch_unknown(ckt, &ckt->elems[e->ctrl]), 1.0);
        break;
    default: /* TB_EL_H: the caller passes controlled sources only (tb_elem_is_controlled) */
        lv.u = unit(tb_mna_branch_unknown(ckt, e), -1.0);
        lv.v = unit(tb_mna_branch_unknown(ckt, &ckt->elems[e->ctrl]), 1.0);
        break;
    }
    return lv;
}

static void io_vectors(const stamper *s, const tb_circuit *ckt, tb_mna *mna)
{
    const tb_io_spec *io = &ckt->io;
    mna->has_io = io->given;
    if (!io->given)
        return;
    const tb_element *src = &ckt->elems[io->source_elem];
    if (src->kind == TB_EL_V)
        mna->b = unit(branch_unknown(s, src), 1.0);
    else /* current from n+ through the source to n-: it leaves n+ and enters n- */
        mna->b = node_diff(src->node[1], src->node[0]);
    if (io->out_kind == TB_OUT_V)
        mna->c = node_diff(io->out_node[0], io->out_node[1]);
    else
        mna->c = unit(branch_unknown(s, &ckt->elems[io->out_elem]), 1.0);
}

/* Orders the triplets of one column by row (columns hold a handful of entries). */
static void sort_rows(triplet *t, size_t count)
{
    for (size_t i = 1; i < count; i++) {
        triplet key = t[i];
        size_t j = i;
        while (j > 0 && t[j - 1].row > key.row) {
            t[j] = t[j - 1];
            j--;
        }
        t[j] = key;
    }
}

/* Sorts the triplets by (col, row) -- a counting pass by column, then rows
 * within each column -- freeing s->t as soon as it is copied, and sums
 * duplicates into the CSC arrays of mna. On success *sorted_out owns the
 * sorted triplets (for own_entries). */
static tb_status compress(stamper *s, tb_mna *mna, triplet **sorted_out)
{
    size_t n = mna->n;
    size_t m = s->count;
    size_t *start = tb_calloc(n + 1, sizeof(size_t));
    triplet *sorted = tb_malloc(m, sizeof(triplet));
    tb_status st = TB_ERR_NOMEM;
    if (!start || !sorted)
        goto done;
    for (size_t i = 0; i < m; i++)
        start[s->t[i].col + 1]++;
    for (size_t j = 0; j < n; j++)
        start[j + 1] += start[j];
    for (size_t i = 0; i < m; i++)
        sorted[start[s->t[i].col]++] = s->t[i]; /* start[j] ends as column j+1's start */
    tb_free(s->t);
    s->t = NULL;
    for (size_t j = 0; j < n; j++) {
        size_t first = j == 0 ? 0 : start[j - 1];
        sort_rows(sorted + first, start[j] - first);
    }
    mna->Ap = tb_calloc(n + 1, sizeof(int));
    mna->Ai = tb_malloc(m, sizeof(int));
    mna->Gx = tb_malloc(m, sizeof(double));
    mna->Cx = tb_malloc(m, sizeof(double));
    if (!mna->Ap || !mna->Ai || !mna->Gx || !mna->Cx)
        goto done;
    size_t nz = 0;
    for (size_t i = 0; i < m; i++) {
        const triplet *t = &sorted[i];
        if (nz > 0 && sorted[i - 1].col == t->col && sorted[i - 1].row == t->row) {
            mna->Gx[nz - 1] += t->g;
            mna->Cx[nz - 1] += t->c;
            continue;
        }
        mna->Ai[nz] = (int)t->row;
        mna->Gx[nz] = t->g;
        mna->Cx[nz] = t->c;
        mna->Ap[t->col + 1]++;
        nz++;
    }
    for (size_t j = 0; j < n; j++)
        mna->Ap[j + 1] += mna->Ap[j];
    mna->nnz = nz;
    *sorted_out = sorted;
    sorted = NULL;
    st = TB_OK;
done:
    tb_free(start);
    tb_free(sorted);
    return st;
}

/* First index of the (col, row) group in the sorted triplets, or m when absent. */
static size_t find_group(const triplet *t, size_t m, size_t row, size_t col)
{
    size_t lo = 0, hi = m;
    while (lo < hi) {
        size_t mid = lo + (hi - lo) / 2;
        if (t[mid].col < col || (t[mid].col == col && t[mid].row < row))
            lo = mid + 1;
        else
            hi = mid;
    }
    return lo < m && t[lo].col == col && t[lo].row == row ? lo : m;
}

size_t tb_mna_position(const tb_mna *mna, size_t row, size_t col)
{
    for (int k = mna->Ap[col]; k < mna->Ap[col + 1]; k++)
        if ((size_t)mna->Ai[k] == row)
            return (size_t)k;
    return SIZE_MAX;
}

static size_t csc_position(const tb_mna *mna, size_t row, size_t col)
{
    return tb_mna_position(mna, row, col); /* found: every (u, v) pair was stamped */
}

/* The positions where lv's own gain sits, and G there without it. */
static void own_entries(const tb_mna *mna, const triplet *t, size_t m, tb_loopvec *lv)
{
    lv->own_count = 0;
    for (int i = 0; i < lv->u.count; i++) {
        for (int j = 0; j < lv->v.count; j++) {
            size_t row = lv->u.idx[i], col = lv->v.idx[j];
            double g0 = 0;
            for (size_t k = find_group(t, m, row, col); k < m && t[k].row == row && t[k].col == col; k++)
                if (t[k].elem != lv->elem)
                    g0 += t[k].g;
            lv->own_pos[lv->own_count] = csc_position(mna, row, col);
            lv->own_g0[lv->own_count] = g0;
            lv->own_count++;
        }
    }
}

tb_status tb_mna_build(const tb_circuit *ckt, tb_diag *diag, tb_mna **out)
{
    stamper s = {NULL, 0, 0, ckt->node_count - 1, SIZE_MAX};
    triplet *sorted = NULL;
    tb_mna *mna = tb_calloc(1, sizeof(*mna));
    tb_status st = TB_ERR_NOMEM;
    if (!mna)
        goto fail;
    mna->n = s.nodes + ckt->branch_count;
    mna->nodes = s.nodes;
    if (mna->n >= (size_t)INT_MAX) {
        st = tb_diag_add(diag, TB_SEV_ERROR, ckt->file, 0, 0, NULL, 0,
                         "too many unknowns (%zu; the limit is %d)", mna->n, INT_MAX - 1);
        st = st ? st : TB_ERR_INPUT;
        goto fail;
    }
    for (size_t i = 0; i < ckt->elem_count; i++) {
        s.elem = i;
        if (stamp_element(&s, ckt, &ckt->elems[i]))
            goto fail;
    }
    s.elem = SIZE_MAX;
    /* every unknown gets a diagonal slot so KLU sees a full structural diagonal pattern */
    for (size_t i = 0; i < mna->n; i++)
        if (add(&s, i, i, 0, 0))
            goto fail;
    size_t triplets = s.count;
    if (compress(&s, mna, &sorted))
        goto fail;
    mna->loops = tb_calloc(ckt->loop_count, sizeof(tb_loopvec));
    if (!mna->loops)
        goto fail;
    mna->loop_count = ckt->loop_count;
    for (size_t l = 0; l < ckt->loop_count; l++) {
        mna->loops[l] = tb_mna_source_vectors(ckt, ckt->loops[l].elem);
        own_entries(mna, sorted, triplets, &mna->loops[l]);
    }
    io_vectors(&s, ckt, mna);
    for (size_t l = 0; l < mna->loop_count && mna->has_io; l++)
        if ((st = tb_zeropath_feed_nil(mna, &mna->loops[l], &mna->loops[l].feed_nil)))
            goto fail;
    tb_free(s.t);
    tb_free(sorted);
    *out = mna;
    return TB_OK;
fail:
    tb_free(s.t);
    tb_free(sorted);
    tb_mna_free(mna);
    return st;
}

void tb_mna_free(tb_mna *mna)
{
    if (!mna)
        return;
    tb_free(mna->Ap);
    tb_free(mna->Ai);
    tb_free(mna->Gx);
    tb_free(mna->Cx);
    tb_free(mna->loops);
    tb_free(mna);
}

void tb_mna_values(const tb_mna *mna, double omega, double *Mx)
{
    for (size_t k = 0; k < mna->nnz; k++) {
        Mx[2 * k] = mna->Gx[k];
        Mx[2 * k + 1] = omega * mna->Cx[k];
    }
}

void tb_mna_values_gain(const tb_mna *mna, double omega, const tb_loopvec *lv, double dk, double *Mx)
{
    tb_mna_values(mna, omega, Mx);
    int o = 0;
    for (int i = 0; i < lv->u.count; i++)
        for (int j = 0; j < lv->v.count; j++)
            Mx[2 * lv->own_pos[o++]] += dk * lv->u.coef[i] * lv->v.coef[j];
}

void tb_mna_dense(const tb_mna *mna, double omega, double complex *M)
{
    memset(M, 0, mna->n * mna->n * sizeof(double complex));
    for (size_t j = 0; j < mna->n; j++)
        for (int k = mna->Ap[j]; k < mna->Ap[j + 1]; k++)
            M[j * mna->n + (size_t)mna->Ai[k]] = CMPLX(mna->Gx[k], omega * mna->Cx[k]);
}

/* Coefficient of unknown idx in sv (0 when absent). */
static double svec_coef(const tb_svec *sv, size_t idx)
{
    for (int i = 0; i < sv->count; i++)
        if (sv->idx[i] == idx)
            return sv->coef[i];
    return 0;
}

void tb_mna_residual0(const tb_mna *mna, const double *Mx, double omega, const tb_loopvec *lv,
                      const tb_svec *r, const double complex *x, double complex *y)
{
    memset(y, 0, mna->n * sizeof(double complex));
    tb_svec_axpy(r, 1.0, y);
    for (size_t j = 0; j < mna->n; j++) {
        double complex xj = x[j];
        if (xj == 0)
            continue;
        bool own_col = svec_coef(&lv->v, j) != 0;
        for (int k = mna->Ap[j]; k < mna->Ap[j + 1]; k++) {
            double complex m = CMPLX(Mx[2 * k], Mx[2 * k + 1]);
            for (int o = 0; own_col && o < lv->own_count; o++)
                if (lv->own_pos[o] == (size_t)k)
                    m = CMPLX(lv->own_g0[o], omega * mna->Cx[k]);
            y[mna->Ai[k]] -= m * xj;
        }
    }
}

static double abs1(double complex z)
{
    return fabs(creal(z)) + fabs(cimag(z));
}

double tb_mna_residual0_berr(const tb_mna *mna, const double *Mx, double omega, const tb_loopvec *lv,
                             const tb_svec *r, const double complex *x, double complex *y, double *D,
                             double *N)
{
    size_t n = mna->n;
    memset(y, 0, n * sizeof(double complex));
    memset(D, 0, n * sizeof(double));
    memset(N, 0, n * sizeof(double));
    tb_svec_axpy(r, 1.0, y);
    for (int i = 0; i < r->count; i++)
        D[r->idx[i]] += fabs(r->coef[i]);
    double xmax = 0;
    double *yr = (double *)y; /* (re, im) pairs: real arithmetic, no complex-multiply calls */
    for (size_t j = 0; j < n; j++) {
        double xr = creal(x[j]), xi = cimag(x[j]);
        double aj = fabs(xr) + fabs(xi);
        xmax = aj > xmax ? aj : xmax;
        bool own_col = svec_coef(&lv->v, j) != 0;
        for (int k = mna->Ap[j]; k < mna->Ap[j + 1]; k++) {
            double mr = Mx[2 * k], mi = Mx[2 * k + 1];
            for (int o = 0; own_col && o < lv->own_count; o++)
                if (lv->own_pos[o] == (size_t)k) {
                    mr = lv->own_g0[o];
                    mi = omega * mna->Cx[k];
                }
            size_t i = (size_t)mna->Ai[k];
            double am = fabs(mr) + fabs(mi);
            yr[2 * i] -= mr * xr - mi * xi;
            yr[2 * i + 1] -= mr * xi + mi * xr;
            D[i] += am * aj;
            N[i] = am > N[i] ? am : N[i];
        }
    }
    /* rows where |M0||x| + |r| is at rounding level of the row's largest entry times
     * max|x| get that product as their scale (Arioli, Demmel and Duff 1989) */
    double small = 1000.0 * (double)n * 0x1p-52;
    double omega_b = 0;
    for (size_t i = 0; i < n; i++) {
        double scale = D[i] > small * N[i] * xmax ? D[i] : D[i] + N[i] * xmax;
        double ri = abs1(y[i]);
        if (ri > scale * omega_b || isnan(ri)) /* a division only where the maximum grows */
            omega_b = scale > 0 && !isnan(ri) ? ri / scale : INFINITY;
    }
    return omega_b;
}

/* Visits d (e_a - e_b)(e_ca - e_cb)' without ground. */
static void visit_pair(tb_mna_visit visit, void *ctx, int a, int b, int ca, int cb, double complex d)
{
    size_t r[2] = {tb_mna_node_unknown(a), tb_mna_node_unknown(b)};
    size_t c[2] = {tb_mna_node_unknown(ca), tb_mna_node_unknown(cb)};
    for (int i = 0; i < 2; i++)
        for (int j = 0; j < 2; j++)
            if (r[i] != SIZE_MAX && c[j] != SIZE_MAX)
                visit(ctx, r[i], c[j], (i == j ? 1.0 : -1.0) * d);
}

static void visit_one(tb_mna_visit visit, void *ctx, size_t row, size_t col, double complex d)
{
    if (row != SIZE_MAX && col != SIZE_MAX)
        visit(ctx, row, col, d);
}

/* The mutual terms of inductor e (value L): d/dL of -jw k sqrt(L L_other) at both off-diagonal places. */
static void visit_mutuals(const tb_circuit *ckt, size_t e, double omega, tb_mna_visit visit, void *ctx)
{
    const tb_element *el = &ckt->elems[e];
    for (size_t k = 0; k < ckt->elem_count; k++) {
        const tb_element *kc = &ckt->elems[k];
        if (kc->kind != TB_EL_K || (kc->ctrl != e && kc->ctrl2 != e))
            continue;
        const tb_element *other = &ckt->elems[kc->ctrl == e ? kc->ctrl2 : kc->ctrl];
        double dM = kc->value * sqrt(other->value / el->value) / 2.0;
        size_t j1 = tb_mna_branch_unknown(ckt, el), j2 = tb_mna_branch_unknown(ckt, other);
        visit(ctx, j1, j2, CMPLX(0, -omega * dM));
        visit(ctx, j2, j1, CMPLX(0, -omega * dM));
    }
}

void tb_mna_derivative(const tb_circuit *ckt, size_t elem, double omega, tb_mna_visit visit, void *ctx)
{
    const tb_element *e = &ckt->elems[elem];
    const int *nd = e->node;
    switch (e->kind) {
    case TB_EL_R:
        visit_pair(visit, ctx, nd[0], nd[1], nd[0], nd[1], -1.0 / (e->value * e->value));
        break;
    case TB_EL_C:
        visit_pair(visit, ctx, nd[0], nd[1], nd[0], nd[1], CMPLX(0, omega));
        break;
    case TB_EL_G:
        visit_pair(visit, ctx, nd[0], nd[1], nd[2], nd[3], 1.0);
        break;
    case TB_EL_L: {
        size_t j = tb_mna_branch_unknown(ckt, e);
        visit(ctx, j, j, CMPLX(0, -omega));
        visit_mutuals(ckt, elem, omega, visit, ctx);
        break;
    }
    case TB_EL_E: {
        size_t j = tb_mna_branch_unknown(ckt, e);
        visit_one(visit, ctx, j, tb_mna_node_unknown(nd[2]), -1.0);
        visit_one(visit, ctx, j, tb_mna_node_unknown(nd[3]), 1.0);
        break;
    }
    case TB_EL_F: {
        size_t js = tb_mna_branch_unknown(ckt, &ckt->elems[e->ctrl]);
        visit_one(visit, ctx, tb_mna_node_unknown(nd[0]), js, 1.0);
        visit_one(visit, ctx, tb_mna_node_unknown(nd[1]), js, -1.0);
        break;
    }
    case TB_EL_H:
        visit(ctx, tb_mna_branch_unknown(ckt, e), tb_mna_branch_unknown(ckt, &ckt->elems[e->ctrl]), -1.0);
        break;
    case TB_EL_K: {
        const tb_element *l1 = &ckt->elems[e->ctrl];
        const tb_element *l2 = &ckt->elems[e->ctrl2];
        double dM = sqrt(l1->value * l2->value);
        size_t j1 = tb_mna_branch_unknown(ckt, l1), j2 = tb_mna_branch_unknown(ckt, l2);
        visit(ctx, j1, j2, CMPLX(0, -omega * dM));
        visit(ctx, j2, j1, CMPLX(0, -omega * dM));
        break;
    }
    case TB_EL_V:
    case TB_EL_I:
    case TB_EL_COUNT:
        break;
    }
}

double complex tb_mna_form_C(const tb_mna *mna, const double complex *g, const double complex *h)
{
    double complex sum = 0;
    for (size_t j = 0; j < mna->n; j++) {
        if (h[j] == 0)
            continue;
        for (int k = mna->Ap[j]; k < mna->Ap[j + 1]; k++)
            if (mna->Cx[k] != 0)
                sum += g[mna->Ai[k]] * mna->Cx[k] * h[j];
    }
    return sum;
}
