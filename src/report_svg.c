/* src/report_svg.c: the pictures: Bode, Nyquist, step response, port impedances, the estimate's breakdown */
#include <math.h>
#include <string.h>

#include "alloc.h"
#include "plot.h"
#include "report.h"
#include "units.h"

#define WIDTH 900.0
#define PANEL_LEFT 78.0
#define PANEL_WIDTH (WIDTH - PANEL_LEFT - 240.0)

static const char *const picture_names[TB_PIC_COUNT] = {"bode", "nyquist", "step", "impedance", "breakdown"};

const char *tb_picture_name(tb_picture_kind kind)
{
    return (unsigned)kind < TB_PIC_COUNT ? picture_names[kind] : "unknown";
}

/* Workspace of one picture: x, y and presence of up to three series over the sweep. */
typedef struct {
    size_t n;
    double *x;
    double *y[3];
    bool *ok[3];
} columns;

static void columns_free(columns *c)
{
    tb_free(c->x);
    for (int k = 0; k < 3; k++) {
        tb_free(c->y[k]);
        tb_free(c->ok[k]);
    }
}

static tb_status columns_new(columns *c, size_t n)
{
    *c = (columns){.n = n};
    c->x = tb_malloc(n ? n : 1, sizeof(double));
    bool good = c->x != NULL;
    for (int k = 0; k < 3; k++) {
        c->y[k] = tb_malloc(n ? n : 1, sizeof(double));
        c->ok[k] = tb_calloc(n ? n : 1, sizeof(bool));
        good = good && c->y[k] && c->ok[k];
    }
    if (!good) {
        columns_free(c);
        return TB_ERR_NOMEM;
    }
    return TB_OK;
}

/* The range of the present values of a column set, padded; lo < hi always. */
static void value_range(const columns *c, int series, double *lo, double *hi)
{
    *lo = INFINITY;
    *hi = -INFINITY;
    for (int k = 0; k < series; k++)
        for (size_t i = 0; i < c->n; i++)
            if (c->ok[k][i] && isfinite(c->y[k][i])) {
                *lo = fmin(*lo, c->y[k][i]);
                *hi = fmax(*hi, c->y[k][i]);
            }
    if (!(*lo <= *hi)) {
        *lo = -1;
        *hi = 1;
    }
}

/* dB of |z|, present when z is non-zero and finite. */
static void put_db(columns *c, int k, size_t i, bool present, double complex z)
{
    c->y[k][i] = present && cabs(z) > 0 ? tb_db(z) : 0;
    c->ok[k][i] = present && cabs(z) > 0 && isfinite(c->y[k][i]);
}

static tb_panel panel(double top, double height, double x0, double x1, double y0, double y1, bool log_x, bool log_y)
{
    return (tb_panel){x0, x1, y0, y1, log_x, log_y, PANEL_LEFT, top, PANEL_WIDTH, height};
}

static tb_status finish(tb_picture *pic, columns *c)
{
    bool ok = tb_plot_end(pic);
    columns_free(c);
    return ok ? TB_OK : TB_ERR_IO;
}

/* What a reader calls the circuit: the netlist's title line, else its file name. */
static const char *circuit_name(const tb_circuit *ckt)
{
    return tb_circuit_title(ckt)[0] ? tb_circuit_title(ckt) : ckt->file;
}

/* The circuit's name cut to fit a picture's title line ("..." when cut). */
#define TITLE_NAME_MAX 72

static void title_of(const tb_circuit *ckt, size_t l, const char *what, char *buf, size_t size)
{
    const char *name = circuit_name(ckt);
    snprintf(buf, size, "%.*s%s: %s at %s", TITLE_NAME_MAX, name, strlen(name) > TITLE_NAME_MAX ? "..." : "", what,
             tb_circuit_loop_name(ckt, l));
}

/* ---- Bode -------------------------------------------------------------- */

/* Each margin drawn where it is read: the phase margin in the phase panel as the distance
 * from -180 deg up to the phase of T where |T| = 1 (marked on the magnitude too), the gain
 * margin in the magnitude panel as the distance from |T| up to 0 dB where the phase reaches
 * -180 deg (marked on the phase too). */
