/* src/checkreport.c: 'tbeta check' for people (one line per netlist, a summary) and as JUnit XML */
#include <stdarg.h>
#include <stdio.h>
#include <string.h>

#include "checkrun.h"
#include "expect.h"
#include "report.h"

/* Counts over a run, for the summary and the JUnit header. */
typedef struct {
    size_t passed;
    size_t failed;
    size_t errors;
    size_t expects;
    size_t expects_failed;
    size_t drifts;
} tally;

static tally count_all(const tb_check_run *run)
{
    tally t = {0, 0, 0, 0, 0, 0};
    for (size_t i = 0; i < tb_check_count(run); i++) {
        const tb_check_entry *e = tb_check_get(run, i);
        t.passed += e->status == TB_CHECK_PASS;
        t.failed += e->status == TB_CHECK_FAIL;
        t.errors += e->status == TB_CHECK_ERROR;
        t.expects += e->expect_count;
        for (size_t k = 0; k < e->expect_count; k++)
            t.expects_failed += !e->expects[k].pass;
        t.drifts += e->drift_count;
    }
    return t;
}

/* The first line of a (multi-line) message, without its end. */
static int first_line_len(const char *s)
{
    size_t n = strcspn(s, "\n");
    return n > 1000 ? 1000 : (int)n;
}

/* ---- text ----------------------------------------------------------------------- */

/* Longest line written (a longer one is cut, ending in "..."). */
#define LINE_MAX_BYTES 8192

/* One line for people: formatted, then written with every control character escaped (a
 * name holding a newline or an escape sequence cannot start a line of its own or drive the
 * terminal: tb_report_escape), then the newline. */
__attribute__((format(printf, 2, 3))) static void say(FILE *out, const char *fmt, ...)
{
    char raw[LINE_MAX_BYTES];
    char safe[LINE_MAX_BYTES];
    va_list ap;
    va_start(ap, fmt);
    int n = vsnprintf(raw, sizeof raw, fmt, ap);
    va_end(ap);
    if (n >= (int)sizeof raw)
        memcpy(raw + sizeof raw - 4, "...", 4);
    fputs(tb_report_escape(raw, safe, sizeof safe), out);
    fputc('\n', out);
}

/* The failures of e: the first on the netlist's own line, the rest indented below. */
static void failures(FILE *out, const tb_check_entry *e)
{
    bool first = true;
    for (size_t k = 0; k < e->expect_count; k++) {
        const tb_check_expect *x = &e->expects[k];
        if (x->pass)
            continue;
        say(out, "%s%s:%d: %s is %s, expected %s", first ? "FAIL   " : "         ", e->path, x->line, x->target,
            x->measured, x->bound);
        first = false;
    }
    for (size_t k = 0; k < e->drift_count; k++) {
        const tb_check_drift *d = &e->drifts[k];
        say(out, "%s%s: %s drifted: %s, now %s", first ? "DRIFT  " : "         ", e->path, d->target, d->was,
            d->now);
        first = false;
    }
}

tb_status tb_check_write_text(const tb_check_run *run, FILE *out)
{
    if (!run || !out)
        return TB_ERR_USAGE;
    bool against = tb_check_opts(run)->compared;
    for (size_t i = 0; i < tb_check_count(run); i++) {
        const tb_check_entry *e = tb_check_get(run, i);
        if (e->status == TB_CHECK_ERROR) {
            /* the first line of the diagnostics, which start with the path when they are located
             * (a path may hold a newline: it is skipped as a whole) */
            const char *msg = e->errors ? e->errors : "cannot be checked";
            size_t path_len = strlen(e->path);
            bool located = strncmp(msg, e->path, path_len) == 0;
            const char *rest = located ? msg + path_len : msg;
            say(out, "ERROR  %s%s%.*s", e->path, located ? "" : ": ", first_line_len(rest), rest);
        } else if (e->status == TB_CHECK_FAIL) {
            failures(out, e);
        } else {
            say(out, "pass   %s (%zu expectation%s)%s", e->path, e->expect_count, e->expect_count == 1 ? "" : "s",
                against && !e->in_baseline ? " (not in the baseline)" : "");
        }
    }
    tally t = count_all(run);
    fprintf(out,
            "check: %zu netlist%s: %zu passed, %zu failed, %zu could not be checked; "
            "%zu expectation%s, %zu failed; %zu figure%s drifted\n",
            tb_check_count(run), tb_check_count(run) == 1 ? "" : "s", t.passed, t.failed, t.errors,
            t.expects, t.expects == 1 ? "" : "s", t.expects_failed, t.drifts,
            t.drifts == 1 ? "" : "s");
    return ferror(out) ? TB_ERR_IO : TB_OK;
}

