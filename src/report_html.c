/* src/report_html.c: one self-contained HTML page per netlist for a design review: verdicts, tables, pictures */
#include <math.h>
#include <string.h>

#include "diag.h"
#include "plot.h"
#include "report.h"
#include "report_distortion.h"
#include "report_spreadpart.h"
#include "units.h"

static const char style_sheet[] =
    "body{font-family:sans-serif;max-width:960px;margin:1.5em auto;color:#1a1a1a;line-height:1.4}"
    "h1{font-size:1.4em}h2{font-size:1.2em;border-bottom:1px solid #999;padding-bottom:.2em;margin-top:2em}"
    "h3{font-size:1.05em}table{border-collapse:collapse;margin:.5em 0 1em}"
    "td,th{border:1px solid #bbb;padding:.25em .6em;text-align:left}th{background:#f0f0f0}"
    "td.num{text-align:right;font-variant-numeric:tabular-nums}"
    ".verdict{border:3px solid #444;padding:.6em 1em;margin:1em 0;font-size:1.05em}"
    ".verdict.stable{border-style:solid}.verdict.unstable{border-style:double;border-width:6px}"
    ".verdict.other{border-style:dashed}.fails{font-weight:bold;text-decoration:underline}"
    ".caution{border-left:4px solid #666;padding:.5em 1em;background:#f6f6f6}"
    "figure{margin:1em 0}svg{max-width:100%;height:auto}";

static void text(FILE *out, const char *s)
{
    tb_plot_escape(out, s);
}

static void cell_text(FILE *out, const char *label, const char *value)
{
    fputs("<tr><th>", out);
    text(out, label);
    fputs("</th><td class=\"num\">", out);
    text(out, value);
    fputs("</td></tr>\n", out);
}

static const char *fmt_complex(bool present, double complex z, char *buf, size_t size)
{
    if (!present || !isfinite(creal(z)) || !isfinite(cimag(z)))
        snprintf(buf, size, "--");
    else if (cimag(z) == 0.0 || fabs(cimag(z)) < 1e-12 * fabs(creal(z)))
        snprintf(buf, size, "%.6g", creal(z));
    else
        snprintf(buf, size, "%.6g %+.6gj", creal(z), cimag(z));
    return buf;
}

static const char *fmt_hz(bool present, double f, char *buf, size_t size)
{
    if (!present || !isfinite(f))
        snprintf(buf, size, "--");
    else
        tb_format_hz(f, 5, buf, size);
    return buf;
}

static void verdict_box(FILE *out, const tb_stability *st, const tb_measures *m)
{
    char reason[512];
    const char *kind = st->verdict == TB_VERDICT_STABLE ? "stable" : st->verdict == TB_VERDICT_UNSTABLE ? "unstable" : "other";
    fprintf(out, "<div class=\"verdict %s\"><strong>Verdict: ", kind);
    text(out, tb_verdict_str(st->verdict));
    fputs("</strong> &#8212; ", out);
    text(out, tb_report_reason(st, reason, sizeof reason));
    char f[64];
    if (m->has_oscillation)
        fprintf(out, " <strong>It will oscillate near %s.</strong>", fmt_hz(true, m->oscillation_hz, f, sizeof f));
    else if (m->runaway)
        fputs(" <strong>A real right-half-plane pole: the output runs away rather than oscillates.</strong>", out);
    if (!m->stability_shown)
        fputs(" The closed-loop figures below (-3 dB point, peaking, desensitivity, step response) assume a stable"
              " loop and do not describe this circuit.", out);
    if (st->computed && (!st->pm_ok || !st->gm_ok))
        fputs(" <span class=\"fails\">A margin threshold is missed.</span>", out);
    fputs("</div>\n", out);
}

/* value, then " ohm" or " S" when .io makes the quantity dimensioned. */
static const char *with_unit(const char *value, const char *unit, char *buf, size_t size)
{
    snprintf(buf, size, "%s%s%s", value, unit[0] && strcmp(value, "--") != 0 ? " " : "", strcmp(value, "--") ? unit : "");
    return buf;
}

