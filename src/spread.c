/* src/spread.c: parameter scans, corners and Monte Carlo: which values each run takes */
#include "spread.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "alloc.h"
#include "paramdep.h"
#include "rng.h"
#include "sensitivity.h"
#include "sweep.h"
#include "spreadrun.h"

void tb_spread_options_init(tb_spread_options *opt)
{
    tb_options_init(&opt->analysis);
    opt->jobs = 1;
    opt->samples = 200;
    opt->seed = 1;
}

/* ---- scans ------------------------------------------------------------------------ */

/* The scan's axes, those on parameters compiled into one re-evaluation. */
typedef struct {
    const tb_spread_cards *sc;
    size_t ntargets;
    size_t target_axis[TB_SCAN_MAX_AXES]; /* the axis of each parameter target */
    tb_pplan *pp;                         /* NULL: no axis on a parameter */
} scan_plan;

/* The parameters take their values first, the element axes after (an element's own axis
 * wins over a parameter that sets it). */
static bool scan_fill(const void *self, size_t run, double *values, double *params, double *work)
{
    const scan_plan *sp = self;
    const tb_spread_cards *sc = sp->sc;
    size_t rest = run;
    for (size_t a = sc->axis_count; a-- > 0;) {
        const tb_scan_axis *axis = &sc->axes[a];
        size_t i = rest % axis->count;
        rest /= axis->count;
        params[a] = axis->values[i];
    }
    for (size_t t = 0; t < sp->ntargets; t++)
        work[t] = params[sp->target_axis[t]];
    if (sp->pp && !tb_pplan_apply(sp->pp, work, work + sp->ntargets, values))
        return false;
    for (size_t a = 0; a < sc->axis_count; a++)
        if (sc->axes[a].param == SIZE_MAX)
            values[sc->axes[a].elem] = params[a];
    return true;
}

tb_status tb_spread_scan(const tb_circuit *ckt, const tb_spread_options *opt, tb_diag *diag, tb_spreadset **out)
{
    if (!ckt || !opt || !out || !ckt->spread || ckt->spread->axis_count == 0)
        return TB_ERR_USAGE;
    const tb_spread_cards *sc = ckt->spread;
    scan_plan sp = {.sc = sc};
    size_t targets[TB_SCAN_MAX_AXES];
    size_t runs = 1;
    for (size_t a = 0; a < sc->axis_count; a++) {
        runs *= sc->axes[a].count;
        if (sc->axes[a].param != SIZE_MAX) {
            sp.target_axis[sp.ntargets] = a;
            targets[sp.ntargets++] = sc->axes[a].param;
        }
    }
    tb_status st = sp.ntargets ? tb_pplan_new(ckt->params, targets, sp.ntargets, &sp.pp) : TB_OK;
    tb_spreadset *set = st ? NULL : tb_spreadset_new(TB_SPREADSET_SCAN, runs, sc->axis_count, ckt->loop_count, 0);
    st = st ? st : set ? TB_OK : TB_ERR_NOMEM;
    for (size_t a = 0; !st && a < sc->axis_count; a++)
        set->param_names[a] = sc->axes[a].param != SIZE_MAX ? ckt->params->q[sc->axes[a].param].label
                                                            : ckt->elems[sc->axes[a].elem].name;
    size_t work = sp.ntargets + (sp.pp ? tb_pplan_work(sp.pp) : 0);
    if (!st)
        st = tb_spreadrun_all(ckt, opt, diag, scan_fill, &sp, work, 0, runs, set);
    tb_pplan_free(sp.pp);
    if (st) {
        tb_spreadset_free(set);
        return st;
    }
    *out = set;
    return TB_OK;
}

/* ---- dimensions: what varies independently -------------------------------------------- */

/* Every item's rule (the last .spread card naming it) and dimension: each grouped rule's
 * group is one dimension, each item of an ungrouped rule another. The items are the
 * elements (0 .. elem_count - 1), then the parameters the cards name (elem_count + k:
 * quantity targets[k]). Runs are given as a matrix z of runs x dims variates (flat: -1..1,
 * gauss: sigmas, pick: index). */