static void bode_markers(tb_picture *pic, const tb_panel *mag, const tb_panel *ph, const tb_stability *st)
{
    char buf[64];
    for (size_t i = 0; st->computed && i < st->unity_count; i++) {
        const tb_crossing *c = &st->unity[i];
        snprintf(buf, sizeof buf, "PM %.1f deg", c->margin);
        tb_plot_marker(pic, mag, c->hz, 0.0, NULL);
        tb_plot_line(pic, ph, c->hz, c->phase_deg - c->margin, c->hz, c->phase_deg, TB_STYLE_MARGIN);
        tb_plot_marker(pic, ph, c->hz, c->phase_deg, buf);
    }
    for (size_t i = 0; st->computed && i < st->phase_count; i++) {
        const tb_crossing *c = &st->phase[i];
        snprintf(buf, sizeof buf, "GM %+.1f dB", c->margin);
        tb_plot_line(pic, mag, c->hz, c->T_db, c->hz, c->T_db + c->margin, TB_STYLE_MARGIN);
        tb_plot_marker(pic, mag, c->hz, c->T_db, buf);
        tb_plot_marker(pic, ph, c->hz, c->phase_deg, NULL);
    }
    if (st->computed && st->unity_count + st->phase_count > 0)
        tb_plot_legend(pic, TB_STYLE_MARGIN, "margin: distance to the limit");
}

static tb_status bode(tb_picture *pic, const tb_circuit *ckt, const tb_result *res, size_t l)
{
    size_t n = tb_result_points(res);
    const double *f = tb_result_freqs(res);
    const tb_point *pts = tb_result_loop(res, l);
    const double *deg = tb_result_phase(res, l);
    columns c;
    if (columns_new(&c, n))
        return TB_ERR_NOMEM;
    bool io = tb_result_has_io(res);
    for (size_t i = 0; i < n; i++) {
        c.x[i] = f[i];
        put_db(&c, 0, i, !(pts[i].flags & TB_PT_T_INF), pts[i].T);
        put_db(&c, 1, i, io, pts[i].A);
        put_db(&c, 2, i, io && !(pts[i].flags & TB_PT_AINF_NONE), pts[i].A_inf);
    }
    tb_feedback_summary fs = {0};
    bool estimate = tb_feedback_loop(res, l, &fs) == TB_OK && fs.has_estimate && fs.estimate != 0;
    double lo = 0, hi = 0;
    value_range(&c, io ? 3 : 1, &lo, &hi);
    if (estimate) {
        lo = fmin(lo, tb_db(fs.estimate));
        hi = fmax(hi, tb_db(fs.estimate));
    }
    lo = fmin(lo, -20.0);
    hi = fmax(hi, 20.0);
    double dmin = INFINITY, dmax = -INFINITY;
    for (size_t i = 0; i < n; i++) {
        dmin = fmin(dmin, deg[i]);
        dmax = fmax(dmax, deg[i]);
    }
    dmin = fmin(floor(dmin / 90.0) * 90.0, -180.0);
    dmax = fmax(ceil(dmax / 90.0) * 90.0, dmin + 90.0);
    char title[512];
    title_of(ckt, l, "loop gain T", title, sizeof title);
    tb_plot_begin(pic, pic->out, WIDTH, 640, title);
    tb_panel mag = panel(50, 300, f[0], f[n - 1], lo - 5, hi + 5, true, false);
    tb_panel ph = panel(400, 180, f[0], f[n - 1], dmin, dmax, true, false);
    tb_plot_axes(pic, &mag, NULL, "magnitude (dB)");
    tb_plot_axes(pic, &ph, "frequency (Hz)", "phase of T (deg)");
    tb_plot_line(pic, &mag, f[0], 0, f[n - 1], 0, TB_STYLE_GUIDE);
    for (double d = -180.0; d >= dmin; d -= 360.0)
        tb_plot_line(pic, &ph, f[0], d, f[n - 1], d, TB_STYLE_GUIDE);
    tb_plot_series(pic, &mag, c.x, c.y[0], c.ok[0], n, TB_STYLE_MAIN);
    tb_plot_legend(pic, TB_STYLE_MAIN, "|T|, loop gain");
    tb_stability st;
    tb_stability_loop(res, l, &st);
    if (io) {
        tb_plot_series(pic, &mag, c.x, c.y[1], c.ok[1], n, TB_STYLE_SECOND);
        tb_plot_series(pic, &mag, c.x, c.y[2], c.ok[2], n, TB_STYLE_THIRD);
        /* an unstable loop has no closed-loop frequency response to speak of */
        tb_plot_legend(pic, TB_STYLE_SECOND,
                       st.computed && st.verdict == TB_VERDICT_UNSTABLE ? "|A| (unstable: not a response)"
                                                                        : "|A|, closed-loop gain");
        tb_plot_legend(pic, TB_STYLE_THIRD, "|A_inf| = 1/|beta|, loaded");
    }
    if (estimate) {
        tb_plot_line(pic, &mag, f[0], tb_db(fs.estimate), f[n - 1], tb_db(fs.estimate), TB_STYLE_FOURTH);
        tb_plot_legend(pic, TB_STYLE_FOURTH, "hand estimate 1/beta");
    }
    tb_plot_series(pic, &ph, c.x, deg, NULL, n, TB_STYLE_MAIN);
    tb_plot_legend(pic, TB_STYLE_GUIDE, "0 dB, -180 deg");
    bode_markers(pic, &mag, &ph, &st);
    return finish(pic, &c);
}

