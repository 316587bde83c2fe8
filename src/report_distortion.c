/* src/report_distortion.c: the distortion section of the text, JSON and HTML reports */
#include "report_distortion.h"

#include <jansson.h>
#include <math.h>

#include "alloc.h"
#include "diag.h"
#include "plot.h"
#include "report.h"

/* ---- text ------------------------------------------------------------------- */

/* "-80.21 dB (0.009762 %)", "0 (vanishes)" or "--". */
static const char *fmt_ratio(const tb_dist_ratio *r, char *buf, size_t size)
{
    if (!r->present)
        snprintf(buf, size, "--");
    else if (!r->has_db)
        snprintf(buf, size, "0 (vanishes)");
    else
        snprintf(buf, size, "%.2f dB (%.4g %%)", r->db, 100 * r->ratio);
    return buf;
}

static void row(FILE *out, const char *label, const char *value)
{
    fprintf(out, "    %-30s %s\n", label, value);
}

static void case_lines(FILE *out, const tb_dist_case *dc, double limit_pct, const char *drive_unit)
{
    char v[160], a[64], b[64];
    row(out, "HD2 (2f)", fmt_ratio(&dc->hd2, v, sizeof v));
    row(out, "HD3 (3f)", fmt_ratio(&dc->hd3, v, sizeof v));
    snprintf(v, sizeof v, "k3 terms %s, second-order interaction %s", fmt_ratio(&dc->hd3_direct, a, sizeof a),
             fmt_ratio(&dc->hd3_inter, b, sizeof b));
    row(out, "  of which", v);
    snprintf(v, sizeof v, "%s (f1+f2), %s (f2-f1)", fmt_ratio(&dc->im2, a, sizeof a),
             fmt_ratio(&dc->im2_diff, b, sizeof b));
    row(out, "IM2", dc->im2.present ? v : "--");
    row(out, "IM3 (2f1-f2)", fmt_ratio(&dc->im3, v, sizeof v));
    snprintf(v, sizeof v, "%.5g%s%s per tone (%.2f dB re 1)", dc->iip3, drive_unit[0] ? " " : "", drive_unit,
             dc->has_iip3 ? 20 * log10(dc->iip3) : 0);
    row(out, "input-referred IP3", dc->has_iip3 ? v : "--");
    snprintf(v, sizeof v, "%s: largest third-order term %.3g %% of the fundamental, limit %.3g %%",
             dc->valid ? "holds" : "AMPLITUDE TOO LARGE for a third-order series", 100 * dc->third, limit_pct);
    row(out, "series", v);
}

static void loop_lines(FILE *out, const tb_circuit *ckt, const tb_result *res, const tb_distortion *sum, size_t l)
{
    tb_distortion_loop dl;
    char v[200], esc[256];
    tb_distortion_loop_get(res, l, &dl, NULL, NULL);
    const tb_element *e = &ckt->elems[ckt->loops[l].elem];
    const char *name = tb_report_escape(e->name, esc, sizeof esc);
    if (!dl.computed) {
        fprintf(out, "  loop %s opened: -- (%s)\n", name, dl.why_absent ? dl.why_absent : "not computed");
        return;
    }
    bool current = e->kind == TB_EL_F || e->kind == TB_EL_H;
    fprintf(out, "  loop %s opened (T = %.4g%+.4gj at the tone), its control driven with %.5g %s for the same "
                 "fundamental\n",
            name, creal(dl.T), cimag(dl.T), dl.open.drive, current ? "A" : "V");
    case_lines(out, &dl.open, sum->limit_pct, current ? "A" : "V");
    char r2[48], r3[48];
    snprintf(r2, sizeof r2, dl.has_rule_hd2 ? "%.4g" : "--", dl.rule_hd2);
    snprintf(r3, sizeof r3, dl.has_rule_hd3 ? "%.4g" : "--", dl.rule_hd3);
    snprintf(v, sizeof v, "HD2 %.4g times (rule |1+T(2f)| = %s; |1+T(f)| = %.4g)", dl.hd2_reduction, r2,
             cabs(1 + dl.T));
    row(out, "feedback reduces", dl.has_hd2_reduction ? v : "HD2 --");
    snprintf(v, sizeof v, "HD3 %.4g times; its k3 part %.4g times (rule |1+T(3f)| = %s)", dl.hd3_reduction,
             dl.hd3_direct_reduction, r3);
    row(out, "", dl.has_hd3_reduction && dl.has_hd3_direct_reduction ? v : "HD3 --");
}

