/* src/paramsens.c: sensitivities to parameters, by the chain rule through the element values they set */
#include "paramsens.h"

#include <math.h>
#include <stdint.h>

#include "alloc.h"
#include "paramdep.h"
#include "spreadcard.h"

/* Relative step of the central difference: its truncation error is O(h^2) relative for a
 * smooth expression, its rounding O(eps/h) = 2e-10 (common practice). */
#define STEP 1e-6

static bool reported(const tb_circuit *ckt, size_t q)
{
    return tb_spreadcard_tunable(ckt, q) && ckt->params->q[q].value != 0 && ckt->params->q[q].label;
}

size_t tb_paramsens_count(const tb_circuit *ckt)
{
    size_t n = 0;
    for (size_t q = 0; ckt->params && q < ckt->params->count && n < TB_PARAMSENS_MAX; q++)
        n += reported(ckt, q);
    return n;
}

/* to += w * from, figure by figure; a figure absent in `from` leaves `to` without it. */
static void add_weighted(tb_sens_entry *to, const tb_sens_entry *from, double w)
{
    to->has_T = to->has_T && from->has_T;
    to->T_mag += w * from->T_mag;
    to->T_phase_deg += w * from->T_phase_deg;
    to->has_A = to->has_A && from->has_A;
    to->A_mag += w * from->A_mag;
    to->has_A_inf = to->has_A_inf && from->has_A_inf;
    to->A_inf_mag += w * from->A_inf_mag;
    to->has_unity = to->has_unity && from->has_unity;
    to->unity += w * from->unity;
    to->has_pm = to->has_pm && from->has_pm;
    to->pm_deg_pct += w * from->pm_deg_pct;
    to->has_gm = to->has_gm && from->has_gm;
    to->gm_db_pct += w * from->gm_db_pct;
}

/* Parameter q's entry from the element values at p (1 + STEP) (hi) and p (1 - STEP) (lo),
 * each elem_count doubles preset to the netlist's values (and left so); pos[e] is element
 * e's entry. An expression that fails beside the nominal value leaves the entry absent. */
static tb_status one_param(const tb_circuit *ckt, size_t q, const size_t *pos, const tb_sens_entry *elem,
                           double *lo, double *hi, tb_sens_entry *out)
{
    const tb_pquant *x = &ckt->params->q[q];
    *out = (tb_sens_entry){.element = x->label, .value = x->value, .has_T = true, .has_A = true,
                           .has_A_inf = true, .has_unity = true, .has_pm = true, .has_gm = true};
    tb_pplan *pl = NULL;
    if (tb_pplan_new(ckt->params, &q, 1, &pl))
        return TB_ERR_NOMEM;
    double *work = tb_malloc(tb_pplan_work(pl) + 1, sizeof(double));
    double up = x->value * (1 + STEP), down = x->value * (1 - STEP);
    bool ok = work && tb_pplan_apply(pl, &up, work, hi) && tb_pplan_apply(pl, &down, work, lo);
    for (size_t e = 0; ok && e < ckt->elem_count; e++)
        if (hi[e] != lo[e] && pos[e] != SIZE_MAX)
            add_weighted(out, &elem[pos[e]], (hi[e] - lo[e]) / (2 * STEP * ckt->elems[e].value));
    for (size_t e = 0; e < ckt->elem_count; e++)
        hi[e] = lo[e] = ckt->elems[e].value;
    if (!ok)
        *out = (tb_sens_entry){.element = x->label, .value = x->value};
    tb_status st = work ? TB_OK : TB_ERR_NOMEM;
    tb_free(work);
    tb_pplan_free(pl);
    return st;
}

tb_status tb_paramsens_fill(const tb_circuit *ckt, const tb_sens_entry *elem, tb_sens_entry *out)
{
    size_t count = tb_paramsens_count(ckt);
    if (count == 0)
        return TB_OK;
    size_t n = ckt->elem_count ? ckt->elem_count : 1;
    size_t *pos = tb_malloc(n, sizeof(size_t));
    double *lo = tb_malloc(n, sizeof(double));
    double *hi = tb_malloc(n, sizeof(double));
    tb_status st = pos && lo && hi ? TB_OK : TB_ERR_NOMEM;
    for (size_t i = 0, e = 0; !st && e < ckt->elem_count; e++) {
        lo[e] = hi[e] = ckt->elems[e].value;
        pos[e] = tb_spreadcard_valued(ckt->elems[e].kind) ? i++ : SIZE_MAX;
    }
    for (size_t q = 0, i = 0; !st && i < count; q++)
        if (reported(ckt, q))
            st = one_param(ckt, q, pos, elem, lo, hi, &out[i++]);
    tb_free(pos);
    tb_free(lo);
    tb_free(hi);
    return st;
}
