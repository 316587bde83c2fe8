/* src/checkjson.c: 'tbeta check' as JSON: saved figures (--save), full results (--json),
 * drift against a saved run (--against), merging shard results (--merge) */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include <jansson.h>

#include "alloc.h"
#include "checkrun.h"
#include "expect.h"
#include "report.h"

/* Format tag of the documents written here (docs/check.md). */
#define FORMAT_NAME "tbeta-check"
#define FORMAT_VERSION 1

static const char *const status_word[] = {"pass", "fail", "error"};

/* Text from a netlist or the file system, its odd bytes read as every writer reads them. */
static json_t *text(const char *s)
{
    return tb_report_json_text(s);
}

/* ---- building ---------------------------------------------------------------- */

/* Sets key to value (stolen); false when out of memory. */
static bool put(json_t *obj, const char *key, json_t *value)
{
    return value && json_object_set_new(obj, key, value) == 0;
}

/* A figure's value: a number, a word, or null when absent. Made where it is put, so that it
 * never leaks when an earlier put fails. */
static json_t *figure_value(int figure, bool present, double value)
{
    if (!present)
        return json_null();
    if (tb_figure_at((size_t)figure)->word)
        return json_string(tb_figure_word(value));
    return json_real(value);
}

/* {"name": ..., "figures": {...}[, "absent": {figure: why}]} */
static json_t *loop_json(const tb_check_loop *lp, bool reasons)
{
    json_t *loop = json_object();
    json_t *figs = json_object();
    json_t *absent = json_object();
    bool ok = loop && figs && absent && put(loop, "name", text(lp->name));
    for (size_t f = 0; ok && f < tb_figure_count(); f++) {
        const tb_check_figure *fig = &lp->figures[f];
        ok = put(figs, tb_figure_at(f)->name, figure_value(fig->figure, fig->present, fig->value)) &&
             (fig->present || !reasons || put(absent, tb_figure_at(f)->name, text(fig->why)));
    }
    ok = ok && put(loop, "figures", json_incref(figs)) &&
         (!reasons || put(loop, "absent", json_incref(absent)));
    json_decref(figs);
    json_decref(absent);
    if (!ok) {
        json_decref(loop);
        return NULL;
    }
    return loop;
}

static json_t *loops_json(const tb_check_entry *e, bool reasons)
{
    json_t *arr = json_array();
    for (size_t l = 0; arr && l < e->loop_count; l++) {
        if (json_array_append_new(arr, loop_json(&e->loops[l], reasons)) != 0) {
            json_decref(arr);
            return NULL;
        }
    }
    return arr;
}

static json_t *expect_json(const tb_check_expect *x)
{
    json_t *o = json_object();
    if (o && put(o, "target", text(x->target)) && put(o, "line", json_integer(x->line)) &&
        put(o, "pass", json_boolean(x->pass)) && put(o, "value", figure_value(x->figure, x->present, x->value)) &&
        put(o, "measured", text(x->measured)) && put(o, "bound", text(x->bound)))
        return o;
    json_decref(o);
    return NULL;
}

static json_t *drift_json(const tb_check_drift *d)
{
    json_t *o = json_object();
    if (o && put(o, "target", text(d->target)) && put(o, "was", text(d->was)) &&
        put(o, "now", text(d->now)))
        return o;
    json_decref(o);
    return NULL;
}

/* The full record of one netlist (--json), or only its figures (--save). */
static json_t *entry_json(const tb_check_entry *e, bool full)
{
    json_t *o = json_object();
    bool ok = o && put(o, "path", text(e->path)) && put(o, "rel", text(e->rel));
    if (ok && full) {
        ok = put(o, "status", json_string(status_word[e->status])) &&
             put(o, "errors", e->errors ? text(e->errors) : json_null()) &&
             put(o, "warnings", e->warnings ? text(e->warnings) : json_null());
        json_t *xs = json_array();
        json_t *ds = json_array();
        ok = ok && xs && ds;
        for (size_t i = 0; ok && i < e->expect_count; i++)
            ok = json_array_append_new(xs, expect_json(&e->expects[i])) == 0;
        for (size_t i = 0; ok && i < e->drift_count; i++)
            ok = json_array_append_new(ds, drift_json(&e->drifts[i])) == 0;
        ok = ok && put(o, "expectations", json_incref(xs)) && put(o, "drifts", json_incref(ds));
        json_decref(xs);
        json_decref(ds);
    }
    ok = ok && put(o, "loops", loops_json(e, full));
    if (!ok) {
        json_decref(o);
        return NULL;
    }
    return o;
}

