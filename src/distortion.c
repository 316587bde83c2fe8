/* src/distortion.c: harmonic and intermodulation distortion by nonlinear currents (Volterra series
 * to third order), with and without each loop's feedback */
#include "distortion.h"

#include <math.h>
#include <string.h>

#include "alloc.h"
#include "loop.h"
#include "nonlinear.h"

/* The method of nonlinear currents (P. Wambacq and W. Sansen, Distortion Analysis of Analog
 * Integrated Circuits, Kluwer 1998, ch. 3 and 4): a source y = k x + k2 x^2 + k3 x^3 keeps
 * k in M; its higher-order terms, evaluated on the lower-order solutions, are current
 * sources driving the same linear circuit at the product frequencies. Signals are
 * x(t) = Re(X e^{jwt}) with X the peak phasor, so a product p q of phasors P (at a) and
 * Q (at b) holds P Q / 2 at a + b and P conj(Q) / 2 at a - b. With u the source's output
 * vector, M x = b - u (y - k x) (docs/algebra.md: M = M0 + k u v'). */

typedef struct {
    tb_loopvec lv;  /* u, v, k of the source */
    double k2;
    double k3;
    size_t loop;    /* the loop whose source it is, or SIZE_MAX */
} nl_source;

/* The work of one analysis. Case 0 is the circuit as drawn; case 1 + l has loop l opened: its
 * source's linear output driven by k times an injected controlling variable of amplitude
 * drive[1 + l] (M0 = M - k u v', solved by Sherman-Morrison on M's factorization), and the
 * .io input at zero. */
typedef struct {
    tb_probe *probe;
    const tb_mna *mna;
    double amp;
    double target;      /* > 0: the output amplitude to hold by scaling the input (the sweep) */
    size_t n;
    size_t nloops;
    size_t ncase;
    nl_source *src;
    size_t nsrc;
    double *drive;      /* ncase */
    bool *ok;           /* ncase: the case exists at every frequency solved so far */
    const char **why;   /* ncase: why not */
    double complex *T;  /* 3 x nloops: T at the last tone f, at 2f and at 3f */
    bool *T_ok;         /* 3 x nloops: T was finite there */
    double complex *B;  /* n x (2 ncase + nloops): right-hand sides, then w_l = M^-1 u_l */
    double complex *X1; /* n x ncase: first order at f1 */
    double complex *X2; /* n x ncase: second order at 2 f1 */
    double complex *Xb; /* n x ncase: first order at f2 */
    double complex *Xd; /* n x ncase: second order at f2 - f1 */
} dist_work;

/* Raw output phasors of one case. */
typedef struct {
    double complex y1, y2, y3_direct, y3_inter;
    double complex ysum, ydiff, yim3;
} dist_raw;

static const char *const WHY_SINGULAR = "the circuit matrix is singular at a product frequency";
static const char *const WHY_T_INF = "T is infinite at a product frequency (the circuit with the "
                                     "loop's source at zero gain is singular there)";
static const char *const WHY_DEAF = "the output does not respond to the input at the tone";
static const char *const WHY_OPEN_DEAF = "with the loop opened, its source does not reach the output";

static double complex *col(const dist_work *dw, double complex *base, size_t j)
{
    return base + j * dw->n;
}

/* Solves M(j 2 pi f) X = B for per columns of each case (case-major), the opened cases by
 * Sherman-Morrison; T_out and T_ok (nloops each, or NULL) receive T at f and whether it is
 * finite. A singular matrix marks
 * every case absent and returns TB_OK. */
