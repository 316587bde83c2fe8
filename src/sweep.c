/* src/sweep.c: frequency grids; drives factor, refactor and loop evaluation point by point */
#include "sweep.h"

#include <math.h>
#include <string.h>

#include "alloc.h"
#include "census.h"
#include "diag.h"
#include "feedback.h"
#include "impedance.h"
#include "wirebreak.h"
#include "loop.h"
#include "mna.h"
#include "solve.h"
#include "stability.h"
#include "step.h"

static const double TWO_PI = 6.28318530717958647692528676655900577;

void tb_options_init(tb_options *opt)
{
    opt->dc = true;
    opt->refactor_rcond_drop = 1e-6;
    opt->stability = true;
    opt->pole_limit = 500; /* QZ is O(n^3): about 1.5 s at 500 unknowns, 18 s at 1000 */
    opt->pm_min_deg = -1.0; /* the netlist's .margins, else 45 degrees (common practice) */
    opt->gm_min_db = -1.0;  /* the netlist's .margins, else 10 dB (common practice) */
    opt->census = false;
}

void tb_result_free(tb_result *res)
{
    if (!res)
        return;
    tb_free(res->freqs);
    tb_free(res->pts);
    tb_free(res->dc);
    tb_free(res->stab);
    tb_free(res->step_t);
    tb_free(res->step_y);
    tb_free(res->census);
    tb_feedback_free(res->fb);
    tb_impedance_free(res->zp);
    tb_wirebreak_free(res->wb);
    tb_free(res);
}

static tb_result *result_new(size_t npoints, size_t nloops)
{
    tb_result *res = tb_calloc(1, sizeof(*res));
    if (!res)
        return NULL;
    res->npoints = npoints;
    res->nloops = nloops;
    res->freqs = tb_malloc(npoints, sizeof(double));
    res->pts = tb_calloc(npoints * nloops, sizeof(tb_point));
    res->dc = tb_calloc(nloops, sizeof(tb_point));
    if (!res->freqs || !res->pts || !res->dc) {
        tb_result_free(res);
        return NULL;
    }
    return res;
}

/* Everything the point loop uses, allocated before it starts. */
typedef struct {
    const tb_circuit *ckt;
    tb_mna *mna;
    tb_solver *solver;
    tb_loop_work *work;
    double *Mx;
    tb_point *row; /* one point of every loop */
    tb_diag *diag;
} sweeper;

static void sweeper_free(sweeper *s)
{
    tb_mna_free(s->mna);
    tb_solver_free(s->solver);
    tb_loop_work_free(s->work);
    tb_free(s->Mx);
    tb_free(s->row);
}

static tb_status sweeper_init(sweeper *s, const tb_circuit *ckt, tb_diag *diag)
{
    *s = (sweeper){.ckt = ckt, .diag = diag};
    tb_status st = tb_mna_build(ckt, diag, &s->mna);
    if (st)
        return st;
    if ((st = tb_solver_new(s->mna, &s->solver)) || (st = tb_loop_work_new(s->mna, &s->work)))
        return st;
    s->Mx = tb_malloc(2 * s->mna->nnz, sizeof(double));
    s->row = tb_calloc(ckt->loop_count, sizeof(tb_point));
    return s->Mx && s->row ? TB_OK : TB_ERR_NOMEM;
}

static tb_status singular_diag(const sweeper *s, tb_severity sev, double f, size_t culprit,
                               const char *consequence)
{
    /* Structural causes (floating nodes, loops of voltage sources or
     * inductors) were reported by tb_circuit_finish; at DC it has said so
     * already, and an error would have stopped the circuit before the sweep.
     * What is left is numerical: values that make the equations dependent. */
    if (sev == TB_SEV_WARNING && f == 0.0 && s->ckt->dc_singular)
        return TB_ERR_SINGULAR;
    char at[64];
    tb_format_hz(f, 6, at, sizeof at);
    char name[256];
    tb_circuit_unknown_name(s->ckt, culprit, name, sizeof name);
    tb_status st = tb_diag_add(s->diag, sev, s->ckt->file, 0, 0, NULL, 0,
                               "the circuit matrix is singular at %s (zero pivot at %s): element "
                               "values make the equations dependent there, e.g. a loop whose "
                               "return difference 1 + T is zero%s",
                               at, name, consequence);
    return st ? st : TB_ERR_SINGULAR;
}

/* DC: an exact f = 0 factorization when M(0) is non-singular; otherwise
 * *dc_culprit names the zero pivot (reported once the sweep has succeeded). */
