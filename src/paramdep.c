/* src/paramdep.c: which element values follow which parameters, kept from parsing to re-evaluate them per run */
#include "paramdep.h"

#include <stdint.h>
#include <string.h>

#include "alloc.h"
#include "expr.h"
#include "names.h"

/* Most quantities and references one circuit records (each instance's parameters count). */
#define MAX_QUANTITIES ((size_t)100000000)

tb_params *tb_params_new(void)
{
    return tb_calloc(1, sizeof(tb_params));
}

void tb_params_free(tb_params *P)
{
    if (!P)
        return;
    tb_free(P->q);
    tb_free(P->refs);
    tb_free(P->deps);
    tb_free(P->rec);
    tb_free(P);
}

/* ---- while parsing ---------------------------------------------------------------- */

size_t tb_params_mark(const tb_params *P)
{
    return P->rec_count;
}

tb_status tb_params_ref(tb_params *P, size_t offset, size_t q)
{
    if (tb_grow(&P->rec, &P->rec_cap, P->rec_count + 1, sizeof(tb_pref), MAX_QUANTITIES))
        return TB_ERR_NOMEM;
    P->rec[P->rec_count++] = (tb_pref){offset, q};
    return TB_OK;
}

size_t tb_params_refs(const tb_params *P, size_t mark)
{
    return P->rec_count - mark;
}

void tb_params_drop(tb_params *P, size_t mark)
{
    P->rec_count = mark;
}

tb_status tb_params_add(tb_params *P, size_t mark, const tb_pquant *proto, size_t *q)
{
    size_t n = P->rec_count - mark;
    if (tb_grow(&P->q, &P->cap, P->count + 1, sizeof(tb_pquant), MAX_QUANTITIES) ||
        tb_grow(&P->refs, &P->ref_cap, P->ref_count + n + 1, sizeof(tb_pref), MAX_QUANTITIES)) {
        tb_params_drop(P, mark);
        return TB_ERR_NOMEM;
    }
    tb_pquant *x = &P->q[P->count];
    *x = *proto;
    x->ref_first = P->ref_count;
    x->ref_count = n;
    x->fixed_loc = proto->loc;
    x->sets = false;
    x->full = NULL;
    if (n)
        memcpy(&P->refs[P->ref_count], &P->rec[mark], n * sizeof(tb_pref));
    P->ref_count += n;
    tb_params_drop(P, mark);
    *q = P->count++;
    P->settled = false;
    return TB_OK;
}

tb_status tb_params_bind(tb_params *P, size_t q, size_t elem)
{
    if (tb_grow(&P->deps, &P->dep_cap, P->dep_count + 1, sizeof(tb_pdep), MAX_QUANTITIES))
        return TB_ERR_NOMEM;
    P->deps[P->dep_count++] = (tb_pdep){elem, q};
    P->q[q].fixed = false;
    P->settled = false;
    return TB_OK;
}

/* ---- after parsing ---------------------------------------------------------------- */

void tb_params_settle(tb_params *P)
{
    if (!P || P->settled)
        return;
    for (size_t d = 0; d < P->dep_count; d++)
        P->q[P->deps[d].q].sets = true;
    for (size_t i = P->count; i-- > 0;) {
        const tb_pquant *x = &P->q[i];
        for (size_t r = 0; r < x->ref_count; r++) {
            tb_pquant *read = &P->q[P->refs[x->ref_first + r].q];
            read->sets = read->sets || x->sets;
            if (x->fixed && !read->fixed) {
                read->fixed = true;
                read->fixed_loc = x->fixed_loc;
            }
        }
    }
    P->settled = true;
}

/* true when x is the parameter called name: PREFIX.NAME, or NAME at the top level. */
static bool is_called(const tb_pquant *x, const char *name)
{
    if (!x->name)
        return false;
    size_t plen = x->prefix ? strlen(x->prefix) : 0;
    if (plen) {
        if (strlen(name) <= plen || name[plen] != '.' || !tb_name_eq_n(x->prefix, name, plen))
            return false;
        name += plen + 1;
    }
    return tb_name_eq(x->name, name);
}

bool tb_params_find(tb_circuit *ckt, const char *name, size_t *q)
{
    const tb_params *P = ckt->params;
    for (size_t i = 0; P && i < P->count; i++) {
        if (is_called(&P->q[i], name)) {
            *q = i;
            return true;
        }
    }
    return false;
}

/* ---- per run ----------------------------------------------------------------------- */

/* A reference of a compiled expression: a slot of the workspace, or a constant. */
typedef struct {
    size_t offset;
    size_t slot;  /* SIZE_MAX: value */
    double value;
} cref;

