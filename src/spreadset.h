/* src/spreadset.h: the table of a spread run (scan, corners or Monte Carlo): every run's values and figures, statistics */
#ifndef TB_SPREADSET_H
#define TB_SPREADSET_H

#include <complex.h>
#include <stdbool.h>
#include <stddef.h>

#include "expect.h"

/* The figures every run records, per loop, by their names in the figure table (docs/check.md):
 * dc.T, unity_hz, phase_margin_deg, gain_margin_up_db, delay_margin_s, dc.A, dc.gain_error_pct,
 * f3db_closed_hz, verdict. */
#define TB_SPREAD_FIGURES 9
/* Index i of the spread figures into the figure table. */
int tb_spreadset_figure(size_t i);

typedef enum { TB_SPREADSET_SCAN, TB_SPREADSET_CORNERS, TB_SPREADSET_MONTE_CARLO } tb_spreadset_kind;

/* What became of one run. */
typedef enum {
    TB_RUN_PASS = 0, /* analysed; every loop stable with its margins, every .expect holds */
    TB_RUN_FAIL,     /* analysed; a loop or an .expect fails */
    TB_RUN_ERROR     /* not analysed (a singular matrix at these values); its figures are absent */
} tb_run_status;

/* The per-frequency record of a Monte Carlo run: the closed-loop gain at the probe frequencies. */
typedef struct {
    size_t count;
    double *hz;       /* count frequencies (0: DC) */
} tb_spread_probes;

/* One table: runs rows of params values and loops * TB_SPREAD_FIGURES figures. */
typedef struct {
    tb_spreadset_kind kind;
    size_t runs;
    size_t loops;
    size_t params;
    const char **param_names;  /* params names (owned by the circuit) */
    double *param_values;      /* runs * params: the values of the run (element values) */
    tb_figure_value *fig;      /* runs * loops * TB_SPREAD_FIGURES */
    tb_run_status *status;     /* runs */
    size_t nominal;            /* the row of the nominal values, or SIZE_MAX */
    tb_spread_probes probes;   /* Monte Carlo: where A is recorded (count 0 otherwise) */
    double complex *A;         /* runs * probes.count: A there (0 when absent) */
    double *k;                 /* runs * loops: each loop source's gain in the run */
    bool has_nominal;          /* Monte Carlo: the nominal circuit's T and A at the probes below */
    double complex *T_nom;     /* loops * probes.count */
    double complex *A_nom;     /* probes.count */
    /* what the run was asked */
    unsigned long long seed;   /* Monte Carlo */
    bool reduced;              /* corners: the reduced design (too many dimensions for all) */
    size_t dimensions;         /* corners and Monte Carlo: independent draws (groups count once) */
    size_t *ol_rhp_nominal;    /* Monte Carlo: per loop the nominal circuit's open-loop right-half-plane
                                * count, which every sample's Nyquist verdict uses as P (NULL: each
                                * sample counts as the nominal analysis would) */
    size_t *factorizations;    /* per run: the numeric factorizations its analysis took (grid, new
                                * frequencies, step response; tb_stats), 0 when not analysed */
} tb_spreadset;

/* A table of runs rows (params parameter columns, loops loops, probes probe frequencies),
 * figures absent and status TB_RUN_ERROR until filled. NULL when out of memory. */
tb_spreadset *tb_spreadset_new(tb_spreadset_kind kind, size_t runs, size_t params, size_t loops, size_t probes);
void tb_spreadset_free(tb_spreadset *set);

/* Row r's figures of loop l (TB_SPREAD_FIGURES of them). */
static inline tb_figure_value *tb_spreadset_row(const tb_spreadset *set, size_t r, size_t l)
{
    return &set->fig[(r * set->loops + l) * TB_SPREAD_FIGURES];
}

/* Statistics of one figure of one loop over the runs where it is present. */
typedef struct {
    size_t present;      /* runs with the figure */
    double mean;
    double sigma;        /* sample standard deviation (n - 1); 0 with fewer than 2 */
    double min, max;
    size_t min_run, max_run;
    double p[5];         /* percentiles 1, 5, 50, 95, 99 (linear between order statistics) */
} tb_spread_stats;

/* The percentiles tb_spread_stats.p holds. */
extern const double tb_spread_percentiles[5];

/* Statistics of figure i (0 .. TB_SPREAD_FIGURES - 1) of loop l. Errors: TB_ERR_NOMEM. */
tb_status tb_spreadset_stats(const tb_spreadset *set, size_t l, size_t i, tb_spread_stats *out);

/* The q-th quantile (0..1) of sorted x[0..n): x[(n-1)q] interpolated linearly (Hyndman and Fan's type 7). */
double tb_spread_quantile(const double *sorted, size_t n, double q);

/* Desensitivity shown over the samples, at probe i: the relative spread of A (the rms of
 * |A - mean A| over |mean A|, analysed runs), that of loop l's source gain k, and the
 * nominal |S| = 1/|1 + T|. To first order (dA/A = S dk/k with A0 << A) the first is |S|
 * times the second when only k spreads. false when there are fewer than two analysed runs or no nominal values. */
typedef struct {
    double hz;
    double spread_A; /* rms |A - mean A| / |mean A| */
    double spread_k; /* sigma k / |mean k| */
    double S;        /* 1/|1 + T| of the nominal circuit */
} tb_spread_desens;
bool tb_spreadset_desens(const tb_spreadset *set, size_t l, size_t i, tb_spread_desens *out);

/* Pearson's correlation coefficient between parameter column p and figure i of loop l over
 * the runs where the figure exists: which part moves the figure most over a Monte Carlo.
 * false with fewer than three such runs or a column or figure that does not vary. */
bool tb_spreadset_correlation(const tb_spreadset *set, size_t l, size_t i, size_t p, double *r);

/* Runs that passed, and runs analysed. */
size_t tb_spreadset_passed(const tb_spreadset *set, size_t *analysed);

#endif
