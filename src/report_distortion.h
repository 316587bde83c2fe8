/* src/report_distortion.h: the distortion section of the text, JSON and HTML reports */
#ifndef TB_REPORT_DISTORTION_H
#define TB_REPORT_DISTORTION_H

#include <stdio.h>

#include "result.h"

struct json_t;

/* The distortion section for people (nothing without .volterra). */
void tb_report_distortion_text(const tb_circuit *ckt, const tb_result *res, FILE *out);

/* The "distortion" object of the JSON report, full precision, null where absent; names made
 * JSON strings by text (the JSON writer's own, tb_report_json_text). NULL when out of memory. */
typedef struct json_t *(*tb_json_text_fn)(const char *s);
struct json_t *tb_report_distortion_json(const tb_circuit *ckt, const tb_result *res, tb_json_text_fn text);

/* The HTML section: the figures as a table per loop and the picture of HD2 and HD3 over
 * frequency with and without the loop's feedback, as inline SVG (nothing without .volterra).
 * Errors: TB_ERR_NOMEM, TB_ERR_IO. */
tb_status tb_report_distortion_html(const tb_circuit *ckt, const tb_result *res, FILE *out);

#endif
