/* src/checkjson.c: 'tbeta check' as JSON: saved figures (--save) and full results (--json);
 * checkload.c reads them back */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include <jansson.h>

#include "alloc.h"
#include "checkrun.h"
#include "expect.h"
#include "report.h"

static const char *const status_word[] = {"pass", "fail", "error"};
_Static_assert(sizeof status_word / sizeof status_word[0] == TB_CHECK_ERROR + 1, "one word per status");

const char *tb_check_status_str(tb_check_status st)
{
    return status_word[st];
}

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
    bool ok = root && arr && put(root, "format", json_string(TB_CHECK_FORMAT)) &&
              put(root, "version", json_integer(TB_CHECK_FORMAT_VERSION));
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