static tb_status solve_at(dist_work *dw, double f, size_t per, double complex *T_out, bool *T_ok)
{
    size_t culprit = 0;
    tb_status st = tb_probe_factor(dw->probe, f, false, &culprit);
    if (st == TB_ERR_SINGULAR) {
        for (size_t l = 0; T_ok && l < dw->nloops; l++)
            T_ok[l] = false;
        for (size_t c = 0; c < dw->ncase; c++)
            if (dw->ok[c]) {
                dw->ok[c] = false;
                dw->why[c] = WHY_SINGULAR;
            }
        return TB_OK;
    }
    if (st)
        return st;
    size_t first_w = dw->ncase * per;
    for (size_t l = 0; l < dw->nloops; l++) {
        double complex *w = col(dw, dw->B, first_w + l);
        memset(w, 0, dw->n * sizeof *w);
        tb_svec_axpy(&dw->mna->loops[l].u, 1, w);
    }
    st = tb_solver_solve(dw->probe->solver, dw->B, first_w + dw->nloops);
    if (st)
        return st;
    for (size_t l = 0; l < dw->nloops; l++) {
        const tb_loopvec *lv = &dw->mna->loops[l];
        const double complex *w = col(dw, dw->B, first_w + l);
        double complex q = lv->k * tb_svec_dot(&lv->v, w);
        bool inf = cabs(1 - q) <= TB_LOOP_INF_TOL;
        if (T_out) {
            T_out[l] = inf ? 0 : q / (1 - q);
            T_ok[l] = !inf;
        }
        if (inf && dw->ok[1 + l]) {
            dw->ok[1 + l] = false;
            dw->why[1 + l] = WHY_T_INF;
        }
        for (size_t j = 0; !inf && j < per; j++) {
            double complex *d = col(dw, dw->B, (1 + l) * per + j);
            tb_loop_sherman_morrison(lv, w, q, d, NULL, d, dw->n);
        }
    }
    return TB_OK;
}

/* The controlling variable of source s in case c on solution X of the given order: the
 * opened loop's own source sees the injected drive alone (a pure tone). */
static double complex ctrl(const dist_work *dw, size_t c, const nl_source *s, const double complex *X, int order)
{
    if (c > 0 && s->loop == c - 1)
        return order == 1 ? dw->drive[c] : 0;
    return tb_svec_dot(&s->lv.v, X);
}

static void clear(dist_work *dw, size_t cols)
{
    memset(dw->B, 0, cols * dw->n * sizeof *dw->B);
}

/* First-order right-hand sides: the input at amp (case 0), each opened source at its drive
 * (unit drive when unit). */
static void first_order_rhs(dist_work *dw, bool unit)
{
    clear(dw, dw->ncase);
    tb_svec_axpy(&dw->mna->b, dw->amp, col(dw, dw->B, 0));
    for (size_t l = 0; l < dw->nloops; l++) {
        const tb_loopvec *lv = &dw->mna->loops[l];
        tb_svec_axpy(&lv->u, -lv->k * (unit ? 1.0 : dw->drive[1 + l]), col(dw, dw->B, 1 + l));
    }
}

static double complex out_of(const dist_work *dw, const double complex *X)
{
    return tb_svec_dot(&dw->mna->c, X);
}

/* Order 1 at f into X1 with each opened case's drive set for the output amplitude of case 0. */
static tb_status order_one(dist_work *dw, double f)
{
    first_order_rhs(dw, true);
    tb_status st = solve_at(dw, f, 1, dw->T, dw->T_ok);
    if (st)
        return st;
    memcpy(dw->X1, dw->B, dw->ncase * dw->n * sizeof *dw->B);
    double y0 = cabs(out_of(dw, dw->X1));
    /* holding the output (the sweep): the input is scaled so that |y0| is the target */
    double in_scale = dw->target > 0 && y0 > 0 ? dw->target / y0 : 1.0;
    y0 *= in_scale;
    for (size_t c = 0; c < dw->ncase; c++) {
        double complex *X = col(dw, dw->X1, c);
        double g = c == 0 ? y0 : cabs(out_of(dw, X));
        if (dw->ok[c] && (y0 == 0 || g == 0 || !isfinite(in_scale))) {
            dw->ok[c] = false;
            dw->why[c] = y0 == 0 || !isfinite(in_scale) ? WHY_DEAF : WHY_OPEN_DEAF;
        }
        dw->drive[c] = c == 0 ? dw->amp * in_scale : dw->ok[c] ? y0 / g : 0;
        double scale = c == 0 ? in_scale : dw->drive[c];
        for (size_t i = 0; i < dw->n; i++)
            X[i] *= scale;
    }
    return TB_OK;
}

