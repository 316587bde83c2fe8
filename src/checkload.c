/* src/checkload.c: saved runs read back: every --save and --json document checked whole
 * (format, version, types, statuses, one record per netlist), drift against a baseline
 * (--against), shard results merged (--merge) */
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <jansson.h>

#include "alloc.h"
#include "checkrun.h"
#include "expect.h"
#include "report.h"

/* ---- checking a document ---------------------------------------------------------- */

/* One document being read: its file and where to say what is wrong with it. */
typedef struct {
    const char *file;
    char *why;
    size_t why_size;
} reader;

/* "FILE: message" into why; false, so that a check can end with return refuse(...). */
__attribute__((format(printf, 2, 3))) static bool refuse(reader *r, const char *fmt, ...)
{
    int n = snprintf(r->why, r->why_size, "%s: ", r->file);
    size_t used = n < 0 ? 0 : (size_t)n < r->why_size ? (size_t)n : r->why_size - 1;
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(r->why + used, r->why_size - used, fmt, ap);
    va_end(ap);
    return false;
}

typedef enum { K_STRING, K_WHOLE, K_BOOL, K_ARRAY, K_OBJECT } kind;

static const char *const kind_word[] = {"a string", "a whole number", "true or false", "an array", "an object"};

static bool is_kind(const json_t *v, kind k)
{
    switch (k) {
    case K_STRING:
        return json_is_string(v);
    case K_WHOLE:
        return json_is_integer(v);
    case K_BOOL:
        return json_is_boolean(v);
    case K_ARRAY:
        return json_is_array(v);
    case K_OBJECT:
        return json_is_object(v);
    }
    return false;
}

/* What v is, for messages. */
static const char *found(const json_t *v)
{
    if (!v)
        return "missing";
    switch (json_typeof(v)) {
    case JSON_OBJECT:
        return "an object";
    case JSON_ARRAY:
        return "an array";
    case JSON_STRING:
        return "a string";
    case JSON_INTEGER:
    case JSON_REAL:
        return "a number";
    case JSON_TRUE:
    case JSON_FALSE:
        return "true or false";
    case JSON_NULL:
        break;
    }
    return "null";
}

/* obj's key, which must be of kind k (or null, when nullable); NULL after refusing. */
static json_t *field(reader *r, const char *where, const json_t *obj, const char *key, kind k, bool nullable)
{
    json_t *v = json_object_get(obj, key);
    if (v && (is_kind(v, k) || (nullable && json_is_null(v))))
        return v;
    refuse(r, "%s'%s' is %s, not %s%s", where, key, found(v), kind_word[k], nullable ? " or null" : "");
    return NULL;
}

/* A saved value of figure: null (absent), a number, or on a word figure one of its words. */
static bool figure_ok(reader *r, const char *where, const char *what, int figure, const json_t *v)
{
    if (json_is_null(v))
        return true;
    if (!tb_figure_at((size_t)figure)->word) {
        if (json_is_number(v))
            return true;
        return refuse(r, "%s%s is %s, not a number or null", where, what, found(v));
    }
    const char *w = json_string_value(v);
    if (w && tb_figure_word_find(w, strlen(w)) >= 0)
        return true;
    if (w)
        return refuse(r, "%s%s is '%.40s', not a word of that figure (such as 'stable') or null", where, what, w);
    return refuse(r, "%s%s is %s, not a word (such as 'stable') or null", where, what, found(v));
}

/* {"name": ..., "figures": {FIGURE: value}, ["absent": {FIGURE: why}]} */
static bool check_loop(reader *r, const char *record, size_t l, const json_t *lp)
{
    char where[600];
    snprintf(where, sizeof where, "%.320sloops[%zu]: ", record, l);
    if (!json_is_object(lp))
        return refuse(r, "%sis %s, not an object", where, found(lp));
    json_t *name = field(r, where, lp, "name", K_STRING, false);
    json_t *figs = name ? field(r, where, lp, "figures", K_OBJECT, false) : NULL;
    if (!figs)
        return false;
    snprintf(where, sizeof where, "%.320sloop '%.60s': ", record, json_string_value(name));
    const char *key;
    json_t *v;
    json_object_foreach(figs, key, v)
    {
        int f = tb_figure_find(key, strlen(key));
        char what[96];
        snprintf(what, sizeof what, "figure '%.40s'", key);
        if (f < 0)
            return refuse(r, "%sunknown figure '%.40s' (docs/check.md lists them)", where, key);
        if (!figure_ok(r, where, what, f, v))
            return false;
    }
    json_t *absent = json_object_get(lp, "absent");
    if (absent && !field(r, where, lp, "absent", K_OBJECT, false))
        return false;
    json_object_foreach(absent, key, v)
    {
        if (!json_is_string(v))
            return refuse(r, "%swhy '%.40s' is absent is %s, not a string", where, key, found(v));
    }
    return true;
}

