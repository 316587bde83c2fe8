/* src/spreadrun.c: runs of the circuit at changed values, shared among threads on one symbolic analysis */
#include "spreadrun.h"

#include <math.h>
#include <pthread.h>
#include <string.h>
#include <unistd.h>

#include "alloc.h"
#include "analyse.h"
#include "grid.h"

/* One thread's share: runs first + lane, first + lane + lanes, ... */
typedef struct {
    const tb_circuit *ckt;
    const tb_sweep *base;
    const tb_options *opt;
    tb_spread_fill fill;
    const void *plan;
    size_t work;
    tb_spreadset *set;
    size_t first, count, lane, lanes;
    tb_status st;
} worker;

/* The grid index of probe i (SIZE_MAX: DC). */
static size_t probe_index(const tb_spreadset *set, size_t npoints, size_t i)
{
    if (i == 0)
        return SIZE_MAX;
    size_t k = set->probes.count - 1;
    return k <= 1 ? 0 : (i - 1) * (npoints - 1) / (k - 1);
}

tb_status tb_spreadrun_probes(const tb_circuit *ckt, tb_spreadset *set)
{
    size_t npoints = tb_grid_count(&ckt->ac);
    double *f = tb_malloc(npoints ? npoints : 1, sizeof(double));
    if (!f)
        return TB_ERR_NOMEM;
    tb_grid_fill(&ckt->ac, f);
    if (set->probes.count > npoints + 1)
        set->probes.count = npoints + 1;
    for (size_t i = 0; i < set->probes.count; i++) {
        size_t g = probe_index(set, npoints, i);
        set->probes.hz[i] = g == SIZE_MAX ? 0 : f[g];
    }
    tb_free(f);
    return TB_OK;
}

static double complex finite_or_zero(double complex z)
{
    return isfinite(creal(z)) && isfinite(cimag(z)) ? z : 0;
}

/* Loop l's point at probe i of res (DC: the lowest sweep point when DC was not solved);
 * values that are not finite read 0. */
static tb_point probe_point(const tb_spreadset *set, const tb_result *res, size_t l, size_t i)
{
    size_t g = probe_index(set, tb_result_points(res), i);
    tb_point p;
    if (g != SIZE_MAX || !tb_result_dc(res, l, &p))
        p = tb_result_loop(res, l)[g == SIZE_MAX ? 0 : g];
    p.A = finite_or_zero(p.A);
    p.T = finite_or_zero(p.T);
    return p;
}

/* Every loop's open-loop right-half-plane count of the nominal circuit, kept when each was
 * made by the argument principle or shown zero by passive blocks (above the pole limit; below
 * it every sample has its poles) with no open-loop pole on the axis: a sample's
 * small change of values moves a pole across the axis only where one lies near it, and
 * the samples' Nyquist counts then take P from here instead of walking det M0 again. */
static tb_status nominal_counts(const tb_result *res, tb_spreadset *set)
{
    for (size_t l = 0; l < set->loops; l++) {
        tb_stability st;
        if (tb_stability_loop(res, l, &st) != TB_OK || !st.computed ||
            (st.ol_count_by != TB_COUNT_WINDING && st.ol_count_by != TB_COUNT_PASSIVE_BLOCKS) || st.ol_axis > 0)
            return TB_OK;
    }
    if (set->loops == 0)
        return TB_OK;
    set->ol_rhp_nominal = tb_malloc(set->loops, sizeof(size_t));
    if (!set->ol_rhp_nominal)
        return TB_ERR_NOMEM;
    for (size_t l = 0; l < set->loops; l++) {
        tb_stability st;
        tb_stability_loop(res, l, &st);
        set->ol_rhp_nominal[l] = st.ol_rhp;
    }
    return TB_OK;
}