/* The harmonics of the tone f: X1 (f), X2 (2f), then third order at 3f into raw. */
static tb_status harmonics(dist_work *dw, double f, dist_raw *raw)
{
    for (size_t c = 0; c < dw->ncase; c++) {
        dw->ok[c] = true;
        dw->why[c] = NULL;
    }
    tb_status st = order_one(dw, f);
    clear(dw, dw->ncase);
    for (size_t c = 0; !st && c < dw->ncase; c++)
        for (size_t s = 0; s < dw->nsrc; s++) {
            const nl_source *ns = &dw->src[s];
            double complex x1 = ctrl(dw, c, ns, col(dw, dw->X1, c), 1);
            tb_svec_axpy(&ns->lv.u, -ns->k2 * x1 * x1 / 2, col(dw, dw->B, c));
        }
    if (!st)
        st = solve_at(dw, 2 * f, 1, dw->T + dw->nloops, dw->T_ok + dw->nloops);
    if (st)
        return st;
    memcpy(dw->X2, dw->B, dw->ncase * dw->n * sizeof *dw->B);
    clear(dw, 2 * dw->ncase);
    for (size_t c = 0; c < dw->ncase; c++)
        for (size_t s = 0; s < dw->nsrc; s++) {
            const nl_source *ns = &dw->src[s];
            double complex x1 = ctrl(dw, c, ns, col(dw, dw->X1, c), 1);
            double complex x2 = ctrl(dw, c, ns, col(dw, dw->X2, c), 2);
            tb_svec_axpy(&ns->lv.u, -ns->k3 * x1 * x1 * x1 / 4, col(dw, dw->B, 2 * c));
            tb_svec_axpy(&ns->lv.u, -ns->k2 * x1 * x2, col(dw, dw->B, 2 * c + 1));
        }
    st = solve_at(dw, 3 * f, 2, dw->T + 2 * dw->nloops, dw->T_ok + 2 * dw->nloops);
    for (size_t c = 0; !st && c < dw->ncase; c++) {
        raw[c].y1 = out_of(dw, col(dw, dw->X1, c));
        raw[c].y2 = out_of(dw, col(dw, dw->X2, c));
        raw[c].y3_direct = out_of(dw, col(dw, dw->B, 2 * c));
        raw[c].y3_inter = out_of(dw, col(dw, dw->B, 2 * c + 1));
    }
    return st;
}

/* Second-order right-hand sides of the two-tone products: at f2 - f1, k2 xb conj(xa); at
 * f1 + f2, k2 xa xb (each from 2 x_a x_b). */
static void second_mix_rhs(dist_work *dw, bool sum)
{
    clear(dw, dw->ncase);
    for (size_t c = 0; c < dw->ncase; c++)
        for (size_t s = 0; s < dw->nsrc; s++) {
            const nl_source *ns = &dw->src[s];
            double complex xa = ctrl(dw, c, ns, col(dw, dw->X1, c), 1);
            double complex xb = ctrl(dw, c, ns, col(dw, dw->Xb, c), 1);
            double complex p = sum ? xa * xb : xb * conj(xa);
            tb_svec_axpy(&ns->lv.u, -ns->k2 * p, col(dw, dw->B, c));
        }
}

/* Intermodulation of tones f1 (X1, X2 from harmonics at f1) and f2, each at the drive of its
 * case: ysum (f1 + f2), ydiff (f2 - f1), yim3 (2 f1 - f2). */
