/* src/passive.c: no zero of det M0(s) in the right half-plane, shown from the passivity of M0's diagonal blocks */
#include "passive.h"

#include <btf.h>
#include <float.h>
#include <limits.h>
#include <math.h>
#include <stdint.h>
#include <string.h>

#include "alloc.h"
#include "m0.h"

/* Per connected part of a symmetric matrix: which sufficient test failed. */
enum { FAIL_PLAIN = 1, FAIL_SCALED = 2 };

/* One symmetric matrix of the test (the symmetric part of D G0, or D C): its diagonal, per
 * unknown the sums of |off-diagonal| entries plain and scaled, and its connected parts. */
typedef struct {
    double *d;          /* n: diagonal */
    double *off;        /* n: sum over the row of |a_ij| */
    double *scaled;     /* n: sum over the row of |a_ij| / sqrt(a_ii a_jj) */
    int *up;            /* n: union-find parent */
    unsigned char *fail; /* n: FAIL_* of each part, at its root */
    int *size;          /* n: unknowns of each part, at its root */
} symmat;

typedef struct {
    const tb_mna *mna;
    size_t n;
    int *Fp, *Fi;       /* M0's non-zero pattern, CSC */
    int *Fk;            /* each entry's position in mna's value arrays */
    int *Tp, *Ti, *Tk;  /* the transpose, likewise */
    const tb_loopvec *lv; /* the source at gain zero, or NULL */
    int *P, *R, *work;  /* btf_strongcomp: order, block starts, workspace (4n) */
    int *blk;           /* n: block of each unknown */
    int *count;         /* n: off-diagonal entries of each row of the symmetric parts */
    unsigned char *bad; /* blocks: not shown passive */
    int *order;         /* n: unknowns grouped by part (dense test) */
    int *first;         /* n + 1: where each root's group starts in order */
    double *dense;      /* TB_PASSIVE_DENSE^2 */
    symmat g, c;
} pwork;

/* One entry of the symmetric parts at (i, j), i != j in the same block. */
typedef struct {
    int fa, fa_end, ta, ta_end; /* cursors in F's and T's column j */
} pair_iter;

/* Row sign: branch-current rows are negated (their equations read v_p - v_n - ...). */
static double sign_of(const pwork *w, size_t i)
{
    return i < w->mna->nodes ? 1.0 : -1.0;
}

static void symmat_free(symmat *m)
{
    tb_free(m->d);
    tb_free(m->off);
    tb_free(m->scaled);
    tb_free(m->up);
    tb_free(m->fail);
    tb_free(m->size);
}

static bool symmat_alloc(symmat *m, size_t n)
{
    m->d = tb_calloc(n, sizeof(double));
    m->off = tb_calloc(n, sizeof(double));
    m->scaled = tb_calloc(n, sizeof(double));
    m->up = tb_malloc(n, sizeof(int));
    m->fail = tb_calloc(n, 1);
    m->size = tb_calloc(n, sizeof(int));
    if (!m->d || !m->off || !m->scaled || !m->up || !m->fail || !m->size)
        return false;
    for (size_t i = 0; i < n; i++)
        m->up[i] = (int)i;
    return true;
}

static void work_free(pwork *w)
{
    tb_free(w->Fp);
    tb_free(w->Fi);
    tb_free(w->Fk);
    tb_free(w->Tp);
    tb_free(w->Ti);
    tb_free(w->Tk);
    tb_free(w->P);
    tb_free(w->R);
    tb_free(w->work);
    tb_free(w->blk);
    tb_free(w->count);
    tb_free(w->bad);
    tb_free(w->order);
    tb_free(w->first);
    tb_free(w->dense);
    symmat_free(&w->g);
    symmat_free(&w->c);
}