void tb_report_distortion_text(const tb_circuit *ckt, const tb_result *res, FILE *out)
{
    tb_distortion sum;
    char f1[64], f2[64], o[512], esc[256];
    if (!ckt->volterra.given)
        return;
    tb_distortion_get(res, &sum);
    fprintf(out, "\ndistortion (Volterra series to third order, equal output amplitude with and without feedback)\n");
    if (!sum.computed) {
        fprintf(out, "    -- (%s)\n", sum.why_absent ? sum.why_absent : "not computed");
        return;
    }
    fprintf(out, "  input %.5g peak per tone at %s into %s, second tone %s; output %s; %zu nonlinear source%s\n",
            sum.amp, tb_format_hz(sum.freq_hz, 5, f1, sizeof f1), tb_report_escape(ckt->io.source, esc, sizeof esc),
            tb_format_hz(sum.freq2_hz, 5, f2, sizeof f2), tb_report_output(&ckt->io, o, sizeof o), sum.nonlinear,
            sum.nonlinear == 1 ? "" : "s");
    fprintf(out, "  as drawn: fundamental %.6g\n", sum.closed.fund);
    case_lines(out, &sum.closed, sum.limit_pct, "");
    for (size_t l = 0; l < tb_result_loops(res); l++)
        loop_lines(out, ckt, res, &sum, l);
    fprintf(out, "    (weakly nonlinear: valid while the series holds; it does not replace a large-signal "
                 "simulation or a bench measurement)\n");
}

/* ---- JSON ------------------------------------------------------------------- */

static json_t *num(bool present, double x)
{
    return present && isfinite(x) ? json_real(x) : json_null();
}

/* Adds key: val, remembering a failure in *ok. */
static void put(json_t *obj, const char *key, json_t *val, bool *ok)
{
    if (!obj) {
        json_decref(val);
        *ok = false;
    } else if (!val || json_object_set_new(obj, key, val)) {
        *ok = false;
    }
}

/* Appends val to arr, remembering a failure in *ok. */
static void append(json_t *arr, json_t *val, bool *ok)
{
    if (!arr) {
        json_decref(val);
        *ok = false;
    } else if (!val || json_array_append_new(arr, val)) {
        *ok = false;
    }
}

static json_t *ratio_object(const tb_dist_ratio *r, bool *ok)
{
    json_t *o = json_object();
    put(o, "ratio", num(r->present, r->ratio), ok);
    put(o, "db", num(r->present && r->has_db, r->db), ok);
    put(o, "pct", num(r->present, 100 * r->ratio), ok);
    return o;
}

static json_t *case_object(const tb_dist_case *dc, bool *ok)
{
    json_t *o = json_object();
    if (!dc->computed) {
        put(o, "why_absent", json_string(dc->why_absent ? dc->why_absent : "not computed"), ok);
        return o;
    }
    put(o, "drive", num(true, dc->drive), ok);
    put(o, "fundamental", num(true, dc->fund), ok);
    put(o, "hd2", ratio_object(&dc->hd2, ok), ok);
    put(o, "hd3", ratio_object(&dc->hd3, ok), ok);
    put(o, "hd3_k3_part", ratio_object(&dc->hd3_direct, ok), ok);
    put(o, "hd3_interaction_part", ratio_object(&dc->hd3_inter, ok), ok);
    put(o, "im2_sum", ratio_object(&dc->im2, ok), ok);
    put(o, "im2_difference", ratio_object(&dc->im2_diff, ok), ok);
    put(o, "im3", ratio_object(&dc->im3, ok), ok);
    put(o, "iip3", num(dc->has_iip3, dc->iip3), ok);
    put(o, "third_order_max", num(true, dc->third), ok);
    put(o, "series_valid", json_boolean(dc->valid), ok);
    return o;
}

