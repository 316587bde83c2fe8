/* src/census.c: the return ratio of every controlled source, marked or not, over the sweep */
#include "census.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "alloc.h"
#include "crossing.h"
#include "loop.h"
#include "poles.h"
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
    bool falling[TB_CENSUS_CROSSINGS];
    tb_census_entry *entry;
} source;

struct tb_census {
    const tb_circuit *ckt;
    const tb_mna *mna;
    tb_census_entry *entries; /* count, handed to the result by tb_census_end */
    source *src;
    size_t count;
    size_t npoints;
    double complex *W; /* per lane, count columns of n */
    double complex *q; /* count x (1 + npoints): q = k v'w of each source at DC, then at each grid point */
};
typedef struct tb_census census;


/* T of source s from q = k v'w, w = M^-1 u; false when T is infinite (1 - q = 0). */
static bool ratio(const source *s, double complex q, double complex *T)
{
    if (cabs(1.0 - q) <= TB_LOOP_INF_TOL)
        return false;
    *T = q / (1.0 - q);
    if (cabs(q) > TB_LOOP_ZERO_TOL)
        s->entry->in_loop = true;
    return true;
}

static double complex q_of(const source *s, const double complex *w)
{
    return s->k * tb_svec_dot(&s->v, w);
}

/* W = M^-1 u of sources [first, first + count) into W on the factorization solver holds. */
static tb_status solve_sources(const census *cs, tb_solver *solver, size_t first, size_t count,
                               double complex *W)
{
    size_t n = cs->mna->n;
    for (size_t i = 0; i < count; i++) {
        memset(W + i * n, 0, n * sizeof(double complex));
        tb_svec_axpy(&cs->src[first + i].u, 1.0, W + i * n);
    }
    return tb_solver_solve(solver, W, count);
}

/* Takes one sample of source s at f: the largest |T|, unity brackets, unwrapped phase. */
static void update(source *s, double f, double complex q)
{
    tb_census_entry *e = s->entry;
    double complex T = 0;
    bool inf = !ratio(s, q, &T);
    e->t_infinite = e->t_infinite || inf;
    if (!s->have_prev && !inf) { /* the first sample: DC, or the lowest sweep point */
        e->has_T_dc = true;
        e->T_dc = T;
    }
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
        s->falling[s->brackets] = cabs(T) < 1.0;
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
    size_t n = cs->mna->n;
    double complex *W = cs->W + pt->lane * cs->count * n;
    tb_status st = solve_sources(cs, pt->solver, 0, cs->count, W);
    if (st)
        return st;
    size_t slot = pt->index == TB_SWEEP_DC ? 0 : 1 + pt->index;
    for (size_t i = 0; i < cs->count; i++)
        cs->q[i * (1 + cs->npoints) + slot] = q_of(&cs->src[i], W + i * n);
    return TB_OK;
}

