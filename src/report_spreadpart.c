/* src/report_spreadpart.c: the spread part of the text, JSON and HTML reports: scans, corners, Monte Carlo and sensitivities */
#include "report_spreadpart.h"

#include <jansson.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "plot.h"
#include "report.h"
#include "report_spread.h"
#include "spreadpart.h"

/* The part's tables in the order the reports show them. */
static size_t tables(const tb_spread_part *part, const tb_spreadset *sets[3])
{
    size_t n = 0;
    const tb_spreadset *all[3] = {part->scan, part->corners, part->samples};
    for (size_t i = 0; i < 3; i++)
        if (all[i])
            sets[n++] = all[i];
    return n;
}

static const char *where(double f, char *buf, size_t size)
{
    return f == 0 ? "DC" : tb_plot_eng(f, "Hz", buf, size);
}

/* ---- text ------------------------------------------------------------------------ */

tb_status tb_report_spreadpart_text(const tb_circuit *ckt, const tb_result *res, FILE *out)
{
    const tb_spread_part *part = tb_result_spread(res);
    if (!part)
        return TB_OK;
    const tb_spreadset *sets[3];
    size_t n = tables(part, sets);
    if (part->skipped)
        fputs("\nspread: the netlist's .scan and .spread cards were not run (--no-spread; 'tbeta spread' runs "
              "them)\n", out);
    else if (n > 0)
        fputs("\nspread over the netlist's .scan and .spread cards (docs/spread.md; every run at full precision: "
              "'tbeta spread NETLIST --csv')\n", out);
    tb_status st = TB_OK;
    for (size_t i = 0; i < n && !st; i++) {
        fputs("\n", out);
        st = tb_report_spread_body(ckt, sets[i], out);
    }
    char hz[32];
    for (size_t k = 0; k < part->at_count && !st; k++) {
        fprintf(out, "\nsensitivities at %s (adjoint; per 1 %% increase of each element or parameter)\n",
                where(part->at_hz[k], hz, sizeof hz));
        st = tb_report_sensitivities_at_body(ckt, part->at_hz[k], part->at + k * ckt->loop_count * part->at_per,
                                             part->at_per, out);
    }
    return st ? st : ferror(out) ? TB_ERR_IO : TB_OK;
}

/* ---- JSON ------------------------------------------------------------------------ */

static bool put(json_t *obj, const char *key, json_t *val)
{
    return val && json_object_set_new(obj, key, val) == 0;
}

bool tb_report_spreadpart_json(const tb_circuit *ckt, const tb_result *res, struct json_t *root)
{
    const tb_spread_part *part = tb_result_spread(res);
    if (!part)
        return true;
    const tb_spreadset *sets[3];
    size_t n = tables(part, sets);
    bool ok = true;
    if (part->skipped) {
        ok = put(root, "spread", json_null());
    } else if (n > 0) {
        static const char *const keys[] = {[TB_SPREADSET_SCAN] = "scan", [TB_SPREADSET_CORNERS] = "corners",
                                           [TB_SPREADSET_MONTE_CARLO] = "monte_carlo"};
        json_t *spread = json_object();
        ok = put(root, "spread", spread);
        for (size_t i = 0; ok && i < n; i++)
            ok = put(spread, keys[sets[i]->kind], tb_report_spread_json_object(ckt, sets[i], false));
    }
    if (ok && part->at_count > 0) {
        json_t *arr = json_array();
        ok = put(root, "sensitivities_at", arr);
        for (size_t k = 0; ok && k < part->at_count; k++) {
            json_t *one = tb_report_sensitivities_at_json(ckt, part->at_hz[k],
                                                          part->at + k * ckt->loop_count * part->at_per, part->at_per);
            ok = one && json_array_append_new(arr, one) == 0;
        }
    }
    return ok;
}

/* ---- HTML ------------------------------------------------------------------------ */

/* What fn writes to a memory stream, escaped line by line (the lines kept), between open and
 * close; TB_ERR_NOMEM when the stream cannot be had. */
typedef tb_status (*text_fn)(const void *ctx, FILE *out);

