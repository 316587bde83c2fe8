/* src/wirebreak.c: loop gain at a wire break by voltage and current injection (Middlebrook) */
#include "wirebreak.h"

#include <math.h>
#include <string.h>

#include "alloc.h"
#include "diag.h"
#include "measure.h"

static const double TWO_PI = 6.28318530717958647692528676655900577;

void tb_wirebreak_free(tb_wb_data *wb)
{
    if (!wb)
        return;
    tb_free(wb->pts);
    tb_free(wb);
}

/* The break source and where it sits in M. */
typedef struct {
    size_t j;       /* its branch unknown */
    int x;          /* + node (0 = ground) */
    int y;          /* - node */
    bool inject_y;  /* the test current enters at y (else at x, when y is ground) */
} brk;

static tb_status break_error(const tb_circuit *ckt, tb_diag *diag, const char *fmt, const char *what)
{
    const tb_loc *loc = &ckt->brk.loc;
    size_t len = 0;
    const char *line = tb_circuit_source_line(ckt, loc->file, loc->line, &len);
    tb_status st = tb_diag_add(diag, TB_SEV_ERROR, loc->file, loc->line, loc->col, line, len, fmt,
                               ckt->brk.source, what);
    return st ? st : TB_ERR_INPUT;
}

static tb_status find_break(const tb_circuit *ckt, tb_diag *diag, brk *b)
{
    size_t e = 0;
    if (!tb_circuit_find_element(ckt, ckt->brk.source, &e))
        return break_error(ckt, diag, ".break names '%s', which does not exist%s", "");
    const tb_element *el = &ckt->elems[e];
    if (el->kind != TB_EL_V)
        return break_error(ckt, diag, ".break names '%s', a %s; a zero-volt V source in the loop wire is expected",
                           tb_elem_kind_word(el->kind));
    if (el->node[0] == 0 && el->node[1] == 0)
        return break_error(ckt, diag, ".break: '%s' has both ends at ground%s", "");
    if (ckt->io.given && ckt->io.source_elem == e)
        return break_error(ckt, diag, ".break: '%s' is the .io input; mark a zero-volt source of its own%s", "");
    *b = (brk){ckt->node_count - 1 + (size_t)el->branch, el->node[0], el->node[1], el->node[1] != 0};
    return TB_OK;
}

static double complex node_v(const double complex *s, int node)
{
    return node == 0 ? 0 : s[node - 1];
}

/* Tv, Ti and T from s1 (1 V injected: v_x - v_y = 1) and s2 (1 A injected). */
static tb_break_point evaluate(const brk *b, const double complex *s1, const double complex *s2)
{
    tb_break_point p = {0};
    double complex vx = node_v(s1, b->x), vy = node_v(s1, b->y);
    /* i(V) flows into x, through the source, out of y: from y toward x it is -i(V) */
    double complex ib = s2[b->j];
    double complex ix = b->inject_y ? -ib : 1.0 - ib;
    double complex iy = b->inject_y ? 1.0 + ib : ib;
    if (cabs(vy) > 0) {
        p.has_Tv = true;
        p.Tv = -vx / vy;
    }
    if (cabs(iy) > 0) {
        p.has_Ti = true;
        p.Ti = ix / iy;
    }
    double complex inv = iy - vy; /* 1/(1+T) = 1/(1+Tv) + 1/(1+Ti), V_inj = I_inj = 1 */
    if (cabs(inv) > 0) {
        p.has_T_probe = true;
        p.T_probe = 1.0 / inv - 1.0;
    }
    if (p.has_Tv && p.has_Ti && cabs(p.Tv + p.Ti + 2.0) > 0) {
        p.has_T = true;
        p.T = (p.Tv * p.Ti - 1.0) / (p.Tv + p.Ti + 2.0);
    } else if (p.has_T_probe) { /* Tv or Ti infinite: T is the other one, as the probe form gives */
        p.has_T = true;
        p.T = p.T_probe;
    }
    return p;
}