static bool work_alloc(pwork *w, size_t n, size_t nnz)
{
    size_t z = nnz ? nnz : 1;
    w->Fp = tb_malloc(n + 1, sizeof(int));
    w->Fi = tb_malloc(z, sizeof(int));
    w->Fk = tb_malloc(z, sizeof(int));
    w->Tp = tb_calloc(n + 1, sizeof(int));
    w->Ti = tb_malloc(z, sizeof(int));
    w->Tk = tb_malloc(z, sizeof(int));
    w->P = tb_malloc(n, sizeof(int));
    w->R = tb_malloc(n + 1, sizeof(int));
    w->work = tb_malloc(n, 4 * sizeof(int));
    w->blk = tb_malloc(n, sizeof(int));
    w->count = tb_calloc(n, sizeof(int));
    w->bad = tb_calloc(n, 1);
    w->order = tb_malloc(n, sizeof(int));
    w->first = tb_calloc(n + 1, sizeof(int));
    w->dense = tb_malloc(TB_PASSIVE_DENSE * TB_PASSIVE_DENSE, sizeof(double));
    return w->Fp && w->Fi && w->Fk && w->Tp && w->Ti && w->Tk && w->P && w->R && w->work &&
           w->blk && w->count && w->bad && w->order && w->first && w->dense && symmat_alloc(&w->g, n) &&
           symmat_alloc(&w->c, n);
}


/* T = F' (rows come out sorted within each column). */
static void transpose(pwork *w)
{
    size_t n = w->n;
    size_t nz = (size_t)w->Fp[n];
    for (size_t k = 0; k < nz; k++)
        w->Tp[w->Fi[k] + 1]++;
    for (size_t i = 0; i < n; i++)
        w->Tp[i + 1] += w->Tp[i];
    int *next = w->order; /* free until the dense test */
    memcpy(next, w->Tp, n * sizeof(int));
    for (size_t j = 0; j < n; j++) {
        for (int k = w->Fp[j]; k < w->Fp[j + 1]; k++) {
            int pos = next[w->Fi[k]]++;
            w->Ti[pos] = (int)j;
            w->Tk[pos] = w->Fk[k];
        }
    }
}

/* The diagonal blocks: strongly connected parts of F's pattern; blk[i] = block of unknown i. */
static size_t blocks(pwork *w)
{
    int nb = btf_strongcomp((int)w->n, w->Fp, w->Fi, NULL, w->P, w->R, w->work);
    for (int b = 0; b < nb; b++)
        for (int k = w->R[b]; k < w->R[b + 1]; k++)
            w->blk[w->P[k]] = b;
    return (size_t)nb;
}

/* The next row i != j of column j of the symmetric parts within j's block: (DA + (DA)')/2
 * at (i, j) for A = G0 (*g) and A = C (*c), and the skew part of DC there (*c_skew). */
static bool next_pair(const pwork *w, size_t j, pair_iter *it, size_t *i, double *g, double *c, double *c_skew)
{
    for (;;) {
        bool fa = it->fa < it->fa_end, ta = it->ta < it->ta_end;
        if (!fa && !ta)
            return false;
        int rf = fa ? w->Fi[it->fa] : INT_MAX, rt = ta ? w->Ti[it->ta] : INT_MAX;
        int r = rf < rt ? rf : rt;
        double gij = 0, gji = 0, cij = 0, cji = 0;
        if (rf == r) {
            gij = tb_m0_g_at(w->mna, w->lv, (size_t)w->Fk[it->fa]);
            cij = w->mna->Cx[w->Fk[it->fa]];
            it->fa++;
        }
        if (rt == r) {
            gji = tb_m0_g_at(w->mna, w->lv, (size_t)w->Tk[it->ta]);
            cji = w->mna->Cx[w->Tk[it->ta]];
            it->ta++;
        }
        if ((size_t)r == j || w->blk[r] != w->blk[j])
            continue;
        double si = sign_of(w, (size_t)r), sj = sign_of(w, j);
        *i = (size_t)r;
        *g = 0.5 * (si * gij + sj * gji);
        *c = 0.5 * (si * cij + sj * cji);
        *c_skew = 0.5 * (si * cij - sj * cji);
        return true;
    }
}

static pair_iter pairs_of(const pwork *w, size_t j)
{
    return (pair_iter){w->Fp[j], w->Fp[j + 1], w->Tp[j], w->Tp[j + 1]};
}