tb_status tb_spreadrun_nominal(const tb_circuit *ckt, const tb_spread_options *opt, tb_diag *diag,
                               tb_spreadset *set)
{
    tb_options one = opt->analysis;
    one.census = false;
    one.sensitivity = false;
    tb_result *res = NULL;
    tb_status st = tb_analyse(ckt, &one, diag, &res);
    if (st)
        return st;
    for (size_t i = 0; i < set->probes.count && set->loops > 0; i++) {
        set->A_nom[i] = probe_point(set, res, 0, i).A;
        for (size_t l = 0; l < set->loops; l++)
            set->T_nom[l * set->probes.count + i] = probe_point(set, res, l, i).T;
    }
    set->has_nominal = set->loops > 0;
    st = nominal_counts(res, set);
    tb_result_free(res);
    return st;
}

/* Loop l passes: stable, and its margins meet the thresholds (as 'tbeta report' judges). */
static bool loop_passes(const tb_result *res, size_t l)
{
    tb_stability st;
    if (tb_stability_loop(res, l, &st) != TB_OK || !st.computed)
        return true;
    return st.verdict == TB_VERDICT_STABLE && st.pm_ok && st.gm_ok;
}

/* Figures, status and A of run r from its result; all: loops * tb_figure_count() scratch. */
static tb_status record(const worker *w, const tb_circuit *copy, const tb_result *res, size_t r,
                        tb_figure_value *all)
{
    tb_spreadset *set = w->set;
    for (size_t l = 0; l < set->loops; l++)
        set->k[r * set->loops + l] = copy->elems[copy->loops[l].elem].value;
    size_t nfig = tb_figure_count();
    bool pass = true;
    for (size_t l = 0; l < set->loops; l++) {
        tb_status st = tb_figure_measure(res, l, all + l * nfig);
        if (st)
            return st;
        tb_figure_value *row = tb_spreadset_row(set, r, l);
        for (size_t i = 0; i < TB_SPREAD_FIGURES; i++)
            row[i] = all[l * nfig + (size_t)tb_spreadset_figure(i)];
        pass = pass && loop_passes(res, l);
    }
    for (const tb_expect *x = w->ckt->expects; x; x = x->next) {
        if (tb_figure_is_spread(x->figure))
            continue; /* a bound on the spread itself, not on one run */
        const tb_figure_value *v = &all[x->loop * nfig + (size_t)x->figure];
        pass = pass && tb_expect_holds(x, v->present, v->value);
    }
    set->status[r] = pass ? TB_RUN_PASS : TB_RUN_FAIL;
    if (set->loops == 0 || !tb_circuit_has_io(w->ckt))
        return TB_OK;
    for (size_t i = 0; i < set->probes.count; i++)
        set->A[r * set->probes.count + i] = probe_point(set, res, 0, i).A;
    return TB_OK;
}

/* Analyses the circuit copy (its values set) as run r. */
static tb_status one_run(const worker *w, const tb_circuit *copy, size_t r, tb_figure_value *all)
{
    tb_diag *diag = tb_diag_new();
    if (!diag)
        return TB_ERR_NOMEM;
    tb_result *res = NULL;
    tb_status st = tb_analyse_on(copy, w->opt, w->base, diag, &res);
    tb_diag_free(diag);
    if (st == TB_ERR_NOMEM)
        return st;
    if (st)
        return TB_OK; /* the row stays TB_RUN_ERROR */
    st = record(w, copy, res, r, all);
    tb_stats stats;
    if (!st && tb_result_stats(res, &stats) == TB_OK)
        w->set->factorizations[r] = stats.grid_factorizations + stats.probe_factorizations + stats.step_factorizations;
    tb_result_free(res);
    return st;
}

/* Element values a run may analyse (a parameter may have taken one out of range). */
static bool values_ok(const tb_circuit *ckt, const double *values)
{
    for (size_t e = 0; e < ckt->elem_count; e++)
        if (values[e] != ckt->elems[e].value &&
            !tb_spreadcard_value_ok(ckt->elems[e].kind, ckt->elems[e].value, values[e]))
            return false;
    return true;
}

