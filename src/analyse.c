/* src/analyse.c: the analysis driver, the one file that knows every analysis and the order they run in */
#include "analyse.h"

#include "alloc.h"
#include "census.h"
#include "closedloop.h"
#include "distortion.h"
#include "feedback.h"
#include "feedback_type.h"
#include "grid.h"
#include "impedance.h"
#include "measure.h"
#include "sensitivity.h"
#include "spot.h"
#include "stability.h"
#include "step.h"
#include "sweep.h"
#include "wirebreak.h"

void tb_options_init(tb_options *opt)
{
    opt->dc = true;
    opt->refactor_rcond_drop = 1e-6;
    opt->stability = true;
    opt->pole_limit = 500; /* QZ is O(n^3): about 1.5 s at 500 unknowns, 18 s at 1000 */
    opt->pm_min_deg = -1.0; /* the netlist's .margins, else 45 degrees (common practice) */
    opt->gm_min_db = -1.0;  /* the netlist's .margins, else 10 dB (common practice) */
    opt->census = false;
    opt->sensitivity = false;
    opt->closed_loop = true;
    opt->jobs = 1;
    opt->at_hz = NULL;
    opt->at_count = 0;
    opt->progress = NULL;
    opt->progress_ctx = NULL;
    opt->rhp_count_limit = 5000;
    opt->step_response = true;
    opt->near_poles = true;
    opt->vector_refine = true;
    opt->peak_refine = true;
    opt->crossing_list = true;
    opt->gm_cap_db = 60.0;
    opt->ol_rhp_given = NULL;
    opt->rhp_check_limit = 1000;
}

/* Thresholds left negative in the options come from the netlist's .margins,
 * else from common practice: PM >= 45 degrees, GM >= 10 dB. */
static void effective_thresholds(const tb_circuit *ckt, tb_options *opt)
{
    if (opt->pm_min_deg < 0)
        opt->pm_min_deg = ckt->margins.has_pm ? ckt->margins.pm_min_deg : 45.0;
    if (opt->gm_min_db < 0)
        opt->gm_min_db = ckt->margins.has_gm ? ckt->margins.gm_min_db : 10.0;
}

/* The sweep table: every loop's point into res (self: the result). */
static tb_status store_point(void *self, const tb_sweep_point *pt)
{
    tb_result *res = self;
    for (size_t l = 0; l < res->nloops; l++) {
        if (pt->index == TB_SWEEP_DC)
            res->dc[l] = pt->loops[l];
        else
            res->pts[l * res->npoints + pt->index] = pt->loops[l];
    }
    return TB_OK;
}

/* The per-point analyses the circuit and the options ask for, each with its state. */
typedef struct {
    tb_census *census;
    tb_impedance *ports;
    tb_wirebreak *brk;
    tb_sweep_hook hooks[4];
    size_t count;
} point_analyses;

static void point_analyses_free(point_analyses *pa)
{
    tb_census_free(pa->census);
    tb_impedance_free(pa->ports);
    tb_wirebreak_free(pa->brk);
}

static tb_status point_analyses_begin(point_analyses *pa, const tb_circuit *ckt, const tb_sweep *sw,
                                      const tb_options *opt, tb_result *res)
{
    const tb_mna *mna = tb_sweep_mna(sw);
    size_t lanes = tb_sweep_lanes(sw);
    *pa = (point_analyses){0};
    pa->hooks[pa->count++] = (tb_sweep_hook){res, store_point};
    tb_status st = TB_OK;
    if (opt->census && !(st = tb_census_begin(ckt, mna, res->npoints, lanes, &pa->census)))
        pa->hooks[pa->count++] = (tb_sweep_hook){pa->census, tb_census_at};
    if (!st && ckt->zport_count > 0 && mna->loop_count > 0 &&
        !(st = tb_impedance_begin(ckt, mna, res->npoints, lanes, &pa->ports)))
        pa->hooks[pa->count++] = (tb_sweep_hook){pa->ports, tb_impedance_at};
    if (!st && ckt->brk.given && !(st = tb_wirebreak_begin(ckt, mna, res->npoints, lanes, &pa->brk)))
        pa->hooks[pa->count++] = (tb_sweep_hook){pa->brk, tb_wirebreak_at};
    return st;
}

/* Everything after the point loop, in an order that matters: the census and
 * stability factor at new frequencies on the shared solver, the step response
 * last of the solver's users; the measures need the stability figures. */