static tb_status intermodulation(dist_work *dw, double f1, double f2, dist_raw *raw)
{
    first_order_rhs(dw, false);
    tb_status st = solve_at(dw, f2, 1, NULL, NULL);
    if (st)
        return st;
    memcpy(dw->Xb, dw->B, dw->ncase * dw->n * sizeof *dw->B);
    second_mix_rhs(dw, false);
    if ((st = solve_at(dw, f2 - f1, 1, NULL, NULL)))
        return st;
    memcpy(dw->Xd, dw->B, dw->ncase * dw->n * sizeof *dw->B);
    for (size_t c = 0; c < dw->ncase; c++)
        raw[c].ydiff = out_of(dw, col(dw, dw->Xd, c));
    second_mix_rhs(dw, true);
    if ((st = solve_at(dw, f1 + f2, 1, NULL, NULL)))
        return st;
    for (size_t c = 0; c < dw->ncase; c++)
        raw[c].ysum = out_of(dw, col(dw, dw->B, c));
    /* 2 f1 - f2: 2 k2 (x_2f1 x_b + x_d x_a) and 3 k3 x_a^2 x_b, at the difference frequencies */
    clear(dw, dw->ncase);
    for (size_t c = 0; c < dw->ncase; c++)
        for (size_t s = 0; s < dw->nsrc; s++) {
            const nl_source *ns = &dw->src[s];
            double complex xa = ctrl(dw, c, ns, col(dw, dw->X1, c), 1);
            double complex xb = ctrl(dw, c, ns, col(dw, dw->Xb, c), 1);
            double complex x2a = ctrl(dw, c, ns, col(dw, dw->X2, c), 2);
            double complex xd = ctrl(dw, c, ns, col(dw, dw->Xd, c), 2);
            double complex p = ns->k2 * (x2a * conj(xb) + xa * conj(xd)) + ns->k3 * 0.75 * xa * xa * conj(xb);
            tb_svec_axpy(&ns->lv.u, -p, col(dw, dw->B, c));
        }
    if ((st = solve_at(dw, 2 * f1 - f2, 1, NULL, NULL)))
        return st;
    for (size_t c = 0; c < dw->ncase; c++)
        raw[c].yim3 = out_of(dw, col(dw, dw->B, c));
    return TB_OK;
}

/* ---- figures ---------------------------------------------------------------- */

static tb_dist_ratio ratio_of(double complex y, double fund)
{
    double r = cabs(y) / fund;
    if (!isfinite(r))
        return (tb_dist_ratio){.present = false}; /* beyond a double: the series is long gone */
    return (tb_dist_ratio){.present = true, .ratio = r, .has_db = r > 0, .db = r > 0 ? 20 * log10(r) : 0};
}

/* The harmonic figures of one case from its raw phasors. */
static void fill_harmonics(tb_dist_case *dc, const dist_raw *raw, double drive, double limit_pct)
{
    dc->computed = true;
    dc->why_absent = NULL;
    dc->drive = drive;
    dc->fund = cabs(raw->y1);
    dc->hd2 = ratio_of(raw->y2, dc->fund);
    dc->hd3 = ratio_of(raw->y3_direct + raw->y3_inter, dc->fund);
    dc->hd3_direct = ratio_of(raw->y3_direct, dc->fund);
    dc->hd3_inter = ratio_of(raw->y3_inter, dc->fund);
    dc->third = dc->hd3.ratio;
    dc->valid = dc->hd3.present && 100 * dc->third <= limit_pct;
}

/* The intermodulation figures of one case (after fill_harmonics). */
static void fill_intermodulation(tb_dist_case *dc, const dist_raw *raw, double limit_pct)
{
    dc->im2 = ratio_of(raw->ysum, dc->fund);
    dc->im2_diff = ratio_of(raw->ydiff, dc->fund);
    dc->im3 = ratio_of(raw->yim3, dc->fund);
    dc->has_iip3 = dc->im3.ratio > 0 && isfinite(dc->drive / sqrt(dc->im3.ratio));
    dc->iip3 = dc->has_iip3 ? dc->drive / sqrt(dc->im3.ratio) : 0;
    dc->third = fmax(dc->hd3.ratio, dc->im3.ratio);
    dc->valid = dc->hd3.present && dc->im3.present && 100 * dc->third <= limit_pct;
}

