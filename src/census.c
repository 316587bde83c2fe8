/* src/census.c: the return ratio of every controlled source, marked or not, over the sweep */
#include "census.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "alloc.h"
#include "crossing.h"
#include "loop.h"
#include "measure.h"

static const double TWO_PI = 6.28318530717958647692528676655900577;

/* One controlled source: M = M0 + k u v' (design.md), and its running state. */
typedef struct {
    size_t elem;
    double k;
    tb_svec u;
    tb_svec v;
    bool have_prev;
    double prev_f;
    double complex prev_T;
    bool prev_inf;
    double prev_deg;
    size_t brackets;
    double lo[TB_CENSUS_CROSSINGS];
    double hi[TB_CENSUS_CROSSINGS];
    double deg_lo[TB_CENSUS_CROSSINGS];
    tb_census_entry *entry;
} source;

typedef struct {
    const tb_circuit *ckt;
    const tb_mna *mna;
    tb_solver *solver;
    double *Mx;
    source *src;
    size_t count;
    double complex *W; /* count columns of n */
} census;


/* The unknown numbering of mna.c: node i > 0 is unknown i - 1, branches follow the nodes. */
static void put(tb_svec *sv, size_t idx, double coef)
{
    if (idx == SIZE_MAX)
        return;
    sv->idx[sv->count] = idx;
    sv->coef[sv->count++] = coef;
}

static size_t node_unknown(int node)
{
    return node == 0 ? SIZE_MAX : (size_t)node - 1;
}

static size_t branch_unknown(const tb_circuit *ckt, const tb_element *e)
{
    return ckt->node_count - 1 + (size_t)e->branch;
}

static bool source_vectors(const tb_circuit *ckt, size_t i, source *s)
{
    const tb_element *e = &ckt->elems[i];
    if (e->kind != TB_EL_E && e->kind != TB_EL_G && e->kind != TB_EL_F && e->kind != TB_EL_H)
        return false;
    *s = (source){.elem = i, .k = e->value};
    if (e->kind == TB_EL_G || e->kind == TB_EL_F) {
        put(&s->u, node_unknown(e->node[0]), 1.0);
        put(&s->u, node_unknown(e->node[1]), -1.0);
    } else {
        put(&s->u, branch_unknown(ckt, e), -1.0);
    }
    if (e->kind == TB_EL_E || e->kind == TB_EL_G) {
        put(&s->v, node_unknown(e->node[2]), 1.0);
        put(&s->v, node_unknown(e->node[3]), -1.0);
    } else {
        put(&s->v, branch_unknown(ckt, &ckt->elems[e->ctrl]), 1.0);
    }
    return true;
}

/* T of source s from w = M^-1 u; false when T is infinite (1 - q = 0). */
static bool ratio(const source *s, const double complex *w, double complex *T)
{
    double complex q = s->k * tb_svec_dot(&s->v, w);
    if (cabs(1.0 - q) <= TB_LOOP_INF_TOL)
        return false;
    *T = q / (1.0 - q);
    if (cabs(q) > TB_LOOP_ZERO_TOL)
        s->entry->in_loop = true;
    return true;
}

/* Factors M(j 2 pi f) (fresh, or reusing the pivot order) and solves for the u of
 * sources [first, first + count). */
static tb_status solve_at(census *cs, double f, bool fresh, double rcond_drop, size_t first,
                          size_t count)
{
    size_t n = cs->mna->n;
    size_t culprit = 0;
    tb_mna_values(cs->mna, TWO_PI * f, cs->Mx);
    tb_status st = fresh ? tb_solver_factor(cs->solver, cs->Mx, &culprit)
                         : tb_solver_refactor(cs->solver, cs->Mx, rcond_drop, &culprit);
    if (st)
        return st;
    for (size_t i = 0; i < count; i++) {
        memset(cs->W + i * n, 0, n * sizeof(double complex));
        tb_svec_axpy(&cs->src[first + i].u, 1.0, cs->W + i * n);
    }
    return tb_solver_solve(cs->solver, cs->W, count);
}

