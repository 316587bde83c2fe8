/* src/spread.c: parameter scans, corners and Monte Carlo: which values each run takes */
#include "spread.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "alloc.h"
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

static void scan_fill(const void *plan, size_t run, double *values, double *params)
{
    const tb_spread_cards *sc = plan;
    size_t rest = run;
    for (size_t a = sc->axis_count; a-- > 0;) {
        const tb_scan_axis *axis = &sc->axes[a];
        size_t i = rest % axis->count;
        rest /= axis->count;
        values[axis->elem] = axis->values[i];
        params[a] = axis->values[i];
    }
}

tb_status tb_spread_scan(const tb_circuit *ckt, const tb_spread_options *opt, tb_diag *diag, tb_spreadset **out)
{
    if (!ckt || !opt || !out || !ckt->spread || ckt->spread->axis_count == 0)
        return TB_ERR_USAGE;
    const tb_spread_cards *sc = ckt->spread;
    size_t runs = 1;
    for (size_t a = 0; a < sc->axis_count; a++)
        runs *= sc->axes[a].count;
    tb_spreadset *set = tb_spreadset_new(TB_SPREADSET_SCAN, runs, sc->axis_count, ckt->loop_count, 0);
    if (!set)
        return TB_ERR_NOMEM;
    for (size_t a = 0; a < sc->axis_count; a++)
        set->param_names[a] = ckt->elems[sc->axes[a].elem].name;
    tb_status st = tb_spreadrun_all(ckt, opt, diag, scan_fill, sc, 0, runs, set);
    if (st) {
        tb_spreadset_free(set);
        return st;
    }
    *out = set;
    return TB_OK;
}

/* ---- dimensions: what varies independently -------------------------------------------- */

/* Every element's rule (the last .spread card naming it) and dimension: each grouped
 * rule's group is one dimension, each element of an ungrouped rule another. Runs are
 * given as a matrix z of runs x dims variates (flat: -1..1, gauss: sigmas, pick: index). */
typedef struct {
    const tb_circuit *ckt;
    const tb_spread_rule **rule; /* per element, or NULL */
    size_t *dim;                 /* per element, or SIZE_MAX */
    size_t dims;
    const tb_spread_rule **dim_rule; /* per dimension: its first element's rule */
    size_t *dim_elem;            /* per dimension: its first element */
    double *z;                   /* runs * dims */
} plan;

static void plan_free(plan *p)
{
    tb_free(p->rule);
    tb_free(p->dim);
    tb_free(p->dim_rule);
    tb_free(p->dim_elem);
    tb_free(p->z);
}

/* The dimension of group name among those made so far, or SIZE_MAX. */
static size_t group_dim(const plan *p, const char *group)
{
    for (size_t d = 0; d < p->dims; d++)
        if (p->dim_rule[d]->group && tb_name_eq(p->dim_rule[d]->group, group))
            return d;
    return SIZE_MAX;
}

static tb_status plan_make(const tb_circuit *ckt, plan *p)
{
    size_t n = ckt->elem_count ? ckt->elem_count : 1;
    *p = (plan){.ckt = ckt};
    p->rule = tb_calloc(n, sizeof(*p->rule));
    p->dim = tb_malloc(n, sizeof(size_t));
    p->dim_rule = tb_calloc(n, sizeof(*p->dim_rule));
    p->dim_elem = tb_calloc(n, sizeof(size_t));
    if (!p->rule || !p->dim || !p->dim_rule || !p->dim_elem)
        return TB_ERR_NOMEM;
    for (const tb_spread_rule *r = ckt->spread->rules; r; r = r->next)
        for (size_t e = 0; e < ckt->elem_count; e++)
            if (tb_spreadcard_valued(ckt->elems[e].kind) && tb_spreadcard_match(r->pattern, ckt->elems[e].name))
                p->rule[e] = r;
    for (size_t e = 0; e < ckt->elem_count; e++) {
        p->dim[e] = SIZE_MAX;
        if (!p->rule[e])
            continue;
        size_t d = p->rule[e]->group ? group_dim(p, p->rule[e]->group) : SIZE_MAX;
        if (d == SIZE_MAX) {
            d = p->dims++;
            p->dim_rule[d] = p->rule[e];
            p->dim_elem[d] = e;
        }
        p->dim[e] = d;
    }
    return TB_OK;
}

/* Element e's value at variate z of its dimension. */
static double varied(const tb_spread_rule *rule, double nominal, double z)
{
    if (rule->dist == TB_SPREAD_PICK) {
        size_t i = (size_t)z;
        return rule->values[i < rule->value_count ? i : rule->value_count - 1];
    }
    return rule->relative ? nominal * (1.0 + z * rule->width) : nominal + z * rule->width;
}

static void plan_fill(const void *self, size_t run, double *values, double *params)
{
    const plan *p = self;
    const double *z = &p->z[run * p->dims];
    for (size_t e = 0; e < p->ckt->elem_count; e++)
        if (p->rule[e])
            values[e] = varied(p->rule[e], p->ckt->elems[e].value, z[p->dim[e]]);
    for (size_t d = 0; d < p->dims; d++)
        params[d] = values[p->dim_elem[d]];
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
    double v = p->ckt->elems[p->dim_elem[d]].value;
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
        set->param_names[d] = p->dim_rule[d]->group ? p->dim_rule[d]->group : p->ckt->elems[p->dim_elem[d]].name;
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
        st = tb_spreadrun_all(ckt, opt, diag, plan_fill, &p, 0, runs, set);
    } else if (!st) {
        set->reduced = true;
        one_at_a_time(&p);
        st = tb_spreadrun_all(ckt, opt, diag, plan_fill, &p, 0, first, set);
        size_t used = st ? runs : predicted_corners(&p, set, first);
        if (!st)
            st = tb_spreadrun_all(ckt, opt, diag, plan_fill, &p, first, used - first, set);
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
        st = tb_spreadrun_all(ckt, opt, diag, plan_fill, &p, 0, runs, set);
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