/* {"target", "line", "pass", "value", "measured", "bound"}; *failed is set when it failed. */
static bool check_expectation(reader *r, const char *record, size_t k, const json_t *x, bool *failed)
{
    char where[600];
    snprintf(where, sizeof where, "%.320sexpectations[%zu]: ", record, k);
    if (!json_is_object(x))
        return refuse(r, "%sis %s, not an object", where, found(x));
    json_t *target = field(r, where, x, "target", K_STRING, false);
    json_t *pass = target ? field(r, where, x, "pass", K_BOOL, false) : NULL;
    if (!pass || !field(r, where, x, "line", K_WHOLE, false) || !field(r, where, x, "measured", K_STRING, false) ||
        !field(r, where, x, "bound", K_STRING, false))
        return false;
    const char *t = json_string_value(target);
    size_t loop_len = 0;
    int f = tb_expect_split(t, strlen(t), &loop_len);
    if (f < 0)
        return refuse(r, "%starget '%.80s' names no figure", where, t);
    json_t *value = json_object_get(x, "value");
    if (!value)
        return refuse(r, "%s'value' is missing", where);
    *failed = *failed || !json_is_true(pass);
    return figure_ok(r, where, "'value'", f, value);
}

/* Status words as the writers spell them (checkjson.c). */
static int status_find(const char *s)
{
    for (int k = TB_CHECK_PASS; k <= TB_CHECK_ERROR; k++)
        if (strcmp(s, tb_check_status_str((tb_check_status)k)) == 0)
            return k;
    return -1;
}

/* The results of a --json record: status, diagnostics, expectations, drifts, agreeing. */
static bool check_results(reader *r, const char *where, const json_t *rec)
{
    json_t *status = field(r, where, rec, "status", K_STRING, false);
    if (!status)
        return false;
    int st = status_find(json_string_value(status));
    if (st < 0)
        return refuse(r, "%sunknown status '%.40s' (pass, fail or error)", where, json_string_value(status));
    json_t *errors = field(r, where, rec, "errors", K_STRING, true);
    json_t *xs = errors && field(r, where, rec, "warnings", K_STRING, true) ?
                 field(r, where, rec, "expectations", K_ARRAY, false) : NULL;
    json_t *ds = xs ? field(r, where, rec, "drifts", K_ARRAY, false) : NULL;
    if (!ds)
        return false;
    bool failed = false;
    for (size_t k = 0; k < json_array_size(xs); k++)
        if (!check_expectation(r, where, k, json_array_get(xs, k), &failed))
            return false;
    for (size_t k = 0; k < json_array_size(ds); k++) {
        char at[600];
        const json_t *d = json_array_get(ds, k);
        snprintf(at, sizeof at, "%.320sdrifts[%zu]: ", where, k);
        if (!json_is_object(d))
            return refuse(r, "%sis %s, not an object", at, found(d));
        if (!field(r, at, d, "target", K_STRING, false) || !field(r, at, d, "was", K_STRING, false) ||
            !field(r, at, d, "now", K_STRING, false))
            return false;
    }
    failed = failed || json_array_size(ds) > 0;
    if (st == TB_CHECK_ERROR && json_is_null(errors))
        return refuse(r, "%sstatus 'error' without its errors", where);
    if (st == TB_CHECK_PASS && failed)
        return refuse(r, "%sstatus 'pass' with a failed expectation or a drift", where);
    if (st == TB_CHECK_FAIL && !failed)
        return refuse(r, "%sstatus 'fail' without a failed expectation or a drift", where);
    return true;
}