typedef struct {
    const char *text;
    size_t len;
    size_t first, count; /* into refs */
} cexpr;

/* The workspace holds the targets (slots 0 .. ntargets - 1), then each expression's value. */
struct tb_pplan {
    size_t ntargets;
    cexpr *ex;
    size_t nex;
    cref *refs;
    size_t nrefs;
    tb_pdep *deps; /* (element, slot) */
    size_t ndeps;
};

void tb_pplan_free(tb_pplan *pl)
{
    if (!pl)
        return;
    tb_free(pl->ex);
    tb_free(pl->refs);
    tb_free(pl->deps);
    tb_free(pl);
}

size_t tb_pplan_work(const tb_pplan *pl)
{
    return pl->ntargets + pl->nex;
}

/* Compiles quantity i (which reads an affected slot) as the next expression. */
static void compile_one(tb_pplan *pl, const tb_params *P, size_t i, size_t *slot)
{
    const tb_pquant *x = &P->q[i];
    cexpr *e = &pl->ex[pl->nex];
    *e = (cexpr){x->text, x->len, pl->nrefs, x->ref_count};
    for (size_t r = 0; r < x->ref_count; r++) {
        const tb_pref *ref = &P->refs[x->ref_first + r];
        pl->refs[pl->nrefs++] = (cref){ref->offset, slot[ref->q], P->q[ref->q].value};
    }
    slot[i] = pl->ntargets + pl->nex++;
}

static bool reads_slot(const tb_params *P, size_t i, const size_t *slot)
{
    const tb_pquant *x = &P->q[i];
    for (size_t r = 0; r < x->ref_count; r++)
        if (slot[P->refs[x->ref_first + r].q] != SIZE_MAX)
            return true;
    return false;
}

tb_status tb_pplan_new(const tb_params *P, const size_t *targets, size_t n, tb_pplan **out)
{
    size_t count = P ? P->count : 0;
    tb_pplan *pl = tb_calloc(1, sizeof(tb_pplan));
    size_t *slot = tb_malloc(count ? count : 1, sizeof(size_t));
    if (pl) {
        pl->ex = tb_malloc(count ? count : 1, sizeof(cexpr));
        pl->refs = tb_malloc(P && P->ref_count ? P->ref_count : 1, sizeof(cref));
        pl->deps = tb_malloc(P && P->dep_count ? P->dep_count : 1, sizeof(tb_pdep));
    }
    if (!pl || !slot || !pl->ex || !pl->refs || !pl->deps) {
        tb_free(slot);
        tb_pplan_free(pl);
        return TB_ERR_NOMEM;
    }
    for (size_t i = 0; i < count; i++)
        slot[i] = SIZE_MAX;
    pl->ntargets = n;
    for (size_t t = 0; t < n; t++)
        slot[targets[t]] = t;
    for (size_t i = 0; i < count; i++)
        if (slot[i] == SIZE_MAX && reads_slot(P, i, slot))
            compile_one(pl, P, i, slot);
    for (size_t d = 0; d < (P ? P->dep_count : 0); d++)
        if (slot[P->deps[d].q] != SIZE_MAX)
            pl->deps[pl->ndeps++] = (tb_pdep){P->deps[d].elem, slot[P->deps[d].q]};
    tb_free(slot);
    *out = pl;
    return TB_OK;
}

typedef struct {
    const tb_pplan *pl;
    const cexpr *e;
    const double *work;
} run_ctx;

/* tb_expr_lookup over a compiled expression: the reference at that byte. */
static tb_status run_lookup(void *ctx, const char *name, size_t len, size_t offset, double *value)
{
    (void)name;
    (void)len;
    const run_ctx *c = ctx;
    for (size_t r = 0; r < c->e->count; r++) {
        const cref *ref = &c->pl->refs[c->e->first + r];
        if (ref->offset == offset) {
            *value = ref->slot == SIZE_MAX ? ref->value : c->work[ref->slot];
            return TB_OK;
        }
    }
    return TB_ERR_INPUT; /* not a name the parser saw there: cannot happen */
}

bool tb_pplan_apply(const tb_pplan *pl, const double *tv, double *work, double *values)
{
    for (size_t t = 0; t < pl->ntargets; t++)
        work[t] = tv[t];
    for (size_t i = 0; i < pl->nex; i++) {
        run_ctx c = {pl, &pl->ex[i], work};
        tb_expr_error err;
        if (tb_expr_eval(pl->ex[i].text, pl->ex[i].len, run_lookup, &c, &work[pl->ntargets + i], &err) != TB_OK)
            return false;
    }
    for (size_t d = 0; d < pl->ndeps; d++)
        values[pl->deps[d].elem] = work[pl->deps[d].q];
    return true;
}