/* Takes one sample of source s at f: the largest |T|, unity brackets, unwrapped phase. */
static void update(source *s, double f, const double complex *w)
{
    tb_census_entry *e = s->entry;
    double complex T = 0;
    bool inf = !ratio(s, w, &T);
    e->t_infinite = e->t_infinite || inf;
    double db = inf ? 0 : 20.0 * log10(fmax(cabs(T), 1e-15));
    if (!inf && db > e->max_T_db) {
        e->max_T_db = db;
        e->max_T_hz = f;
    }
    double deg = inf ? s->prev_deg : carg(T) * TB_DEG_PER_RAD;
    if (s->have_prev && !inf)
        deg = s->prev_deg + tb_wrap180(deg - s->prev_deg);
    bool crossed = s->have_prev && !inf && !s->prev_inf && s->prev_f > 0 &&
                   (cabs(s->prev_T) < 1.0) != (cabs(T) < 1.0);
    if (crossed && s->brackets < TB_CENSUS_CROSSINGS) {
        s->lo[s->brackets] = s->prev_f;
        s->hi[s->brackets] = f;
        s->deg_lo[s->brackets++] = s->prev_deg;
    }
    s->have_prev = true;
    s->prev_f = f;
    s->prev_T = T;
    s->prev_inf = inf;
    s->prev_deg = deg;
}

static tb_status sweep(census *cs, const tb_result *res, double rcond_drop)
{
    tb_status st = solve_at(cs, 0.0, true, rcond_drop, 0, cs->count);
    if (st == TB_OK)
        for (size_t i = 0; i < cs->count; i++)
            update(&cs->src[i], 0.0, cs->W + i * cs->mna->n);
    else if (st != TB_ERR_SINGULAR)
        return st;
    for (size_t p = 0; p < res->npoints; p++) {
        if ((st = solve_at(cs, res->freqs[p], p == 0, rcond_drop, 0, cs->count)))
            return st;
        for (size_t i = 0; i < cs->count; i++)
            update(&cs->src[i], res->freqs[p], cs->W + i * cs->mna->n);
    }
    return TB_OK;
}

typedef struct {
    census *cs;
    size_t i;
    double complex T;
} root_ctx;

static tb_status log_magnitude(void *ctx, double x, double *y)
{
    root_ctx *rc = ctx;
    tb_status st = solve_at(rc->cs, exp(x), true, 0, rc->i, 1);
    if (st)
        return st;
    if (!ratio(&rc->cs->src[rc->i], rc->cs->W, &rc->T))
        return TB_ERR_NUMERIC;
    *y = log(fmax(cabs(rc->T), 1e-300));
    return TB_OK;
}

/* Brent on ln|T| inside each bracket; the phase margin at each root. */
static tb_status refine(census *cs, size_t i)
{
    source *s = &cs->src[i];
    tb_census_entry *e = s->entry;
    for (size_t b = 0; b < s->brackets; b++) {
        root_ctx rc = {cs, i, 0};
        double ya = 0, yb = 0, x = 0;
        tb_status st = log_magnitude(&rc, log(s->lo[b]), &ya);
        if (!st)
            st = log_magnitude(&rc, log(s->hi[b]), &yb);
        if (!st)
            st = tb_brent_root(log_magnitude, &rc, log(s->lo[b]), log(s->hi[b]), ya, yb, 1e-12, 100, &x);
        if (!st)
            st = log_magnitude(&rc, x, &ya);
        if (st == TB_ERR_NOMEM)
            return st;
        if (st)
            continue; /* a singular point on the axis: the crossing is left out */
        double deg = s->deg_lo[b] + tb_wrap180(carg(rc.T) * TB_DEG_PER_RAD - s->deg_lo[b]);
        double margin = tb_wrap180(deg + 180.0);
        e->unity_hz[e->unity_count] = exp(x);
        e->margin_deg[e->unity_count++] = margin;
        if (!e->has_phase_margin || margin < e->phase_margin_deg)
            e->phase_margin_deg = margin;
        e->has_phase_margin = true;
    }
    return TB_OK;
}