static tb_status summarise(const tb_circuit *ckt, const tb_options *opt, tb_sweep *sw, point_analyses *pa,
                           tb_result *res)
{
    tb_probe *probe = tb_sweep_probe(sw);
    tb_options limits = *opt;
    effective_thresholds(ckt, &limits);
    tb_status st = tb_measure_phase_run(res);
    /* above the pole limit the step response needs nothing of what follows: with more
     * than one thread it runs beside the analyses, on a solver of its own */
    tb_step_job *job = NULL;
    if (!st && opt->jobs > 1 && opt->stability && opt->step_response)
        st = tb_step_start(probe, res, opt->pole_limit, &job);
    if (!st && pa->census)
        st = tb_census_end(pa->census, probe, res);
    if (!st && opt->stability)
        st = tb_stability_run(probe, &limits, res);
    if (!st && pa->census)
        st = tb_census_judge(pa->census, probe, &limits, res);
    if (!st)
        st = tb_feedback_run(ckt, probe, res);
    if (!st)
        st = tb_spot_run(probe, pa->ports, ckt->zport_count, opt->at_hz, opt->at_count, res);
    if (!st && opt->closed_loop)
        st = tb_closed_loop_run(probe, res, opt->peak_refine);
    if (!st && opt->sensitivity)
        st = tb_sensitivity_run(ckt, probe, res);
    if (!st)
        st = tb_distortion_run(ckt, probe, res);
    res->stats.probe_factorizations = probe->factorizations;
    res->stats.probe_solve_columns = tb_sweep_counts(sw).columns - res->stats.grid_solve_columns;
    size_t before = tb_sweep_counts(sw).numeric, job_factorizations = 0;
    tb_status job_st = tb_step_finish(job, st ? NULL : res, &job_factorizations);
    st = st ? st : job_st;
    if (!st && opt->stability && opt->step_response && !job)
        st = tb_step_run(probe, res);
    res->stats.step_factorizations = tb_sweep_counts(sw).numeric - before + job_factorizations;
    /* the dominant pair's second-order predictions against the computed step response */
    for (size_t l = 0; !st && res->stab && l < res->nloops; l++)
        tb_stability_vs_step(&res->step, &res->stab[l]);
    if (!st)
        st = tb_measure_run(res);
    if (!st && pa->ports)
        tb_impedance_end(pa->ports, res);
    if (!st && pa->brk)
        tb_wirebreak_end(pa->brk, res);
    if (!st)
        st = tb_feedback_type_run(res);
    return st;
}

static void grid_stats(const tb_sweep *sw, tb_result *res)
{
    tb_solver_counts c = tb_sweep_counts(sw);
    res->stats.grid_points = res->npoints + (res->has_dc ? 1 : 0);
    res->stats.grid_factorizations = c.numeric;
    res->stats.grid_pivoted = c.pivoted;
    res->stats.grid_solve_columns = c.columns;
}

tb_status tb_analyse(const tb_circuit *ckt, const tb_options *opt, tb_diag *diag, tb_result **out)
{
    return tb_analyse_on(ckt, opt, NULL, diag, out);
}

tb_status tb_analyse_on(const tb_circuit *ckt, const tb_options *opt, const tb_sweep *base, tb_diag *diag,
                        tb_result **out)
{
    if (!ckt || !out)
        return TB_ERR_USAGE;
    tb_options defaults;
    if (!opt) {
        tb_options_init(&defaults);
        opt = &defaults;
    }
    if (tb_spot_check(opt->at_hz, opt->at_count))
        return TB_ERR_USAGE;
    size_t npoints = tb_grid_count(&ckt->ac);
    if (npoints == 0)
        return TB_ERR_USAGE; /* the parser admits only usable grids */
    tb_result *res = tb_result_new(npoints, ckt->loop_count);
    if (!res)
        return TB_ERR_NOMEM;
    tb_grid_fill(&ckt->ac, res->freqs);
    res->has_io = ckt->io.given;
    tb_sweep *sw = NULL;
    point_analyses pa = {0};
    size_t lanes = tb_sweep_lanes_for(opt->jobs, npoints);
    tb_status st = tb_sweep_new_on(ckt, opt->refactor_rcond_drop, lanes, base, diag, &sw);
    if (!st)
        tb_sweep_set_progress(sw, opt->progress, opt->progress_ctx);
    if (!st)
        st = point_analyses_begin(&pa, ckt, sw, opt, res);
    if (!st)
        st = tb_sweep_run(sw, res->freqs, npoints, opt->dc, pa.hooks, pa.count, &res->has_dc);
    if (!st) {
        grid_stats(sw, res);
        st = summarise(ckt, opt, sw, &pa, res);
    }
    point_analyses_free(&pa);
    tb_sweep_free(sw);
    if (st) {
        tb_result_free(res);
        return st;
    }
    *out = res;
    return TB_OK;
}
