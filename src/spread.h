/* src/spread.h: the circuit over changed values: parameter scans, corners and Monte Carlo on one symbolic analysis */
#ifndef TB_SPREAD_H
#define TB_SPREAD_H

#include <stdint.h>

#include "spreadcard.h"
#include "spreadset.h"

/* Corners run in full up to this many independent dimensions (2^10 = 1024 corners); beyond,
 * the reduced design (docs/spread.md). */
#define TB_SPREAD_FULL_CORNERS 10
/* Monte Carlo samples, at most. */
#define TB_SPREAD_MAX_SAMPLES ((size_t)100000) /* a run keeps its figures and A at 25 frequencies: about 600 bytes */
/* Frequencies where Monte Carlo records A (DC and grid points), at most. */
#define TB_SPREAD_PROBES 25

typedef struct {
    tb_options analysis; /* every run's analysis (its jobs is ignored: runs are shared among threads) */
    unsigned jobs;       /* threads sharing the runs: 1 (the default); 0: one per online core */
    size_t samples;      /* Monte Carlo samples (default 200) */
    uint64_t seed;       /* Monte Carlo seed (default 1) */
} tb_spread_options;

void tb_spread_options_init(tb_spread_options *opt);

/* The netlist's .scan axes: one run per value (per pair of values with two axes, the first
 * axis varying slowest), the other elements at their values. Errors: TB_ERR_USAGE (no
 * .scan), TB_ERR_NOMEM, those of the nominal circuit's stamping (diag). */
tb_status tb_spread_scan(const tb_circuit *ckt, const tb_spread_options *opt, tb_diag *diag, tb_spreadset **out);

/* The nominal run, then every .spread dimension at its extremes: all 2^d combinations up to
 * TB_SPREAD_FULL_CORNERS dimensions, else the reduced design (set->reduced). Errors:
 * TB_ERR_USAGE (no .spread), as tb_spread_scan. */
tb_status tb_spread_corners(const tb_circuit *ckt, const tb_spread_options *opt, tb_diag *diag,
                            tb_spreadset **out);

/* opt->samples runs with every .spread dimension drawn from its distribution by the sample's
 * own stream (tb_rng_stream(seed, sample)): the same numbers for any jobs. Errors as
 * tb_spread_corners (TB_ERR_USAGE also for 0 or too many samples). */
tb_status tb_spread_monte_carlo(const tb_circuit *ckt, const tb_spread_options *opt, tb_diag *diag,
                                tb_spreadset **out);

/* The spread figures of every loop (out: ckt->loop_count entries) for 'tbeta check': the
 * corners when corners is set, the Monte Carlo (opt->samples, opt->seed) when samples is
 * set; without a .spread card they stay absent. Errors as tb_spread_corners. */
tb_status tb_spread_figures_run(const tb_circuit *ckt, const tb_spread_options *opt, tb_diag *diag, bool corners,
                                bool samples, tb_spread_figures *out);

/* The sensitivities of every loop at frequency f (Hz; 0: DC) to every element, by the
 * adjoint method (tb_sensitivity_at), into *out (ckt->loop_count * *per entries, loop by
 * loop, each loop's ranked by |T_mag|; free with tb_free). Errors: TB_ERR_USAGE (no loop,
 * f < 0), TB_ERR_NOMEM, TB_ERR_SINGULAR (M singular at f), those of stamping (diag). */
tb_status tb_spread_sensitivities_at(const tb_circuit *ckt, const tb_options *opt, double f, tb_diag *diag,
                                     tb_sens_entry **out, size_t *per);

#endif