static tb_status at_frequency(const tb_mna *mna, tb_solver *solver, double *Mx, const brk *b, double f,
                              bool fresh, double rcond_drop, double complex *S, tb_break_point *out)
{
    size_t n = mna->n;
    size_t culprit = 0;
    tb_mna_values(mna, TWO_PI * f, Mx);
    tb_status st = fresh ? tb_solver_factor(solver, Mx, &culprit) : tb_solver_refactor(solver, Mx, rcond_drop, &culprit);
    if (st)
        return st;
    memset(S, 0, 2 * n * sizeof(double complex));
    S[b->j] = 1.0;
    S[n + (size_t)(b->inject_y ? b->y : b->x) - 1] = 1.0;
    if ((st = tb_solver_solve(solver, S, 2)))
        return st;
    *out = evaluate(b, S, S + n);
    return TB_OK;
}

/* Lowest frequency where |T| falls through 1, linear in (log f, dB), and the phase margin. */
static void unity(tb_wb_data *wb, const tb_result *res)
{
    tb_break_summary *s = &wb->sum;
    double prev_deg = s->dc.has_T && cabs(s->dc.T) > 0 ? carg(s->dc.T) * TB_DEG_PER_RAD : 0;
    for (size_t i = 0; i < res->npoints; i++) {
        const tb_break_point *p = &wb->pts[i];
        if (!p->has_T || cabs(p->T) == 0)
            continue;
        double deg = prev_deg + tb_wrap180(carg(p->T) * TB_DEG_PER_RAD - prev_deg);
        if (i > 0 && wb->pts[i - 1].has_T && cabs(wb->pts[i - 1].T) >= 1.0 && cabs(p->T) < 1.0) {
            double d0 = tb_db(wb->pts[i - 1].T), d1 = tb_db(p->T);
            double t = d0 == d1 ? 0 : d0 / (d0 - d1);
            double f0 = res->freqs[i - 1], f1 = res->freqs[i];
            s->has_unity = true;
            s->unity_hz = exp(log(f0) + t * (log(f1) - log(f0)));
            s->has_phase_margin = true;
            s->phase_margin_deg = 180.0 + prev_deg + t * (deg - prev_deg);
            return;
        }
        prev_deg = deg;
    }
}

tb_status tb_wirebreak_run(const tb_circuit *ckt, const tb_mna *mna, tb_solver *solver, double *Mx,
                           double rcond_drop, tb_diag *diag, tb_result *res)
{
    if (!ckt->brk.given)
        return TB_OK;
    brk b;
    tb_status st = find_break(ckt, diag, &b);
    if (st)
        return st;
    tb_wb_data *wb = tb_calloc(1, sizeof(*wb));
    if (!wb)
        return TB_ERR_NOMEM;
    res->wb = wb;
    wb->pts = tb_calloc(res->npoints ? res->npoints : 1, sizeof(tb_break_point));
    double complex *S = tb_malloc(2 * mna->n, sizeof(double complex));
    st = wb->pts && S ? TB_OK : TB_ERR_NOMEM;
    tb_break_summary *s = &wb->sum;
    *s = (tb_break_summary){.computed = true, .source = ckt->brk.source, .node_x = ckt->node_names[b.x],
                            .node_y = ckt->node_names[b.y]};
    if (!st && res->has_dc)
        st = at_frequency(mna, solver, Mx, &b, 0.0, true, rcond_drop, S, &s->dc);
    for (size_t i = 0; i < res->npoints && !st; i++)
        st = at_frequency(mna, solver, Mx, &b, res->freqs[i], i == 0, rcond_drop, S, &wb->pts[i]);
    if (!st && !res->has_dc && res->npoints > 0) {
        s->dc = wb->pts[0];
        s->dc_hz = res->freqs[0];
    }
    if (!st)
        unity(wb, res);
    tb_free(S);
    return st;
}

tb_status tb_break_get(const tb_result *res, tb_break_summary *out, const tb_break_point **pts)
{
    if (!res || !out)
        return TB_ERR_USAGE;
    if (!res->wb) {
        *out = (tb_break_summary){0};
        if (pts)
            *pts = NULL;
        return TB_OK;
    }
    *out = res->wb->sum;
    if (pts)
        *pts = res->wb->pts;
    return TB_OK;
}
