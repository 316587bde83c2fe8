/* src/sweep.h: frequency grids and the analysis table (one row per frequency, per loop) */
#ifndef TB_SWEEP_H
#define TB_SWEEP_H

#include "circuit.h"

struct tb_result {
    size_t npoints;
    size_t nloops;
    double *freqs;    /* npoints, Hz */
    tb_point *pts;    /* nloops x npoints, loop-major */
    bool has_dc;
    tb_point *dc;     /* nloops, valid when has_dc */
    bool has_io;
    size_t factor_count; /* pivoted factorizations during the sweep (statistics) */
    tb_stability *stab;  /* nloops, or NULL when the stability analysis was off */
    tb_step_figures step; /* closed-loop step response (computed false when absent) */
    double *step_t;       /* step.points samples each, or NULL */
    double *step_y;
    tb_census_entry *census; /* census_count, ranked; NULL unless opt->census */
    size_t census_count;
    struct tb_fb_data *fb;   /* hand estimate and desensitivity (feedback.c), or NULL */
    struct tb_z_data *zp;    /* .zport impedances (impedance.c), or NULL */
    struct tb_wb_data *wb;   /* .break loop gain (wirebreak.c), or NULL */
};

/* Number of frequencies of the grid spec (0 when the spec is unusable). */
size_t tb_sweep_count(const tb_ac_spec *ac);
/* Fills f with the tb_sweep_count(ac) frequencies of the grid, ascending:
 * dec/oct f_i = fstart * 10^(i/N) (2^(i/N)) up to fstop; lin N points inclusive. */
void tb_sweep_grid(const tb_ac_spec *ac, double *f);

#endif
