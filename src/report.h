/* src/report.h: what the text and JSON writers share: the caution, sweep and output words */
#ifndef TB_REPORT_H
#define TB_REPORT_H

#include "result.h"

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

/* One sentence saying why the verdict of st is what it is, into buf. */
const char *tb_report_reason(const tb_stability *st, char *buf, size_t size);

#endif