static tb_status escaped(FILE *out, const char *open, const char *close, text_fn fn, const void *ctx)
{
    char *text = NULL;
    size_t len = 0;
    FILE *mem = open_memstream(&text, &len);
    if (!mem)
        return TB_ERR_NOMEM;
    tb_status st = fn(ctx, mem);
    if (fclose(mem) != 0 && !st)
        st = TB_ERR_NOMEM;
    if (!st) {
        fputs(open, out);
        for (char *line = text, *nl; line && *line; line = nl ? nl + 1 : NULL) {
            nl = strchr(line, '\n');
            if (nl)
                *nl = '\0';
            tb_plot_escape(out, line);
            if (nl)
                fputs("\n", out);
        }
        fputs(close, out);
    }
    free(text);
    return st;
}

typedef struct {
    const tb_circuit *ckt;
    const tb_spreadset *set;
    double f;
    const tb_sens_entry *e;
    size_t per;
} html_ctx;

static tb_status set_body(const void *ctx, FILE *out)
{
    const html_ctx *c = ctx;
    return tb_report_spread_body(c->ckt, c->set, out);
}

static tb_status sentence(const void *ctx, FILE *out)
{
    const html_ctx *c = ctx;
    tb_report_sensitivities_at_sentence(c->f, c->e, c->per, out);
    return TB_OK;
}

static const char *const set_heading[] = {
    [TB_SPREADSET_SCAN] = "Scan", [TB_SPREADSET_CORNERS] = "Corners", [TB_SPREADSET_MONTE_CARLO] = "Monte Carlo"};

static const char *const set_caption[] = {
    [TB_SPREADSET_SCAN] = "The phase margin (the dashed line is the threshold) and the unity crossing against the "
                          "scanned value: where the margin falls through the threshold is the limit of what the "
                          "loop can take.",
    [TB_SPREADSET_CORNERS] = "",
    [TB_SPREADSET_MONTE_CARLO] = "How the phase margin spreads over the samples (the vertical line is the "
                                 "threshold): the share of the histogram left of it is the share of builds that "
                                 "miss it."};

static tb_status spread_sections(FILE *out, const tb_circuit *ckt, const tb_spread_part *part)
{
    const tb_spreadset *sets[3];
    size_t n = tables(part, sets);
    if (part->skipped) {
        fputs("<h2>Spread</h2>\n<p>The netlist's .scan and .spread cards were not run (--no-spread); "
              "<code>tbeta spread</code> runs them.</p>\n", out);
        return TB_OK;
    }
    if (n == 0)
        return TB_OK;
    fputs("<h2>Spread: the loop over load and tolerance</h2>\n<p>The netlist's .scan cards walk a part through "
          "its values; its .spread cards give every part a tolerance, run at the corners (every tolerance at its "
          "extremes at once, and the corner behind each worst case) and drawn at random (Monte Carlo: the yield, "
          "with its 95 % interval). A run passes when every loop is stable with its margins and every .expect "
          "holds. Every run at full precision: <code>tbeta spread NETLIST --csv</code> (docs/spread.md).</p>\n",
          out);
    tb_status st = TB_OK;
    for (size_t i = 0; i < n && !st; i++) {
        const tb_spreadset *set = sets[i];
        fprintf(out, "<h3>%s</h3>\n", set_heading[set->kind]);
        if (tb_report_spread_has_svg(set)) {
            fputs("<figure>\n", out);
            st = tb_report_spread_svg(ckt, set, out);
            fprintf(out, "<figcaption>%s</figcaption>\n</figure>\n", set_caption[set->kind]);
        }
        html_ctx c = {.ckt = ckt, .set = set};
        if (!st)
            st = escaped(out, "<pre style=\"overflow-x:auto\">", "</pre>\n", set_body, &c);
    }
    return st;
}

/* A ranked table of sensitivities, at most ROWS rows; with crossings, the unity crossing, phase
 * and gain margin columns too. */