static void absent_case(tb_dist_case *dc, const char *why)
{
    *dc = (tb_dist_case){.computed = false, .why_absent = why};
}

/* Open against closed, and the memoryless rules at the harmonics' own frequencies, for loop l
 * (T: at f, 2f, 3f, with T_ok). */
static void compare(tb_distortion_loop *dl, const tb_dist_case *closed, const double complex *T, const bool *T_ok)
{
    const tb_dist_case *open = &dl->open;
    dl->T = T[0];
    dl->has_rule_hd2 = T_ok[1];
    dl->T_2f = T[1];
    dl->rule_hd2 = T_ok[1] ? cabs(1 + T[1]) : 0;
    dl->has_rule_hd3 = T_ok[2];
    dl->T_3f = T[2];
    dl->rule_hd3 = T_ok[2] ? cabs(1 + T[2]) : 0;
    dl->has_hd2_reduction = closed->hd2.ratio > 0 && open->hd2.ratio > 0;
    dl->hd2_reduction = dl->has_hd2_reduction ? open->hd2.ratio / closed->hd2.ratio : 0;
    dl->has_hd3_reduction = closed->hd3.ratio > 0 && open->hd3.ratio > 0;
    dl->hd3_reduction = dl->has_hd3_reduction ? open->hd3.ratio / closed->hd3.ratio : 0;
    dl->has_hd3_direct_reduction = closed->hd3_direct.ratio > 0 && open->hd3_direct.ratio > 0;
    dl->hd3_direct_reduction =
        dl->has_hd3_direct_reduction ? open->hd3_direct.ratio / closed->hd3_direct.ratio : 0;
}

/* At the stated amplitude and tones: the circuit as drawn into dd->sum.closed, each loop's
 * opened case into dd->loops. */
static tb_status at_tone(dist_work *dw, const tb_volterra_spec *vs, dist_raw *raw, bool *hd_ok, tb_dist_data *dd)
{
    tb_status st = harmonics(dw, vs->freq_hz, raw);
    if (st)
        return st;
    memcpy(hd_ok, dw->ok, dw->ncase * sizeof *hd_ok);
    for (size_t c = 0; c < dw->ncase; c++) {
        tb_dist_case *dc = c == 0 ? &dd->sum.closed : &dd->loops[c - 1].open;
        if (hd_ok[c])
            fill_harmonics(dc, &raw[c], dw->drive[c], vs->limit_pct);
        else
            absent_case(dc, dw->why[c]);
    }
    if ((st = intermodulation(dw, vs->freq_hz, vs->freq2_hz, raw)))
        return st;
    for (size_t c = 0; c < dw->ncase; c++) {
        tb_dist_case *dc = c == 0 ? &dd->sum.closed : &dd->loops[c - 1].open;
        if (hd_ok[c] && dw->ok[c])
            fill_intermodulation(dc, &raw[c], vs->limit_pct);
    }
    for (size_t l = 0; l < dw->nloops; l++) {
        tb_distortion_loop *dl = &dd->loops[l];
        dl->computed = dd->sum.closed.computed && dl->open.computed;
        dl->why_absent = !dd->sum.closed.computed ? dd->sum.closed.why_absent : dl->open.why_absent;
        const double complex T[3] = {dw->T[l], dw->T[dw->nloops + l], dw->T[2 * dw->nloops + l]};
        const bool T_ok[3] = {dw->T_ok[l], dw->T_ok[dw->nloops + l], dw->T_ok[2 * dw->nloops + l]};
        if (dl->computed)
            compare(dl, &dd->sum.closed, T, T_ok);
    }
    return TB_OK;
}

/* HD2 and HD3 with and without each loop's feedback at every kept grid frequency, the input
 * scaled at each so that the output amplitude is that of the stated tone. */
