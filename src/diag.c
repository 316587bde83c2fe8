/* src/diag.c: collecting located diagnostics and formatting them in one place */
#include "diag.h"

#include <math.h>
#include <stdlib.h>
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

/* ---- escaping: user text never reaches a terminal as control codes -------- */

/* One character of s[0..len) as it is shown: its length in bytes (*size), and
 * either nothing (it is shown as it is: valid UTF-8, not a control code) or its
 * escape in esc ("\x1B" for a control or an invalid byte, "\u202E" for a
 * direction override); returns the escape's length, 0 when shown as it is. */
static size_t shown(const unsigned char *s, size_t len, size_t *size, char esc[12])
{
    unsigned c = s[0];
    *size = 1;
    if (c < 0x20 || c == 0x7F) {
        snprintf(esc, 12, "\\x%02X", c);
        return 4;
    }
    if (c < 0x80)
        return 0;
    size_t n = c >= 0xF0 ? 4 : c >= 0xE0 ? 3 : c >= 0xC0 ? 2 : 0;
    unsigned long cp = n == 4 ? c & 0x07 : n == 3 ? c & 0x0F : c & 0x1F;
    bool valid = n >= 2 && n <= len && c <= 0xF4;
    for (size_t i = 1; valid && i < n; i++) {
        valid = (s[i] & 0xC0) == 0x80;
        cp = cp << 6 | (s[i] & 0x3F);
    }
    static const unsigned long least[5] = {0, 0, 0x80, 0x800, 0x10000};
    valid = valid && cp >= least[n] && cp <= 0x10FFFF && !(cp >= 0xD800 && cp <= 0xDFFF);
    if (!valid) {
        snprintf(esc, 12, "\\x%02X", c);
        return 4;
    }
    *size = n;
    /* C1 controls (a terminal reads U+009B as CSI) and the direction overrides that
     * reorder what is shown */
    if (cp <= 0x9F || (cp >= 0x202A && cp <= 0x202E) || (cp >= 0x2066 && cp <= 0x2069)) {
        snprintf(esc, 12, "\\u%04lX", cp);
        return 6;
    }
    return 0;
}

size_t tb_diag_escape(const char *s, size_t len, char *out, size_t size)
{
    size_t need = 0;
    for (size_t i = 0; i < len;) {
        char esc[12];
        size_t n = 0;
        size_t k = shown((const unsigned char *)s + i, len - i, &n, esc);
        const char *piece = k ? esc : s + i;
        size_t piece_len = k ? k : n;
        if (out && need + 1 < size) /* as much as fits, like snprintf */
            memcpy(out + need, piece, piece_len < size - 1 - need ? piece_len : size - 1 - need);
        need += piece_len;
        i += n;
    }
    if (out && size)
        out[need < size ? need : size - 1] = '\0';
    return need;
}

/* A NUL-terminated escaped copy of s[0..len); NULL when out of memory. */
static char *escaped_copy(const char *s, size_t len)
{
    size_t need = tb_diag_escape(s, len, NULL, 0);
    char *copy = tb_malloc(need + 1, 1);
    if (copy)
        tb_diag_escape(s, len, copy, need + 1);
    return copy;
}

tb_status tb_diag_vadd(tb_diag *diag, tb_severity sev, const char *file, int line, int col,
                       const char *src_line, size_t src_len, const char *fmt, va_list ap)
{
    if (!diag)
        return TB_OK;
    if (tb_grow(&diag->items, &diag->cap, diag->count + 1, sizeof(tb_diag_entry), DIAG_LIMIT))
        return TB_ERR_NOMEM;
    tb_diag_entry e = {.severity = sev, .line = line, .col = col};
    const char *name = file ? file : "<input>";
    e.file = escaped_copy(name, strlen(name));
    char *raw = vformat(fmt, ap);
    e.message = raw ? escaped_copy(raw, strlen(raw)) : NULL;
    tb_free(raw);
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

tb_status tb_diag_add_context(tb_diag *diag, const char *fmt, ...)
{
    if (!diag || diag->count == 0)
        return TB_OK;
    va_list ap;
    va_start(ap, fmt);
    char *raw = vformat(fmt, ap);
    va_end(ap);
    char *line = raw ? escaped_copy(raw, strlen(raw)) : NULL;
    tb_free(raw);
    tb_diag_entry *e = &diag->items[diag->count - 1];
    size_t old = strlen(e->message);
    char *joined = line ? tb_malloc(old + strlen(line) + 4, 1) : NULL;
    if (!joined) {
        tb_free(line);
        return TB_ERR_NOMEM;
    }
    memcpy(joined, e->message, old);
    memcpy(joined + old, "\n  ", 3);
    strcpy(joined + old + 3, line);
    tb_free(line);
    tb_free((char *)e->message);
    e->message = joined;
    return TB_OK;
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

/* As shown(), for the quoted line: a tab stays a tab (the caret line copies it). */
static size_t shown_in_line(const char *line, size_t n, size_t i, size_t *bytes, char esc[12])
{
    if (line[i] == '\t') {
        *bytes = 1;
        return 0;
    }
    return shown((const unsigned char *)line + i, n - i, bytes, esc);
}

/* The quoted source line, escaped, then a caret under byte column col: each
 * character before it takes the width it is shown with. */
static void put_source(char *buf, size_t size, size_t *len, const char *line, int col)
{
    size_t n = strlen(line);
    char esc[12];
    size_t bytes = 0;
    put(buf, size, len, "  ");
    for (size_t i = 0; i < n; i += bytes) {
        size_t k = shown_in_line(line, n, i, &bytes, esc);
        put(buf, size, len, "%.*s", (int)(k ? k : bytes), k ? esc : line + i);
    }
    put(buf, size, len, "\n  ");
    size_t stop = col > 1 ? (size_t)col - 1 : 0;
    for (size_t i = 0; i < stop && i < n; i += bytes) {
        size_t k = shown_in_line(line, n, i, &bytes, esc);
        put(buf, size, len, "%*s", line[i] == '\t' ? 0 : (int)(k ? k : 1), line[i] == '\t' ? "\t" : "");
    }
    if (stop > n)
        put(buf, size, len, " "); /* the position just past the line's end */
    put(buf, size, len, "^\n");
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
    if (e->source_line && e->line > 0)
        put_source(buf, size, &len, e->source_line, e->col);
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
    if (f == 0.0) {
        snprintf(buf, size, "DC");
        return buf;
    }
    /* rounded first, so that 999.999996 Hz reads "1 kHz", not "1000 Hz" */
    char rounded[64];
    snprintf(rounded, sizeof rounded, "%.*g", digits, f);
    f = strtod(rounded, NULL);
    double v = f;
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