static tb_status write_doc(const tb_check_run *run, FILE *out, bool full)
{
    json_t *root = json_object();
    json_t *arr = json_array();
    bool ok = root && arr && put(root, "format", json_string(FORMAT_NAME)) &&
              put(root, "version", json_integer(FORMAT_VERSION));
    if (ok && full)
        ok = put(root, "exit_code", json_integer(tb_check_exit_code(run)));
    for (size_t i = 0; ok && i < tb_check_count(run); i++)
        ok = json_array_append_new(arr, entry_json(tb_check_get(run, i), full)) == 0;
    ok = ok && put(root, "netlists", json_incref(arr));
    json_decref(arr);
    if (!ok) {
        json_decref(root);
        return TB_ERR_NOMEM;
    }
    int rc = json_dumpf(root, out, JSON_INDENT(1) | JSON_REAL_PRECISION(17) | JSON_PRESERVE_ORDER);
    json_decref(root);
    if (rc != 0) /* a write error (the stream says so), or jansson ran out of memory */
        return ferror(out) ? TB_ERR_IO : TB_ERR_NOMEM;
    return fputc('\n', out) == EOF ? TB_ERR_IO : TB_OK;
}

tb_status tb_check_write_save(const tb_check_run *run, FILE *out)
{
    return run && out ? write_doc(run, out, false) : TB_ERR_USAGE;
}

tb_status tb_check_write_json(const tb_check_run *run, FILE *out)
{
    return run && out ? write_doc(run, out, true) : TB_ERR_USAGE;
}

/* ---- reading ----------------------------------------------------------------- */

/* Loads a document written by write_doc; NULL with why when it cannot. */
static json_t *load_doc(const char *path, char *why, size_t why_size, tb_status *st)
{
    json_error_t err;
    memset(&err, 0, sizeof err);
    json_t *root = json_load_file(path, 0, &err);
    if (!root && json_error_code(&err) == json_error_cannot_open_file) {
        snprintf(why, why_size, "%s", err.text);
        *st = TB_ERR_IO;
        return NULL;
    }
    /* A readable file fails without a position only when jansson runs out of memory (it may
     * also report an allocation that fails inside a string as a syntax error there). */
    if (!root && (err.line <= 0 || json_error_code(&err) == json_error_out_of_memory)) {
        snprintf(why, why_size, "out of memory");
        *st = TB_ERR_NOMEM;
        return NULL;
    }
    if (!root) {
        snprintf(why, why_size, "%s:%d: %s", path, err.line, err.text);
        *st = TB_ERR_INPUT;
        return NULL;
    }
    const char *fmt = json_string_value(json_object_get(root, "format"));
    if (!fmt || strcmp(fmt, FORMAT_NAME) != 0 || !json_is_array(json_object_get(root, "netlists"))) {
        snprintf(why, why_size, "%s: not a 'tbeta check' --save or --json file", path);
        json_decref(root);
        *st = TB_ERR_INPUT;
        return NULL;
    }
    return root;
}

/* true when raw, its odd bytes read as the writers read them (tb_report_char), is the
 * saved text: a name with stray bytes matches its own record. */
static bool same_text(const char *raw, const char *saved)
{
    uint32_t cp = 0;
    for (size_t n; (n = tb_report_char(raw, &cp)) != 0; raw += n) {
        char enc[4];
        size_t len = tb_report_utf8(cp, enc);
        if (strncmp(saved, enc, len) != 0)
            return false;
        saved += len;
    }
    return *saved == '\0';
}

/* The record whose key ("path" or "rel") is value in a loaded document; NULL
 * when none or, for "rel", when several share it. */
static json_t *find_by(json_t *root, const char *key, const char *value)
{
    size_t i;
    json_t *n;
    json_t *found = NULL;
    json_array_foreach(json_object_get(root, "netlists"), i, n)
    {
        const char *p = json_string_value(json_object_get(n, key));
        if (p && same_text(value, p)) {
            if (found)
                return NULL;
            found = n;
        }
    }
    return found;
}

/* The saved record of e: the same path, else the same path relative to its folder
 * argument (a copy of the library elsewhere). */
static json_t *find_netlist(json_t *root, const tb_check_entry *e)
{
    json_t *n = find_by(root, "path", e->path);
    return n ? n : find_by(root, "rel", e->rel);
}

static json_t *find_loop(json_t *netlist, const char *name)
{
    size_t i;
    json_t *lp;
    json_array_foreach(json_object_get(netlist, "loops"), i, lp)
    {
        const char *n = json_string_value(json_object_get(lp, "name"));
        if (n && same_text(name, n))
            return lp;
    }
    return NULL;
}