/* The samples of every source in frequency order, DC first when it was solved. */
static void sequential_pass(census *cs, const tb_result *res)
{
    for (size_t i = 0; i < cs->count; i++) {
        const double complex *q = cs->q + i * (1 + cs->npoints);
        if (res->has_dc)
            update(&cs->src[i], 0.0, q[0]);
        for (size_t p = 0; p < cs->npoints; p++)
            update(&cs->src[i], res->freqs[p], q[1 + p]);
    }
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
        st = solve_sources(rc->cs, rc->probe->solver, rc->i, 1, rc->cs->W);
    if (st)
        return st;
    const source *s = &rc->cs->src[rc->i];
    if (!ratio(s, q_of(s, rc->cs->W), &rc->T))
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
        e->unity_falling[e->unity_count] = s->falling[b];
        e->margin_deg[e->unity_count++] = margin;
        if (!s->falling[b])
            continue; /* a phase margin belongs to a crossing where |T| falls through 1 */
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

/* Largest |T| first; ties (the sources of one loop) marked first, then in name order, so
 * the ranking does not depend on the sort. */
static int by_max_T(const void *pa, const void *pb)
{
    const tb_census_entry *a = pa, *b = pb;
    if (a->max_T_db != b->max_T_db)
        return a->max_T_db > b->max_T_db ? -1 : 1;
    if (a->marked != b->marked)
        return a->marked ? -1 : 1;
    return strcmp(a->source, b->source);
}

/* The source a later entry's loop is named by: a marked source with the same T, else the
 * first (highest ranked) unmarked one of its local loop. */
static void group(tb_census_entry *entries, size_t count)
{
    for (size_t i = 0; i < count; i++) {
        tb_census_entry *e = &entries[i];
        for (size_t j = 0; j < count && !e->marked && !e->same_loop_as; j++)
            if (entries[j].marked && same_ratio(e, &entries[j]))
                e->same_loop_as = entries[j].source;
        for (size_t j = 0; j < i && !e->marked && !e->same_loop_as; j++)
            if (!entries[j].marked && !entries[j].same_loop_as && same_ratio(e, &entries[j]))
                e->same_loop_as = entries[j].source;
        e->flagged = !e->marked && !e->same_loop_as && e->in_loop && (e->max_T_db >= 0 || e->t_infinite);
        e->pm_ok = true;
    }
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
    tb_free(cs->q);
    tb_free(cs);
}

tb_status tb_census_begin(const tb_circuit *ckt, const tb_mna *mna, size_t npoints, size_t lanes,
                          tb_census **out)
{
    size_t total = 0;
    for (size_t i = 0; i < ckt->elem_count; i++)
        total += tb_elem_is_controlled(ckt->elems[i].kind);
    census *cs = tb_calloc(1, sizeof(*cs));
    if (!cs)
        return TB_ERR_NOMEM;
    *cs = (census){.ckt = ckt, .mna = mna, .npoints = npoints};
    size_t slots = total ? total : 1;
    cs->entries = tb_calloc(slots, sizeof(tb_census_entry));
    cs->src = tb_calloc(slots, sizeof(source));
    cs->W = tb_malloc(lanes * slots, mna->n * sizeof(double complex)); /* lanes <= TB_SWEEP_MAX_LANES */
    cs->q = tb_calloc(slots, (1 + npoints) * sizeof(double complex));
    if (!cs->entries || !cs->src || !cs->W || !cs->q) {
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
    sequential_pass(cs, res);
    for (size_t i = 0; i < cs->count; i++) {
        tb_status st = refine(cs, probe, i);
        if (st)
            return st;
    }
    tb_census_entry *entries = cs->entries;
    qsort(entries, cs->count, sizeof(tb_census_entry), by_max_T);
    group(entries, cs->count);
    res->census = entries;
    res->census_count = cs->count;
    cs->entries = NULL;
    return TB_OK;
}

/* Right-half-plane poles of the circuit with loop lv's gain and source s's gain at zero
 * (s's stamp k u v' taken out of G at its positions); SIZE_MAX when QZ fails. */
static size_t rhp_without(const tb_mna *mna, const tb_loopvec *lv, const source *s, double *Gx,
                          tb_pole_check *check, tb_pole_found *eig, tb_status *st)
{
    memcpy(Gx, mna->Gx, mna->nnz * sizeof(double));
    tb_loopvec lv0 = *lv; /* its own entries hold G without lv's stamp: take s's out there too */
    for (int i = 0; i < s->u.count; i++)
        for (int j = 0; j < s->v.count; j++) {
            size_t k = tb_mna_position(mna, s->u.idx[i], s->v.idx[j]);
            double stamp = s->k * s->u.coef[i] * s->v.coef[j];
            if (k != SIZE_MAX)
                Gx[k] -= stamp;
            for (int o = 0; o < lv0.own_count; o++)
                if (lv0.own_pos[o] == k)
                    lv0.own_g0[o] -= stamp;
        }
    tb_mna both = *mna;
    both.Gx = Gx;
    size_t count = 0;
    double scale = 0;
    *st = tb_poles_find(&both, &lv0, check, NULL, 0, eig, NULL, &count, &scale);
    if (*st)
        return SIZE_MAX;
    size_t rhp = 0;
    for (size_t i = 0; i < count; i++)
        rhp += eig[i].place == TB_POLE_RIGHT;
    return rhp;
}

static bool is_marked_name(const tb_circuit *ckt, const char *name)
{
    for (size_t l = 0; l < ckt->loop_count; l++)
        if (ckt->elems[ckt->loops[l].elem].name == name)
            return true;
    return false;
}

static const source *source_of(const census *cs, const tb_census_entry *e)
{
    for (size_t i = 0; i < cs->count; i++)
        if (cs->ckt->elems[cs->src[i].elem].name == e->source)
            return &cs->src[i];
    return NULL;
}

/* Which flagged local cells are unstable on their own, for one marked loop with P > 0. */
static tb_status cells_of_loop(const census *cs, size_t l, const tb_stability *stab, tb_result *res,
                               double *Gx, tb_pole_check *check, tb_pole_found *eig)
{
    for (size_t i = 0; i < res->census_count; i++) {
        tb_census_entry *e = &res->census[i];
        const source *s = source_of(cs, e);
        bool own_loop = !e->same_loop_as || !is_marked_name(cs->ckt, e->same_loop_as);
        if (e->marked || !e->in_loop || !own_loop || e->unstable_alone || !s)
            continue;
        tb_status st = TB_OK;
        size_t rhp = rhp_without(cs->mna, &cs->mna->loops[l], s, Gx, check, eig, &st);
        if (st == TB_ERR_NOMEM)
            return st;
        if (rhp != SIZE_MAX && rhp < stab->ol_rhp) {
            e->unstable_alone = true;
            e->flagged = !e->same_loop_as; /* a local loop to look at, whatever its |T| */
            e->relies_on = cs->ckt->elems[cs->mna->loops[l].elem].name;
        }
    }
    return TB_OK;
}

tb_status tb_census_judge(const tb_census *cs, tb_probe *probe, const tb_options *limits, tb_result *res)
{
    for (size_t i = 0; i < res->census_count; i++) {
        tb_census_entry *e = &res->census[i];
        e->pm_ok = !e->flagged || !e->has_phase_margin || e->phase_margin_deg >= limits->pm_min_deg;
    }
    bool any = false;
    for (size_t l = 0; res->stab && l < res->nloops; l++)
        any = any || (res->stab[l].has_poles && res->stab[l].ol_rhp > 0);
    if (!any)
        return TB_OK;
    size_t n = cs->mna->n;
    double *Gx = tb_malloc(cs->mna->nnz ? cs->mna->nnz : 1, sizeof(double));
    tb_pole_found *eig = tb_malloc(n ? n : 1, sizeof(tb_pole_found));
    tb_pole_check check = {tb_probe_take_solver(probe), probe->Mx, 0};
    tb_status st = Gx && eig ? TB_OK : TB_ERR_NOMEM;
    for (size_t l = 0; !st && l < res->nloops; l++)
        if (res->stab[l].has_poles && res->stab[l].ol_rhp > 0)
            st = cells_of_loop(cs, l, &res->stab[l], res, Gx, &check, eig);
    tb_free(Gx);
    tb_free(eig);
    return st;
}