static void dc_table(FILE *out, const tb_measures *m, const char *gu, const char *bu)
{
    char v[128], u[160];
    const tb_dc_figures *fig = &m->fig;
    fputs("<h3>", out);
    if (m->dc_hz == 0.0)
        fputs("At DC", out);
    else
        fprintf(out, "At the lowest sweep point, %s (DC is singular)", fmt_hz(true, m->dc_hz, v, sizeof v));
    fputs("</h3>\n<table>\n", out);
    cell_text(out, "loop gain T (return ratio)", fig->has_T ? fmt_complex(true, m->dc.T, v, sizeof v) : "infinite");
    cell_text(out, "open-loop gain a = A_inf T", with_unit(fmt_complex(fig->has_a, m->dc.a, v, sizeof v), gu, u, sizeof u));
    cell_text(out, "loaded feedback factor beta = 1/A_inf",
              with_unit(fmt_complex(fig->has_beta, fig->beta, v, sizeof v), bu, u, sizeof u));
    cell_text(out, "ideal gain A_inf", with_unit(fmt_complex(fig->has_A_inf, m->dc.A_inf, v, sizeof v), gu, u, sizeof u));
    cell_text(out, "feedthrough A0", with_unit(fmt_complex(fig->has_A0, m->dc.A0, v, sizeof v), gu, u, sizeof u));
    cell_text(out, "closed-loop gain A", with_unit(fmt_complex(fig->has_A, m->dc.A, v, sizeof v), gu, u, sizeof u));
    if (fig->has_gain_error)
        snprintf(v, sizeof v, "%+.4g %%", creal(fig->gain_error_pct));
    cell_text(out, "gain error (A - A_inf)/A_inf", fig->has_gain_error ? v : "--");
    fputs("</table>\n", out);
}

static void frequency_table(FILE *out, const tb_result *res, const tb_measures *m, const tb_stability *st)
{
    char v[128], f[64];
    tb_closed_loop cl;
    tb_closed_loop_get(res, &cl);
    fputs("<h3>Over frequency</h3>\n<table>\n", out);
    cell_text(out, "unity loop gain |T| = 1 at", fmt_hz(m->has_unity, m->unity_hz, v, sizeof v));
    if (st->computed && st->has_phase_margin)
        snprintf(v, sizeof v, "%.2f deg at %s (threshold %g: %s)", st->phase_margin_deg,
                 fmt_hz(true, st->phase_margin_hz, f, sizeof f), st->pm_min_deg, st->pm_ok ? "met" : "MISSED");
    cell_text(out, "phase margin", st->computed && st->has_phase_margin ? v : "--");
    if (st->computed && st->has_gain_margin_up)
        snprintf(v, sizeof v, "%.2f dB at %s (threshold %g: %s)", st->gain_margin_up_db,
                 fmt_hz(true, st->gain_margin_up_hz, f, sizeof f), st->gm_min_db, st->gm_ok ? "met" : "MISSED");
    else if (st->computed && st->has_gain_margin_up_above)
        snprintf(v, sizeof v, "more than %g dB, the cap (threshold %g: %s)", st->gm_cap_db, st->gm_min_db,
                 st->gm_ok ? "met" : "MISSED");
    cell_text(out, "loop gain may rise by",
              st->computed && (st->has_gain_margin_up || st->has_gain_margin_up_above) ? v : "--");
    if (st->computed && st->has_gain_margin_down)
        snprintf(v, sizeof v, "%.2f dB at %s (threshold %g: %s)", st->gain_margin_down_db,
                 fmt_hz(true, st->gain_margin_down_hz, f, sizeof f), st->gm_min_db, st->gm_ok ? "met" : "MISSED");
    cell_text(out, "loop gain may fall by", st->computed && st->has_gain_margin_down ? v : "--");
    if (st->computed && st->has_delay_margin)
        snprintf(v, sizeof v, "%.4g s", st->delay_margin_s);
    cell_text(out, "delay margin", st->computed && st->has_delay_margin ? v : "--");
    if (st->computed && st->has_vector_margin)
        snprintf(v, sizeof v, "%.4g at %s", st->vector_margin, fmt_hz(true, st->vector_margin_hz, f, sizeof f));
    cell_text(out, "vector margin min |1 + T|", st->computed && st->has_vector_margin ? v : "--");
    cell_text(out, "closed-loop -3 dB", fmt_hz(m->has_f3db, m->f3db_closed_hz, v, sizeof v));
    if (cl.has_peak)
        snprintf(v, sizeof v, "%+.3f dB at %s", cl.peak_db, fmt_hz(true, cl.peak_hz, f, sizeof f));
    cell_text(out, "peaking of |A|", cl.has_peak ? v : "--");
    fputs("</table>\n", out);
}