/* Reads a saved figure: present (number or word) or absent (null); false when malformed. */
static bool saved_figure(const json_t *v, int figure, bool *present, double *x)
{
    *present = !json_is_null(v);
    if (!*present)
        return true;
    if (tb_figure_at((size_t)figure)->word) {
        const char *w = json_string_value(v);
        int k = w ? tb_figure_word_find(w, strlen(w)) : -1;
        *x = k;
        return k >= 0;
    }
    *x = json_number_value(v);
    return json_is_number(v);
}

/* ---- drift ------------------------------------------------------------------- */

/* true when the figure moved from (had, was) to (has, now) the worse way. */
static bool worse(int figure, bool had, double was, bool has, double now, double pct)
{
    const tb_figure *f = tb_figure_at((size_t)figure);
    if (had != has)
        return true; /* a crossing, a margin or a value appeared or went away */
    if (!had)
        return false;
    if (f->word)
        return was == TB_VERDICT_STABLE && now != TB_VERDICT_STABLE;
    double tol = pct / 100.0 * fabs(was);
    double d = now - was;
    switch (f->worse) {
    case TB_WORSE_LOWER:
        return d < -tol;
    case TB_WORSE_HIGHER:
        return d > tol;
    case TB_WORSE_FARTHER:
        return fabs(now) - fabs(was) > tol;
    default:
        return fabs(d) > tol;
    }
}

static tb_status add_drift(tb_check_entry *e, const char *loop, int figure, bool had, double was,
                           const tb_check_figure *now)
{
    char a[96];
    char b[96];
    tb_check_drift *grown = tb_realloc(e->drifts, e->drift_count + 1, sizeof(tb_check_drift));
    if (!grown)
        return TB_ERR_NOMEM;
    e->drifts = grown;
    tb_check_drift *d = &e->drifts[e->drift_count++];
    d->target = tb_check_format("%s.%s", loop, tb_figure_at((size_t)figure)->name);
    d->was = tb_check_strdup(tb_figure_text(figure, had, was, a, sizeof a));
    tb_figure_text(figure, now->present, now->value, b, sizeof b);
    bool numeric = had && now->present && was != 0 && !tb_figure_at((size_t)figure)->word;
    d->now = numeric ? tb_check_format("%s (%+.3g %% relative)", b, (now->value - was) / fabs(was) * 100.0)
                     : tb_check_strdup(b);
    if (!d->target || !d->was || !d->now)
        return TB_ERR_NOMEM;
    if (e->status == TB_CHECK_PASS)
        e->status = TB_CHECK_FAIL;
    return TB_OK;
}

/* Compares e's loops with its saved record. */
static tb_status drift_entry(tb_check_entry *e, json_t *saved, double pct)
{
    for (size_t l = 0; l < e->loop_count; l++) {
        json_t *lp = find_loop(saved, e->loops[l].name);
        json_t *figs = json_object_get(lp, "figures");
        for (size_t f = 0; figs && f < tb_figure_count(); f++) {
            json_t *v = json_object_get(figs, tb_figure_at(f)->name);
            bool had = false;
            double was = 0;
            if (!v || !saved_figure(v, (int)f, &had, &was))
                continue; /* a figure the saved run did not know */
            const tb_check_figure *now = &e->loops[l].figures[f];
            if (worse((int)f, had, was, now->present, now->value, pct) &&
                add_drift(e, e->loops[l].name, (int)f, had, was, now) != TB_OK)
                return TB_ERR_NOMEM;
        }
    }
    return TB_OK;
}

tb_status tb_check_against(tb_check_run *run, const char *path, char *why, size_t why_size)
{
    tb_status st = TB_OK;
    json_t *root = load_doc(path, why, why_size, &st);
    if (!root)
        return st;
    double pct = tb_check_opts(run)->drift_pct;
    tb_check_set_compared(run);
    for (size_t i = 0; st == TB_OK && i < tb_check_count(run); i++) {
        tb_check_entry *e = tb_check_at(run, i);
        json_t *saved = find_netlist(root, e);
        e->in_baseline = saved != NULL;
        if (saved && e->status != TB_CHECK_ERROR)
            st = drift_entry(e, saved, pct);
    }
    json_decref(root);
    if (st == TB_ERR_NOMEM)
        snprintf(why, why_size, "out of memory");
    return st;
}

/* ---- merging shard results ---------------------------------------------------- */

static char *json_str(const json_t *obj, const char *key)
{
    const char *s = json_string_value(json_object_get(obj, key));
    return tb_check_strdup(s ? s : "");
}

