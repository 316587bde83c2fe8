/* src/report_spreadpart.h: the spread part of the text, JSON and HTML reports: scans, corners, Monte Carlo and sensitivities */
#ifndef TB_REPORT_SPREADPART_H
#define TB_REPORT_SPREADPART_H

#include <stdio.h>

#include "result.h"

struct json_t;

/* The spread part for people (nothing when none ran): each table of report_spread.c without
 * its own heading and caution, then the sensitivities at chosen frequencies. Errors:
 * TB_ERR_NOMEM, TB_ERR_IO. */
tb_status tb_report_spreadpart_text(const tb_circuit *ckt, const tb_result *res, FILE *out);

/* Adds "spread" ({"scan", "corners", "monte_carlo"}: those that ran, each as in 'tbeta spread
 * --json' without its tool, netlist and caution; null when the cards were skipped) and
 * "sensitivities_at" (an array, one object per frequency) to root, nothing when none ran.
 * false when out of memory. */
bool tb_report_spreadpart_json(const tb_circuit *ckt, const tb_result *res, struct json_t *root);

/* The HTML sections: the spread (each table with its picture: the scan's phase margin and unity
 * crossing, the histogram of the phase margin) and which part sets the loop (the ranked
 * sentences and tables of --sensitivities and of the chosen frequencies); nothing when none
 * ran. Errors: TB_ERR_NOMEM, TB_ERR_IO. */
tb_status tb_report_spreadpart_html(const tb_circuit *ckt, const tb_result *res, FILE *out);

#endif