static json_t *sweep_array(const tb_dist_sweep_point *p, size_t n, bool *ok)
{
    json_t *a = json_array();
    for (size_t i = 0; i < n; i++) {
        json_t *o = json_object();
        put(o, "freq_hz", num(true, p[i].freq_hz), ok);
        put(o, "amp", num(true, p[i].amp), ok);
        put(o, "hd2", num(p[i].has_closed, p[i].hd2_closed), ok);
        put(o, "hd3", num(p[i].has_closed, p[i].hd3_closed), ok);
        put(o, "hd2_open", num(p[i].has_open, p[i].hd2_open), ok);
        put(o, "hd3_open", num(p[i].has_open, p[i].hd3_open), ok);
        put(o, "T_mag", num(p[i].has_T, p[i].T_mag), ok);
        put(o, "series_valid", json_boolean(p[i].valid_closed), ok);
        put(o, "series_valid_open", json_boolean(p[i].valid_open), ok);
        append(a, o, ok);
    }
    return a;
}

static json_t *loop_object(const tb_circuit *ckt, const tb_result *res, size_t l, tb_json_text_fn text, bool *ok)
{
    tb_distortion_loop dl;
    const tb_dist_sweep_point *pts = NULL;
    size_t n = 0;
    tb_distortion_loop_get(res, l, &dl, &pts, &n);
    json_t *o = json_object();
    put(o, "source", text(ckt->elems[ckt->loops[l].elem].name), ok);
    if (!dl.computed) {
        put(o, "why_absent", json_string(dl.why_absent ? dl.why_absent : "not computed"), ok);
        return o;
    }
    put(o, "T", json_pack("{s:f,s:f}", "re", creal(dl.T), "im", cimag(dl.T)), ok);
    put(o, "open", case_object(&dl.open, ok), ok);
    put(o, "hd2_reduction", num(dl.has_hd2_reduction, dl.hd2_reduction), ok);
    put(o, "hd3_reduction", num(dl.has_hd3_reduction, dl.hd3_reduction), ok);
    put(o, "hd3_k3_part_reduction", num(dl.has_hd3_direct_reduction, dl.hd3_direct_reduction), ok);
    put(o, "T_2f", dl.has_rule_hd2 ? json_pack("{s:f,s:f}", "re", creal(dl.T_2f), "im", cimag(dl.T_2f))
                                   : json_null(), ok);
    put(o, "T_3f", dl.has_rule_hd3 ? json_pack("{s:f,s:f}", "re", creal(dl.T_3f), "im", cimag(dl.T_3f))
                                   : json_null(), ok);
    put(o, "rule_hd2", num(dl.has_rule_hd2, dl.rule_hd2), ok);
    put(o, "rule_hd3", num(dl.has_rule_hd3, dl.rule_hd3), ok);
    put(o, "sweep", sweep_array(pts, n, ok), ok);
    return o;
}

json_t *tb_report_distortion_json(const tb_circuit *ckt, const tb_result *res, tb_json_text_fn text)
{
    tb_distortion sum;
    bool ok = true;
    tb_distortion_get(res, &sum);
    json_t *o = json_object();
    put(o, "amp", num(true, sum.amp), &ok);
    put(o, "freq_hz", num(true, sum.freq_hz), &ok);
    put(o, "freq2_hz", num(true, sum.freq2_hz), &ok);
    put(o, "limit_pct", num(true, sum.limit_pct), &ok);
    put(o, "nonlinear_sources", json_integer((json_int_t)sum.nonlinear), &ok);
    if (!sum.computed) {
        put(o, "why_absent", json_string(sum.why_absent ? sum.why_absent : "not computed"), &ok);
    } else {
        put(o, "closed", case_object(&sum.closed, &ok), &ok);
        json_t *loops = json_array();
        for (size_t l = 0; l < tb_result_loops(res); l++) {
            json_t *lo = loop_object(ckt, res, l, text, &ok);
            append(loops, lo, &ok);
        }
        put(o, "loops", loops, &ok);
    }
    if (!ok) {
        json_decref(o);
        return NULL;
    }
    return o;
}

/* ---- HTML ------------------------------------------------------------------- */

#define PIC_WIDTH 900.0
#define PIC_LEFT 78.0
#define PIC_PANEL_WIDTH (PIC_WIDTH - PIC_LEFT - 240.0)

/* The columns of the picture: x, and HD2/HD3 with and without feedback in dB. */
typedef struct {
    double *x;
    double *y[4];
    bool *ok[4];
} dist_columns;