static tb_status sweep(dist_work *dw, const tb_result *res, const tb_volterra_spec *vs, dist_raw *raw,
                       tb_dist_data *dd)
{
    size_t count = dd->sum.sweep_points;
    size_t stride = (res->npoints + count - 1) / count;
    dw->target = dd->sum.closed.fund; /* the output amplitude at the stated tone */
    for (size_t i = 0; i < count; i++) {
        double f = res->freqs[i * stride];
        tb_status st = harmonics(dw, f, raw);
        if (st)
            return st;
        double closed_hd3 = cabs(raw[0].y3_direct + raw[0].y3_inter) / cabs(raw[0].y1);
        for (size_t l = 0; l < dw->nloops; l++) {
            tb_dist_sweep_point *p = &dd->pts[l * count + i];
            const dist_raw *r = &raw[1 + l];
            *p = (tb_dist_sweep_point){.freq_hz = f, .amp = dw->drive[0], .has_closed = dw->ok[0],
                                       .has_open = dw->ok[1 + l]};
            if (p->has_closed) {
                p->hd2_closed = cabs(raw[0].y2) / cabs(raw[0].y1);
                p->hd3_closed = closed_hd3;
            }
            if (p->has_open) {
                p->hd2_open = cabs(r->y2) / cabs(r->y1);
                p->hd3_open = cabs(r->y3_direct + r->y3_inter) / cabs(r->y1);
            }
            p->has_T = dw->T_ok[l];
            p->T_mag = p->has_T ? cabs(dw->T[l]) : 0;
            /* IM3 of a memoryless cubic is three times HD3 (common practice): the sweep, which
             * computes HD3 alone, judges the series by 3 HD3 */
            p->has_closed = p->has_closed && isfinite(p->hd2_closed) && isfinite(p->hd3_closed);
            p->has_open = p->has_open && isfinite(p->hd2_open) && isfinite(p->hd3_open);
            if (!p->has_closed)
                p->hd2_closed = p->hd3_closed = 0;
            if (!p->has_open)
                p->hd2_open = p->hd3_open = 0;
            p->valid_closed = p->has_closed && 300 * p->hd3_closed <= vs->limit_pct;
            p->valid_open = p->has_open && 300 * p->hd3_open <= vs->limit_pct;
            p->valid = p->valid_closed && p->valid_open;
        }
    }
    return TB_OK;
}

/* ---- setup ------------------------------------------------------------------ */

static void work_free(dist_work *dw)
{
    tb_free(dw->src);
    tb_free(dw->drive);
    tb_free(dw->ok);
    tb_free(dw->why);
    tb_free(dw->T);
    tb_free(dw->T_ok);
    tb_free(dw->B);
    tb_free(dw->X1);
    tb_free(dw->X2);
    tb_free(dw->Xb);
    tb_free(dw->Xd);
}

/* The nonlinear sources of ckt, each with its loop (when it is a .loop source). */
static size_t collect_sources(const tb_circuit *ckt, const tb_mna *mna, nl_source *out)
{
    size_t count = 0;
    for (size_t e = 0; e < ckt->elem_count; e++) {
        const tb_element *el = &ckt->elems[e];
        if (!tb_nl_is_nonlinear(el))
            continue;
        if (out) {
            nl_source *s = &out[count];
            s->lv = tb_mna_source_vectors(ckt, e);
            s->k2 = el->k2;
            s->k3 = el->k3;
            s->loop = SIZE_MAX;
            for (size_t l = 0; l < mna->loop_count; l++)
                if (mna->loops[l].elem == e)
                    s->loop = l;
        }
        count++;
    }
    return count;
}