static int root(int *up, int i)
{
    while (up[i] != i) {
        up[i] = up[up[i]];
        i = up[i];
    }
    return i;
}

static void join(int *up, size_t a, size_t b)
{
    int ra = root(up, (int)a), rb = root(up, (int)b);
    if (ra != rb)
        up[ra < rb ? rb : ra] = ra < rb ? ra : rb;
}

/* Rounding allowance for a row summed from `terms` stored values. */
static double allowance(int terms)
{
    return 4.0 * DBL_EPSILON * (terms + 2);
}

/* First pass: diagonals, plain off-diagonal sums, connected parts; C's skew part. */
static void first_pass(pwork *w)
{
    for (size_t j = 0; j < w->n; j++) {
        double s = sign_of(w, j);
        for (int k = w->Fp[j]; k < w->Fp[j + 1]; k++) {
            if ((size_t)w->Fi[k] == j) {
                w->g.d[j] = s * tb_m0_g_at(w->mna, w->lv, (size_t)w->Fk[k]);
                w->c.d[j] = s * w->mna->Cx[w->Fk[k]];
            }
        }
        pair_iter it = pairs_of(w, j);
        size_t i = 0;
        double g = 0, c = 0, skew = 0;
        while (next_pair(w, j, &it, &i, &g, &c, &skew)) {
            w->count[j]++;
            w->g.off[j] += fabs(g);
            w->c.off[j] += fabs(c);
            if (g != 0)
                join(w->g.up, i, j);
            if (c != 0)
                join(w->c.up, i, j);
            if (fabs(skew) > allowance(1) * (fabs(c) + fabs(skew)))
                w->bad[w->blk[j]] = 1; /* C not symmetric: x*Cx is not real */
        }
    }
}

static double scaled_term(const symmat *m, size_t i, size_t j, double a)
{
    if (a == 0)
        return 0;
    return m->d[i] > 0 && m->d[j] > 0 ? fabs(a) / sqrt(m->d[i] * m->d[j]) : INFINITY;
}

/* Second pass: the scaled off-diagonal sums (they need every diagonal). */
static void second_pass(pwork *w)
{
    for (size_t j = 0; j < w->n; j++) {
        pair_iter it = pairs_of(w, j);
        size_t i = 0;
        double g = 0, c = 0, skew = 0;
        while (next_pair(w, j, &it, &i, &g, &c, &skew)) {
            w->g.scaled[j] += scaled_term(&w->g, i, j, g);
            w->c.scaled[j] += scaled_term(&w->c, i, j, c);
        }
    }
}

/* Which diagonal-dominance tests each connected part fails (at its root). */
static void mark_parts(pwork *w, symmat *m)
{
    for (size_t j = 0; j < w->n; j++) {
        int r = root(m->up, (int)j);
        double tol = allowance(w->count[j]);
        m->size[r]++;
        if (m->d[j] - m->off[j] < -tol * (fabs(m->d[j]) + m->off[j]))
            m->fail[r] |= FAIL_PLAIN;
        if (m->d[j] < 0 || m->scaled[j] > 1.0 + tol)
            m->fail[r] |= FAIL_SCALED;
    }
}

/* Whether the symmetric m x m matrix A (column-major, overwritten) is positive
 * semidefinite within rounding: LDL' without pivoting, where a pivot within the
 * tolerance of zero must have a column within the tolerance of zero (a semidefinite
 * matrix's |a_ik|^2 <= a_kk a_ii), which is then dropped. */
static bool dense_psd(double *A, int m)
{
    double scale = 0;
    for (int i = 0; i < m * m; i++)
        scale = fmax(scale, fabs(A[i]));
    double tol = 64.0 * m * DBL_EPSILON * scale, col_tol = sqrt(tol * scale);
    for (int k = 0; k < m; k++) {
        double d = A[k + k * m];
        if (d < -tol)
            return false;
        if (d <= tol) {
            for (int i = k + 1; i < m; i++)
                if (fabs(A[i + k * m]) > col_tol)
                    return false;
            continue;
        }
        for (int j = k + 1; j < m; j++)
            for (int i = j; i < m; i++)
                A[i + j * m] -= A[i + k * m] * A[j + k * m] / d;
    }
    return true;
}