/* ---- Nyquist ----------------------------------------------------------- */

/* The radius |T| inside the unit circle and 1 + log10 |T| outside it: the unit circle and
 * -1 stay where they are, each decade of |T| beyond 1 takes one unit. */
static double complex squash(double complex T)
{
    double m = cabs(T);
    return m > 1.0 ? (1.0 + log10(m)) * (T / m) : T;
}

/* What makes the compressed picture readable: a ring at each decade of |T| beyond 1 (20 dB,
 * 40 dB, ...) labelled with its level, and the sweep's two ends labelled with their
 * frequencies, so that the direction of travel and the size of T stay visible. */
static void nyquist_guides(tb_picture *pic, const tb_panel *p, const tb_result *res, size_t l, double reach)
{
    char buf[64], f[32];
    int rings = (int)floor(reach - 1.0), every = rings > 4 ? (rings + 3) / 4 : 1; /* at most 4 rings */
    for (int k = every; k <= rings; k += every) {
        tb_plot_circle(pic, p, 0, 0, 1.0 + k, TB_STYLE_GUIDE);
        snprintf(buf, sizeof buf, "|T| %d dB", 20 * k);
        double d = (1.0 + k) / sqrt(2.0);
        tb_plot_label(pic, p, d, d, buf);
    }
    size_t n = tb_result_points(res);
    const tb_point *pts = tb_result_loop(res, l);
    const double *freqs = tb_result_freqs(res);
    for (size_t e = 0; e < 2 && n > 0; e++) {
        size_t i = e ? n - 1 : 0;
        if (pts[i].flags & TB_PT_T_INF)
            continue;
        double complex z = squash(pts[i].T);
        snprintf(buf, sizeof buf, "%s %s", e ? "sweep ends" : "sweep starts", tb_plot_eng(freqs[i], "Hz", f, sizeof f));
        tb_plot_marker(pic, p, creal(z), cimag(z), buf);
    }
}