#define ROWS 20
static void sens_table(FILE *out, const tb_sens_entry *e, size_t count, bool crossings)
{
    fputs("<table>\n<tr><th>element</th><th>value</th><th>|T| %/%</th><th>phase of T deg/%</th><th>|A| %/%</th>"
          "<th>|A_inf| %/%</th>", out);
    if (crossings)
        fputs("<th>unity crossing %/%</th><th>phase margin deg/%</th><th>gain margin dB/%</th>", out);
    fputs("</tr>\n", out);
    for (size_t i = 0; i < count && i < ROWS; i++) {
        char v[32];
        fputs("<tr><td>", out);
        tb_plot_escape(out, e[i].element);
        fprintf(out, "</td><td class=\"num\">%s</td>", tb_plot_eng(e[i].value, "", v, sizeof v));
        bool has[6] = {e[i].has_T, e[i].has_T, e[i].has_A, e[i].has_A_inf, e[i].has_unity, e[i].has_pm};
        double x[6] = {e[i].T_mag, e[i].T_phase_deg, e[i].A_mag, e[i].A_inf_mag, e[i].unity, e[i].pm_deg_pct};
        for (size_t k = 0; k < (crossings ? 6u : 4u); k++) {
            if (has[k] && isfinite(x[k]))
                fprintf(out, "<td class=\"num\">%+.4g</td>", fabs(x[k]) < 1e-12 ? 0.0 : x[k]);
            else
                fputs("<td class=\"num\">--</td>", out);
        }
        if (crossings && e[i].has_gm && isfinite(e[i].gm_db_pct))
            fprintf(out, "<td class=\"num\">%+.4g</td>", fabs(e[i].gm_db_pct) < 1e-12 ? 0.0 : e[i].gm_db_pct);
        else if (crossings)
            fputs("<td class=\"num\">--</td>", out);
        fputs("</tr>\n", out);
    }
    fputs("</table>\n", out);
    if (count > ROWS)
        fprintf(out, "<p>(%zu more in --json)</p>\n", count - ROWS);
}

static bool has_sensitivities(const tb_circuit *ckt, const tb_result *res, const tb_spread_part *part)
{
    tb_sensitivity s;
    bool any = part && part->at_count > 0;
    for (size_t l = 0; l < ckt->loop_count && !any; l++)
        any = tb_sensitivity_get(res, l, &s) == TB_OK && s.computed;
    return any;
}

static tb_status sens_sections(FILE *out, const tb_circuit *ckt, const tb_result *res, const tb_spread_part *part)
{
    if (!has_sensitivities(ckt, res, part))
        return TB_OK;
    fputs("<h2>Which part sets the loop</h2>\n<p>Normalized sensitivities by the adjoint method: how much each "
          "figure moves per 1 % increase of each element's or parameter's value, ranked. They are slopes at the nominal "
          "values; a figure that moves non-linearly needs the spread above.</p>\n", out);
    char f[32];
    for (size_t l = 0; l < ckt->loop_count; l++) {
        tb_sensitivity s;
        if (tb_sensitivity_get(res, l, &s) != TB_OK || !s.computed)
            continue;
        fputs("<h3>Loop at ", out);
        tb_plot_escape(out, tb_circuit_loop_name(ckt, l));
        fputs(": its figures</h3>\n", out);
        if (s.count > 0 && s.entries[0].has_pm) {
            fputs("<p>The phase margin is set by ", out);
            tb_plot_escape(out, s.entries[0].element);
            fprintf(out, " (%+.3g deg/%%)", s.entries[0].pm_deg_pct);
            if (s.count > 1 && s.entries[1].has_pm) {
                fputs(" and ", out);
                tb_plot_escape(out, s.entries[1].element);
                fprintf(out, " (%+.3g deg/%%)", s.entries[1].pm_deg_pct);
            }
            fprintf(out, ", at %s; |T|, its phase and |A| are taken at %s.</p>\n",
                    tb_plot_eng(s.pm_hz, "Hz", f, sizeof f), where(s.dc_hz, f, sizeof f));
        }
        sens_table(out, s.entries, s.count, true);
    }
    tb_status st = TB_OK;
    for (size_t k = 0; part && k < part->at_count && !st; k++)
        for (size_t l = 0; l < ckt->loop_count && !st; l++) {
            const tb_sens_entry *e = part->at + (k * ckt->loop_count + l) * part->at_per;
            fputs("<h3>Loop at ", out);
            tb_plot_escape(out, tb_circuit_loop_name(ckt, l));
            fprintf(out, ", at %s</h3>\n", where(part->at_hz[k], f, sizeof f));
            html_ctx c = {.ckt = ckt, .f = part->at_hz[k], .e = e, .per = part->at_per};
            st = escaped(out, "<p>", "</p>\n", sentence, &c);
            if (!st)
                sens_table(out, e, part->at_per, false);
        }
    return st;
}

tb_status tb_report_spreadpart_html(const tb_circuit *ckt, const tb_result *res, FILE *out)
{
    const tb_spread_part *part = tb_result_spread(res);
    tb_status st = part ? spread_sections(out, ckt, part) : TB_OK;
    if (!st)
        st = sens_sections(out, ckt, res, part);
    return st ? st : ferror(out) ? TB_ERR_IO : TB_OK;
}
