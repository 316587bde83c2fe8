/* src/diag.h: collecting located diagnostics (errors and warnings) */
#ifndef TB_DIAG_H
#define TB_DIAG_H

#include <stdarg.h>

#include "tbeta.h"

/* Stop collecting errors past this many (the parser gives up then). */
#define TB_DIAG_MAX_ERRORS 20

/* Adds a diagnostic at file:line:col. src_line/src_len is the physical source
 * line (may be NULL). Returns TB_ERR_NOMEM if it could not be recorded. A NULL
 * diag is allowed and records nothing. */
tb_status tb_diag_add(tb_diag *diag, tb_severity sev, const char *file, int line, int col,
                      const char *src_line, size_t src_len, const char *fmt, ...)
    __attribute__((format(printf, 8, 9)));
tb_status tb_diag_vadd(tb_diag *diag, tb_severity sev, const char *file, int line, int col,
                       const char *src_line, size_t src_len, const char *fmt, va_list ap);
/* A frequency for people, "DC", "500 mHz", "1.2346 MHz" (digits significant
 * figures), in buf; returns buf. */
const char *tb_format_hz(double f, int digits, char *buf, size_t size);

/* true once TB_DIAG_MAX_ERRORS errors have been recorded. */
bool tb_diag_full(const tb_diag *diag);

#endif