static tb_status nyquist(tb_picture *pic, const tb_circuit *ckt, const tb_result *res, size_t l)
{
    size_t n = tb_result_points(res);
    const tb_point *pts = tb_result_loop(res, l);
    columns c;
    if (columns_new(&c, n > 181 ? n : 181))
        return TB_ERR_NOMEM;
    double reach = 1.5;
    for (size_t i = 0; i < n; i++) {
        double complex z = squash(pts[i].T);
        bool ok = !(pts[i].flags & TB_PT_T_INF);
        c.x[i] = creal(z);
        c.y[0][i] = cimag(z);
        c.y[1][i] = -cimag(z);
        c.ok[0][i] = c.ok[1][i] = ok;
        if (ok)
            reach = fmax(reach, cabs(z));
    }
    reach = fmin(reach * 1.1, 8.0);
    char title[512];
    title_of(ckt, l, "Nyquist plot of T", title, sizeof title);
    tb_plot_begin(pic, pic->out, WIDTH, 700, title);
    tb_panel p = {-reach, reach, -reach, reach, false, false, PANEL_LEFT + 15, 50, 590, 590};
    tb_plot_axes(pic, &p, "Re T (radius |T| up to 1, then 1 + log10 |T|)", "Im T (same scale)");
    tb_plot_circle(pic, &p, 0, 0, 1.0, TB_STYLE_GUIDE);
    tb_plot_series(pic, &p, c.x, c.y[0], c.ok[0], n, TB_STYLE_MAIN);
    tb_plot_series(pic, &p, c.x, c.y[1], c.ok[1], n, TB_STYLE_SECOND);
    tb_plot_legend(pic, TB_STYLE_MAIN, "T(jw), w > 0 (sweep)");
    tb_plot_legend(pic, TB_STYLE_SECOND, "T(jw), w < 0 (mirror)");
    tb_plot_legend(pic, TB_STYLE_GUIDE, "|T| = 1");
    tb_stability st;
    tb_stability_loop(res, l, &st);
    if (st.computed && st.has_vector_margin) {
        for (size_t k = 0; k < 181; k++) { /* the circle |1 + T| = VM around -1, mapped */
            double th = TB_TWO_PI * (double)k / 180.0;
            double complex z = squash(-1.0 + st.vector_margin * cexp(I * th));
            c.x[k] = creal(z);
            c.y[2][k] = cimag(z);
            c.ok[2][k] = true;
        }
        tb_plot_series(pic, &p, c.x, c.y[2], c.ok[2], 181, TB_STYLE_FOURTH);
        char buf[64];
        snprintf(buf, sizeof buf, "vector margin %.3g", st.vector_margin);
        tb_plot_legend(pic, TB_STYLE_FOURTH, buf);
    }
    tb_plot_marker(pic, &p, -1.0, 0.0, "-1");
    nyquist_guides(pic, &p, res, l, reach);
    if (st.computed && st.has_nyquist) {
        char buf[96];
        snprintf(buf, sizeof buf, "N = %ld clockwise", st.nyquist_n);
        tb_plot_text(pic, pic->legend_x, pic->legend_y + 10, buf);
        tb_plot_text(pic, pic->legend_x, pic->legend_y + 26, "encirclements of -1");
        /* what the count means: N + P closed-loop poles in the right half-plane */
        long z = st.nyquist_n + (long)st.ol_rhp;
        if (z == 0)
            snprintf(buf, sizeof buf, "N + P = 0: no closed-loop pole");
        else
            snprintf(buf, sizeof buf, "N + P = %ld closed-loop poles", z);
        tb_plot_text(pic, pic->legend_x, pic->legend_y + 48, buf);
        tb_plot_text(pic, pic->legend_x, pic->legend_y + 64, "in the right half-plane");
        snprintf(buf, sizeof buf, "(P = %zu open-loop ones)%s", st.ol_rhp, z > 0 ? ": unstable" : "");
        tb_plot_text(pic, pic->legend_x, pic->legend_y + 80, buf);
    }
    return finish(pic, &c);
}

/* ---- step response ------------------------------------------------------ */

/* The time where y first reaches level (linear between samples), or -1. */
static double first_at(const double *t, const double *y, size_t n, double level)
{
    for (size_t k = 1; k < n; k++)
        if ((y[k - 1] - level) * (y[k] - level) <= 0 && y[k] != y[k - 1])
            return t[k - 1] + (t[k] - t[k - 1]) * (level - y[k - 1]) / (y[k] - y[k - 1]);
    return -1;
}