typedef struct {
    const tb_circuit *ckt;
    size_t items;
    const tb_spread_rule **rule; /* per item, or NULL */
    size_t *dim;                 /* per item, or SIZE_MAX */
    size_t dims;
    const tb_spread_rule **dim_rule; /* per dimension: its first item's rule */
    size_t *dim_item;            /* per dimension: its first item */
    double *z;                   /* runs * dims */
    size_t *targets;             /* the parameters' quantities (paramdep.h) */
    size_t ntargets;
    tb_pplan *pp;                /* their re-evaluation; NULL without parameters */
} plan;

static void plan_free(plan *p)
{
    tb_free(p->rule);
    tb_free(p->dim);
    tb_free(p->dim_rule);
    tb_free(p->dim_item);
    tb_free(p->z);
    tb_free(p->targets);
    tb_pplan_free(p->pp);
}

/* The netlist's value of item i. */
static double item_value(const plan *p, size_t i)
{
    size_t E = p->ckt->elem_count;
    return i < E ? p->ckt->elems[i].value : p->ckt->params->q[p->targets[i - E]].value;
}

/* Item i's name in the tables ("R7", "{X1.gbw}"). */
static const char *item_name(const plan *p, size_t i)
{
    size_t E = p->ckt->elem_count;
    return i < E ? p->ckt->elems[i].name : p->ckt->params->q[p->targets[i - E]].label;
}

/* The dimension of group name among those made so far, or SIZE_MAX. */
static size_t group_dim(const plan *p, const char *group)
{
    for (size_t d = 0; d < p->dims; d++)
        if (p->dim_rule[d]->group && tb_name_eq(p->dim_rule[d]->group, group))
            return d;
    return SIZE_MAX;
}

/* true when parameter quantity q is named by rule r (a rule on parameters). */
static bool names_param(const tb_circuit *ckt, const tb_spread_rule *r, size_t q)
{
    const tb_pquant *x = &ckt->params->q[q];
    return r->param && x->full && tb_spreadcard_tunable(ckt, q) && tb_spreadcard_match(r->pattern, x->full);
}

/* The parameters the rules name, in table order, into p->targets. */
static tb_status plan_targets(const tb_circuit *ckt, plan *p)
{
    size_t count = ckt->params ? ckt->params->count : 0;
    p->targets = tb_malloc(count ? count : 1, sizeof(size_t));
    if (!p->targets)
        return TB_ERR_NOMEM;
    for (size_t q = 0; q < count; q++) {
        bool named = false;
        for (const tb_spread_rule *r = ckt->spread->rules; r && !named; r = r->next)
            named = names_param(ckt, r, q);
        if (named)
            p->targets[p->ntargets++] = q;
    }
    return p->ntargets ? tb_pplan_new(ckt->params, p->targets, p->ntargets, &p->pp) : TB_OK;
}

static tb_status plan_make(const tb_circuit *ckt, plan *p)
{
    *p = (plan){.ckt = ckt};
    tb_status st = plan_targets(ckt, p);
    if (st)
        return st;
    size_t E = ckt->elem_count;
    p->items = E + p->ntargets;
    size_t n = p->items ? p->items : 1;
    p->rule = tb_calloc(n, sizeof(*p->rule));
    p->dim = tb_malloc(n, sizeof(size_t));
    p->dim_rule = tb_calloc(n, sizeof(*p->dim_rule));
    p->dim_item = tb_calloc(n, sizeof(size_t));
    if (!p->rule || !p->dim || !p->dim_rule || !p->dim_item)
        return TB_ERR_NOMEM;
    for (const tb_spread_rule *r = ckt->spread->rules; r; r = r->next) {
        for (size_t e = 0; !r->param && e < E; e++)
            if (tb_spreadcard_valued(ckt->elems[e].kind) && tb_spreadcard_match(r->pattern, ckt->elems[e].name))
                p->rule[e] = r;
        for (size_t k = 0; r->param && k < p->ntargets; k++)
            if (names_param(ckt, r, p->targets[k]))
                p->rule[E + k] = r;
    }
    for (size_t i = 0; i < p->items; i++) {
        p->dim[i] = SIZE_MAX;
        if (!p->rule[i])
            continue;
        size_t d = p->rule[i]->group ? group_dim(p, p->rule[i]->group) : SIZE_MAX;
        if (d == SIZE_MAX) {
            d = p->dims++;
            p->dim_rule[d] = p->rule[i];
            p->dim_item[d] = i;
        }
        p->dim[i] = d;
    }
    return TB_OK;
}

