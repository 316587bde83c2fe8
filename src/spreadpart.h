/* src/spreadpart.h: the spread part of a report: the tables of the netlist's .scan and .spread cards and the sensitivities at chosen frequencies, held by the result */
#ifndef TB_SPREADPART_H
#define TB_SPREADPART_H

#include "spreadset.h"

/* What 'tbeta report' ran beyond the nominal analysis (filled by spreadreport.c, freed with
 * the result, read by the writers through tb_result_spread). */
typedef struct tb_spread_part {
    bool skipped;          /* the netlist has .scan or .spread cards, and they were not run */
    tb_spreadset *scan;    /* the .scan table, or NULL */
    tb_spreadset *corners; /* the .spread cards at their corners, or NULL */
    tb_spreadset *samples; /* Monte Carlo over the .spread cards, or NULL */
    size_t at_count;       /* frequencies of the sensitivities below */
    double *at_hz;         /* at_count, Hz (0: DC) */
    size_t at_per;         /* entries per loop and frequency */
    tb_sens_entry *at;     /* at_count x loops x at_per, frequency-major, each loop's ranked by |T| */
} tb_spread_part;

/* An empty part (nothing run, nothing skipped). NULL when out of memory. */
tb_spread_part *tb_spread_part_new(void);
/* Frees the part and every table it holds (NULL is fine). */
void tb_spread_part_free(tb_spread_part *part);

#endif
