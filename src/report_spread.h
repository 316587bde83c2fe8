/* src/report_spread.h: scans, corners and Monte Carlo as text, CSV, JSON, SVG and an HTML page */
#ifndef TB_REPORT_SPREAD_H
#define TB_REPORT_SPREAD_H

#include <stdio.h>

#include "spreadset.h"

/* The table for people: per loop, the scan's rows, the corners' extremes and the corner that
 * gave each, or the Monte Carlo statistics and yield. Errors: TB_ERR_NOMEM, TB_ERR_IO. */
tb_status tb_report_spread_text(const tb_circuit *ckt, const tb_spreadset *set, FILE *out);

/* The same without the first line (the tool and the netlist) and the caution: the run's kind,
 * how many pass, and each loop's table, as the spread part of 'tbeta report' shows it. */
tb_status tb_report_spread_body(const tb_circuit *ckt, const tb_spreadset *set, FILE *out);

/* One row per run at full precision: run, status, the parameter values, then LOOP.FIGURE
 * for every loop and spread figure (empty when absent; the verdict as its word). */
tb_status tb_report_spread_csv(const tb_circuit *ckt, const tb_spreadset *set, FILE *out);

/* Everything as JSON (absent figures null). Errors: TB_ERR_NOMEM, TB_ERR_IO. */
tb_status tb_report_spread_json(const tb_circuit *ckt, const tb_spreadset *set, FILE *out);

/* The JSON object of tb_report_spread_json; with whole false, without the tool, the netlist and
 * the caution (the spread part of 'tbeta report --json'). NULL when out of memory. */
struct json_t;
struct json_t *tb_report_spread_json_object(const tb_circuit *ckt, const tb_spreadset *set, bool whole);

/* true when set has a picture: a scan or a Monte Carlo of more than one run. */
bool tb_report_spread_has_svg(const tb_spreadset *set);

/* set's picture as SVG (the scan's phase margin and unity crossing, or the histogram of the
 * phase margin; nothing when tb_report_spread_has_svg is false or every sample has the same
 * margin). Errors: TB_ERR_NOMEM, TB_ERR_IO. */
tb_status tb_report_spread_svg(const tb_circuit *ckt, const tb_spreadset *set, FILE *out);

/* A self-contained HTML page: the text table and, for a scan, the phase margin and unity
 * crossing against the (first) scanned value (a curve per loop, or per value of a second
 * scanned element), for Monte Carlo the histogram of the first loop's phase margin, as SVG. */
tb_status tb_report_spread_html(const tb_circuit *ckt, const tb_spreadset *set, FILE *out);

/* The sensitivities of every loop at frequency f (tb_spread_sensitivities_at: per entries per
 * loop, ranked by |T|) for people: two ranked sentences per loop, "at 1 MHz |T| is set by C1
 * (-0.98 %/%) and R1 (+0.02 %/%); its phase by ...", then the table. Errors: TB_ERR_IO. */
tb_status tb_report_sensitivities_at_text(const tb_circuit *ckt, double f, const tb_sens_entry *entries, size_t per,
                                          FILE *out);

/* The same without the first line and the caution: per loop, the two sentences and the table. */
tb_status tb_report_sensitivities_at_body(const tb_circuit *ckt, double f, const tb_sens_entry *entries, size_t per,
                                          FILE *out);

/* The two sentences alone for one loop's entries (per of them, ranked by |T|), without indent. */
void tb_report_sensitivities_at_sentence(double f, const tb_sens_entry *entries, size_t per, FILE *out);

/* The same as JSON: {"hz", "loops": {LOOP: {"summary" (the sentences), "T_mag_set_by",
 * "T_phase_set_by" (up to three element names each), "elements" (every entry, ranked by |T|)}}}.
 * NULL when out of memory. */
struct json_t *tb_report_sensitivities_at_json(const tb_circuit *ckt, double f, const tb_sens_entry *entries,
                                               size_t per);

/* The 95 % Wilson score interval of a proportion of k in n (E. B. Wilson, J. Am. Stat.
 * Assoc. 22, 1927): *lo, *hi in 0..1. n > 0. */
void tb_spread_wilson(size_t k, size_t n, double *lo, double *hi);

#endif