/* One record of netlists[]: full (a --json document) when it must carry results. */
static bool check_record(reader *r, size_t i, const json_t *rec, bool full)
{
    char where[600];
    snprintf(where, sizeof where, "netlists[%zu]: ", i);
    if (!json_is_object(rec))
        return refuse(r, "%sis %s, not an object", where, found(rec));
    json_t *path = field(r, where, rec, "path", K_STRING, false);
    if (!path || !field(r, where, rec, "rel", K_STRING, false))
        return false;
    snprintf(where, sizeof where, "netlist '%.200s': ", json_string_value(path));
    json_t *loops = field(r, where, rec, "loops", K_ARRAY, false);
    if (!loops)
        return false;
    for (size_t l = 0; l < json_array_size(loops); l++) {
        if (!check_loop(r, where, l, json_array_get(loops, l)))
            return false;
        const char *name = json_string_value(json_object_get(json_array_get(loops, l), "name"));
        for (size_t k = 0; k < l; k++)
            if (strcmp(name, json_string_value(json_object_get(json_array_get(loops, k), "name"))) == 0)
                return refuse(r, "%sloop '%.60s' is saved twice", where, name);
    }
    if (!full && json_object_get(rec, "status"))
        return refuse(r, "%sa result ('status') in a file without 'exit_code'", where);
    return !full || check_results(r, where, rec);
}

static int by_string(const void *a, const void *b)
{
    return strcmp(*(const char *const *)a, *(const char *const *)b);
}

/* One record per netlist path. Errors: TB_ERR_INPUT (refused), TB_ERR_NOMEM. */
static tb_status check_unique(reader *r, const json_t *netlists)
{
    size_t n = json_array_size(netlists);
    if (n < 2)
        return TB_OK;
    const char **paths = tb_malloc(n, sizeof(char *));
    if (!paths)
        return TB_ERR_NOMEM;
    for (size_t i = 0; i < n; i++)
        paths[i] = json_string_value(json_object_get(json_array_get(netlists, i), "path"));
    qsort(paths, n, sizeof(char *), by_string);
    tb_status st = TB_OK;
    for (size_t i = 1; i < n && st == TB_OK; i++)
        if (strcmp(paths[i - 1], paths[i]) == 0) {
            refuse(r, "netlist '%.200s' has two records: a file holds one run", paths[i]);
            st = TB_ERR_INPUT;
        }
    tb_free(paths);
    return st;
}

/* The head of a document: format, version, and its kind (*full: a --json file, with results). */
static bool check_head(reader *r, const json_t *root, bool *full)
{
    const char *fmt = json_string_value(json_object_get(root, "format"));
    if (!fmt || strcmp(fmt, TB_CHECK_FORMAT) != 0 || !json_is_array(json_object_get(root, "netlists")))
        return refuse(r, "not a 'tbeta check' --save or --json file");
    json_t *version = json_object_get(root, "version");
    if (!json_is_integer(version))
        return refuse(r, "'version' is %s, not a whole number", found(version));
    json_int_t v = json_integer_value(version);
    if (v > TB_CHECK_FORMAT_VERSION)
        return refuse(r, "written in format version %lld by a newer tbeta; this one reads version %d",
                      (long long)v, TB_CHECK_FORMAT_VERSION);
    if (v < 1)
        return refuse(r, "unknown format version %lld", (long long)v);
    json_t *code = json_object_get(root, "exit_code");
    *full = code != NULL;
    if (code && (!json_is_integer(code) || json_integer_value(code) < 0 || json_integer_value(code) > 2))
        return refuse(r, "'exit_code' is not 0, 1 or 2");
    return true;
}

/* The whole document. Errors: TB_ERR_INPUT (why says where and what), TB_ERR_NOMEM. */
static tb_status check_doc(reader *r, const json_t *root, bool *full)
{
    if (!check_head(r, root, full))
        return TB_ERR_INPUT;
    json_t *netlists = json_object_get(root, "netlists");
    for (size_t i = 0; i < json_array_size(netlists); i++)
        if (!check_record(r, i, json_array_get(netlists, i), *full))
            return TB_ERR_INPUT;
    return check_unique(r, netlists);
}

/* Loads and checks a document written by checkjson.c; NULL with why when it cannot. */
static json_t *load_doc(const char *path, bool *full, char *why, size_t why_size, tb_status *st)
{
    json_error_t err;
    memset(&err, 0, sizeof err);
    json_t *root = json_load_file(path, JSON_REJECT_DUPLICATES, &err);
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
    reader r = {path, why, why_size};
    *st = check_doc(&r, root, full);
    if (*st == TB_ERR_NOMEM)
        snprintf(why, why_size, "out of memory");
    if (*st != TB_OK) {
        json_decref(root);
        return NULL;
    }
    return root;
}

/* ---- finding a netlist's record ------------------------------------------------------ */

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

