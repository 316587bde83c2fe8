/* src/sweep.c: the point loop: one factorization of M per frequency, handed to every per-point hook */
#include "sweep.h"

#include "alloc.h"
#include "diag.h"
#include "units.h"

struct tb_sweep {
    const tb_circuit *ckt;
    tb_diag *diag;
    tb_mna *mna;
    tb_solver *solver;
    tb_loop_work *work;
    double *Mx;
    tb_point *row; /* one point of every loop */
    double rcond_drop;
    tb_probe probe;
};

void tb_sweep_free(tb_sweep *s)
{
    if (!s)
        return;
    tb_solver_free(s->solver);
    tb_mna_free(s->mna);
    tb_loop_work_free(s->work);
    tb_free(s->Mx);
    tb_free(s->row);
    tb_free(s);
}

tb_status tb_sweep_new(const tb_circuit *ckt, double rcond_drop, tb_diag *diag, tb_sweep **out)
{
    tb_sweep *s = tb_calloc(1, sizeof(*s));
    if (!s)
        return TB_ERR_NOMEM;
    s->ckt = ckt;
    s->diag = diag;
    s->rcond_drop = rcond_drop;
    tb_status st = tb_mna_build(ckt, diag, &s->mna);
    if (!st)
        st = tb_solver_new(s->mna, &s->solver);
    if (!st)
        st = tb_loop_work_new(s->mna, &s->work);
    if (!st) {
        s->Mx = tb_malloc(2 * s->mna->nnz, sizeof(double));
        s->row = tb_calloc(ckt->loop_count, sizeof(tb_point));
        st = s->Mx && s->row ? TB_OK : TB_ERR_NOMEM;
    }
    if (st) {
        tb_sweep_free(s);
        return st;
    }
    s->probe = tb_probe_make(s->mna, s->solver, s->work, s->Mx, s->row, rcond_drop);
    *out = s;
    return TB_OK;
}

const tb_mna *tb_sweep_mna(const tb_sweep *s)
{
    return s->mna;
}

tb_probe *tb_sweep_probe(tb_sweep *s)
{
    return &s->probe;
}

tb_solver_counts tb_sweep_counts(const tb_sweep *s)
{
    return tb_solver_get_counts(s->solver);
}

static tb_status singular_diag(const tb_sweep *s, tb_severity sev, double f, size_t culprit,
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
    tb_mna_unknown_name(s->ckt, culprit, name, sizeof name);
    tb_status st = tb_diag_add(s->diag, sev, s->ckt->file, 0, 0, NULL, 0,
                               "the circuit matrix is singular at %s (zero pivot at %s): element "
                               "values make the equations dependent there, e.g. a loop whose "
                               "return difference 1 + T is zero%s",
                               at, name, consequence);
    return st ? st : TB_ERR_SINGULAR;
}

/* Every loop at the point the solver holds, then every hook. */
static tb_status visit(tb_sweep *s, size_t index, double f, const tb_sweep_hook *hooks, size_t nhooks)
{
    double omega = TB_TWO_PI * f;
    tb_status st = tb_loop_eval(s->mna, s->solver, s->Mx, omega, s->work, s->row);
    tb_sweep_point pt = {index, f, omega, s->mna, s->solver, s->Mx, s->row, s->work};
    for (size_t h = 0; h < nhooks && !st; h++)
        st = hooks[h].at(hooks[h].self, &pt);
    return st;
}

/* DC: an exact f = 0 factorization when M(0) is non-singular; otherwise
 * *culprit names the zero pivot (reported once the sweep has succeeded). */
static tb_status sweep_dc(tb_sweep *s, const tb_sweep_hook *hooks, size_t nhooks, bool *has_dc, size_t *culprit)
{
    if (s->ckt->dc_singular)
        return TB_OK; /* singular by structure (warned); rounding could hide a zero pivot */
    tb_mna_values(s->mna, 0.0, s->Mx);
    tb_status st = tb_solver_factor(s->solver, s->Mx, culprit);
    if (st == TB_ERR_SINGULAR)
        return TB_OK;
    if (st || (st = visit(s, TB_SWEEP_DC, 0.0, hooks, nhooks)))
        return st;
    *has_dc = true;
    return TB_OK;
}

tb_status tb_sweep_run(tb_sweep *s, const double *freqs, size_t npoints, bool dc,
                       const tb_sweep_hook *hooks, size_t nhooks, bool *has_dc)
{
    size_t dc_culprit = 0;
    *has_dc = false;
    s->probe.held = false;
    s->probe.row_valid = false;
    tb_status st = dc ? sweep_dc(s, hooks, nhooks, has_dc, &dc_culprit) : TB_OK;
    for (size_t i = 0; i < npoints && !st; i++) {
        size_t culprit = 0;
        tb_mna_values(s->mna, TB_TWO_PI * freqs[i], s->Mx);
        st = i == 0 ? tb_solver_factor(s->solver, s->Mx, &culprit)
                    : tb_solver_refactor(s->solver, s->Mx, s->rcond_drop, &culprit);
        if (st == TB_ERR_SINGULAR)
            return singular_diag(s, TB_SEV_ERROR, freqs[i], culprit, "");
        if (!st)
            st = visit(s, i, freqs[i], hooks, nhooks);
    }
    if (!st && dc && !*has_dc) {
        st = singular_diag(s, TB_SEV_WARNING, 0.0, dc_culprit, "; DC values are those at the lowest sweep frequency");
        st = st == TB_ERR_SINGULAR ? TB_OK : st;
    }
    return st;
}