static void columns_free(dist_columns *c)
{
    tb_free(c->x);
    for (int k = 0; k < 4; k++) {
        tb_free(c->y[k]);
        tb_free(c->ok[k]);
    }
}

static bool columns_new(dist_columns *c, size_t n)
{
    *c = (dist_columns){tb_calloc(n, sizeof(double)), {NULL}, {NULL}};
    bool ok = c->x != NULL;
    for (int k = 0; k < 4; k++) {
        c->y[k] = tb_calloc(n, sizeof(double));
        c->ok[k] = tb_calloc(n, sizeof(bool));
        ok = ok && c->y[k] && c->ok[k];
    }
    if (!ok)
        columns_free(c);
    return ok;
}

/* Fills the columns in dB; *lo and *hi span the values present. */
static void columns_fill(dist_columns *c, const tb_dist_sweep_point *p, size_t n, double *lo, double *hi)
{
    *lo = INFINITY;
    *hi = -INFINITY;
    for (size_t i = 0; i < n; i++) {
        c->x[i] = p[i].freq_hz;
        double r[4] = {p[i].hd2_closed, p[i].hd2_open, p[i].hd3_closed, p[i].hd3_open};
        /* a point beyond the series' limit is left out: the series says nothing there */
        bool has[4] = {p[i].valid_closed, p[i].valid_open, p[i].valid_closed, p[i].valid_open};
        for (int k = 0; k < 4; k++) {
            c->ok[k][i] = has[k] && r[k] > 0;
            c->y[k][i] = c->ok[k][i] ? 20 * log10(r[k]) : 0;
            if (c->ok[k][i]) {
                *lo = fmin(*lo, c->y[k][i]);
                *hi = fmax(*hi, c->y[k][i]);
            }
        }
    }
}

/* The picture of loop l: HD2 and HD3 over the tone's frequency, as drawn and opened. */
static tb_status sweep_picture(const tb_circuit *ckt, const tb_result *res, size_t l, FILE *out)
{
    tb_distortion_loop dl;
    const tb_dist_sweep_point *p = NULL;
    size_t n = 0;
    tb_distortion_loop_get(res, l, &dl, &p, &n);
    if (n < 2)
        return TB_OK;
    dist_columns c;
    if (!columns_new(&c, n))
        return TB_ERR_NOMEM;
    double lo = 0, hi = 0;
    columns_fill(&c, p, n, &lo, &hi);
    if (!(lo <= hi)) {
        columns_free(&c);
        return TB_OK;
    }
    char title[300];
    snprintf(title, sizeof title, "Harmonic distortion over the tone's frequency, loop %s",
             ckt->elems[ckt->loops[l].elem].name);
    tb_picture pic;
    tb_plot_begin(&pic, out, PIC_WIDTH, 480, title);
    tb_panel pan = {p[0].freq_hz, p[n - 1].freq_hz, floor(lo / 10) * 10 - 5, ceil(hi / 10) * 10 + 5, true, false,
                    PIC_LEFT, 50, PIC_PANEL_WIDTH, 380};
    tb_plot_axes(&pic, &pan, "tone frequency (Hz)", "distortion (dB re fundamental)");
    static const char *const names[4] = {"HD2 with feedback", "HD2 loop opened", "HD3 with feedback",
                                         "HD3 loop opened"};
    static const tb_style styles[4] = {TB_STYLE_MAIN, TB_STYLE_SECOND, TB_STYLE_THIRD, TB_STYLE_FOURTH};
    for (int k = 0; k < 4; k++) {
        tb_plot_series(&pic, &pan, c.x, c.y[k], c.ok[k], n, styles[k]);
        tb_plot_legend(&pic, styles[k], names[k]);
    }
    char note[120];
    tb_distortion sum;
    tb_distortion_get(res, &sum);
    snprintf(note, sizeof note, "output held at %.4g (the tone's)", sum.closed.fund);
    tb_plot_text(&pic, pic.legend_x, pic.legend_y + 10, note);
    snprintf(note, sizeof note, "left out where 3 HD3 > %.3g %%", sum.limit_pct);
    tb_plot_text(&pic, pic.legend_x, pic.legend_y + 26, note);
    bool ok = tb_plot_end(&pic);
    columns_free(&c);
    return ok ? TB_OK : TB_ERR_IO;
}