static tb_status step(tb_picture *pic, const tb_circuit *ckt, const tb_result *res)
{
    tb_step_figures fig;
    const double *t = NULL, *y = NULL;
    size_t n = 0;
    tb_step_figures_get(res, &fig);
    tb_step_samples(res, &t, &y, &n);
    if (!fig.computed || n < 2)
        return TB_ERR_NOT_FOUND;
    double lo = 0, hi = 0;
    for (size_t k = 0; k < n; k++) {
        lo = fmin(lo, y[k]);
        hi = fmax(hi, y[k]);
    }
    double pad = 0.08 * (hi - lo > 0 ? hi - lo : 1.0);
    char title[512];
    snprintf(title, sizeof title, "%.*s: closed-loop step response", TITLE_NAME_MAX, circuit_name(ckt));
    tb_plot_begin(pic, pic->out, WIDTH, 480, title);
    tb_panel p = panel(50, 360, t[0], t[n - 1], lo - pad, hi + pad, false, false);
    tb_plot_axes(pic, &p, "time (s)", "output per unit input step");
    double fv = fig.final_value;
    tb_plot_line(pic, &p, t[0], fv, t[n - 1], fv, TB_STYLE_GUIDE);
    tb_plot_line(pic, &p, t[0], fv * 1.02, t[n - 1], fv * 1.02, TB_STYLE_THIRD);
    tb_plot_line(pic, &p, t[0], fv * 0.98, t[n - 1], fv * 0.98, TB_STYLE_THIRD);
    tb_plot_series(pic, &p, t, y, NULL, n, TB_STYLE_MAIN);
    tb_plot_legend(pic, TB_STYLE_MAIN, "output");
    tb_plot_legend(pic, TB_STYLE_GUIDE, "final value A(0)");
    tb_plot_legend(pic, TB_STYLE_THIRD, "2 % band");
    char buf[64], ts[32];
    if (fig.has_overshoot && fig.has_peak) {
        snprintf(buf, sizeof buf, "overshoot %.3g %%", fig.overshoot_pct);
        tb_plot_marker(pic, &p, fig.peak_s, fig.peak_value, buf);
    }
    if (fig.has_rise) {
        double t10 = first_at(t, y, n, 0.1 * fv), t90 = first_at(t, y, n, 0.9 * fv);
        tb_plot_marker(pic, &p, t10, 0.1 * fv, "10 %");
        snprintf(buf, sizeof buf, "90 %%: rise 10-90 %% %s", tb_plot_eng(fig.rise_s, "s", ts, sizeof ts));
        tb_plot_marker(pic, &p, t90, 0.9 * fv, buf);
    }
    if (fig.has_settling) {
        snprintf(buf, sizeof buf, "settled within 2 %% at %s", tb_plot_eng(fig.settling_s, "s", ts, sizeof ts));
        tb_plot_marker(pic, &p, fig.settling_s, fv, buf);
    }
    bool ok = tb_plot_end(pic);
    return ok ? TB_OK : TB_ERR_IO;
}

/* ---- port impedance ------------------------------------------------------ */

static tb_status impedance(tb_picture *pic, const tb_circuit *ckt, const tb_result *res, size_t l, size_t port)
{
    tb_zport_summary s;
    const tb_zpoint *zp = NULL;
    if (port >= tb_zport_count(res))
        return tb_zport_count(res) == 0 ? TB_ERR_NOT_FOUND : TB_ERR_USAGE;
    if (tb_zport_loop(res, port, l, &s, &zp))
        return TB_ERR_NOT_FOUND;
    size_t n = tb_result_points(res);
    const double *f = tb_result_freqs(res);
    columns c;
    if (columns_new(&c, n))
        return TB_ERR_NOMEM;
    for (size_t i = 0; i < n; i++) {
        c.x[i] = f[i];
        c.y[0][i] = cabs(zp[i].Z);
        c.ok[0][i] = zp[i].has_Z && cabs(zp[i].Z) > 0;
        c.y[1][i] = cabs(zp[i].Z0);
        c.ok[1][i] = zp[i].has_Z0 && cabs(zp[i].Z0) > 0;
    }
    double lo = 0, hi = 0;
    value_range(&c, 2, &lo, &hi);
    lo = lo > 0 ? lo / 2 : 1e-3;
    hi = hi > lo ? hi * 2 : lo * 10;
    char title[512];
    snprintf(title, sizeof title, "%.*s: impedance at port %s, loop %s", TITLE_NAME_MAX, circuit_name(ckt), s.name,
             tb_circuit_loop_name(ckt, l));
    tb_plot_begin(pic, pic->out, WIDTH, 480, title);
    tb_panel p = panel(50, 360, f[0], f[n - 1], lo, hi, true, true);
    tb_plot_axes(pic, &p, "frequency (Hz)", "|Z| (ohm)");
    tb_plot_series(pic, &p, c.x, c.y[0], c.ok[0], n, TB_STYLE_MAIN);
    tb_plot_series(pic, &p, c.x, c.y[1], c.ok[1], n, TB_STYLE_SECOND);
    tb_plot_legend(pic, TB_STYLE_MAIN, "|Z| with feedback");
    tb_plot_legend(pic, TB_STYLE_SECOND, "|Z0|, source gain at zero");
    return finish(pic, &c);
}

/* ---- the estimate's breakdown -------------------------------------------- */