/* An item's value at variate z of its dimension, about its value `nominal`. */
static double varied(const tb_spread_rule *rule, double nominal, double z)
{
    if (rule->dist == TB_SPREAD_PICK) {
        size_t i = (size_t)z;
        return rule->values[i < rule->value_count ? i : rule->value_count - 1];
    }
    return rule->relative ? nominal * (1.0 + z * rule->width) : nominal + z * rule->width;
}

/* The parameters take their values and the elements that follow them are re-evaluated;
 * then each element's own tolerance applies about the value it now has (docs/spread.md). */
static bool plan_fill(const void *self, size_t run, double *values, double *params, double *work)
{
    const plan *p = self;
    const double *z = &p->z[run * p->dims];
    size_t E = p->ckt->elem_count;
    for (size_t k = 0; k < p->ntargets; k++)
        work[k] = varied(p->rule[E + k], item_value(p, E + k), z[p->dim[E + k]]);
    for (size_t d = 0; d < p->dims; d++)
        if (p->dim_item[d] >= E)
            params[d] = work[p->dim_item[d] - E];
    if (p->pp && !tb_pplan_apply(p->pp, work, work + p->ntargets, values))
        return false;
    for (size_t e = 0; e < E; e++)
        if (p->rule[e])
            values[e] = varied(p->rule[e], values[e], z[p->dim[e]]);
    for (size_t d = 0; d < p->dims; d++)
        if (p->dim_item[d] < E)
            params[d] = values[p->dim_item[d]];
    return true;
}

/* Workspace plan_fill needs. */
static size_t plan_work(const plan *p)
{
    return p->ntargets + (p->pp ? tb_pplan_work(p->pp) : 0);
}

/* The variate of dimension d at its low (high false) or high extreme. */
static double extreme(const plan *p, size_t d, bool high)
{
    const tb_spread_rule *r = p->dim_rule[d];
    if (r->dist == TB_SPREAD_FLAT)
        return high ? 1.0 : -1.0;
    if (r->dist == TB_SPREAD_GAUSS)
        return high ? TB_SPREAD_GAUSS_CORNER : -TB_SPREAD_GAUSS_CORNER;
    size_t best = 0;
    for (size_t i = 1; i < r->value_count; i++)
        if (high ? r->values[i] > r->values[best] : r->values[i] < r->values[best])
            best = i;
    return (double)best;
}

/* The nominal variate of dimension d: 0, or for a list the value nearest the netlist's. */
static double middle(const plan *p, size_t d)
{
    const tb_spread_rule *r = p->dim_rule[d];
    if (r->dist != TB_SPREAD_PICK)
        return 0;
    double v = item_value(p, p->dim_item[d]);
    size_t best = 0;
    for (size_t i = 1; i < r->value_count; i++)
        if (fabs(r->values[i] - v) < fabs(r->values[best] - v))
            best = i;
    return (double)best;
}

static tb_status new_set(const plan *p, tb_spreadset_kind kind, size_t runs, size_t probes, tb_spreadset **out)
{
    tb_spreadset *set = tb_spreadset_new(kind, runs, p->dims, p->ckt->loop_count, probes);
    if (!set)
        return TB_ERR_NOMEM;
    for (size_t d = 0; d < p->dims; d++)
        set->param_names[d] = p->dim_rule[d]->group ? p->dim_rule[d]->group : item_name(p, p->dim_item[d]);
    set->dimensions = p->dims;
    *out = set;
    return TB_OK;
}

/* ---- corners -------------------------------------------------------------------- */

/* Row 0 nominal, rows 1 .. 2^d every combination (bit d of run - 1 high). */
static void full_design(plan *p, size_t runs)
{
    for (size_t r = 0; r < runs; r++)
        for (size_t d = 0; d < p->dims; d++)
            p->z[r * p->dims + d] = r == 0 ? middle(p, d) : extreme(p, d, ((r - 1) >> d) & 1u);
}

/* The reduced design's first phase: nominal, then each dimension alone low and high. */
static void one_at_a_time(plan *p)
{
    for (size_t r = 0; r < 1 + 2 * p->dims; r++)
        for (size_t d = 0; d < p->dims; d++) {
            bool moved = r > 0 && (r - 1) / 2 == d;
            p->z[r * p->dims + d] = moved ? extreme(p, d, (r - 1) % 2 == 1) : middle(p, d);
        }
}