static void *work(void *arg)
{
    worker *w = arg;
    const tb_circuit *ckt = w->ckt;
    size_t n = ckt->elem_count ? ckt->elem_count : 1;
    tb_element *elems = tb_malloc(n, sizeof(tb_element));
    double *values = tb_malloc(n, sizeof(double));
    double *scratch = tb_malloc(w->work + 1, sizeof(double));
    tb_figure_value *all = tb_calloc((w->set->loops ? w->set->loops : 1) * tb_figure_count(), sizeof(tb_figure_value));
    w->st = elems && values && scratch && all ? TB_OK : TB_ERR_NOMEM;
    tb_circuit copy = *ckt; /* the same circuit but for the element values */
    copy.elems = elems;
    for (size_t r = w->first + w->lane; !w->st && r < w->first + w->count; r += w->lanes) {
        for (size_t e = 0; e < ckt->elem_count; e++)
            values[e] = ckt->elems[e].value;
        if (!w->fill(w->plan, r, values, &w->set->param_values[r * w->set->params], scratch) ||
            !values_ok(ckt, values))
            continue; /* the row stays TB_RUN_ERROR */
        memcpy(elems, ckt->elems, ckt->elem_count * sizeof(tb_element));
        for (size_t e = 0; e < ckt->elem_count; e++)
            elems[e].value = values[e];
        w->st = one_run(w, &copy, r, all);
    }
    tb_free(elems);
    tb_free(values);
    tb_free(scratch);
    tb_free(all);
    return NULL;
}

/* true when one of the netlist's .expect cards (on a single run) reads the figure named. */
static bool expected(const tb_circuit *ckt, const char *name)
{
    int f = tb_figure_find(name, strlen(name));
    for (const tb_expect *x = ckt->expects; x; x = x->next)
        if (x->figure == f)
            return true;
    return false;
}

static size_t lanes_for(unsigned jobs, size_t count)
{
    size_t lanes = jobs;
    if (jobs == 0) {
        long cores = sysconf(_SC_NPROCESSORS_ONLN);
        lanes = cores > 0 ? (size_t)cores : 1;
    }
    if (lanes > TB_SWEEP_MAX_LANES)
        lanes = TB_SWEEP_MAX_LANES;
    if (lanes > count)
        lanes = count;
    return lanes ? lanes : 1;
}

tb_status tb_spreadrun_all(const tb_circuit *ckt, const tb_spread_options *opt, tb_diag *diag, tb_spread_fill fill,
                           const void *plan, size_t work_size, size_t first, size_t count, tb_spreadset *set)
{
    tb_options one = opt->analysis;
    one.jobs = 1;
    one.census = false;
    one.sensitivity = false;
    /* only what the spread records: its figures, the verdict and the .expect cards */
    one.step_response = expected(ckt, "overshoot_pct") || expected(ckt, "rise_s") || expected(ckt, "settling_s");
    one.vector_refine = expected(ckt, "vector_margin");
    one.near_poles = false;
    one.crossing_list = false; /* no list is shown: crossings refined only when all fit */
    one.peak_refine = false; /* the spread's figures take the peak of |A| from the dominant pair */
    one.ol_rhp_given = set->ol_rhp_nominal;
    one.rhp_check_limit = 0; /* where a sample's passive blocks show P = 0, no check walk */
    if (!set->factorizations && !(set->factorizations = tb_calloc(set->runs ? set->runs : 1, sizeof(size_t))))
        return TB_ERR_NOMEM;
    tb_sweep *base = NULL;
    tb_status st = tb_sweep_new(ckt, one.refactor_rcond_drop, 1, diag, &base);
    if (st)
        return st;
    size_t lanes = lanes_for(opt->jobs, count);
    worker w[TB_SWEEP_MAX_LANES];
    pthread_t thread[TB_SWEEP_MAX_LANES];
    bool started[TB_SWEEP_MAX_LANES] = {false};
    for (size_t l = 0; l < lanes; l++) {
        w[l] = (worker){ckt, base, &one, fill, plan, work_size, set, first, count, l, lanes, TB_OK};
        if (l > 0)
            started[l] = pthread_create(&thread[l], NULL, work, &w[l]) == 0;
    }
    work(&w[0]);
    for (size_t l = 1; l < lanes; l++) {
        if (started[l])
            pthread_join(thread[l], NULL);
        else
            work(&w[l]); /* no thread: this lane's runs on the calling one */
    }
    for (size_t l = 0; l < lanes && !st; l++)
        st = w[l].st;
    tb_sweep_free(base);
    return st;
}