static tb_status sweep_dc(sweeper *s, tb_result *res, size_t *dc_culprit)
{
    if (s->ckt->dc_singular)
        return TB_OK; /* singular by structure (warned); rounding could hide a zero pivot */
    tb_mna_values(s->mna, 0.0, s->Mx);
    tb_status st = tb_solver_factor(s->solver, s->Mx, dc_culprit);
    if (st == TB_ERR_SINGULAR)
        return TB_OK;
    if (st)
        return st;
    if ((st = tb_loop_eval(s->mna, s->solver, s->Mx, 0.0, s->work, res->dc)))
        return st;
    res->has_dc = true;
    return TB_OK;
}

static tb_status sweep_points(sweeper *s, const tb_options *opt, tb_result *res)
{
    for (size_t i = 0; i < res->npoints; i++) {
        size_t culprit = 0;
        double f = res->freqs[i];
        double omega = TWO_PI * f;
        tb_mna_values(s->mna, omega, s->Mx);
        tb_status st = i == 0 ? tb_solver_factor(s->solver, s->Mx, &culprit)
                              : tb_solver_refactor(s->solver, s->Mx, opt->refactor_rcond_drop, &culprit);
        if (st == TB_ERR_SINGULAR)
            return singular_diag(s, TB_SEV_ERROR, f, culprit, "");
        if (st || (st = tb_loop_eval(s->mna, s->solver, s->Mx, omega, s->work, s->row)))
            return st;
        for (size_t l = 0; l < res->nloops; l++)
            res->pts[l * res->npoints + i] = s->row[l];
    }
    return TB_OK;
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

tb_status tb_analyse(const tb_circuit *ckt, const tb_options *opt, tb_diag *diag, tb_result **out)
{
    if (!ckt || !out)
        return TB_ERR_USAGE;
    tb_options defaults;
    if (!opt) {
        tb_options_init(&defaults);
        opt = &defaults;
    }
    size_t npoints = tb_sweep_count(&ckt->ac);
    if (npoints == 0)
        return TB_ERR_USAGE; /* the parser admits only usable grids */
    tb_result *res = result_new(npoints, ckt->loop_count);
    if (!res)
        return TB_ERR_NOMEM;
    tb_sweep_grid(&ckt->ac, res->freqs);
    res->has_io = ckt->io.given;
    sweeper s;
    size_t dc_culprit = 0;
    tb_status st = sweeper_init(&s, ckt, diag);
    if (!st && opt->dc)
        st = sweep_dc(&s, res, &dc_culprit);
    if (!st)
        st = sweep_points(&s, opt, res);
    if (!st && opt->dc && !res->has_dc) {
        st = singular_diag(&s, TB_SEV_WARNING, 0.0, dc_culprit,
                           "; DC values are those at the lowest sweep frequency");
        st = st == TB_ERR_SINGULAR ? TB_OK : st;
    }
    if (!st)
        res->factor_count = tb_solver_factor_count(s.solver);
    if (!st && opt->census)
        st = tb_census_run(ckt, s.mna, s.solver, s.Mx, opt->refactor_rcond_drop, res);
    if (!st && opt->stability) {
        tb_probe probe = {s.mna, s.solver, s.work, s.Mx, s.row, opt->refactor_rcond_drop, 0};
        tb_options limits = *opt;
        effective_thresholds(ckt, &limits);
        st = tb_stability_run(&probe, &limits, res);
        if (!st)
            st = tb_step_run(s.mna, res);
    }
    if (!st) {
        tb_probe probe = {s.mna, s.solver, s.work, s.Mx, s.row, opt->refactor_rcond_drop, 0};
        st = tb_feedback_run(ckt, &probe, res);
    }
    if (!st)
        st = tb_impedance_run(ckt, s.mna, s.solver, s.Mx, opt->refactor_rcond_drop, diag, res);
    if (!st)
        st = tb_wirebreak_run(ckt, s.mna, s.solver, s.Mx, opt->refactor_rcond_drop, diag, res);
    sweeper_free(&s);
    if (st) {
        tb_result_free(res);
        return st;
    }
    *out = res;
    return TB_OK;
}

size_t tb_result_points(const tb_result *res)
{
    return res ? res->npoints : 0;
}

size_t tb_result_loops(const tb_result *res)
{
    return res ? res->nloops : 0;
}

const double *tb_result_freqs(const tb_result *res)
{
    return res ? res->freqs : NULL;
}

const tb_point *tb_result_loop(const tb_result *res, size_t l)
{
    return res && l < res->nloops ? res->pts + l * res->npoints : NULL;
}

bool tb_result_dc(const tb_result *res, size_t l, tb_point *out)
{
    if (!res || !res->has_dc || l >= res->nloops)
        return false;
    *out = res->dc[l];
    return true;
}