static bool near(double a, double b)
{
    return fabs(a - b) <= 1e-6 * fmax(fabs(a), fabs(b)) + 1e-9;
}

/* Every source of a single loop sees the same T: the same peak and the same
 * unity crossings (to 1e-6) are taken as the same loop. */
static bool same_ratio(const tb_census_entry *a, const tb_census_entry *b)
{
    if (!a->in_loop || !b->in_loop || a->unity_count != b->unity_count || a->t_infinite != b->t_infinite ||
        !near(a->max_T_db, b->max_T_db) || !near(a->max_T_hz, b->max_T_hz))
        return false;
    for (size_t i = 0; i < a->unity_count; i++)
        if (!near(a->unity_hz[i], b->unity_hz[i]))
            return false;
    return true;
}

static int by_max_T(const void *pa, const void *pb)
{
    const tb_census_entry *a = pa, *b = pb;
    return a->max_T_db > b->max_T_db ? -1 : a->max_T_db < b->max_T_db;
}

static bool is_marked(const tb_circuit *ckt, size_t elem)
{
    for (size_t l = 0; l < ckt->loop_count; l++)
        if (ckt->loops[l].elem == elem)
            return true;
    return false;
}

tb_status tb_census_run(const tb_circuit *ckt, const tb_mna *mna, tb_solver *solver, double *Mx,
                        double rcond_drop, tb_result *res)
{
    census cs = {.ckt = ckt, .mna = mna, .solver = solver, .Mx = Mx};
    size_t total = 0;
    for (size_t i = 0; i < ckt->elem_count; i++) {
        tb_elem_kind kind = ckt->elems[i].kind;
        total += kind == TB_EL_E || kind == TB_EL_G || kind == TB_EL_F || kind == TB_EL_H;
    }
    res->census = tb_calloc(total ? total : 1, sizeof(tb_census_entry));
    cs.src = tb_calloc(total ? total : 1, sizeof(source));
    cs.W = tb_malloc((total ? total : 1) * mna->n, sizeof(double complex));
    tb_status st = TB_ERR_NOMEM;
    if (!res->census || !cs.src || !cs.W)
        goto done;
    for (size_t i = 0; i < ckt->elem_count; i++) {
        if (!source_vectors(ckt, i, &cs.src[cs.count]))
            continue;
        tb_census_entry *e = &res->census[cs.count];
        *e = (tb_census_entry){.source = ckt->elems[i].name, .marked = is_marked(ckt, i), .max_T_db = -300};
        cs.src[cs.count++].entry = e;
    }
    st = total ? sweep(&cs, res, rcond_drop) : TB_OK;
    for (size_t i = 0; i < cs.count && !st; i++)
        st = refine(&cs, i);
    if (st)
        goto done;
    for (size_t i = 0; i < cs.count; i++) {
        tb_census_entry *e = &res->census[i];
        for (size_t j = 0; j < cs.count && !e->marked; j++)
            if (res->census[j].marked && same_ratio(e, &res->census[j]))
                e->same_loop_as = res->census[j].source;
        e->flagged = !e->marked && !e->same_loop_as && e->in_loop && (e->max_T_db >= 0 || e->t_infinite);
    }
    qsort(res->census, cs.count, sizeof(tb_census_entry), by_max_T);
    res->census_count = cs.count;
done:
    tb_free(cs.src);
    tb_free(cs.W);
    return st;
}

tb_status tb_census_get(const tb_result *res, const tb_census_entry **entries, size_t *count)
{
    if (!res || !entries || !count)
        return TB_ERR_USAGE;
    *entries = res->census;
    *count = res->census ? res->census_count : 0;
    return TB_OK;
}