static tb_status breakdown(tb_picture *pic, const tb_circuit *ckt, const tb_result *res, size_t l)
{
    tb_feedback_summary fs;
    const tb_breakdown_point *b = NULL;
    if (tb_feedback_loop(res, l, &fs) || !fs.computed || !fs.has_estimate || tb_feedback_points(res, l, &b))
        return TB_ERR_NOT_FOUND;
    size_t n = tb_result_points(res);
    const double *f = tb_result_freqs(res);
    columns c;
    if (columns_new(&c, n))
        return TB_ERR_NOMEM;
    for (size_t i = 0; i < n; i++) {
        c.x[i] = f[i];
        for (int k = 0; k < 3; k++) {
            c.y[k][i] = cabs(b[i].part[k]);
            c.ok[k][i] = b[i].has_parts && c.y[k][i] > 0;
        }
    }
    double *total = tb_malloc(n ? n : 1, sizeof(double));
    bool *total_ok = tb_calloc(n ? n : 1, sizeof(bool));
    if (!total || !total_ok) {
        tb_free(total);
        tb_free(total_ok);
        columns_free(&c);
        return TB_ERR_NOMEM;
    }
    double lo = INFINITY, hi = 0;
    for (size_t i = 0; i < n; i++) {
        total[i] = cabs(b[i].total);
        total_ok[i] = total[i] > 0;
        for (int k = 0; k < 3; k++)
            if (c.ok[k][i]) {
                lo = fmin(lo, c.y[k][i]);
                hi = fmax(hi, c.y[k][i]);
            }
        if (total_ok[i]) {
            lo = fmin(lo, total[i]);
            hi = fmax(hi, total[i]);
        }
    }
    double band = fs.tol_pct / 100.0 * fabs(fs.estimate);
    if (!(hi > 0)) {
        lo = band / 100;
        hi = band * 100;
    }
    lo = fmax(fmin(lo, band) / 3, hi * 1e-12);
    hi = fmax(hi, band) * 3;
    char title[512];
    title_of(ckt, l, "why A differs from the hand estimate G", title, sizeof title);
    tb_plot_begin(pic, pic->out, WIDTH, 480, title);
    tb_panel p = panel(50, 360, f[0], f[n - 1], lo, hi, true, true);
    tb_plot_axes(pic, &p, "frequency (Hz)", "magnitude (same unit as A)");
    tb_plot_line(pic, &p, f[0], band, f[n - 1], band, TB_STYLE_GUIDE);
    tb_plot_series(pic, &p, c.x, total, total_ok, n, TB_STYLE_MAIN);
    static const tb_style part_style[3] = {TB_STYLE_SECOND, TB_STYLE_THIRD, TB_STYLE_FOURTH};
    static const char *const part_label[3] = {"|loading|", "|finite loop gain|", "|feedthrough|"};
    tb_plot_legend(pic, TB_STYLE_MAIN, "|A - G|");
    for (int k = 0; k < 3; k++) {
        tb_plot_series(pic, &p, c.x, c.y[k], c.ok[k], n, part_style[k]);
        tb_plot_legend(pic, part_style[k], part_label[k]);
    }
    char buf[64];
    snprintf(buf, sizeof buf, "tolerance %g %% of G", fs.tol_pct);
    tb_plot_legend(pic, TB_STYLE_GUIDE, buf);
    if (fs.has_limit)
        tb_plot_marker(pic, &p, fs.limit_hz, band, "estimate stops holding");
    tb_free(total);
    tb_free(total_ok);
    return finish(pic, &c);
}

tb_status tb_report_svg(const tb_circuit *ckt, const tb_result *res, tb_picture_kind kind, size_t l, size_t port,
                        FILE *out)
{
    if (!ckt || !res || !out || l >= tb_result_loops(res) || (unsigned)kind >= TB_PIC_COUNT)
        return TB_ERR_USAGE;
    if (tb_result_points(res) < 2 && kind != TB_PIC_STEP)
        return TB_ERR_NOT_FOUND;
    tb_picture pic = {.out = out};
    switch (kind) {
    case TB_PIC_BODE:
        return bode(&pic, ckt, res, l);
    case TB_PIC_NYQUIST:
        return nyquist(&pic, ckt, res, l);
    case TB_PIC_STEP:
        return step(&pic, ckt, res);
    case TB_PIC_IMPEDANCE:
        return impedance(&pic, ckt, res, l, port);
    case TB_PIC_BREAKDOWN:
        return breakdown(&pic, ckt, res, l);
    case TB_PIC_COUNT:
        break;
    }
    return TB_ERR_USAGE;
}
