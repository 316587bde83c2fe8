/* src/diag.h: collecting located diagnostics (errors and warnings) */
#ifndef TB_DIAG_H
#define TB_DIAG_H

#include <stdarg.h>

#include "tbeta.h"

/* Stop collecting errors past this many (the parser gives up then). */
#define TB_DIAG_MAX_ERRORS 20

/* Adds a diagnostic at file:line:col. src_line/src_len is the physical source
 * line (may be NULL), kept as it is and escaped when formatted; the file name
 * and the message are kept escaped (tb_diag_escape), so that no text from a
 * netlist reaches a terminal or a report as control codes. Returns
 * TB_ERR_NOMEM if it could not be recorded. A NULL diag is allowed and records
 * nothing. */
tb_status tb_diag_add(tb_diag *diag, tb_severity sev, const char *file, int line, int col,
                      const char *src_line, size_t src_len, const char *fmt, ...)
    __attribute__((format(printf, 8, 9)));
tb_status tb_diag_vadd(tb_diag *diag, tb_severity sev, const char *file, int line, int col,
                       const char *src_line, size_t src_len, const char *fmt, va_list ap);
/* Appends a context line ("included from F:L", "in instance P (F:L)") to the
 * last diagnostic's message, after "\n  "; escaped like the message. A NULL or
 * empty diag records nothing. TB_ERR_NOMEM if it could not be recorded. */
tb_status tb_diag_add_context(tb_diag *diag, const char *fmt, ...) __attribute__((format(printf, 2, 3)));
/* Writes s[0..len) as diagnostics show user text: valid UTF-8 as it is; control
 * codes (C0, DEL, C1), bytes that are not UTF-8 and the direction overrides
 * U+202A..U+202E, U+2066..U+2069 as "\x1B" or "\u202E". Writes at most size
 * bytes (NUL-terminated when size > 0) and returns the length it needs, like
 * snprintf; out may be NULL when size is 0. */
size_t tb_diag_escape(const char *s, size_t len, char *out, size_t size);
/* A frequency for people, "DC", "500 mHz", "1.2346 MHz" (digits significant
 * figures), in buf; returns buf. */
const char *tb_format_hz(double f, int digits, char *buf, size_t size);

/* true once TB_DIAG_MAX_ERRORS errors have been recorded. */
bool tb_diag_full(const tb_diag *diag);

#endif