/* The second phase: for each loop and numeric figure, the corner that the one-at-a-time
 * runs say pushes it lowest, and the one that pushes it highest (every dimension at the end
 * that moved the figure that way; an end that left it absent or unmoved keeps the middle). */
static size_t predicted_corners(plan *p, const tb_spreadset *set, size_t first)
{
    size_t runs = first;
    for (size_t l = 0; l < set->loops; l++)
        for (size_t i = 0; i + 1 < TB_SPREAD_FIGURES; i++)
            for (int way = 0; way < 2; way++) {
                double *z = &p->z[runs * p->dims];
                for (size_t d = 0; d < p->dims; d++) {
                    const tb_figure_value *lo = &tb_spreadset_row(set, 1 + 2 * d, l)[i];
                    const tb_figure_value *hi = &tb_spreadset_row(set, 2 + 2 * d, l)[i];
                    z[d] = middle(p, d);
                    if (lo->present && hi->present && lo->value != hi->value)
                        z[d] = extreme(p, d, (hi->value > lo->value) == (way == 1));
                }
                bool seen = false;
                for (size_t r = 0; r < runs && !seen; r++)
                    seen = memcmp(&p->z[r * p->dims], z, p->dims * sizeof(double)) == 0;
                runs += !seen;
            }
    return runs;
}

tb_status tb_spread_corners(const tb_circuit *ckt, const tb_spread_options *opt, tb_diag *diag,
                            tb_spreadset **out)
{
    if (!ckt || !opt || !out || !ckt->spread || ckt->spread->rule_count == 0)
        return TB_ERR_USAGE;
    plan p;
    tb_status st = plan_make(ckt, &p);
    bool reduced = p.dims > TB_SPREAD_FULL_CORNERS;
    size_t first = 1 + 2 * p.dims;
    size_t runs = reduced ? first + 2 * (TB_SPREAD_FIGURES - 1) * ckt->loop_count : 1 + ((size_t)1 << p.dims);
    if (!st)
        p.z = tb_calloc(runs * (p.dims ? p.dims : 1), sizeof(double));
    st = st ? st : p.z ? TB_OK : TB_ERR_NOMEM;
    tb_spreadset *set = NULL;
    if (!st)
        st = new_set(&p, TB_SPREADSET_CORNERS, runs, 0, &set);
    if (!st && !reduced) {
        full_design(&p, runs);
        st = tb_spreadrun_all(ckt, opt, diag, plan_fill, &p, plan_work(&p), 0, runs, set);
    } else if (!st) {
        set->reduced = true;
        one_at_a_time(&p);
        st = tb_spreadrun_all(ckt, opt, diag, plan_fill, &p, plan_work(&p), 0, first, set);
        size_t used = st ? runs : predicted_corners(&p, set, first);
        if (!st)
            st = tb_spreadrun_all(ckt, opt, diag, plan_fill, &p, plan_work(&p), first, used - first, set);
        set->runs = used;
    }
    if (set)
        set->nominal = 0;
    plan_free(&p);
    if (st) {
        tb_spreadset_free(set);
        return st;
    }
    *out = set;
    return TB_OK;
}

/* ---- Monte Carlo ------------------------------------------------------------------- */

/* Sample `run`'s variates from its own stream, dimension by dimension in order. */
static void draw(const plan *p, uint64_t seed, size_t run, double *z)
{
    tb_rng rng = tb_rng_stream(seed, run);
    for (size_t d = 0; d < p->dims; d++) {
        const tb_spread_rule *r = p->dim_rule[d];
        if (r->dist == TB_SPREAD_FLAT) {
            z[d] = 2.0 * tb_rng_uniform(&rng) - 1.0;
        } else if (r->dist == TB_SPREAD_GAUSS) {
            z[d] = tb_rng_normal(&rng);
        } else {
            size_t i = (size_t)(tb_rng_uniform(&rng) * (double)r->value_count);
            z[d] = (double)(i < r->value_count ? i : r->value_count - 1);
        }
    }
}