/* Groups the unknowns by their part's root in m (order, first). */
static void group_by_part(pwork *w, symmat *m)
{
    size_t n = w->n;
    memset(w->first, 0, (n + 1) * sizeof(int));
    for (size_t j = 0; j < n; j++)
        w->first[root(m->up, (int)j) + 1]++;
    for (size_t r = 0; r < n; r++)
        w->first[r + 1] += w->first[r];
    int *next = w->count; /* the counts are spent by now */
    memcpy(next, w->first, n * sizeof(int));
    for (size_t j = 0; j < n; j++)
        w->order[next[root(m->up, (int)j)]++] = (int)j;
}

/* The dense test on the part rooted at r of the G (is_g) or C matrix. */
static bool part_dense(pwork *w, const symmat *m, int r, bool is_g)
{
    int lo = w->first[r], size = w->first[r + 1] - lo;
    double *A = w->dense;
    memset(A, 0, (size_t)size * (size_t)size * sizeof(double));
    for (int a = 0; a < size; a++) {
        size_t j = (size_t)w->order[lo + a];
        A[a + a * size] = m->d[j];
        pair_iter it = pairs_of(w, j);
        size_t i = 0;
        double g = 0, c = 0, skew = 0;
        while (next_pair(w, j, &it, &i, &g, &c, &skew)) {
            for (int b = 0; b < size; b++)
                if ((size_t)w->order[lo + b] == i)
                    A[b + a * size] = is_g ? g : c;
        }
    }
    return dense_psd(A, size);
}

/* Blocks holding a part of m that no test shows positive semidefinite become bad. */
static void judge_parts(pwork *w, symmat *m, bool is_g)
{
    bool grouped = false;
    for (size_t r = 0; r < w->n; r++) {
        if (m->up[r] != (int)r || (m->fail[r] & FAIL_PLAIN) == 0 || (m->fail[r] & FAIL_SCALED) == 0)
            continue;
        if (w->bad[w->blk[r]])
            continue;
        if (m->size[r] > TB_PASSIVE_DENSE) {
            w->bad[w->blk[r]] = 1;
            continue;
        }
        if (!grouped)
            group_by_part(w, m);
        grouped = true;
        if (!part_dense(w, m, (int)r, is_g))
            w->bad[w->blk[r]] = 1;
    }
}

static void summarise(const pwork *w, size_t nb, tb_passive *out)
{
    *out = (tb_passive){.blocks = nb, .first_active = SIZE_MAX};
    for (size_t b = 0; b < nb; b++) {
        if (!w->bad[b])
            continue;
        size_t size = (size_t)(w->R[b + 1] - w->R[b]);
        out->active_blocks++;
        if (size > out->largest_active) {
            out->largest_active = size;
            out->first_active = (size_t)w->P[w->R[b]];
        }
    }
    out->proven = out->active_blocks == 0;
}

tb_status tb_passive_open_loop(const tb_mna *mna, const tb_loopvec *lv, tb_passive *out)
{
    if (!mna || !out)
        return TB_ERR_USAGE;
    size_t n = mna->n;
    if (n >= (size_t)INT_MAX / 4)
        return TB_ERR_USAGE;
    if (n == 0) {
        *out = (tb_passive){.proven = true, .first_active = SIZE_MAX};
        return TB_OK;
    }
    pwork w = {.mna = mna, .n = n, .lv = lv};
    if (!work_alloc(&w, n, mna->nnz)) {
        work_free(&w);
        return TB_ERR_NOMEM;
    }
    tb_m0_pattern(mna, lv, w.Fp, w.Fi, w.Fk); /* M0's entries non-zero at some s, by mna position */
    transpose(&w);
    size_t nb = blocks(&w);
    first_pass(&w);
    second_pass(&w);
    mark_parts(&w, &w.g);
    mark_parts(&w, &w.c);
    judge_parts(&w, &w.g, true);
    judge_parts(&w, &w.c, false);
    summarise(&w, nb, out);
    work_free(&w);
    return TB_OK;
}