/* The record whose key ("path" or "rel") is value; NULL when none or several. */
static json_t *find_by(const json_t *root, const char *key, const char *value)
{
    size_t i;
    json_t *n;
    json_t *hit = NULL;
    json_array_foreach(json_object_get(root, "netlists"), i, n)
    {
        if (same_text(value, json_string_value(json_object_get(n, key)))) {
            if (hit)
                return NULL;
            hit = n;
        }
    }
    return hit;
}

/* The saved record of e: the same path, else the same path relative to its folder
 * argument (a copy of the library elsewhere). */
static json_t *find_netlist(const json_t *root, const tb_check_entry *e)
{
    json_t *n = find_by(root, "path", e->path);
    return n ? n : find_by(root, "rel", e->rel);
}

static json_t *find_loop(const json_t *netlist, const char *name)
{
    size_t i;
    json_t *lp;
    json_array_foreach(json_object_get(netlist, "loops"), i, lp)
    {
        if (same_text(name, json_string_value(json_object_get(lp, "name"))))
            return lp;
    }
    return NULL;
}

/* A checked saved figure: present (number or word) or absent (null). */
static void saved_figure(const json_t *v, int figure, bool *present, double *x)
{
    *present = !json_is_null(v);
    *x = 0;
    if (!*present)
        return;
    const char *w = json_string_value(v);
    *x = tb_figure_at((size_t)figure)->word ? tb_figure_word_find(w, strlen(w)) : json_number_value(v);
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
static tb_status drift_entry(tb_check_entry *e, const json_t *saved, double pct)
{
    for (size_t l = 0; l < e->loop_count; l++) {
        json_t *figs = json_object_get(find_loop(saved, e->loops[l].name), "figures");
        for (size_t f = 0; figs && f < tb_figure_count(); f++) {
            json_t *v = json_object_get(figs, tb_figure_at(f)->name);
            bool had = false;
            double was = 0;
            if (!v)
                continue; /* a figure the saved run did not have yet */
            saved_figure(v, (int)f, &had, &was);
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
    bool full = false;
    json_t *root = load_doc(path, &full, why, why_size, &st);
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
    return tb_check_strdup(json_string_value(json_object_get(obj, key)));
}

/* One loop of a checked --json record into lp (reasons of absence included). */
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
        fig->present = false;
        if (v)
            saved_figure(v, (int)f, &fig->present, &fig->value);
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
    if (!x->target || !x->measured || !x->bound)
        return false;
    size_t loop_len = 0;
    x->figure = tb_expect_split(x->target, strlen(x->target), &loop_len); /* checked: >= 0 */
    saved_figure(json_object_get(src, "value"), x->figure, &x->present, &x->value);
    return true;
}

static bool merge_entry(const json_t *src, tb_check_entry *e)
{
    json_t *loops = json_object_get(src, "loops");
    json_t *xs = json_object_get(src, "expectations");
    json_t *ds = json_object_get(src, "drifts");
    e->path = json_str(src, "path");
    e->rel = json_str(src, "rel");
    e->status = (tb_check_status)status_find(json_string_value(json_object_get(src, "status")));
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

/* true when one of the first count entries (sorted by path) has path. */
static bool merged_already(const tb_check_run *run, size_t count, const char *path)
{
    size_t lo = 0;
    size_t hi = count;
    while (lo < hi) {
        size_t mid = lo + (hi - lo) / 2;
        int c = strcmp(tb_check_get(run, mid)->path, path);
        if (c == 0)
            return true;
        if (c < 0)
            lo = mid + 1;
        else
            hi = mid;
    }
    return false;
}

tb_status tb_check_merge(tb_check_run *run, const char *path, char *why, size_t why_size)
{
    tb_status st = TB_OK;
    bool full = false;
    json_t *root = load_doc(path, &full, why, why_size, &st);
    if (!root)
        return st;
    json_t *arr = json_object_get(root, "netlists");
    if (!full) {
        snprintf(why, why_size, "%s: a --save file has no results; merge --json files", path);
        st = TB_ERR_INPUT;
    }
    tb_check_sort(run); /* the entries of earlier files, for merged_already */
    size_t before = tb_check_count(run);
    for (size_t i = 0; st == TB_OK && i < json_array_size(arr); i++) {
        json_t *n = json_array_get(arr, i);
        const char *p = json_string_value(json_object_get(n, "path"));
        if (merged_already(run, before, p)) {
            snprintf(why, why_size, "%s: netlist '%.200s' is already in an earlier merged file "
                                    "(each shard's file once)", path, p);
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
