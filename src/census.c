/* src/census.c: the return ratio of every controlled source, marked or not, over the sweep */
#include "census.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "alloc.h"
#include "crossing.h"
#include "loop.h"
#include "units.h"


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

struct tb_census {
    const tb_circuit *ckt;
    const tb_mna *mna;
    tb_census_entry *entries; /* count, handed to the result by tb_census_end */
    source *src;
    size_t count;
    double complex *W; /* count columns of n */
};
typedef struct tb_census census;


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

/* W = M^-1 u of sources [first, first + count) on the factorization solver holds. */
static tb_status solve_sources(census *cs, tb_solver *solver, size_t first, size_t count)
{
    size_t n = cs->mna->n;
    for (size_t i = 0; i < count; i++) {
        memset(cs->W + i * n, 0, n * sizeof(double complex));
        tb_svec_axpy(&cs->src[first + i].u, 1.0, cs->W + i * n);
    }
    return tb_solver_solve(solver, cs->W, count);
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

tb_status tb_census_at(void *self, const tb_sweep_point *pt)
{
    census *cs = self;
    tb_status st = solve_sources(cs, pt->solver, 0, cs->count);
    if (st)
        return st;
    for (size_t i = 0; i < cs->count; i++)
        update(&cs->src[i], pt->f, cs->W + i * cs->mna->n);
    return TB_OK;
}

typedef struct {
    census *cs;
    tb_probe *probe;
    size_t i;
    double complex T;
} root_ctx;

static tb_status log_magnitude(void *ctx, double x, double *y)
{
    root_ctx *rc = ctx;
    size_t culprit = 0;
    tb_status st = tb_probe_factor(rc->probe, exp(x), true, &culprit);
    if (!st)
        st = solve_sources(rc->cs, rc->probe->solver, rc->i, 1);
    if (st)
        return st;
    if (!ratio(&rc->cs->src[rc->i], rc->cs->W, &rc->T))
        return TB_ERR_NUMERIC;
    *y = log(fmax(cabs(rc->T), 1e-300));
    return TB_OK;
}

/* Brent on ln|T| inside each bracket; the phase margin at each root. */
static tb_status refine(census *cs, tb_probe *probe, size_t i)
{
    source *s = &cs->src[i];
    tb_census_entry *e = s->entry;
    for (size_t b = 0; b < s->brackets; b++) {
        root_ctx rc = {cs, probe, i, 0};
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

void tb_census_free(tb_census *cs)
{
    if (!cs)
        return;
    tb_free(cs->entries);
    tb_free(cs->src);
    tb_free(cs->W);
    tb_free(cs);
}

tb_status tb_census_begin(const tb_circuit *ckt, const tb_mna *mna, tb_census **out)
{
    size_t total = 0;
    for (size_t i = 0; i < ckt->elem_count; i++)
        total += tb_elem_is_controlled(ckt->elems[i].kind);
    census *cs = tb_calloc(1, sizeof(*cs));
    if (!cs)
        return TB_ERR_NOMEM;
    *cs = (census){.ckt = ckt, .mna = mna};
    cs->entries = tb_calloc(total ? total : 1, sizeof(tb_census_entry));
    cs->src = tb_calloc(total ? total : 1, sizeof(source));
    cs->W = tb_malloc((total ? total : 1) * mna->n, sizeof(double complex));
    if (!cs->entries || !cs->src || !cs->W) {
        tb_census_free(cs);
        return TB_ERR_NOMEM;
    }
    for (size_t i = 0; i < ckt->elem_count; i++) {
        if (!tb_elem_is_controlled(ckt->elems[i].kind))
            continue;
        tb_loopvec lv = tb_mna_source_vectors(ckt, i);
        tb_census_entry *e = &cs->entries[cs->count];
        *e = (tb_census_entry){.source = ckt->elems[i].name, .marked = is_marked(ckt, i), .max_T_db = -300};
        cs->src[cs->count++] = (source){.elem = i, .k = lv.k, .u = lv.u, .v = lv.v, .entry = e};
    }
    *out = cs;
    return TB_OK;
}

tb_status tb_census_end(tb_census *cs, tb_probe *probe, tb_result *res)
{
    for (size_t i = 0; i < cs->count; i++) {
        tb_status st = refine(cs, probe, i);
        if (st)
            return st;
    }
    tb_census_entry *entries = cs->entries;
    for (size_t i = 0; i < cs->count; i++) {
        tb_census_entry *e = &entries[i];
        for (size_t j = 0; j < cs->count && !e->marked; j++)
            if (entries[j].marked && same_ratio(e, &entries[j]))
                e->same_loop_as = entries[j].source;
        e->flagged = !e->marked && !e->same_loop_as && e->in_loop && (e->max_T_db >= 0 || e->t_infinite);
    }
    qsort(entries, cs->count, sizeof(tb_census_entry), by_max_T);
    res->census = entries;
    res->census_count = cs->count;
    cs->entries = NULL;
    return TB_OK;
}
