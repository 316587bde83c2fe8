/* src/wirebreak.c: loop gain at a wire break by voltage and current injection (Middlebrook) */
#include "wirebreak.h"

#include <math.h>
#include <string.h>

#include "alloc.h"
#include "measure.h"


/* The break source and where it sits in M. */
typedef struct {
    size_t j;       /* its branch unknown */
    int x;          /* + node (0 = ground) */
    int y;          /* - node */
    bool inject_y;  /* the test current enters at y (else at x, when y is ground) */
} brk;

struct tb_wirebreak {
    brk b;
    size_t n;
    tb_wb_data *wb;     /* what the result receives from tb_wirebreak_end */
    double complex *S;  /* per lane, 2 columns: the voltage and the current injection */
};

static double complex node_v(const double complex *s, int node)
{
    return node == 0 ? 0 : s[tb_mna_node_unknown(node)];
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

tb_status tb_wirebreak_at(void *self, const tb_sweep_point *pt)
{
    tb_wirebreak *w = self;
    size_t n = w->n;
    const brk *b = &w->b;
    double complex *S = w->S + pt->lane * 2 * n;
    memset(S, 0, 2 * n * sizeof(double complex));
    S[b->j] = 1.0;
    S[n + tb_mna_node_unknown(b->inject_y ? b->y : b->x)] = 1.0;
    tb_status st = tb_solver_solve(pt->solver, S, 2);
    if (st)
        return st;
    tb_break_point p = evaluate(b, S, S + n);
    if (pt->index == TB_SWEEP_DC)
        w->wb->sum.dc = p;
    else
        w->wb->pts[pt->index] = p;
    return TB_OK;
}

/* |T| at the break in dB, NAN where it is absent or zero. */
static double break_db(const void *ctx, size_t i)
{
    const tb_break_point *p = (const tb_break_point *)ctx + i;
    return p->has_T && cabs(p->T) > 0 ? tb_db(p->T) : NAN;
}

/* Unwrapped phase of T at the break, from DC through point `through`, over the points where it exists. */
static void break_phase(const tb_wb_data *wb, size_t through, double *before, double *at)
{
    const tb_break_summary *s = &wb->sum;
    double prev = s->dc.has_T && cabs(s->dc.T) > 0 ? carg(s->dc.T) * TB_DEG_PER_RAD : 0;
    *before = prev;
    for (size_t i = 0; i <= through; i++) {
        const tb_break_point *p = &wb->pts[i];
        if (!p->has_T || cabs(p->T) == 0)
            continue;
        *before = prev;
        prev += tb_wrap180(carg(p->T) * TB_DEG_PER_RAD - prev);
    }
    *at = prev;
}

/* Lowest frequency where |T| falls through 1, linear in (log f, dB), and the phase margin. */
static void unity(tb_wb_data *wb, const tb_result *res)
{
    size_t seg = 0;
    double t = 0, d0 = 0, d1 = 0;
    if (!tb_grid_unity(break_db, wb->pts, res->npoints, &seg, &t))
        return;
    break_phase(wb, seg + 1, &d0, &d1);
    tb_break_summary *s = &wb->sum;
    s->has_unity = true;
    s->unity_hz = tb_grid_logf(res->freqs[seg], res->freqs[seg + 1], t);
    s->has_phase_margin = true;
    s->phase_margin_deg = tb_wrap180(180.0 + d0 + t * (d1 - d0)); /* as margin.c */
}

void tb_wirebreak_free(tb_wirebreak *w)
{
    if (!w)
        return;
    if (w->wb) {
        tb_free(w->wb->pts);
        tb_free(w->wb->vs);
        tb_free(w->wb);
    }
    tb_free(w->S);
    tb_free(w);
}

tb_status tb_wirebreak_begin(const tb_circuit *ckt, const tb_mna *mna, size_t npoints, size_t lanes,
                             tb_wirebreak **out)
{
    const tb_element *el = &ckt->elems[ckt->brk.elem];
    tb_wirebreak *w = tb_calloc(1, sizeof(*w));
    if (!w)
        return TB_ERR_NOMEM;
    w->b = (brk){tb_mna_branch_unknown(ckt, el), el->node[0], el->node[1], el->node[1] != 0};
    w->n = mna->n;
    w->wb = tb_calloc(1, sizeof(tb_wb_data));
    if (w->wb)
        w->wb->pts = tb_calloc(npoints ? npoints : 1, sizeof(tb_break_point));
    if (w->wb)
        w->wb->vs = tb_calloc(mna->loop_count ? mna->loop_count : 1, sizeof(tb_break_vs_loop));
    w->S = tb_malloc(2 * lanes, mna->n * sizeof(double complex)); /* lanes <= TB_SWEEP_MAX_LANES */
    if (!w->wb || !w->wb->pts || !w->wb->vs || !w->S) {
        tb_wirebreak_free(w);
        return TB_ERR_NOMEM;
    }
    w->wb->sum = (tb_break_summary){.computed = true, .source = ckt->brk.source, .node_x = ckt->node_names[w->b.x],
                                    .node_y = ckt->node_names[w->b.y]};
    *out = w;
    return TB_OK;
}

/* The break's T against loop l's return ratio at the same point. */
static tb_break_vs_loop versus_loop(const tb_break_summary *s, const tb_result *res, size_t l)
{
    tb_break_vs_loop vs = {0};
    double hz = 0;
    tb_point p = tb_result_dc_or_first(res, l, &hz);
    if ((p.flags & TB_PT_T_INF) || !s->dc.has_T)
        return vs;
    vs.T_return = p.T;
    vs.rel_diff = cabs(s->dc.T) > 0 ? cabs(p.T - s->dc.T) / cabs(s->dc.T) : 0;
    vs.kind = cabs(s->dc.T) <= 1e-12 && cabs(p.T) <= 1e-12 ? TB_BREAK_CMP_NO_LOOP
              : vs.rel_diff <= 1e-9                       ? TB_BREAK_CMP_UNILATERAL
                                                          : TB_BREAK_CMP_BILATERAL;
    return vs;
}

void tb_wirebreak_end(tb_wirebreak *w, tb_result *res)
{
    tb_wb_data *wb = w->wb;
    if (!res->has_dc && res->npoints > 0) {
        wb->sum.dc = wb->pts[0];
        wb->sum.dc_hz = res->freqs[0];
    }
    unity(wb, res);
    for (size_t l = 0; l < res->nloops; l++)
        wb->vs[l] = versus_loop(&wb->sum, res, l);
    res->wb = wb;
    w->wb = NULL;
}