/* One loop of a --json record into lp (reasons of absence included). */
static bool merge_loop(const json_t *src, tb_check_loop *lp)
{
    json_t *figs = json_object_get(src, "figures");
    json_t *absent = json_object_get(src, "absent");
    lp->name = json_str(src, "name");
    lp->figures = tb_calloc(tb_figure_count(), sizeof(tb_check_figure));
    if (!lp->name || !lp->figures)
        return false;
    for (size_t f = 0; f < tb_figure_count(); f++) {
        tb_check_figure *fig = &lp->figures[f];
        json_t *v = json_object_get(figs, tb_figure_at(f)->name);
        fig->figure = (int)f;
        if (!v || !saved_figure(v, (int)f, &fig->present, &fig->value))
            fig->present = false;
        if (!fig->present) {
            const char *w = json_string_value(json_object_get(absent, tb_figure_at(f)->name));
            fig->value = 0;
            fig->why = tb_check_strdup(w ? w : "absent in the merged file");
            if (!fig->why)
                return false;
        }
    }
    return true;
}

static bool merge_expect(const json_t *src, tb_check_expect *x)
{
    x->target = json_str(src, "target");
    x->line = (int)json_integer_value(json_object_get(src, "line"));
    x->pass = json_is_true(json_object_get(src, "pass"));
    x->measured = json_str(src, "measured");
    x->bound = json_str(src, "bound");
    size_t loop_len = 0;
    x->figure = x->target ? tb_expect_split(x->target, strlen(x->target), &loop_len) : -1;
    if (x->figure < 0)
        x->figure = 0;
    x->present = saved_figure(json_object_get(src, "value"), x->figure, &x->present, &x->value) &&
                 x->present;
    return x->target && x->measured && x->bound;
}

static bool merge_entry(const json_t *src, tb_check_entry *e)
{
    const char *status = json_string_value(json_object_get(src, "status"));
    json_t *loops = json_object_get(src, "loops");
    json_t *xs = json_object_get(src, "expectations");
    json_t *ds = json_object_get(src, "drifts");
    e->path = json_str(src, "path");
    e->rel = json_str(src, "rel");
    e->status = status && strcmp(status, "error") == 0  ? TB_CHECK_ERROR
                : status && strcmp(status, "fail") == 0 ? TB_CHECK_FAIL
                                                       : TB_CHECK_PASS;
    bool has_errors = json_is_string(json_object_get(src, "errors"));
    bool has_warnings = json_is_string(json_object_get(src, "warnings"));
    if (has_errors)
        e->errors = json_str(src, "errors");
    if (has_warnings)
        e->warnings = json_str(src, "warnings");
    e->loops = tb_calloc(json_array_size(loops) + 1, sizeof(tb_check_loop));
    e->expects = tb_calloc(json_array_size(xs) + 1, sizeof(tb_check_expect));
    e->drifts = tb_calloc(json_array_size(ds) + 1, sizeof(tb_check_drift));
    if (!e->path || !e->rel || !e->loops || !e->expects || !e->drifts || (has_errors && !e->errors) ||
        (has_warnings && !e->warnings))
        return false;
    for (size_t i = 0; i < json_array_size(loops); i++)
        if (!merge_loop(json_array_get(loops, i), &e->loops[e->loop_count++]))
            return false;
    for (size_t i = 0; i < json_array_size(xs); i++)
        if (!merge_expect(json_array_get(xs, i), &e->expects[e->expect_count++]))
            return false;
    for (size_t i = 0; i < json_array_size(ds); i++) {
        tb_check_drift *d = &e->drifts[e->drift_count++];
        d->target = json_str(json_array_get(ds, i), "target");
        d->was = json_str(json_array_get(ds, i), "was");
        d->now = json_str(json_array_get(ds, i), "now");
        if (!d->target || !d->was || !d->now)
            return false;
    }
    return true;
}

tb_status tb_check_merge(tb_check_run *run, const char *path, char *why, size_t why_size)
{
    tb_status st = TB_OK;
    json_t *root = load_doc(path, why, why_size, &st);
    if (!root)
        return st;
    json_t *arr = json_object_get(root, "netlists");
    for (size_t i = 0; st == TB_OK && i < json_array_size(arr); i++) {
        json_t *n = json_array_get(arr, i);
        if (!json_is_string(json_object_get(n, "status"))) {
            snprintf(why, why_size, "%s: a --save file has no results; merge --json files", path);
            st = TB_ERR_INPUT;
            break;
        }
        tb_check_entry *e = tb_check_append(run);
        if (!e || !merge_entry(n, e)) {
            snprintf(why, why_size, "out of memory");
            st = TB_ERR_NOMEM;
        }
    }
    json_decref(root);
    return st;
}
