/* src/diag.c: collecting located diagnostics and formatting them in one place */
#include "diag.h"

#include <math.h>
#include <stdio.h>
#include <string.h>

#include "alloc.h"

struct tb_diag {
    tb_diag_entry *items;
    size_t count;
    size_t cap;
    size_t errors;
};

/* Enough for any realistic count; each entry is a few hundred bytes. */
#define DIAG_LIMIT ((size_t)1 << 20)

tb_diag *tb_diag_new(void)
{
    return tb_calloc(1, sizeof(tb_diag));
}

static void free_entry(tb_diag_entry *e)
{
    tb_free((char *)e->file);
    tb_free((char *)e->message);
    tb_free((char *)e->source_line);
}

void tb_diag_free(tb_diag *diag)
{
    if (!diag)
        return;
    for (size_t i = 0; i < diag->count; i++)
        free_entry(&diag->items[i]);
    tb_free(diag->items);
    tb_free(diag);
}

size_t tb_diag_count(const tb_diag *diag)
{
    return diag ? diag->count : 0;
}

size_t tb_diag_errors(const tb_diag *diag)
{
    return diag ? diag->errors : 0;
}

bool tb_diag_full(const tb_diag *diag)
{
    return diag && diag->errors >= TB_DIAG_MAX_ERRORS;
}

const tb_diag_entry *tb_diag_get(const tb_diag *diag, size_t i)
{
    if (!diag || i >= diag->count)
        return NULL;
    return &diag->items[i];
}

static char *vformat(const char *fmt, va_list ap)
{
    va_list again;
    va_copy(again, ap);
    int n = vsnprintf(NULL, 0, fmt, again);
    va_end(again);
    if (n < 0)
        return NULL;
    char *text = tb_malloc((size_t)n + 1, 1);
    if (text)
        vsnprintf(text, (size_t)n + 1, fmt, ap);
    return text;
}

tb_status tb_diag_vadd(tb_diag *diag, tb_severity sev, const char *file, int line, int col,
                       const char *src_line, size_t src_len, const char *fmt, va_list ap)
{
    if (!diag)
        return TB_OK;
    if (tb_grow(&diag->items, &diag->cap, diag->count + 1, sizeof(tb_diag_entry), DIAG_LIMIT))
        return TB_ERR_NOMEM;
    tb_diag_entry e = {.severity = sev, .line = line, .col = col};
    e.file = tb_strndup(file ? file : "<input>", strlen(file ? file : "<input>"));
    e.message = vformat(fmt, ap);
    if (src_line)
        e.source_line = tb_strndup(src_line, src_len);
    if (!e.file || !e.message || (src_line && !e.source_line)) {
        free_entry(&e);
        return TB_ERR_NOMEM;
    }
    diag->items[diag->count++] = e;
    if (sev == TB_SEV_ERROR)
        diag->errors++;
    return TB_OK;
}

tb_status tb_diag_add(tb_diag *diag, tb_severity sev, const char *file, int line, int col,
                      const char *src_line, size_t src_len, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    tb_status st = tb_diag_vadd(diag, sev, file, line, col, src_line, src_len, fmt, ap);
    va_end(ap);
    return st;
}

/* Appends to buf like snprintf, tracking the total length needed. */
static void put(char *buf, size_t size, size_t *len, const char *fmt, ...)
    __attribute__((format(printf, 4, 5)));
static void put(char *buf, size_t size, size_t *len, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    char *at = *len < size ? buf + *len : NULL;
    size_t room = *len < size ? size - *len : 0;
    int n = vsnprintf(at, room, fmt, ap);
    va_end(ap);
    if (n > 0)
        *len += (size_t)n;
}

size_t tb_diag_format(const tb_diag *diag, size_t i, char *buf, size_t size)
{
    const tb_diag_entry *e = tb_diag_get(diag, i);
    size_t len = 0;
    if (size)
        buf[0] = '\0';
    if (!e)
        return 0;
    const char *kind = e->severity == TB_SEV_ERROR ? "error" : "warning";
    if (e->line > 0)
        put(buf, size, &len, "%s:%d:%d: %s: %s\n", e->file, e->line, e->col, kind, e->message);
    else
        put(buf, size, &len, "%s: %s: %s\n", e->file, kind, e->message);
    if (e->source_line && e->line > 0) {
        put(buf, size, &len, "  %s\n  ", e->source_line);
        for (int c = 1; c < e->col; c++) {
            char ch = e->source_line[c - 1];
            put(buf, size, &len, "%c", ch == '\t' ? '\t' : ' ');
            if (ch == '\0')
                break;
        }
        put(buf, size, &len, "^\n");
    }
    return len;
}

/* The words for each status, in enum order from TB_OK down to TB_ERR_NOT_FOUND (the last). */
static const char *const status_text[] = {
    "ok",                       /* TB_OK */
    "out of memory",            /* TB_ERR_NOMEM */
    "invalid use of the API",   /* TB_ERR_USAGE */
    "invalid netlist",          /* TB_ERR_INPUT */
    "input/output error",       /* TB_ERR_IO */
    "singular circuit",         /* TB_ERR_SINGULAR */
    "numerical failure",        /* TB_ERR_NUMERIC */
    "not found",                /* TB_ERR_NOT_FOUND: does not exist or was not computed */
};
_Static_assert(sizeof(status_text) / sizeof(status_text[0]) == 1 - TB_ERR_NOT_FOUND,
               "status_text in step with tb_status");

const char *tb_status_str(tb_status status)
{
    int i = -(int)status;
    return i >= 0 && i <= -TB_ERR_NOT_FOUND ? status_text[i] : "unknown status";
}

const char *tb_format_hz(double f, int digits, char *buf, size_t size)
{
    static const char *const prefix[] = {"", "k", "M", "G", "T", "P"};
    int p = 0;
    double v = f;
    if (f == 0.0) {
        snprintf(buf, size, "DC");
        return buf;
    }
    if (fabs(f) < 1.0) {
        snprintf(buf, size, "%.*g mHz", digits, f * 1e3);
        return buf;
    }
    while (fabs(v) >= 1000.0 && p < 5) {
        v /= 1000.0;
        p++;
    }
    snprintf(buf, size, "%.*g %sHz", digits, v, prefix[p]);
    return buf;
}
