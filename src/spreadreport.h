/* src/spreadreport.h: the spread part of 'tbeta report': the netlist's scans, corners and Monte Carlo, and sensitivities at chosen frequencies, run after the nominal analysis */
#ifndef TB_SPREADREPORT_H
#define TB_SPREADREPORT_H

#include "spread.h"
#include "spreadpart.h"

/* Monte Carlo samples of a report by default: enough for a first yield (its 95 % interval is
 * about +-8 % at 80 %), few enough that the report stays quick; 'tbeta spread' has 200. */
#define TB_SPREAD_REPORT_SAMPLES 100
/* Frequencies of the sensitivities at chosen frequencies, at most. */
#define TB_SPREAD_REPORT_AT_MAX 8

typedef struct {
    bool run;             /* run the netlist's .scan and .spread cards (default true) */
    size_t samples;       /* Monte Carlo samples (default TB_SPREAD_REPORT_SAMPLES; 0: none) */
    uint64_t seed;        /* Monte Carlo seed (default 1, as 'tbeta spread') */
    unsigned jobs;        /* threads sharing the runs (default 1; 0: one per online core) */
    const double *at_hz;  /* sensitivities at these frequencies (Hz, 0: DC); borrowed */
    size_t at_count;      /* at most TB_SPREAD_REPORT_AT_MAX */
} tb_spread_report_options;

void tb_spread_report_options_init(tb_spread_report_options *opt);

/* true when the netlist has a .spread card (something for a Monte Carlo to draw). */
bool tb_spread_report_has_spread(const tb_circuit *ckt);

/* Runs what the netlist's cards and opt ask beyond the nominal analysis res and hands it to
 * res (tb_result_spread): the .scan table, the corners and (opt->samples > 0) the Monte Carlo
 * of the .spread cards, each on the analysis options `analysis` (census, sensitivities and
 * chosen frequencies left out), and the sensitivities at opt->at_hz. Nothing, and res
 * unchanged, when the netlist has no such card and no frequency is asked; with cards and
 * opt->run false, only a note that they were skipped. Errors: TB_ERR_USAGE (too many
 * frequencies or samples, a negative frequency), TB_ERR_NOMEM, TB_ERR_SINGULAR (M singular at
 * a chosen frequency), those of stamping (diag); res is unchanged on error. */
tb_status tb_spread_report_run(const tb_circuit *ckt, const tb_options *analysis, const tb_spread_report_options *opt,
                               tb_diag *diag, tb_result *res);

#endif
