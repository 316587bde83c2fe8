/* src/result.h: the analysis result: its type, lifetime and accessors (nothing above it is known here) */
#ifndef TB_RESULT_H
#define TB_RESULT_H

#include "circuit.h"

/* The hand-estimate breakdown and desensitivity (filled by feedback.c). */
typedef struct tb_fb_data {
    tb_feedback_summary *sum; /* nloops */
    tb_breakdown_point *pts;  /* nloops x npoints, loop-major */
} tb_fb_data;

/* Port impedances (filled by impedance.c). */
typedef struct tb_z_data {
    size_t ports;
    size_t loops;
    tb_zport_summary *sum; /* ports x loops, port-major */
    tb_zpoint *pts;        /* ports x loops x npoints */
} tb_z_data;

/* Loop gain at the .break (filled by wirebreak.c). */
typedef struct tb_wb_data {
    tb_break_summary sum;
    tb_break_point *pts; /* npoints */
    tb_break_vs_loop *vs; /* nloops: the break against each loop's return ratio */
} tb_wb_data;

/* Weakly nonlinear distortion (filled by distortion.c). */
typedef struct tb_dist_data {
    tb_distortion sum;
    tb_distortion_loop *loops; /* nloops */
    tb_dist_sweep_point *pts;  /* nloops x sum.sweep_points, loop-major */
} tb_dist_data;

/* Figures at chosen frequencies (filled by spot.c). */
typedef struct tb_spot_data {
    size_t count;
    size_t loops;
    size_t ports;
    tb_spot *spots;   /* count x loops, frequency-major (zports left NULL: set by tb_spot_get) */
    tb_zpoint *zp;    /* count x loops x ports */
} tb_spot_data;

/* Frees the figures at chosen frequencies (NULL is fine). */
void tb_spot_data_free(tb_spot_data *sd);

/* Width in ln f to which the peak of |A| between two grid points is refined. */
#define TB_PEAK_XTOL 1e-10

/* Everything tb_analyse found. The analyses fill their parts; the writers and
 * .expect read them through the accessors below and in include/tbeta.h. */
struct tb_result {
    size_t npoints;
    size_t nloops;
    double *freqs;    /* npoints, Hz */
    tb_point *pts;    /* nloops x npoints, loop-major */
    bool has_dc;
    tb_point *dc;     /* nloops, valid when has_dc */
    bool has_io;
    double *phase;    /* nloops x npoints: unwrapped phase of T in degrees (measure.c) */
    tb_measures *measures;   /* nloops, or NULL before measure.c ran */
    tb_stats stats;
    tb_stability *stab;  /* nloops, or NULL when the stability analysis was off */
    tb_step_figures step; /* closed-loop step response (computed false when absent) */
    double *step_t;       /* step.points samples each, or NULL */
    double *step_y;
    tb_census_entry *census; /* census_count, ranked; NULL unless opt->census */
    size_t census_count;
    tb_fb_data *fb;   /* hand estimate and desensitivity, or NULL */
    tb_z_data *zp;    /* .zport impedances, or NULL */
    tb_wb_data *wb;   /* .break loop gain, or NULL */
    tb_feedback_type *ftype; /* nloops: series/shunt topology, or NULL */
    tb_closed_loop cl;       /* closed-loop response (closedloop.c) */
    struct {                 /* the largest |A| between the neighbours of grid point index, at
                              * f = e^x to TB_PEAK_XTOL, as the first analysis that refined it
                              * found it (the stability's peaking); the closed-loop figures reuse it */
        bool known;
        size_t index;
        double x;
        double abs_a;
    } a_peak;
    tb_sensitivity *sens;    /* nloops, or NULL (sensitivity.c) */
    tb_sens_entry *sens_entries; /* nloops x sens_per_loop, each loop's ranked */
    size_t sens_per_loop;
    tb_point *mid;           /* nloops: every loop at cl.ref_hz when AC-coupled, else NULL */
    tb_dist_data *dist;      /* .volterra distortion, or NULL (distortion.c) */
    tb_spot_data *spot;      /* figures at chosen frequencies (spot.c), or NULL */
    struct tb_spread_part *spread; /* the report's spread part (spreadreport.c), or NULL */
    void (*spread_free)(struct tb_spread_part *); /* frees spread: set with it by its owner, so that
                                                   * the result names no module above it */
};

/* A result for npoints frequencies and nloops loops, freqs and the point table
 * allocated (zeroed), every analysis part absent. NULL when out of memory. */
tb_result *tb_result_new(size_t npoints, size_t nloops);

/* Loop l at DC when it was solved, else at the lowest sweep point; *hz says which
 * (0 for DC). Precondition: l < nloops and npoints > 0. */
tb_point tb_result_dc_or_first(const tb_result *res, size_t l, double *hz);

/* Loop l's unwrapped phase of T in degrees, one per sweep point (NULL before it
 * was computed, or l out of range). */
const double *tb_result_phase(const tb_result *res, size_t l);

/* true when DC was solved exactly (f = 0), when the netlist has .io, when the
 * stability analysis ran, and when the loop census ran. */
bool tb_result_has_dc(const tb_result *res);
bool tb_result_has_io(const tb_result *res);
bool tb_result_has_stability(const tb_result *res);
bool tb_result_has_census(const tb_result *res);

/* The spread part of a report (src/spreadpart.h), or NULL when none ran. */
const struct tb_spread_part *tb_result_spread(const tb_result *res);

#endif