static void html_row(FILE *out, const char *label, const char *closed, const char *open)
{
    fputs("<tr><th>", out);
    tb_plot_escape(out, label);
    fputs("</th><td class=\"num\">", out);
    tb_plot_escape(out, closed);
    fputs("</td><td class=\"num\">", out);
    tb_plot_escape(out, open);
    fputs("</td></tr>\n", out);
}

static void html_table(FILE *out, const tb_distortion *sum, const tb_distortion_loop *dl)
{
    char a[96], b[96];
    const tb_dist_case *c = &sum->closed;
    const tb_dist_case *o = &dl->open;
    bool on = dl->computed;
    fputs("<table>\n<tr><th></th><th>with feedback</th><th>loop opened</th></tr>\n", out);
    html_row(out, "HD2", fmt_ratio(&c->hd2, a, sizeof a), on ? fmt_ratio(&o->hd2, b, sizeof b) : "--");
    html_row(out, "HD3", fmt_ratio(&c->hd3, a, sizeof a), on ? fmt_ratio(&o->hd3, b, sizeof b) : "--");
    html_row(out, "IM2 (f1+f2)", fmt_ratio(&c->im2, a, sizeof a), on ? fmt_ratio(&o->im2, b, sizeof b) : "--");
    html_row(out, "IM3 (2f1-f2)", fmt_ratio(&c->im3, a, sizeof a), on ? fmt_ratio(&o->im3, b, sizeof b) : "--");
    snprintf(a, sizeof a, c->has_iip3 ? "%.4g" : "--", c->iip3);
    snprintf(b, sizeof b, on && o->has_iip3 ? "%.4g" : "--", o->iip3);
    html_row(out, "input-referred IP3 (per tone)", a, b);
    snprintf(a, sizeof a, "%s", c->valid ? "holds" : "amplitude too large");
    snprintf(b, sizeof b, "%s", !on ? "--" : o->valid ? "holds" : "amplitude too large");
    html_row(out, "third-order series", a, b);
    fputs("</table>\n", out);
    if (!on)
        return;
    fprintf(out, "<p>Feedback reduces HD2 %.4g times (rule |1+T(2f)| = %.4g) and HD3 %.4g times (its k3 part "
                 "%.4g times, rule |1+T(3f)| = %.4g; the rest is the second-order interaction), T = %.4g%+.4gj "
                 "at the tone.</p>\n",
            dl->hd2_reduction, dl->rule_hd2, dl->hd3_reduction, dl->hd3_direct_reduction, dl->rule_hd3,
            creal(dl->T), cimag(dl->T));
}

tb_status tb_report_distortion_html(const tb_circuit *ckt, const tb_result *res, FILE *out)
{
    tb_distortion sum;
    char f1[64];
    if (!ckt->volterra.given)
        return TB_OK;
    tb_distortion_get(res, &sum);
    fputs("<h2>Distortion (Volterra series to third order)</h2>\n<p>", out);
    if (!sum.computed) {
        tb_plot_escape(out, sum.why_absent ? sum.why_absent : "not computed");
        fputs("</p>\n", out);
        return ferror(out) ? TB_ERR_IO : TB_OK;
    }
    fprintf(out, "Input %.5g peak per tone at %s; with the loop opened the source is driven for the same output "
                 "amplitude.</p>\n",
            sum.amp, tb_format_hz(sum.freq_hz, 5, f1, sizeof f1));
    for (size_t l = 0; l < tb_result_loops(res); l++) {
        tb_distortion_loop dl;
        tb_distortion_loop_get(res, l, &dl, NULL, NULL);
        fputs("<h3>Loop at ", out);
        tb_plot_escape(out, ckt->elems[ckt->loops[l].elem].name);
        fputs("</h3>\n", out);
        html_table(out, &sum, &dl);
        fputs("<figure>\n", out);
        tb_status st = sweep_picture(ckt, res, l, out);
        if (st)
            return st;
        fputs("<figcaption>HD2 and HD3 over the tone's frequency, with feedback and with the loop opened, the output "
              "held at the stated tone's amplitude; points where the third-order series no longer holds are left "
              "out.</figcaption>\n</figure>\n", out);
    }
    return ferror(out) ? TB_ERR_IO : TB_OK;
}