tb_status tb_spread_monte_carlo(const tb_circuit *ckt, const tb_spread_options *opt, tb_diag *diag,
                                tb_spreadset **out)
{
    if (!ckt || !opt || !out || !ckt->spread || ckt->spread->rule_count == 0 || opt->samples == 0 ||
        opt->samples > TB_SPREAD_MAX_SAMPLES)
        return TB_ERR_USAGE;
    plan p;
    tb_status st = plan_make(ckt, &p);
    size_t runs = opt->samples;
    if (!st)
        p.z = tb_calloc(runs, (p.dims ? p.dims : 1) * sizeof(double));
    st = st ? st : p.z ? TB_OK : TB_ERR_NOMEM;
    tb_spreadset *set = NULL;
    if (!st)
        st = new_set(&p, TB_SPREADSET_MONTE_CARLO, runs, TB_SPREAD_PROBES, &set);
    if (!st) {
        set->seed = opt->seed;
        st = tb_spreadrun_probes(ckt, set);
        if (!st)
            st = tb_spreadrun_nominal(ckt, opt, diag, set);
    }
    if (!st) {
        for (size_t r = 0; r < runs; r++)
            draw(&p, opt->seed, r, &p.z[r * p.dims]);
        st = tb_spreadrun_all(ckt, opt, diag, plan_fill, &p, plan_work(&p), 0, runs, set);
    }
    plan_free(&p);
    if (st) {
        tb_spreadset_free(set);
        return st;
    }
    *out = set;
    return TB_OK;
}

/* ---- the spread figures of .expect ------------------------------------------------ */

tb_status tb_spread_figures_run(const tb_circuit *ckt, const tb_spread_options *opt, tb_diag *diag, bool corners,
                                bool samples, tb_spread_figures *out)
{
    if (!ckt || !opt || !out)
        return TB_ERR_USAGE;
    for (size_t l = 0; l < ckt->loop_count; l++)
        out[l] = (tb_spread_figures){0};
    if (!ckt->spread || ckt->spread->rule_count == 0)
        return TB_OK;
    tb_spreadset *set = NULL;
    tb_status st = corners ? tb_spread_corners(ckt, opt, diag, &set) : TB_OK;
    for (size_t l = 0; !st && set && l < ckt->loop_count; l++) {
        tb_spread_stats pm, gm;
        st = tb_spreadset_stats(set, l, 2, &pm);
        if (!st)
            st = tb_spreadset_stats(set, l, 3, &gm);
        out[l].has_corners = true;
        out[l].has_pm = pm.present > 0;
        out[l].pm_worst_deg = pm.min;
        out[l].has_gm = gm.present > 0;
        out[l].gm_worst_db = gm.min;
    }
    tb_spreadset_free(set);
    set = NULL;
    if (!st && samples)
        st = tb_spread_monte_carlo(ckt, opt, diag, &set);
    size_t analysed = 0;
    size_t pass = set ? tb_spreadset_passed(set, &analysed) : 0;
    for (size_t l = 0; !st && set && analysed > 0 && l < ckt->loop_count; l++) {
        out[l].has_samples = true;
        out[l].yield_pct = 100.0 * (double)pass / (double)analysed;
    }
    tb_spreadset_free(set);
    return st;
}

/* ---- sensitivities at a chosen frequency ------------------------------------------------ */

static int by_T(const void *pa, const void *pb)
{
    const tb_sens_entry *a = pa, *b = pb;
    double ka = a->has_T ? fabs(a->T_mag) : -1, kb = b->has_T ? fabs(b->T_mag) : -1;
    if (ka != kb)
        return ka > kb ? -1 : 1;
    return strcmp(a->element, b->element);
}

tb_status tb_spread_sensitivities_at(const tb_circuit *ckt, const tb_options *opt, double f, tb_diag *diag,
                                     tb_sens_entry **out, size_t *per)
{
    if (!ckt || !opt || !out || !per || ckt->loop_count == 0 || !(f >= 0) || !isfinite(f))
        return TB_ERR_USAGE;
    size_t count = tb_sensitivity_count(ckt);
    tb_sens_entry *all = tb_calloc(ckt->loop_count * (count ? count : 1), sizeof(tb_sens_entry));
    tb_sweep *sw = NULL;
    tb_status st = all ? tb_sweep_new(ckt, opt->refactor_rcond_drop, 1, diag, &sw) : TB_ERR_NOMEM;
    for (size_t l = 0; !st && l < ckt->loop_count; l++) {
        st = tb_sensitivity_at(ckt, tb_sweep_probe(sw), l, f, all + l * count);
        if (!st)
            qsort(all + l * count, count, sizeof(tb_sens_entry), by_T);
    }
    tb_sweep_free(sw);
    if (st) {
        tb_free(all);
        return st;
    }
    *out = all;
    *per = count;
    return TB_OK;
}
