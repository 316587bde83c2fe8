/* src/report.h: what the text and JSON writers share: the caution, sweep and output words */
#ifndef TB_REPORT_H
#define TB_REPORT_H

#include <stdint.h>

#include "result.h"

struct json_t;

/* The caution every report carries. */
extern const char *const tb_report_caution;

/* "dec", "oct" or "lin". */
const char *tb_report_grid_word(tb_grid_kind kind);
/* The .io output as written: "v(out)", "v(a,b)" or "i(Vs)", into buf. */
const char *tb_report_output(const tb_io_spec *io, char *buf, size_t size);

/* CSV cells at full precision: ",re,im" (",," when absent or, defensively, not
 * finite) and ",x" ("," likewise). */
void tb_report_cell_complex(FILE *out, bool present, double complex z);
void tb_report_cell_real(FILE *out, bool present, double x);

/* Text as every writer reads it (docs/check.md, "Odd bytes"): a valid UTF-8 sequence is its
 * character; any other byte stands for the character of its own value, U+0080 to U+00FF (the
 * byte read as Latin-1). Returns the length read at s (1 to 4; 0 at the terminating NUL) and
 * the character in *cp. */
size_t tb_report_char(const char *s, uint32_t *cp);
/* The UTF-8 encoding of cp (at most U+10FFFF) into out[0..4); returns its length. */
size_t tb_report_utf8(uint32_t cp, char out[4]);
/* true for the characters a terminal or an XML reader must not see raw: C0 controls
 * (tab and newline included), DEL and the C1 controls U+0080 to U+009F. */
bool tb_report_is_control(uint32_t cp);
/* s for people: returns s itself when it is valid UTF-8 without control characters, else a
 * copy in buf where each control character is written \xHH (its code, two hex digits)
 * and each stray byte as its Latin-1 character; cut with "..." when buf is too small. */
const char *tb_report_escape(const char *s, char *buf, size_t size);
/* s as a JSON string (jansson), its odd bytes read as tb_report_char reads them; NULL
 * when out of memory. */
struct json_t *tb_report_json_text(const char *s);

/* One sentence saying why the verdict of st is what it is, into buf. */
const char *tb_report_reason(const tb_stability *st, char *buf, size_t size);

#endif