/* ---- JUnit XML ----------------------------------------------------------------- */

/* s as XML character data or attribute text: & < > " ' escaped; odd bytes read as every
 * writer reads them (tb_report_char); the characters XML 1.0 does not allow (control
 * characters other than tab, newline and carriage return, U+FFFE and U+FFFF) and the C1
 * controls written as text, \xHH or \uHHHH, as in the text output. */
static void xml(FILE *out, const char *s)
{
    uint32_t cp = 0;
    for (size_t n; (n = tb_report_char(s, &cp)) != 0; s += n) {
        char enc[4];
        if ((tb_report_is_control(cp) && cp != '\t' && cp != '\n' && cp != '\r') || cp == 0xFFFE || cp == 0xFFFF) {
            fprintf(out, cp > 0xFF ? "\\u%04X" : "\\x%02X", (unsigned)cp);
            continue;
        }
        switch (cp) {
        case '&': fputs("&amp;", out); break;
        case '<': fputs("&lt;", out); break;
        case '>': fputs("&gt;", out); break;
        case '"': fputs("&quot;", out); break;
        case '\'': fputs("&apos;", out); break;
        default: fwrite(enc, 1, tb_report_utf8(cp, enc), out); break;
        }
    }
}

static void junit_expect(FILE *out, const tb_check_entry *e, const tb_check_expect *x)
{
    char name[512];
    snprintf(name, sizeof name, "line %d: %s %s", x->line, x->target, x->bound);
    fputs("    <testcase classname=\"", out);
    xml(out, e->path);
    fputs("\" name=\"", out);
    xml(out, name);
    if (x->pass) {
        fputs("\"/>\n", out);
        return;
    }
    char msg[512];
    snprintf(msg, sizeof msg, "%s is %s, expected %s", x->target, x->measured, x->bound);
    fputs("\">\n      <failure type=\"expectation\" message=\"", out);
    xml(out, msg);
    fputs("\">", out);
    xml(out, e->path);
    fprintf(out, ":%d: ", x->line);
    xml(out, msg);
    fputs("</failure>\n    </testcase>\n", out);
}

static void junit_drift(FILE *out, const tb_check_entry *e, const tb_check_drift *d)
{
    char msg[512];
    snprintf(msg, sizeof msg, "%s drifted: %s, now %s", d->target, d->was, d->now);
    fputs("    <testcase classname=\"", out);
    xml(out, e->path);
    fputs("\" name=\"drift: ", out);
    xml(out, d->target);
    fputs("\">\n      <failure type=\"drift\" message=\"", out);
    xml(out, msg);
    fputs("\">", out);
    xml(out, msg);
    fputs("</failure>\n    </testcase>\n", out);
}

static void junit_entry(FILE *out, const tb_check_entry *e)
{
    size_t failed = e->drift_count;
    for (size_t k = 0; k < e->expect_count; k++)
        failed += !e->expects[k].pass;
    bool err = e->status == TB_CHECK_ERROR;
    fputs("  <testsuite name=\"", out);
    xml(out, e->path);
    fprintf(out, "\" tests=\"%zu\" failures=\"%zu\" errors=\"%d\">\n",
            err ? 1 : e->expect_count + e->drift_count, err ? 0 : failed, err ? 1 : 0);
    if (err) {
        const char *msg = e->errors ? e->errors : "cannot be checked";
        fputs("    <testcase classname=\"", out);
        xml(out, e->path);
        fputs("\" name=\"read and analyse\">\n      <error type=\"netlist\" message=\"", out);
        char first[1024];
        snprintf(first, sizeof first, "%.*s", first_line_len(msg), msg);
        xml(out, first);
        fputs("\">", out);
        xml(out, msg);
        fputs("</error>\n    </testcase>\n", out);
    }
    for (size_t k = 0; !err && k < e->expect_count; k++)
        junit_expect(out, e, &e->expects[k]);
    for (size_t k = 0; !err && k < e->drift_count; k++)
        junit_drift(out, e, &e->drifts[k]);
    fputs("  </testsuite>\n", out);
}

tb_status tb_check_write_junit(const tb_check_run *run, FILE *out)
{
    if (!run || !out)
        return TB_ERR_USAGE;
    tally t = count_all(run);
    fputs("<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n", out);
    fprintf(out, "<testsuites name=\"tbeta check\" tests=\"%zu\" failures=\"%zu\" errors=\"%zu\">\n",
            t.expects + t.drifts + t.errors, t.expects_failed + t.drifts, t.errors);
    for (size_t i = 0; i < tb_check_count(run); i++)
        junit_entry(out, tb_check_get(run, i));
    fputs("</testsuites>\n", out);
    return ferror(out) ? TB_ERR_IO : TB_OK;
}
