/* src/report_spread.h: scans, corners and Monte Carlo as text, CSV, JSON, SVG and an HTML page */
#ifndef TB_REPORT_SPREAD_H
#define TB_REPORT_SPREAD_H

#include <stdio.h>

#include "spreadset.h"

/* The table for people: per loop, the scan's rows, the corners' extremes and the corner that
 * gave each, or the Monte Carlo statistics and yield. Errors: TB_ERR_NOMEM, TB_ERR_IO. */
tb_status tb_report_spread_text(const tb_circuit *ckt, const tb_spreadset *set, FILE *out);

/* One row per run at full precision: run, status, the parameter values, then LOOP.FIGURE
 * for every loop and spread figure (empty when absent; the verdict as its word). */
tb_status tb_report_spread_csv(const tb_circuit *ckt, const tb_spreadset *set, FILE *out);

/* Everything as JSON (absent figures null). Errors: TB_ERR_NOMEM, TB_ERR_IO. */
tb_status tb_report_spread_json(const tb_circuit *ckt, const tb_spreadset *set, FILE *out);

/* A self-contained HTML page: the text table and, for a scan, the phase margin and unity
 * crossing against the (first) scanned value (a curve per loop, or per value of a second
 * scanned element), for Monte Carlo the histogram of the first loop's phase margin, as SVG. */
tb_status tb_report_spread_html(const tb_circuit *ckt, const tb_spreadset *set, FILE *out);

/* The sensitivities of every loop at frequency f (tb_spread_sensitivities_at: per entries per
 * loop, ranked by |T|) for people: two ranked sentences per loop, "at 1 MHz |T| is set by C1
 * (-0.98 %/%) and R1 (+0.02 %/%); its phase by ...", then the table. Errors: TB_ERR_IO. */
tb_status tb_report_sensitivities_at_text(const tb_circuit *ckt, double f, const tb_sens_entry *entries, size_t per,
                                          FILE *out);

/* The 95 % Wilson score interval of a proportion of k in n (E. B. Wilson, J. Am. Stat.
 * Assoc. 22, 1927): *lo, *hi in 0..1. n > 0. */
void tb_spread_wilson(size_t k, size_t n, double *lo, double *hi);

#endif