static void breakdown_table(FILE *out, const tb_feedback_summary *fs)
{
    char v[128], f[64];
    if (!fs->computed || !fs->has_estimate)
        return;
    fputs("<h3>Why A differs from the hand estimate</h3>\n<table>\n", out);
    snprintf(v, sizeof v, "%.6g", fs->estimate);
    cell_text(out, "hand estimate G (1/beta)", v);
    snprintf(v, sizeof v, "%.4g %% (tolerance %g %%: %s)", fs->error_dc_pct, fs->tol_pct,
             fs->holds_at_dc ? "holds" : "MISSED");
    cell_text(out, "|A - G|/|G| at DC", v);
    for (int k = 0; k < TB_PART_COUNT && fs->dc.has_parts; k++)
        cell_text(out, tb_part_str((tb_part)k), fmt_complex(true, fs->dc.part[k], v, sizeof v));
    if (fs->dc.has_parts)
        cell_text(out, "largest part at DC", tb_part_str(fs->dominant_dc));
    cell_text(out, "the estimate stops holding at", fmt_hz(fs->has_limit, fs->limit_hz, f, sizeof f));
    fputs("</table>\n", out);
}

/* One row of the table of chosen frequencies: a label, then one cell per frequency. */
typedef enum { SPOT_T, SPOT_T_DB, SPOT_PHASE, SPOT_RD, SPOT_A, SPOT_AINF, SPOT_A0, SPOT_PART, SPOT_Z } spot_row;

static const char *spot_cell(const tb_spot *s, spot_row row, size_t k, char *v, size_t size)
{
    const tb_point *p = &s->pt;
    bool io = s->solved && !(p->flags & TB_PT_NO_IO);
    switch (row) {
    case SPOT_T:
        return s->solved && !s->has_T ? "infinite" : fmt_complex(s->solved, p->T, v, size);
    case SPOT_T_DB:
        snprintf(v, size, s->solved && s->has_T_db ? "%+.2f dB" : "--", s->T_db);
        return v;
    case SPOT_PHASE:
        snprintf(v, size, s->solved && s->has_T_db ? "%.2f deg" : "--", s->T_phase_deg);
        return v;
    case SPOT_RD:
        snprintf(v, size, s->solved && s->has_T ? "%.6g" : "--", s->return_difference);
        return v;
    case SPOT_A:
        return fmt_complex(io, p->A, v, size);
    case SPOT_AINF:
        return fmt_complex(io && !(p->flags & TB_PT_AINF_NONE), p->A_inf, v, size);
    case SPOT_A0:
        return fmt_complex(io && !(p->flags & TB_PT_A0_NONE), p->A0, v, size);
    case SPOT_PART:
        return fmt_complex(s->solved && s->breakdown.has_parts, s->breakdown.part[k], v, size);
    case SPOT_Z:
        return fmt_complex(s->solved && k < s->ports && s->zports[k].has_Z, s->zports[k].Z, v, size);
    }
    return "--";
}

static void spot_row_out(FILE *out, const tb_result *res, size_t l, const char *label, spot_row row, size_t k)
{
    char v[128];
    fputs("<tr><th>", out);
    text(out, label);
    fputs("</th>", out);
    for (size_t i = 0; i < tb_spot_count(res); i++) {
        tb_spot s;
        tb_spot_get(res, i, l, &s);
        fputs("<td class=\"num\">", out);
        text(out, spot_cell(&s, row, k, v, sizeof v));
        fputs("</td>", out);
    }
    fputs("</tr>\n", out);
}