static tb_status work_new(const tb_circuit *ckt, tb_probe *probe, dist_work *dw)
{
    const tb_mna *mna = probe->mna;
    *dw = (dist_work){.probe = probe, .mna = mna, .amp = ckt->volterra.amp, .n = mna->n,
                      .nloops = mna->loop_count, .ncase = 1 + mna->loop_count};
    dw->nsrc = collect_sources(ckt, mna, NULL);
    size_t nc = dw->ncase;
    size_t n = dw->n;
    dw->src = tb_calloc(dw->nsrc ? dw->nsrc : 1, sizeof *dw->src);
    dw->drive = tb_calloc(nc, sizeof *dw->drive);
    dw->ok = tb_calloc(nc, sizeof *dw->ok);
    dw->why = tb_calloc(nc, sizeof *dw->why);
    dw->T = tb_calloc(3 * nc, sizeof *dw->T);
    dw->T_ok = tb_calloc(3 * nc, sizeof *dw->T_ok);
    dw->B = tb_calloc(n * (2 * nc + dw->nloops), sizeof *dw->B);
    dw->X1 = tb_calloc(n * nc, sizeof *dw->X1);
    dw->X2 = tb_calloc(n * nc, sizeof *dw->X2);
    dw->Xb = tb_calloc(n * nc, sizeof *dw->Xb);
    dw->Xd = tb_calloc(n * nc, sizeof *dw->Xd);
    if (!dw->src || !dw->drive || !dw->ok || !dw->why || !dw->T || !dw->T_ok || !dw->B || !dw->X1 ||
        !dw->X2 || !dw->Xb || !dw->Xd) {
        work_free(dw);
        return TB_ERR_NOMEM;
    }
    collect_sources(ckt, mna, dw->src);
    return TB_OK;
}

/* The summary of the request, and why the analysis cannot run (NULL when it can). */
static const char *request(const tb_circuit *ckt, const tb_result *res, tb_dist_data *dd)
{
    const tb_volterra_spec *vs = &ckt->volterra;
    dd->sum = (tb_distortion){.amp = vs->amp, .freq_hz = vs->freq_hz, .freq2_hz = vs->freq2_hz,
                              .limit_pct = vs->limit_pct, .nonlinear = collect_sources(ckt, NULL, NULL)};
    if (!ckt->io.given)
        return "no .io directive: distortion needs an input and an output";
    if (dd->sum.nonlinear == 0)
        return "no source has k2= or k3=: the circuit is linear";
    size_t stride = (res->npoints + TB_DIST_SWEEP_MAX - 1) / TB_DIST_SWEEP_MAX;
    dd->sum.sweep_points = (res->npoints + stride - 1) / stride;
    return NULL;
}

tb_status tb_distortion_run(const tb_circuit *ckt, tb_probe *probe, tb_result *res)
{
    if (!ckt->volterra.given)
        return TB_OK;
    tb_dist_data *dd = tb_calloc(1, sizeof *dd);
    if (!dd)
        return TB_ERR_NOMEM;
    res->dist = dd;
    const char *why = request(ckt, res, dd);
    dd->sum.why_absent = why;
    if (why)
        return TB_OK;
    size_t nc = 1 + res->nloops;
    dd->loops = tb_calloc(res->nloops ? res->nloops : 1, sizeof *dd->loops);
    dd->pts = tb_calloc(res->nloops * dd->sum.sweep_points + 1, sizeof *dd->pts);
    dist_raw *raw = tb_calloc(nc, sizeof *raw);
    bool *hd_ok = tb_calloc(nc, sizeof *hd_ok);
    dist_work dw;
    tb_status st = !dd->loops || !dd->pts || !raw || !hd_ok ? TB_ERR_NOMEM : work_new(ckt, probe, &dw);
    if (st) {
        tb_free(raw);
        tb_free(hd_ok);
        return st;
    }
    st = at_tone(&dw, &ckt->volterra, raw, hd_ok, dd);
    dd->sum.computed = !st && dd->sum.closed.computed;
    dd->sum.why_absent = dd->sum.computed ? NULL : dd->sum.closed.why_absent;
    if (!st)
        st = sweep(&dw, res, &ckt->volterra, raw, dd);
    work_free(&dw);
    tb_free(raw);
    tb_free(hd_ok);
    return st;
}
