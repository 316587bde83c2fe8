/* src/checkhtml.c: 'tbeta check --html': one self-contained summary page of a library run */
#include <stdio.h>
#include <string.h>

#include "checkrun.h"
#include "expect.h"
#include "plot.h"
#include "report.h"

/* Greys and border styles only: the status reads in words and shapes, not in colours. */
static const char style_sheet[] =
    "body{font-family:sans-serif;max-width:1100px;margin:1.5em auto;color:#1a1a1a;line-height:1.4}"
    "h1{font-size:1.4em}h2{font-size:1.2em;border-bottom:1px solid #999;padding-bottom:.2em;margin-top:2em}"
    "table{border-collapse:collapse;margin:.5em 0 1em;width:100%}"
    "td,th{border:1px solid #bbb;padding:.25em .6em;text-align:left;vertical-align:top}th{background:#f0f0f0}"
    ".status{display:inline-block;min-width:4.5em;text-align:center;font-weight:bold;padding:0 .3em}"
    ".pass{border:2px solid #444}.fail{border:4px double #000}.error{border:2px dashed #000}"
    "ul{margin:0;padding-left:1.2em}pre{margin:0;white-space:pre-wrap;font-size:.9em}td.loops{white-space:nowrap}"
    ".summary{border:3px solid #444;padding:.6em 1em;margin:1em 0;font-size:1.05em}"
    ".caution{border-left:4px solid #666;padding:.5em 1em;background:#f6f6f6}";

static void text(FILE *out, const char *s)
{
    tb_plot_escape(out, s);
}

static const char *status_word(tb_check_status st)
{
    return st == TB_CHECK_PASS ? "PASS" : st == TB_CHECK_FAIL ? "FAIL" : "ERROR";
}

/* Each loop: its name, verdict and phase margin when measured. */
static void loops_cell(FILE *out, const tb_check_entry *e)
{
    int verdict = tb_figure_find("verdict", strlen("verdict"));
    int pm = tb_figure_find("phase_margin_deg", strlen("phase_margin_deg"));
    char v[128];
    fputs("<td class=\"loops\">", out);
    for (size_t l = 0; l < e->loop_count; l++) {
        const tb_check_loop *lp = &e->loops[l];
        fputs(l ? "<br/>" : "", out);
        text(out, lp->name ? lp->name : "?");
        for (int k = 0; k < 2 && lp->figures; k++) {
            int f = k == 0 ? verdict : pm;
            if (f < 0 || !lp->figures[f].present)
                continue;
            fputs(k == 0 ? ": " : ", PM ", out);
            text(out, tb_figure_text(f, true, lp->figures[f].value, v, sizeof v));
        }
    }
    fputs("</td>", out);
}

/* What failed: each failed expectation and drift, or the diagnostics of an error. */
static void failures_cell(FILE *out, const tb_check_entry *e)
{
    char line[1024];
    fputs("<td>", out);
    if (e->status == TB_CHECK_ERROR && e->errors) {
        fputs("<pre>", out);
        text(out, e->errors);
        fputs("</pre>", out);
    }
    bool list = false;
    for (size_t k = 0; k < e->expect_count + e->drift_count; k++) {
        if (k < e->expect_count && e->expects[k].pass)
            continue;
        if (k < e->expect_count)
            snprintf(line, sizeof line, "line %d: %s is %s, expected %s", e->expects[k].line, e->expects[k].target,
                     e->expects[k].measured, e->expects[k].bound);
        else
            snprintf(line, sizeof line, "%s drifted: %s, now %s", e->drifts[k - e->expect_count].target,
                     e->drifts[k - e->expect_count].was, e->drifts[k - e->expect_count].now);
        fputs(list ? "<li>" : "<ul><li>", out);
        text(out, line);
        fputs("</li>", out);
        list = true;
    }
    fputs(list ? "</ul></td>" : "</td>", out);
}

static void entry_row(FILE *out, const tb_check_entry *e)
{
    size_t met = 0;
    for (size_t k = 0; k < e->expect_count; k++)
        met += e->expects[k].pass;
    const char *cls = e->status == TB_CHECK_PASS ? "pass" : e->status == TB_CHECK_FAIL ? "fail" : "error";
    fputs("<tr><td>", out);
    if (e->page) {
        fputs("<a href=\"", out);
        text(out, e->page);
        fputs("\">", out);
    }
    text(out, e->path);
    fputs(e->page ? "</a></td>" : "</td>", out);
    fprintf(out, "<td><span class=\"status %s\">%s</span></td>", cls, status_word(e->status));
    loops_cell(out, e);
    if (e->status == TB_CHECK_ERROR)
        fputs("<td>--</td>", out);
    else
        fprintf(out, "<td>%zu of %zu met</td>", met, e->expect_count);
    failures_cell(out, e);
    fputs("</tr>\n", out);
}

tb_status tb_check_write_html(const tb_check_run *run, FILE *out)
{
    if (!run || !out)
        return TB_ERR_USAGE;
    size_t n[3] = {0, 0, 0}, pages = 0;
    for (size_t i = 0; i < tb_check_count(run); i++) {
        n[tb_check_get(run, i)->status]++;
        pages += tb_check_get(run, i)->page != NULL;
    }
    fprintf(out, "<!DOCTYPE html>\n<html xmlns=\"http://www.w3.org/1999/xhtml\" lang=\"en\">\n<head>\n"
                 "<meta charset=\"utf-8\"/>\n<title>tbeta check: %zu netlists</title>\n<style>%s</style>\n"
                 "</head>\n<body>\n<h1>tbeta check: %zu netlists</h1>\n",
            tb_check_count(run), style_sheet, tb_check_count(run));
    fprintf(out, "<p class=\"summary\"><strong>%zu pass, %zu fail, %zu could not be read or analysed.</strong>",
            n[TB_CHECK_PASS], n[TB_CHECK_FAIL], n[TB_CHECK_ERROR]);
    fprintf(out, " A netlist fails when one of its .expect cards does not hold%s.%s</p>\n",
            tb_check_opts(run)->compared ? " or a figure drifted the worse way from the baseline" : "",
            pages ? " Each name links to the netlist's review page." : "");
    fputs("<table>\n<tr><th>netlist</th><th>status</th><th>loops: verdict, phase margin</th>"
          "<th>expectations</th><th>what failed</th></tr>\n",
          out);
    for (size_t i = 0; i < tb_check_count(run); i++)
        entry_row(out, tb_check_get(run, i));
    fputs("</table>\n<h2>Caution</h2>\n<p class=\"caution\">", out);
    text(out, tb_report_caution);
    fprintf(out, "</p>\n<p>Written by tbeta %s.</p>\n</body>\n</html>\n", TB_VERSION);
    return ferror(out) ? TB_ERR_IO : TB_OK;
}