/* Loop l at every frequency of --at (fresh solves), one column per frequency. */
static void spot_table(FILE *out, const tb_result *res, size_t l)
{
    static const struct {
        const char *label;
        spot_row row;
    } rows[] = {{"loop gain T", SPOT_T},        {"|T|", SPOT_T_DB},          {"phase of T", SPOT_PHASE},
                {"|1 + T|", SPOT_RD},           {"closed-loop gain A", SPOT_A}, {"ideal gain A_inf", SPOT_AINF},
                {"feedthrough A0", SPOT_A0}};
    char v[128], label[160];
    if (tb_spot_count(res) == 0)
        return;
    fputs("<h3>At chosen frequencies (each by a fresh solve there)</h3>\n<table>\n<tr><th>frequency</th>", out);
    for (size_t i = 0; i < tb_spot_count(res); i++) {
        tb_spot s;
        tb_spot_get(res, i, l, &s);
        fputs("<th>", out);
        text(out, s.f_hz > 0 ? fmt_hz(true, s.f_hz, v, sizeof v) : "DC");
        fputs(s.solved ? "</th>" : " (singular)</th>", out);
    }
    fputs("</tr>\n", out);
    for (size_t r = 0; r < sizeof rows / sizeof rows[0]; r++)
        spot_row_out(out, res, l, rows[r].label, rows[r].row, 0);
    tb_feedback_summary fs = {0};
    tb_feedback_loop(res, l, &fs);
    for (int k = 0; k < TB_PART_COUNT && fs.computed && fs.has_estimate; k++) {
        snprintf(label, sizeof label, "part of A - G: %s", tb_part_str((tb_part)k));
        spot_row_out(out, res, l, label, SPOT_PART, (size_t)k);
    }
    for (size_t p = 0; p < tb_zport_count(res); p++) {
        tb_zport_summary zs;
        tb_zport_loop(res, p, l, &zs, NULL);
        snprintf(label, sizeof label, "Z at port %s (ohm)", zs.name);
        spot_row_out(out, res, l, label, SPOT_Z, p);
    }
    fputs("</table>\n", out);
}

/* A picture as inline SVG inside a figure; nothing when it has nothing to show. */
static tb_status figure(FILE *out, const tb_circuit *ckt, const tb_result *res, tb_picture_kind kind, size_t l,
                        size_t port, const char *caption)
{
    fputs("<figure>\n", out);
    tb_status st = tb_report_svg(ckt, res, kind, l, port, out);
    if (st && st != TB_ERR_NOT_FOUND)
        return st;
    fputs("<figcaption>", out);
    text(out, st ? "(not available for this netlist)" : caption);
    fputs("</figcaption>\n</figure>\n", out);
    return TB_OK;
}

static tb_status loop_section(FILE *out, const tb_circuit *ckt, const tb_result *res, size_t l)
{
    tb_measures m;
    tb_stability st;
    tb_feedback_summary fs = {0};
    tb_status s = tb_measure_loop(res, l, &m);
    if (s)
        return s;
    tb_stability_loop(res, l, &st);
    tb_feedback_loop(res, l, &fs);
    fputs("<h2>Loop at ", out);
    text(out, tb_circuit_loop_name(ckt, l));
    fputs("</h2>\n", out);
    if (st.computed)
        verdict_box(out, &st, &m);
    dc_table(out, &m, tb_circuit_gain_unit(ckt), tb_circuit_beta_unit(ckt));
    frequency_table(out, res, &m, &st);
    spot_table(out, res, l);
    breakdown_table(out, &fs);
    if ((s = figure(out, ckt, res, TB_PIC_BODE, l, 0,
                    "How much the loop corrects, and until when. Where the loop gain |T| (solid) is large, the "
                    "closed-loop gain |A| follows the ideal gain |A_inf| = 1/beta; where |T| falls through 0 dB "
                    "the correction ends and |A| follows the amplifier alone. The phase margin (PM, red bar in "
                    "the phase panel) is how far the phase of T stays above -180 deg where |T| = 1; the gain "
                    "margin (GM, red bar in the magnitude panel) is how far |T| stays below 0 dB where the "
                    "phase reaches -180 deg. A margin near zero or below means ringing or oscillation.")))
        return s;
    if ((s = figure(out, ckt, res, TB_PIC_NYQUIST, l, 0,
                    "The same T as one curve in the complex plane, from the start of the sweep (far out: large "
                    "|T|) to its end (near the origin); the dashed curve is its mirror for negative "
                    "frequencies. Beyond the unit circle the radius is compressed, one ring per 20 dB. What "
                    "matters is the point -1: the closer the curve passes it, the smaller the vector margin "
                    "(the circle around -1), and the count of turns around it decides stability.")))
        return s;
    if (fs.computed && fs.has_estimate &&
        (s = figure(out, ckt, res, TB_PIC_BREAKDOWN, l, 0,
                    "Why the real gain A misses the hand estimate G, frequency by frequency: |A - G| (solid) "
                    "is the sum of three parts, loading (the loaded network's 1/beta differs from G), finite "
                    "loop gain (-A_inf/(1 + T), which grows as |T| falls) and feedthrough (signal that "
                    "bypasses the amplifier). The highest curve at a frequency is the reason there; the marker "
                    "shows where the error first exceeds the tolerance.")))
        return s;
    for (size_t p = 0; p < tb_zport_count(res); p++) {
        tb_zport_summary zs;
        char caption[512];
        tb_zport_loop(res, p, l, &zs, NULL);
        snprintf(caption, sizeof caption,
                 "The impedance at port %s with the loop working (solid) and with the amplifier's gain at "
                 "zero (dashed). %s Where |T| has fallen, the two meet: the feedback no longer acts.",
                 zs.name,
                 zs.side == TB_SIDE_SERIES  ? "Here the feedback is in series: it raises the impedance (by |1 + T| when pure)."
                 : zs.side == TB_SIDE_SHUNT ? "Here the feedback is in shunt: it lowers the impedance (by |1 + T| when pure)."
                                            : "Blackman's formula Z = Z0 (1 + T_sc)/(1 + T_oc) gives the change.");
        if ((s = figure(out, ckt, res, TB_PIC_IMPEDANCE, l, p, caption)))
            return s;
    }
    return TB_OK;
}

tb_status tb_report_html(const tb_circuit *ckt, const tb_result *res, FILE *out)
{
    if (!ckt || !res || !out)
        return TB_ERR_USAGE;
    char o[512];
    fprintf(out, "<!DOCTYPE html>\n<html xmlns=\"http://www.w3.org/1999/xhtml\" lang=\"en\">\n<head>\n<meta charset=\"utf-8\"/>\n<title>tbeta: ");
    text(out, ckt->file);
    fprintf(out, "</title>\n<style>%s</style>\n</head>\n<body>\n<h1>", style_sheet);
    text(out, tb_circuit_title(ckt)[0] ? tb_circuit_title(ckt) : ckt->file);
    fputs("</h1>\n<p>Netlist <code>", out);
    text(out, ckt->file);
    fprintf(out, "</code>, analysed by tbeta %s", TB_VERSION);
    if (ckt->io.given) {
        fputs("; closed-loop gain A = ", out);
        text(out, tb_report_output(&ckt->io, o, sizeof o));
        fputs(" / ", out);
        text(out, ckt->io.source);
    }
    fputs(".</p>\n", out);
    fputs("<p>How to read this page: each loop opens with its verdict, then its figures at DC and over "
          "frequency; the pictures then tell its story: the Bode plot shows how much the loop corrects and up "
          "to what frequency, with its margins drawn as red bars; the Nyquist plot shows how close the loop "
          "comes to oscillation (the point -1); the step response shows what the output does. Each picture's "
          "caption says what to look for.</p>\n",
          out);
    for (size_t l = 0; l < tb_result_loops(res); l++) {
        tb_status st = loop_section(out, ckt, res, l);
        if (st)
            return st;
    }
    tb_step_figures fig;
    tb_step_figures_get(res, &fig);
    if (fig.computed) {
        fputs("<h2>Closed-loop step response</h2>\n", out);
        tb_status st = figure(out, ckt, res, TB_PIC_STEP, 0, 0,
                              "What the output does after a unit step at the input: overshoot, the 10-90 % "
                              "rise and the time to settle within 2 % are marked. A small phase margin shows "
                              "here as overshoot and ringing.");
        if (st)
            return st;
    }
    tb_status dst = tb_report_distortion_html(ckt, res, out);
    if (dst)
        return dst;
    if ((dst = tb_report_spreadpart_html(ckt, res, out)))
        return dst;
    fputs("<h2>Caution</h2>\n<p class=\"caution\">", out);
    text(out, tb_report_caution);
    fputs("</p>\n</body>\n</html>\n", out);
    return ferror(out) ? TB_ERR_IO : TB_OK;
}
