/* include/tbeta.h: public C API of tbeta, loop gain and feedback quantities from a linear netlist */
#ifndef TBETA_H
#define TBETA_H

#include <complex.h>
#include <stdbool.h>
#include <stddef.h>
#include <stdio.h>

#ifdef __cplusplus
extern "C" {
#endif

#define TB_API __attribute__((visibility("default")))
#define TB_VERSION "0.1.0"

/* Status of every fallible call: 0 is success, negatives are errors. */
typedef enum {
    TB_OK = 0,
    TB_ERR_NOMEM = -1,    /* an allocation failed */
    TB_ERR_USAGE = -2,    /* API misuse: NULL handle, index out of range */
    TB_ERR_INPUT = -3,    /* malformed or inconsistent netlist (see diagnostics) */
    TB_ERR_IO = -4,       /* a file could not be read or written */
    TB_ERR_SINGULAR = -5, /* the circuit matrix is singular (see diagnostics) */
    TB_ERR_NUMERIC = -6,  /* a numerical failure other than singularity */
    TB_ERR_NOT_FOUND = -7 /* the named item does not exist or was not computed (no such loop,
                           * table or step response) */
} tb_status;

/* A short English phrase for a status; never NULL. */
TB_API const char *tb_status_str(tb_status status);

/* ---- diagnostics ---------------------------------------------------- */

typedef enum { TB_SEV_WARNING = 1, TB_SEV_ERROR = 2 } tb_severity;

/* One diagnostic. line == 0 means the whole file (no position). Strings
 * belong to the tb_diag list they came from. */
typedef struct {
    tb_severity severity;
    const char *file;
    int line;
    int col;
    const char *message;
    const char *source_line; /* text of the offending line, or NULL */
} tb_diag_entry;

typedef struct tb_diag tb_diag;

/* A new, empty diagnostics list; NULL when out of memory. Free with tb_diag_free. */
TB_API tb_diag *tb_diag_new(void);
TB_API void tb_diag_free(tb_diag *diag);
/* Number of diagnostics (errors and warnings), and of errors alone. */
TB_API size_t tb_diag_count(const tb_diag *diag);
TB_API size_t tb_diag_errors(const tb_diag *diag);
/* Entry i (0 <= i < count); NULL when out of range. Valid until the list is freed. */
TB_API const tb_diag_entry *tb_diag_get(const tb_diag *diag, size_t i);
/* Formats entry i as "file:line:col: error: message", then, when the source
 * line is known, the line and a caret under the column; each line ends in '\n'.
 * Returns the length it needs (like snprintf), writing at most size bytes. */
TB_API size_t tb_diag_format(const tb_diag *diag, size_t i, char *buf, size_t size);

/* ---- circuits ------------------------------------------------------- */

typedef struct tb_circuit tb_circuit;

/* How a netlist is read: what its .include cards may reach, and how much text it
 * may bring in. A program that reads netlists from others (a library of them, a
 * server) confines includes to a folder, or turns them off. */
typedef struct {
    bool allow_include;       /* false: every .include card is an error (default true) */
    const char *include_root; /* NULL (the default): .include may name any regular file;
                               * otherwise a folder: every included file, with symbolic links
                               * resolved, must lie inside it (the netlist itself need not) */
    size_t max_bytes;         /* the netlist and every file it includes, each counted once, hold
                               * at most this many bytes in all (default TB_READ_MAX_BYTES) */
} tb_read_options;

#define TB_READ_MAX_BYTES ((size_t)1 << 30) /* 1 GiB: beyond the element limit's text */

/* Sets every field of *opt to its default. */
TB_API void tb_read_options_init(tb_read_options *opt);

/* Parses a netlist held in memory (text[0..len), need not be NUL-terminated);
 * file names it in diagnostics. On success *out owns a new circuit (free with
 * tb_circuit_free). Errors: TB_ERR_INPUT (diagnostics in diag), TB_ERR_NOMEM,
 * TB_ERR_USAGE (NULL argument). Warnings may be added on success. */
TB_API tb_status tb_circuit_parse(const char *text, size_t len, const char *file,
                                  tb_diag *diag, tb_circuit **out);
/* Reads and parses the netlist file at path; TB_ERR_IO when it cannot be read
 * (with a diagnostic), otherwise as tb_circuit_parse. Only regular files are
 * read (never a FIFO or a device, which would block or never end); a file with
 * a NUL byte is not a netlist (TB_ERR_INPUT). */
TB_API tb_status tb_circuit_read(const char *path, tb_diag *diag, tb_circuit **out);
/* tb_circuit_parse and tb_circuit_read with reading options (opt NULL: the
 * defaults, as tb_read_options_init sets them). An include root that cannot be
 * used (missing, not a folder) is TB_ERR_IO with a diagnostic; whatever the
 * options, an included file is read only when it is a regular file, holds no NUL
 * byte and its first cards read as cards: otherwise the .include card is an
 * error that names the file and shows none of its content. */
TB_API tb_status tb_circuit_parse_with(const char *text, size_t len, const char *file,
                                       const tb_read_options *opt, tb_diag *diag, tb_circuit **out);
TB_API tb_status tb_circuit_read_with(const char *path, const tb_read_options *opt, tb_diag *diag,
                                      tb_circuit **out);
/* Frees a circuit and every name it owns (NULL is fine). */
TB_API void tb_circuit_free(tb_circuit *ckt);

/* The netlist's first line, trimmed ("" when empty); owned by the circuit. */
TB_API const char *tb_circuit_title(const tb_circuit *ckt);
/* Number of .loop directives, and the name of loop i's controlled source as written. */
TB_API size_t tb_circuit_loop_count(const tb_circuit *ckt);
TB_API const char *tb_circuit_loop_name(const tb_circuit *ckt, size_t i);
/* Index of the loop whose source is called name (case-insensitive). Errors:
 * TB_ERR_NOT_FOUND (no .loop names it), TB_ERR_USAGE (NULL argument). */
TB_API tb_status tb_circuit_find_loop(const tb_circuit *ckt, const char *name, size_t *index);
/* true when the netlist states its own stability thresholds (.margins): the
 * command line then exits 1 when a loop misses them. */
TB_API bool tb_circuit_states_margins(const tb_circuit *ckt);
/* true when the netlist has an .io directive (A, A_inf, A0 and a exist). */
TB_API bool tb_circuit_has_io(const tb_circuit *ckt);
/* The unit of the gains A, A_inf, A0 and a that .io defines: "" (V/V or A/A), "ohm" (a
 * current source in, a voltage out: a transimpedance) or "S" (a voltage in, a current out);
 * beta has the inverse unit (tb_circuit_beta_unit). "" without .io. Never NULL. */
TB_API const char *tb_circuit_gain_unit(const tb_circuit *ckt);
TB_API const char *tb_circuit_beta_unit(const tb_circuit *ckt);
/* Node count including ground, and the number of MNA unknowns. */
TB_API size_t tb_circuit_node_count(const tb_circuit *ckt);
TB_API size_t tb_circuit_unknowns(const tb_circuit *ckt);

/* ---- analysis ------------------------------------------------------- */

/* Flags of one loop at one frequency: which quantities do not exist there. */
enum {
    TB_PT_T_INF = 1u << 0,   /* 1 - q = 0: the circuit with the source's gain at zero is singular, T is infinite */
    TB_PT_AINF_NONE = 1u << 1, /* v'w = 0: the source does not see its own output here, A_inf undefined */
    TB_PT_A0_NONE = 1u << 2,   /* A0 undefined (T infinite) */
    TB_PT_NO_IO = 1u << 3      /* no .io: A, A_inf, A0 and a are not computed */
};

/* Feedback quantities of one loop at one frequency (see docs/algebra in README):
 * T return ratio, A closed-loop gain, A_inf asymptotic (ideal) gain,
 * A0 feedthrough, a = A_inf*T equivalent open-loop gain. A quantity whose
 * flag says it does not exist holds 0. */
typedef struct {
    double complex T;
    double complex A;
    double complex A_inf;
    double complex A0;
    double complex a;
    unsigned flags;
} tb_point;

/* Told how far a long computation has gone: done of total steps (tb_options.progress). */
typedef void (*tb_progress_fn)(void *ctx, size_t done, size_t total);

typedef struct {
    bool dc;              /* evaluate f = 0 exactly when the circuit allows (default true) */
    double refactor_rcond_drop; /* a refactor whose min/max |U_ii| falls below this times the
                                 * last pivoted one's factors again with pivoting (default 1e-6) */
    bool stability;       /* exact crossings, margins, poles, Nyquist, verdict (default true) */
    size_t pole_limit;    /* poles (and the step response as a sum over the modes) only up to
                           * this many unknowns (default 500: dense QZ costs O(n^3), 18 s at
                           * 1000); above it the step response comes from time stepping */
    double pm_min_deg;    /* phase-margin threshold; negative (the default): the netlist's
                           * .margins pm=, else 45 degrees (common practice) */
    double gm_min_db;     /* gain-margin threshold; negative (the default): the netlist's
                           * .margins gm=, else 10 dB (common practice) */
    bool census;          /* return ratio of every controlled source (default false) */
    bool sensitivity;     /* adjoint sensitivities to every element (default false) */
    bool closed_loop;     /* closed-loop figures from A(jw): -3 dB edges, midband, peaking, by
                           * root finding on fresh solves (default true; the sweep table
                           * needs none of them) */
    unsigned jobs;        /* threads sharing the frequency points of the sweep: 1 (the default)
                           * runs it in the calling thread, 0 one per online core; every
                           * figure is the same for any value */
    const double *at_hz;  /* figures at these frequencies (Hz, finite, >= 0), each by a fresh
                           * solve at exactly that frequency (tb_spot_get); NULL (the default):
                           * none. Borrowed: read during tb_analyse only */
    size_t at_count;      /* entries of at_hz, at most TB_AT_MAX */
    tb_progress_fn progress; /* NULL (the default), or told of the sweep's grid points as they
                              * start: progress(progress_ctx, done, points), from whichever
                              * thread takes them, one call at a time; it must return quickly */
    void *progress_ctx;
    size_t rhp_count_limit; /* above the pole limit, right-half-plane counts by the argument
                             * principle for the verdict, within this many factorizations
                             * (about two per capacitor or inductor; default 5000, about
                             * 3 000 reactive elements; 0: no count, P = 0 assumed unless
                             * shown by passive blocks, which need no factorization) */
    /* what a run needs beyond the figures of a spread run (tbeta spread): each default true */
    bool step_response;   /* the closed-loop step response */
    bool near_poles;      /* above the pole limit, the poles nearest 0 and the unity crossing */
    bool vector_refine;   /* min |1 + T| refined between the scan's samples (false: the best sample) */
    bool crossing_list;   /* phase crossings refined as found (false: at the end, and not at all
                           * when more turn up than are kept: the margins are then not determined) */
    bool peak_refine;     /* the closed-loop peak of |A| refined between grid points (false: the
                           * grid's largest, unless A's reference is that peak: AC coupling) */
    double gm_cap_db;     /* > 0 (default 60): the scan does not follow T's phase where |T| lies
                           * more than this many dB below 0 dB: a gain margin there would exceed
                           * it and is given as "more than gm_cap_db"; 0: every crossing */
    const size_t *ol_rhp_given; /* NULL (the default), or per loop the open loop's right-half-plane
                             * count of a circuit this one is a small change of: above the pole
                             * limit it stands for P (ol_count_by TB_COUNT_GIVEN) and no
                             * argument-principle walk runs. Borrowed: read during tb_analyse only */
    size_t rhp_check_limit; /* where the passivity of M0's blocks shows P = 0 above the pole limit, the
                             * argument-principle walk still runs (the closed-loop count, poles on
                             * the axis) when it needs at most this many factorizations (an estimate
                             * of two per column of C first; default 1000; 0: never) */
} tb_options;

/* The most frequencies tb_options.at_hz may hold (more: TB_ERR_USAGE). */
#define TB_AT_MAX 1000

/* Sets every field of *opt to its default. */
TB_API void tb_options_init(tb_options *opt);

typedef struct tb_result tb_result;

/* Sweeps the circuit over its .ac grid (and DC), evaluating every loop at each
 * frequency from one factorization per point. On success *out owns the result
 * (free with tb_result_free). Errors: TB_ERR_SINGULAR (diagnostic names the
 * node or branch and the frequency), TB_ERR_NOMEM, TB_ERR_USAGE. */
TB_API tb_status tb_analyse(const tb_circuit *ckt, const tb_options *opt, tb_diag *diag,
                            tb_result **out);
/* Frees a result (NULL is fine). */
TB_API void tb_result_free(tb_result *res);

/* Number of sweep frequencies, and of loops (one per .loop, in netlist order). */
TB_API size_t tb_result_points(const tb_result *res);
TB_API size_t tb_result_loops(const tb_result *res);
/* Frequencies in Hz, ascending, tb_result_points of them. */
TB_API const double *tb_result_freqs(const tb_result *res);
/* Loop l's points, one per frequency; NULL when l is out of range. */
TB_API const tb_point *tb_result_loop(const tb_result *res, size_t l);
/* Loop l at DC: true and *out filled when f = 0 was evaluated exactly. */
TB_API bool tb_result_dc(const tb_result *res, size_t l, tb_point *out);

/* What one tb_analyse call spent on the circuit matrix M. The point loop
 * factors M once per grid point (and at DC), whatever analyses are on: every
 * per-point analysis (loops, census, ports, break) solves on that one
 * factorization. Work at new frequencies (root finding, the Nyquist path, the
 * re-solve with a changed gain) and the step response come on top. */
typedef struct {
    size_t grid_points;          /* frequencies visited by the point loop (DC included when solved) */
    size_t grid_factorizations;  /* numeric factorizations of M in the point loop (a refactor that
                                  * falls back to pivoting counts twice) */
    size_t grid_pivoted;         /* of them, with pivoting */
    size_t grid_solve_columns;   /* right-hand sides solved in the point loop */
    size_t probe_factorizations; /* numeric factorizations at new frequencies and changed gains */
    size_t step_factorizations;  /* spent by the step response: fresh M(jw) that check the sum
                                  * over the modes, or real time-step matrices G + aC */
    size_t probe_solve_columns;  /* right-hand sides solved at new frequencies and changed gains
                                  * (before the step response): a loop's search solves for that
                                  * loop alone, so this grows with the loops, not their square */
} tb_stats;

/* The counts of res. Errors: TB_ERR_USAGE (NULL). */
TB_API tb_status tb_result_stats(const tb_result *res, tb_stats *out);

/* ---- measures ------------------------------------------------------- */

/* Reasons a measure is absent or a value needs a word of caution. */
typedef enum {
    TB_NOTE_NO_IO = 0,       /* no .io directive: A, A_inf, A0, a and the -3 dB point are absent */
    TB_NOTE_NOT_IN_LOOP,     /* the source never sees its own output: not in a loop */
    TB_NOTE_DC_FROM_SWEEP,   /* DC is singular: "DC" values are those at the lowest sweep frequency */
    TB_NOTE_T_INF_DC,        /* T is infinite at DC (e.g. an integrator in the loop) */
    TB_NOTE_POSITIVE_FB_DC,  /* T(0) < 0: positive feedback at DC (no grid phase margin without stability) */
    TB_NOTE_NO_UNITY,        /* |T| never falls through 1 in the sweep */
    TB_NOTE_NO_F3DB,         /* |A| never falls 3 dB below its DC value in the sweep */
    TB_NOTE_AINF_NONE_DC,    /* A_inf undefined at DC (T has a zero there) */
    TB_NOTE_FEEDTHROUGH,     /* A0 contributes more than 1 % of A at DC: A != a/(1+a*beta) */
    TB_NOTE_T_INF_SWEEP,     /* T is infinite at sweep points (tb_measures.t_inf_points): a pole of T
                              * on the j-omega axis, e.g. a lossless resonance on a grid frequency */
    TB_NOTE_COUNT
} tb_note;

/* A short English sentence for a note; never NULL. */
TB_API const char *tb_note_str(tb_note note);

/* The figures derived from the DC point, computed once so that every writer
 * and .expect says the same thing; has_* false: absent (the notes say why). */
typedef struct {
    bool has_T;             /* T finite */
    bool has_T_db;          /* T finite and non-zero */
    double T_db;            /* 20 log10 |T| */
    bool has_a;             /* a = A_inf T exists (.io, T finite, A_inf defined) */
    bool has_A_inf;         /* .io and A_inf defined (T has no zero at DC) */
    bool has_A0;            /* .io and A0 defined (T finite) */
    bool has_A;             /* .io */
    bool has_beta;          /* A_inf defined and non-zero */
    double complex beta;    /* loaded feedback factor 1/A_inf */
    bool has_gain_error;    /* as has_beta */
    double complex gain_error_pct; /* (A - A_inf)/A_inf in percent */
} tb_dc_figures;

/* DC values and the foundation measures of one loop. A has_* flag false means
 * the value is absent; notes (bit 1u << tb_note) say why. */
typedef struct {
    tb_point dc;            /* values at DC (or at the lowest sweep point, see notes) */
    double dc_hz;           /* 0, or the lowest sweep frequency */
    tb_dc_figures fig;      /* derived from dc */
    bool has_unity;
    double unity_hz;        /* the headline unity crossing: tb_stability.phase_margin_hz (without
                             * the stability analysis: the lowest grid point where |T| falls through 1) */
    bool has_phase_margin;
    double phase_margin_deg; /* its phase margin: tb_stability.phase_margin_deg (without the
                              * stability analysis: 180 + unwrapped phase at unity_hz, on the grid) */
    bool has_f3db;
    double f3db_closed_hz;  /* the closed-loop -3 dB frequency: where |A| falls through
                             * |A_ref|/sqrt(2) above the reference (tb_closed_loop) */
    bool has_mid;           /* AC-coupled (A(0) = 0): the loop at midband */
    tb_point mid;
    double mid_hz;
    tb_dc_figures mid_fig;  /* derived from mid as fig is from dc */
    bool stability_shown;   /* false when the stability analysis ran and did not show the loop
                             * stable: the closed-loop figures that assume a stable loop (the
                             * -3 dB point, peaking, desensitivity, the step response) describe
                             * a response the circuit will not settle to */
    bool has_oscillation;   /* unstable with a complex right-half-plane pole pair */
    double oscillation_hz;  /* |Im s|/2 pi of the rightmost such pair: where it will oscillate */
    bool runaway;           /* unstable through a real right-half-plane pole: no oscillation,
                             * the output runs away (latches) */
    bool has_max_sensitivity; /* the stability analysis found the vector margin */
    double max_sensitivity_db; /* largest |1/(1+T)| = 1/vector margin, in dB */
    double max_sensitivity_hz;
    unsigned notes;
    size_t t_inf_points;    /* sweep points (DC not counted) where T is infinite */
    double t_inf_first_hz;  /* the lowest of them (0 when none) */
} tb_measures;

/* Measures of loop l (computed once by tb_analyse). Errors: TB_ERR_USAGE (NULL,
 * l out of range). */
TB_API tb_status tb_measure_loop(const tb_result *res, size_t l, tb_measures *out);

/* ---- sensitivities to every element (adjoint method, docs/spread.md) ---- */

/* How one loop's figures move with one element's value p (R, C, L, a controlled source's
 * gain, a coupling): normalized to relative changes of p. Computed from the adjoint
 * (transposed) systems on the same factorization: two more solves per frequency, not one
 * per element. */
typedef struct {
    const char *element;  /* as written; owned by the circuit */
    double value;         /* p */
    bool has_T;
    double T_mag;         /* (d|T|/|T|)/(dp/p) at DC (or the lowest sweep point) */
    double T_phase_deg;   /* degrees the phase of T moves per 1 % increase of p, there */
    bool has_A;
    double A_mag;         /* (d|A|/|A|)/(dp/p) there */
    bool has_A_inf;
    double A_inf_mag;     /* (d|A_inf|/|A_inf|)/(dp/p) there */
    bool has_unity;
    double unity;         /* (df/f)/(dp/p) of the headline phase margin's unity crossing */
    bool has_pm;
    double pm_deg_pct;    /* degrees of phase margin per 1 % increase of p */
    bool has_gm;
    double gm_db_pct;     /* dB of the gain margin upward (how far the loop gain may rise)
                           * per 1 % increase of p */
} tb_sens_entry;

typedef struct {
    bool computed;        /* tb_options.sensitivity was set */
    double dc_hz;         /* where the DC sensitivities are taken: 0 or the lowest sweep point */
    bool has_pm_hz;
    double pm_hz;         /* the unity crossing of the headline phase margin */
    bool has_gm_hz;
    double gm_hz;         /* the phase crossing of the upward gain margin */
    size_t count;
    const tb_sens_entry *entries; /* ranked: largest |pm_deg_pct| first (then |T_mag|); into res */
} tb_sensitivity;

/* The sensitivities of loop l (tb_analyse with opt->sensitivity). Errors: TB_ERR_USAGE. */
TB_API tb_status tb_sensitivity_get(const tb_result *res, size_t l, tb_sensitivity *out);

/* ---- closed-loop response |A(j w)| ------------------------------------ */

/* Reasons a closed-loop figure is absent or qualified (bits 1u << tb_cl_note). */
typedef enum {
    TB_CNOTE_NO_IO = 0,      /* no .io: no closed-loop gain */
    TB_CNOTE_AC_COUPLED,     /* A(0) = 0: gains are referred to midband, where |A| is largest */
    TB_CNOTE_EDGE_OUTSIDE,   /* a -3 dB edge lies outside the sweep (found by searching beyond it) */
    TB_CNOTE_NO_HIGH_EDGE,   /* |A| does not fall 3 dB below the reference up to 6 decades above the sweep */
    TB_CNOTE_NO_LOW_EDGE,    /* AC-coupled: |A| does not fall 3 dB below midband down to 6 decades below */
    TB_CNOTE_PROBE_FAILED,   /* a fresh solve failed (matrix singular on the axis): an edge is left out */
    TB_CNOTE_COUNT
} tb_cl_note;

/* A short English sentence for a note; never NULL. */
TB_API const char *tb_cl_note_str(tb_cl_note note);

/* The closed-loop gain A(j w) of the .io pair, the same for every loop: its
 * reference (DC, or midband when A(0) = 0), the -3 dB band edges and the
 * peaking, each found by root finding or minimization on fresh solves
 * (bracketed on the sweep grid, and beyond it up to 6 decades). */
typedef struct {
    bool computed;           /* .io given */
    bool ac_coupled;         /* |A(0)| <= 1e-9 of the largest |A| on the grid */
    double ref_hz;           /* 0 (DC), the lowest sweep point when DC is singular, or midband */
    double complex A_ref;    /* A there */
    bool has_low_edge;       /* AC-coupled only: |A| rises through |A_ref|/sqrt 2 */
    double low_edge_hz;
    bool low_edge_outside;   /* below the sweep */
    bool has_high_edge;      /* |A| falls through |A_ref|/sqrt 2 above the reference */
    double high_edge_hz;
    bool high_edge_outside;  /* above the sweep (or between DC and the first point) */
    bool has_peak;           /* |A| rises above |A_ref| by more than 0.001 dB (not when AC-coupled:
                              * the reference is then the peak) */
    double peak_hz;
    double peak_db;          /* 20 log10 (max |A| / |A_ref|) */
    unsigned notes;
} tb_closed_loop;

/* The closed-loop figures (computed by tb_analyse). Errors: TB_ERR_USAGE (NULL). */
TB_API tb_status tb_closed_loop_get(const tb_result *res, tb_closed_loop *out);

/* ---- stability ------------------------------------------------------ */

/* Thresholds and limits of the stability analysis (part of tb_options). */
#define TB_MAX_CROSSINGS 16  /* crossings kept per kind and loop (more: truncated, said so) */
#define TB_MAX_POLES 16      /* closed-loop poles kept per loop, largest real part first */
#define TB_MAX_NEAR_POLES 24 /* poles near the shifts kept per loop, above the pole limit */

/* Where a crossing lies against the .ac range: the search follows T from DC to far
 * above the sweep, so margins outside the range are found and checked too. */
typedef enum {
    TB_SWEEP_INSIDE = 0, /* within [first, last] sweep frequency */
    TB_SWEEP_BELOW,      /* below the first sweep frequency (DC included) */
    TB_SWEEP_ABOVE       /* above the last sweep frequency */
} tb_sweep_side;

/* One crossing found by root finding on fresh solves: |T| = 1 (unity) or the
 * unwrapped phase of T at an odd multiple of 180 degrees (phase; also DC itself
 * when T(0) is real and negative, a critical point of the gain). */
typedef struct {
    double hz;            /* 0: DC */
    double T_db;          /* 20 log10 |T| there */
    double phase_deg;     /* unwrapped phase of T there */
    int direction;        /* +1: |T| (or the phase) rises through the level, -1: falls,
                           * 0: at DC (the phase starts at 180 degrees there) */
    double margin;        /* unity: phase margin in degrees, wrapped into (-180, 180]
                           * (negative: that much phase lead puts T through -1);
                           * phase: the change of loop gain in dB that puts T through -1
                           * here, -20 log10 |T| (positive: a rise, negative: a fall) */
    double delay_s;       /* unity: the smallest pure delay that puts T through -1 here,
                           * (margin, or margin + 360 when it is negative) degrees of lag at hz */
    tb_sweep_side sweep;  /* inside, below or above the .ac range */
} tb_crossing;

/* Verdicts from better to worse (stable < marginal < unstable): when the pole count
 * and the Nyquist count disagree, the worse of the two is taken and
 * tb_stability.counts_disagree says so. */
typedef enum {
    TB_VERDICT_UNKNOWN = 0,  /* neither poles nor Nyquist could decide */
    TB_VERDICT_STABLE,
    TB_VERDICT_MARGINAL,     /* closed-loop poles on the j-omega axis, none to its right */
    TB_VERDICT_UNSTABLE      /* a closed-loop pole in the right half-plane (or N + P > 0) */
} tb_verdict;

/* Where a pole lies: left of the j-omega axis, on it (within what the circuit's
 * numbers can resolve, docs/stability.md), or right of it. */
typedef enum {
    TB_POLE_LEFT = 0,
    TB_POLE_AXIS,
    TB_POLE_RIGHT
} tb_pole_place;

/* Whether the closed loop has a dominant complex pair, and if not, why. */
typedef enum {
    TB_DOMINANT_PAIR = 0,    /* a dominant pair (tb_stability.dominant) */
    TB_DOMINANT_NO_WEIGHTS,  /* poles or their residues not available */
    TB_DOMINANT_NOT_STABLE,  /* the loop is not stable: no second-order picture */
    TB_DOMINANT_NO_PAIR,     /* no complex closed-loop pair carries any weight */
    TB_DOMINANT_OUTWEIGHED,  /* another pole weighs more than every pair */
    TB_DOMINANT_CROWDED,     /* another pole of comparable weight lies too close */
    TB_DOMINANT_COUNT
} tb_dominance;

/* How a right-half-plane count was made. */
typedef enum {
    TB_COUNT_NONE = 0,       /* not made */
    TB_COUNT_POLES,          /* from the poles (dense QZ, up to the pole limit) */
    TB_COUNT_WINDING,        /* by the argument principle on the determinant along the j-omega axis */
    TB_COUNT_GIVEN,          /* not counted: taken from tb_options.ol_rhp_given (a nominal circuit's) */
    TB_COUNT_PASSIVE_BLOCKS  /* open loop only: none in the right half-plane, shown by the passivity of
                              * every strongly connected part of M0 (docs/stability.md); on the axis
                              * not counted unless ol_axis_counted */
} tb_count_method;

/* Why the stability figures are as they are (bits 1u << tb_stab_note). */
typedef enum {
    TB_SNOTE_NO_PHASE_CROSSING = 0, /* the phase never reaches -180 (mod 360), DC to far above the
                                     * sweep: no gain margin either way */
    TB_SNOTE_NO_UNITY,              /* |T| never crosses 1, DC to far above the sweep: no phase or
                                     * delay margin */
    TB_SNOTE_TRUNCATED,             /* more crossings than TB_MAX_CROSSINGS: the first ones kept,
                                     * margins not determined */
    TB_SNOTE_POLES_TOO_BIG,         /* more unknowns than the pole limit: poles not computed */
    TB_SNOTE_POLES_FAILED,          /* the dense eigenvalue solver did not converge */
    TB_SNOTE_NYQUIST_ON_AXIS,       /* T(jw) passes through -1 or is infinite on the axis */
    TB_SNOTE_NYQUIST_ASSUMES_P0,    /* poles not computed: Nyquist verdict assumes a stable open loop */
    TB_SNOTE_NOT_STABLE,            /* the loop is not shown stable: no delay margin, and the gain
                                     * figures are distances to critical gains, not margins */
    TB_SNOTE_REFINE_BUDGET,         /* adaptive refinement stopped at its budget: margins not determined */
    TB_SNOTE_PROBE_FAILED,          /* a fresh solve failed (matrix singular on the axis, or T
                                     * infinite at a root-finding point): margins not determined */
    TB_SNOTE_MULTIPLE_UNITY,        /* several unity crossings: margins alone do not decide, see poles */
    TB_SNOTE_UNSETTLED_LOW,         /* T did not settle to its low-frequency asymptote within the
                                     * search: crossings further down not ruled out, margins not
                                     * determined */
    TB_SNOTE_UNSETTLED_HIGH,        /* likewise at the top of the search */
    TB_SNOTE_OUTSIDE_SWEEP,         /* a crossing lies outside the .ac range (found beyond it) */
    TB_SNOTE_NO_GAIN_UP,            /* no -180 crossing where |T| < 1: no critical gain above */
    TB_SNOTE_NO_GAIN_DOWN,          /* no -180 crossing where |T| > 1: no critical gain below */
    TB_SNOTE_COUNTS_DISAGREE,       /* pole count and Nyquist count disagree: the worse verdict taken */
    TB_SNOTE_PAIR_DISAGREES,        /* the dominant pair's predictions miss the computed figures by > 2x */
    TB_SNOTE_RHP_BY_WINDING,        /* poles not computed: right-half-plane counts by the argument
                                     * principle on det M(jw) and det M0(jw) */
    TB_SNOTE_WINDING_FAILED,        /* poles not computed and the argument-principle count not made
                                     * (winding_why says why) */
    TB_SNOTE_BELOW_GM_CAP,          /* phase crossings where |T| is below -gm_cap_db not followed */
    TB_SNOTE_RHP_BY_PASSIVE,        /* poles not computed: no open-loop right-half-plane pole, shown by
                                     * passive blocks (ol_count_by TB_COUNT_PASSIVE_BLOCKS) */
    TB_SNOTE_COUNT
} tb_stab_note;

/* A short English sentence for a stability note; never NULL. */
TB_API const char *tb_stab_note_str(tb_stab_note note);
/* "stable", "marginal", "unstable", "undecided". */
TB_API const char *tb_verdict_str(tb_verdict verdict);
/* "poles", "argument principle", "nominal circuit", "passive blocks", "none". */
TB_API const char *tb_count_method_str(tb_count_method method);
/* "left", "axis", "right". */
TB_API const char *tb_pole_place_str(tb_pole_place place);
/* Why there is no dominant pair (a sentence; "dominant" for TB_DOMINANT_PAIR). */
TB_API const char *tb_dominance_str(tb_dominance dominance);

/* Margins, poles and verdict of one loop. has_* false means absent (notes say why). */
typedef struct {
    bool computed;            /* false when the analysis was switched off */
    size_t unity_count;
    tb_crossing unity[TB_MAX_CROSSINGS];
    size_t phase_count;
    tb_crossing phase[TB_MAX_CROSSINGS];
    /* The search follows T from DC (or search_lo_hz) to search_hi_hz, where T has settled
     * to its asymptote (|T| c f^n with the phase constant). margins_determined false: it did
     * not settle, a solve failed, or the budget or the crossing list ran out; the headline
     * margins below are then absent and every threshold fails (notes say why). */
    bool margins_determined;
    double search_lo_hz;      /* lowest frequency followed (above DC) */
    double search_hi_hz;      /* highest frequency followed */
    /* headline phase margin: that of one unity crossing, unity[phase_margin_index]; the
     * smallest in magnitude when the loop is stable (a negative margin then says that much
     * lead puts T through -1), else the smallest signed one */
    bool has_phase_margin;
    double phase_margin_deg;
    double phase_margin_hz;
    size_t phase_margin_index;
    /* the loop gain may rise by gain_margin_up_db before a closed-loop pole reaches the
     * axis: min of -20 log10 |T| over the phase crossings where |T| < 1 ... */
    bool has_gain_margin_up;
    double gain_margin_up_db;
    double gain_margin_up_hz;
    /* ... and fall by gain_margin_down_db: min of 20 log10 |T| where |T| > 1 (conditional
     * stability, or T(0) < 0 with |T(0)| > 1). Both positive; distances to the nearest
     * critical gains, margins only when the verdict is stable (TB_SNOTE_NOT_STABLE). */
    bool has_gain_margin_down;
    double gain_margin_down_db;
    double gain_margin_down_hz;
    bool has_delay_margin;
    double delay_margin_s;    /* smallest delay_s over the unity crossings (stable loops only) */
    double delay_margin_hz;   /* the crossing it belongs to */
    bool has_vector_margin;
    double vector_margin;     /* min over the whole axis of |1 + T(jw)|, distance of T from -1 */
    double vector_margin_hz;
    size_t evaluations;       /* fresh solves spent on refinement, roots and the Nyquist path */
    /* poles: natural frequencies in rad/s, det(G + sC) = 0 (closed loop) and the
     * same with this loop's source gain at zero (open loop) */
    bool has_poles;
    size_t unknowns;
    size_t pole_limit;
    size_t cl_finite;         /* finite closed-loop poles */
    size_t cl_rhp;            /* of them in the right half-plane */
    size_t cl_axis;           /* on the j-omega axis (docs/stability.md: how that is decided) */
    size_t cl_checked;        /* of them placed by a check on the circuit, not by QZ alone */
    size_t ol_rhp;            /* open-loop right-half-plane poles (P of Nyquist) */
    size_t ol_axis;
    size_t ol_checked;
    double fastest_rad_s;     /* largest |s| of the finite closed-loop poles */
    size_t pole_count;        /* entries of poles[] and the arrays beside it */
    double complex poles[TB_MAX_POLES]; /* closed-loop poles, largest real part first */
    tb_pole_place pole_place[TB_MAX_POLES];
    bool pole_checked[TB_MAX_POLES];    /* placed (and s refined) by the check on the circuit */
    bool has_weights;         /* residues of the closed-loop transfer for every pole */
    bool weights_of_a;        /* that transfer is A (.io), else this loop's T/(1+T) */
    double complex pole_residue[TB_MAX_POLES];
    double pole_weight[TB_MAX_POLES];   /* |residue| / |Re s| (0 on the axis): the pole's
                                         * peak contribution to |H(jw)| */
    /* Nyquist: N = clockwise encirclements of -1 by T(jw), w from -inf to inf */
    bool has_nyquist;
    long nyquist_n;
    bool counts_disagree;     /* poles and Nyquist give different right-half-plane counts
                               * (Z != N + P); the verdict is the worse of the two */
    tb_verdict pole_verdict;  /* what the poles alone say (when has_poles) */
    /* dominant closed-loop pair: the heaviest complex pair, when no other pole weighs
     * as much and every pole of comparable weight lies far enough left (docs/stability.md) */
    bool has_dominant;
    tb_dominance dominance;   /* TB_DOMINANT_PAIR, or why there is none */
    double complex dominant;  /* upper member of the pair (Im >= 0) */
    double dominant_weight;   /* its weight |residue|/|Re s| */
    bool has_weight_ratio;    /* another pole carries weight */
    double weight_ratio;      /* the pair's weight over the next heaviest pole's */
    bool has_separation;      /* another pole of comparable weight (> 1/10 of the pair's) exists */
    double separation;        /* |Re s| of the nearest such pole over the pair's |Re s| */
    double zeta;
    double q;
    double fn_hz;
    bool has_peaking;         /* zeta < 1/sqrt 2 */
    double peaking_db;
    double peaking_hz;
    bool has_overshoot;
    double overshoot_pct;     /* second-order estimate exp(-pi zeta/sqrt(1-zeta^2)) */
    double settling_s;        /* 2 % settling estimate 4/(zeta wn) */
    /* the pair's predictions against what was computed (tb_stability_vs_step) */
    bool has_cl_peaking;      /* with .io and A(0) != 0 */
    double cl_peaking_db;     /* 20 log10 (max |A| / |A(0)|) over the sweep, 0 when |A| never rises */
    double cl_peaking_hz;
    bool pair_checked;        /* predictions compared with the step response and cl_peaking */
    bool has_step_overshoot;
    double step_overshoot_pct; /* the computed step response's overshoot */
    bool pair_disagrees;      /* a prediction misses by more than 2x (note TB_SNOTE_PAIR_DISAGREES) */
    tb_verdict verdict;
    double pm_min_deg;        /* thresholds applied */
    double gm_min_db;
    bool pm_ok;               /* every unity crossing's |phase margin| >= pm_min_deg, positive
                               * unless the loop is stable; false when not determined */
    bool gm_ok;               /* both gain margins (where they exist) >= gm_min_db, in a stable
                               * loop; false when not determined */
    unsigned notes;
    /* how cl_rhp/cl_axis/cl_finite and ol_rhp/ol_axis were counted: by the poles, or above
     * the pole limit by the argument principle (then cl_finite is the degree of det M(s),
     * cl_axis and ol_axis count zeros at s = 0 and elsewhere on the axis, and the
     * closed-loop count is compared with N + P as the poles' is) */
    tb_count_method cl_count_by;
    tb_count_method ol_count_by;
    size_t winding_evaluations; /* factorizations the argument-principle counts took */
    const char *winding_why;    /* static text: why a count was not made, else NULL */
    /* above the pole limit: the poles nearest s = 0 and nearest the headline unity
     * crossing, of the closed loop and of this loop's open loop (its source at gain zero),
     * by shift-invert Krylov-Schur on KLU's factors (docs/stability.md); nearest first
     * within each run, runs in the order closed near 0, open near 0, closed near the
     * crossing, open near the crossing, a pole found twice kept once */
    size_t near_count;
    double complex near_poles[TB_MAX_NEAR_POLES];
    bool near_open[TB_MAX_NEAR_POLES];        /* open loop */
    double near_shift_hz[TB_MAX_NEAR_POLES];  /* the shift it was found near (Hz, on the axis) */
    size_t near_solves;       /* right-hand sides the searches solved */
    bool near_complete;       /* every search found the poles it looked for */
    /* phase crossings where |T| lies more than tb_options.gm_cap_db below 0 dB are not
     * followed (note TB_SNOTE_BELOW_GM_CAP): when none is listed where |T| < 1, the gain may
     * rise by more than gm_cap_db (has_gain_margin_up_above; gain_margin_up_db is then absent) */
    bool has_gain_margin_up_above;
    double gm_cap_db;
    /* above the pole limit: the passivity test of the open loop's diagonal blocks (strongly
     * connected parts of M0's pattern); passive_blocks 0 when the test did not run */
    size_t passive_blocks;    /* blocks */
    size_t passive_active;    /* of them not shown passive (then P comes from elsewhere) */
    bool ol_axis_counted;     /* with TB_COUNT_PASSIVE_BLOCKS: ol_axis counted by the argument
                               * principle's check walk (else open-loop poles on the axis unknown) */
} tb_stability;

/* Stability figures of loop l (computed by tb_analyse when opt->stability).
 * Errors: TB_ERR_USAGE (NULL, l out of range). */
TB_API tb_status tb_stability_loop(const tb_result *res, size_t l, tb_stability *out);

/* ---- loop census ----------------------------------------------------- */

#define TB_CENSUS_CROSSINGS 4 /* unity crossings kept per source */

/* The return ratio of one controlled source (every other source at its gain),
 * whether or not it is marked with .loop. */
typedef struct {
    const char *source;       /* element name as written; owned by the circuit */
    bool marked;              /* the netlist marks it with .loop */
    bool in_loop;             /* T is not identically zero over the sweep */
    double max_T_db;          /* largest |T| over DC and the sweep, in dB (-300 when T = 0) */
    double max_T_hz;          /* where (0 = DC) */
    bool t_infinite;          /* T is infinite somewhere (the source's gain at zero is singular) */
    size_t unity_count;
    double unity_hz[TB_CENSUS_CROSSINGS];   /* |T| = 1, by Brent on fresh solves */
    double margin_deg[TB_CENSUS_CROSSINGS]; /* 180 + phase there, wrapped into (-180, 180] */
    bool unity_falling[TB_CENSUS_CROSSINGS]; /* |T| falls through 1 there (else it rises) */
    bool has_phase_margin;
    double phase_margin_deg;  /* worst of the margins where |T| falls through 1 */
    bool has_T_dc;
    double complex T_dc;      /* T at DC (or the lowest sweep point), with its sign: T(0) < 0 is
                               * positive feedback around this source */
    const char *same_loop_as; /* a source with the same T (the same single loop) listed before it:
                               * a marked one, else the first of its local loop; or NULL */
    bool flagged;             /* an unmarked source whose |T| reaches 1 in a loop no .loop
                               * covers: a local loop to look at (one entry per local loop) */
    bool pm_ok;               /* flagged: its worst phase margin meets the phase-margin threshold
                               * (true when it has no unity crossing); true when not flagged */
    bool unstable_alone;      /* the circuit with a marked loop's gain at zero has right-half-plane
                               * poles that go away when this source's gain is zero too: this
                               * local cell is unstable on its own and relies on that loop */
    const char *relies_on;    /* that marked source, or NULL */
} tb_census_entry;

/* Census of every controlled source (E, G, F, H), computed by tb_analyse when
 * opt->census: ranked by max_T_db, largest first. *entries points into res
 * (*count of them; 0 when not computed). Errors: TB_ERR_USAGE (NULL). */
TB_API tb_status tb_census_get(const tb_result *res, const tb_census_entry **entries, size_t *count);

/* ---- closed-loop step response -------------------------------------- */

/* The response of the .io output to a unit step of the .io input, from
 * G x + C dx/dt = b u(t), x(0-) = 0 (docs/stability.md): up to the pole limit an
 * exact sum over the closed-loop modes, y(t) = A(0) + sum_k (r_k/s_k) e^(s_k t),
 * checked against fresh solves of H(jw); otherwise (or when that check fails)
 * variable-step TR-BDF2 with local error control. Samples at t >= 0 (y(0) is the
 * value just after the jump at t = 0+), spaced to resolve every mode that still
 * matters. computed false: no trustworthy waveform (why_absent says why); a
 * computed waveform may still lack figures (why_no_figures says why). */
typedef struct {
    bool computed;
    const char *method;     /* how the samples were computed, a static string */
    double error_estimate;  /* estimated largest error of the samples, relative to the
                             * larger of |A(0)| and |y(0+)| */
    size_t points;          /* samples, t = 0 included */
    double t_end_s;
    double final_value;     /* A(0), the DC gain the output settles to */
    bool has_peak;
    double peak_value;
    double peak_s;
    bool has_overshoot;
    double overshoot_pct;   /* (peak - final)/final, 0 when it never passes the final value */
    bool has_rise;
    double rise_s;          /* first reaching 10 % to first reaching 90 % of the final value */
    bool has_settling;
    double settling_s;      /* last entry into the 2 % band around the final value */
    const char *why_no_figures; /* computed but without figures: the reason, a static string */
    const char *why_absent; /* when !computed: the reason, a static string */
} tb_step_figures;

/* Figures of the step response (computed by tb_analyse when opt->stability and
 * the netlist has .io). Errors: TB_ERR_USAGE (NULL). */
TB_API tb_status tb_step_figures_get(const tb_result *res, tb_step_figures *out);
/* The samples: *t and *y point into res (n values each); *n = 0 when none. */
TB_API tb_status tb_step_samples(const tb_result *res, const double **t, const double **y, size_t *n);
/* The step response as CSV: "t_s,y" then one row per sample. Errors:
 * TB_ERR_NOT_FOUND (it was not computed), TB_ERR_USAGE (NULL argument), TB_ERR_IO. */
TB_API tb_status tb_report_step_csv(const tb_result *res, FILE *out);

/* ---- writers -------------------------------------------------------- */

/* Human-readable report of every loop. Errors: TB_ERR_IO on a write failure. */
TB_API tb_status tb_report_text(const tb_circuit *ckt, const tb_result *res, FILE *out);
/* The same as one JSON document (full precision; absent values are null). */
TB_API tb_status tb_report_json(const tb_circuit *ckt, const tb_result *res, FILE *out);
/* Sweep table of loop l as CSV: header, then one row per sweep frequency. */
TB_API tb_status tb_report_csv(const tb_circuit *ckt, const tb_result *res, size_t l, FILE *out);

/* ---- hand estimate and desensitivity (docs/feedback.md) ---------------- */

/* The parts of the difference between the closed-loop gain A and the hand
 * estimate G (.ideal gain=G, or beta=1/G):
 *   A - G = (A_inf - G) + (-A_inf/(1+T)) + A0/(1+T)
 *           loading       finite loop gain  feedthrough */
typedef enum {
    TB_PART_LOADING = 0,  /* A_inf - G: the network as loaded by source, load and amplifier */
    TB_PART_LOOP_GAIN,    /* -A_inf/(1+T): the loop gain is finite */
    TB_PART_FEEDTHROUGH,  /* A0/(1+T): the signal that bypasses the amplifier */
    TB_PART_COUNT
} tb_part;

/* "loading", "finite loop gain", "feedthrough". */
TB_API const char *tb_part_str(tb_part part);

/* One loop at one frequency. */
typedef struct {
    bool has_parts;       /* the breakdown exists here (.ideal and .io given, A_inf exists) */
    double complex total; /* A - G (set whenever .ideal and .io are given) */
    double complex part[TB_PART_COUNT];
    bool has_S;
    double complex S;     /* desensitivity 1/(1+T) (0 where T is infinite) */
    bool has_S_A;
    double complex S_A;   /* sensitivity of A to the amplifier's gain, (dA/A)/(dk/k)
                           * = (1 - A0/A)/(1+T); equals S when A0 = 0 */
} tb_breakdown_point;

/* Reasons a figure of the breakdown or the desensitivity is absent or qualified
 * (bits 1u << tb_fb_note). */
typedef enum {
    TB_FNOTE_NO_IO = 0,       /* no .io: neither breakdown nor desensitivity of A */
    TB_FNOTE_NO_ESTIMATE,     /* no .ideal: no breakdown */
    TB_FNOTE_MISSES_AT_DC,    /* the estimate misses by more than the tolerance already at DC */
    TB_FNOTE_HOLDS_IN_SWEEP,  /* the estimate holds within the tolerance over the whole sweep */
    TB_FNOTE_POINTS_ABSENT,   /* at some frequencies A_inf or T does not exist: no breakdown there */
    TB_FNOTE_A_ZERO_DC,       /* A = 0 at DC: the relative sensitivity is not defined */
    TB_FNOTE_RESOLVE_FAILED,  /* the circuit with the changed gain is singular: no re-solve */
    TB_FNOTE_COUNT
} tb_fb_note;

/* A short English sentence for a note; never NULL. */
TB_API const char *tb_fb_note_str(tb_fb_note note);

/* The hand-estimate breakdown and desensitivity of one loop. */
typedef struct {
    bool computed;            /* false without .io (see notes) */
    bool has_estimate;        /* .ideal given */
    double estimate;          /* G: the stated gain, or 1/beta */
    double tol_pct;           /* tolerance (default 1 %) */
    double spread_pct;        /* amplifier-gain spread (default 5 %, common practice) */
    double dc_hz;             /* 0, or the lowest sweep frequency when DC is singular */
    tb_breakdown_point dc;
    tb_part dominant_dc;      /* the largest part at DC (when dc.has_parts) */
    double error_dc_pct;      /* |A - G|/|G| at DC, percent */
    bool holds_at_dc;         /* error_dc_pct <= tol_pct */
    bool has_limit;
    double limit_hz;          /* lowest frequency where |A - G| exceeds tol |G| (root finding
                               * on fresh solves, bracketed on the sweep grid) */
    tb_part dominant_limit;   /* the largest part there */
    tb_breakdown_point at_limit;
    /* relative change of A at DC for the amplifier's gain k -> k (1 + d), d = +-spread:
     * [0] for +spread, [1] for -spread */
    bool has_change;
    double complex change_first_order[2]; /* S_A d */
    double complex change_model[2];       /* exact from T, A_inf, A0 (T is proportional to k) */
    bool has_resolved;
    double complex change_resolved[2];    /* by a fresh factorization with the changed gain */
    unsigned notes;
} tb_feedback_summary;

/* Breakdown and desensitivity of loop l (computed by tb_analyse). Errors:
 * TB_ERR_USAGE (NULL, l out of range). */
TB_API tb_status tb_feedback_loop(const tb_result *res, size_t l, tb_feedback_summary *out);
/* Loop l's breakdown at every sweep frequency: *pts points into res
 * (tb_result_points of them). Errors: TB_ERR_USAGE. */
TB_API tb_status tb_feedback_points(const tb_result *res, size_t l, const tb_breakdown_point **pts);

/* ---- impedances with feedback: Blackman's formula (docs/feedback.md) ---- */

/* One .zport, one loop, one frequency. Z0, T_sc and T_oc belong to the loop's
 * controlled source: Z = Z0 (1 + T_sc)/(1 + T_oc). Independent sources are zeroed
 * (V shorted, I open), so the port sees the whole rest of the circuit. */
typedef struct {
    bool has_Z;
    double complex Z;          /* driving-point impedance of the full circuit, by a direct solve */
    bool has_Z0;
    double complex Z0;         /* the same with the source's gain at zero */
    bool has_T_oc;
    double complex T_oc;       /* return ratio with the port open (as it is): the loop's T */
    bool has_T_sc;
    double complex T_sc;       /* return ratio with the port shorted */
    bool has_blackman;
    double complex Z_blackman; /* Z0 (1 + T_sc)/(1 + T_oc) */
} tb_zpoint;

/* How the feedback meets a port, from Blackman's Z = Z0 (1 + T_sc)/(1 + T_oc). */
typedef enum {
    TB_SIDE_NONE = 0, /* neither return ratio is above 1e-9 (or Blackman's form does not apply:
                       * Z0 = 0 or T infinite): no feedback seen at this port */
    TB_SIDE_SERIES,   /* |1 + T_sc| > |1 + T_oc|: feedback raises the impedance (pure series:
                       * T_oc = 0, opening the port kills the loop) */
    TB_SIDE_SHUNT,    /* |1 + T_sc| < |1 + T_oc|: feedback lowers the impedance (pure shunt:
                       * T_sc = 0, shorting the port kills the loop) */
    TB_SIDE_MIXED     /* |1 + T_sc| = |1 + T_oc| to 1e-9: the impedance is unchanged */
} tb_side;

/* "no feedback", "series", "shunt", "mixed". */
TB_API const char *tb_side_str(tb_side side);

typedef struct {
    const char *name;    /* the .zport label; owned by the circuit */
    bool at_source;      /* i(V): the impedance V sees (T_sc is the loop's T: V as it is,
                          * a short; T_oc has V open); node_a is then V's name */
    const char *node_a;  /* as written */
    const char *node_b;  /* NULL: ground */
    double dc_hz;        /* 0, or the lowest sweep frequency when DC is singular */
    tb_zpoint dc;
    tb_side side;        /* at DC */
    double purity;       /* min(|T_sc|, |T_oc|)/max(...) at DC: 0 for a pure series or shunt
                          * port; up to 0.1 is reported as pure (the source or load resistance
                          * at the port carries a little of the feedback otherwise) */
    bool has_max_diff;
    double max_rel_diff; /* largest |Z_blackman - Z|/|Z| over DC and the sweep */
} tb_zport_summary;

/* Number of .zport ports analysed (0 without .zport). */
TB_API size_t tb_zport_count(const tb_result *res);
/* Port `port` seen by loop l: its summary, and (pts not NULL) its points, one per
 * sweep frequency, pointing into res. Errors: TB_ERR_USAGE. */
TB_API tb_status tb_zport_loop(const tb_result *res, size_t port, size_t l, tb_zport_summary *out,
                               const tb_zpoint **pts);

/* The classic feedback amplifier types (input side - output side). */
typedef enum {
    TB_AMP_UNKNOWN = 0,       /* a side is mixed or without feedback, or a port is missing */
    TB_AMP_VOLTAGE,           /* series at the input, shunt at the output */
    TB_AMP_CURRENT,           /* shunt at the input, series at the output */
    TB_AMP_TRANSCONDUCTANCE,  /* series - series */
    TB_AMP_TRANSRESISTANCE    /* shunt - shunt */
} tb_amp_type;

/* "voltage amplifier (series-shunt)" and the like. */
TB_API const char *tb_amp_type_str(tb_amp_type type);

/* The feedback topology of loop l from the ports labelled "in" and "out". */
typedef struct {
    bool computed;       /* both ports exist */
    tb_side input;
    tb_side output;
    tb_amp_type type;
} tb_feedback_type;

/* Errors: TB_ERR_USAGE (NULL, l out of range). */
TB_API tb_status tb_feedback_type_loop(const tb_result *res, size_t l, tb_feedback_type *out);

/* ---- loop gain at a wire break: double injection (docs/feedback.md) ----- */

/* The loop gain at the zero-volt source marked by .break (+ node x: the side the
 * loop signal comes from; - node y: the side that drives the loop on), from one
 * voltage and one current injection there, solved exactly (no injection sources
 * in the netlist). */
typedef struct {
    bool has_Tv;
    double complex Tv;      /* voltage injection: -v_x/v_y */
    bool has_Ti;
    double complex Ti;      /* current injection: i_x/i_y (currents from the joined node) */
    bool has_T;
    double complex T;       /* Middlebrook: T = (Tv Ti - 1)/(Tv + Ti + 2) */
    bool has_T_probe;
    double complex T_probe; /* the same loop gain straight from the probe quantities of the two
                             * runs, 1/(1 + T) = i_y/I_inj - v_y/V_inj (no Tv, Ti formed) */
} tb_break_point;

typedef struct {
    bool computed;          /* the netlist has .break */
    const char *source;     /* as written; owned by the circuit */
    const char *node_x;
    const char *node_y;
    double dc_hz;           /* 0, or the lowest sweep frequency when DC is singular */
    tb_break_point dc;
    bool has_unity;
    double unity_hz;        /* lowest frequency where |T| falls through 1 (grid, log f / dB) */
    bool has_phase_margin;
    double phase_margin_deg; /* 180 + unwrapped phase of T there */
} tb_break_summary;

/* How the wire-break loop gain compares with a loop's return ratio at the same
 * point (DC, or the lowest sweep point). */
typedef enum {
    TB_BREAK_CMP_NONE = 0,   /* not comparable there: T infinite, or the break's T absent */
    TB_BREAK_CMP_NO_LOOP,    /* both are 0 (|T| <= 1e-12): no loop at this frequency */
    TB_BREAK_CMP_UNILATERAL, /* equal to 1e-9 relative: the break sees a unilateral loop */
    TB_BREAK_CMP_BILATERAL   /* they differ: the wire-break value includes reverse transmission
                              * around the loop (bilateral elements) that the return ratio excludes */
} tb_break_compare;

typedef struct {
    tb_break_compare kind;
    double complex T_return; /* the loop's return ratio there (when kind is not NONE) */
    double rel_diff;         /* |T_return - T|/|T| of the break (0 when T is 0) */
} tb_break_vs_loop;

/* The comparison for loop l (kind NONE without .break). Errors: TB_ERR_USAGE. */
TB_API tb_status tb_break_vs_loop_get(const tb_result *res, size_t l, tb_break_vs_loop *out);

/* The wire-break loop gain (computed by tb_analyse when the netlist has .break);
 * *pts (when not NULL) points into res, one per sweep frequency. Errors: TB_ERR_USAGE. */
TB_API tb_status tb_break_get(const tb_result *res, tb_break_summary *out, const tb_break_point **pts);

/* ---- pictures (SVG) ------------------------------------------------------ */

/* The pictures tbeta draws (docs/pictures.md). */
typedef enum {
    TB_PIC_BODE = 0,   /* |T| and its phase over frequency, with |A|, |A_inf| and the hand estimate,
                        * every unity and -180 degree crossing marked with its margin */
    TB_PIC_NYQUIST,    /* T(jw) on a log-magnitude scale (|T| = 1 stays the unit circle), -1,
                        * the vector-margin circle and the encirclement count */
    TB_PIC_STEP,       /* the closed-loop step response with overshoot, rise and settling marked */
    TB_PIC_IMPEDANCE,  /* |Z| of one .zport with and without feedback over frequency */
    TB_PIC_BREAKDOWN,  /* |A - G| and its three parts over frequency (.ideal) */
    TB_PIC_COUNT
} tb_picture_kind;

/* "bode", "nyquist", "step", "impedance", "breakdown": the picture's name in file names. */
TB_API const char *tb_picture_name(tb_picture_kind kind);

/* Writes picture `kind` of loop l (for TB_PIC_IMPEDANCE: of .zport number `port`; ignored
 * otherwise) to out as one self-contained SVG document. Errors: TB_ERR_USAGE (NULL, l or
 * port out of range), TB_ERR_NOT_FOUND (the picture has nothing to show: no step response,
 * no .zport, no .ideal with .io), TB_ERR_NOMEM, TB_ERR_IO. */
TB_API tb_status tb_report_svg(const tb_circuit *ckt, const tb_result *res, tb_picture_kind kind, size_t l,
                               size_t port, FILE *out);

/* One self-contained HTML page for a design review: the netlist's title, each loop's
 * verdict first, the summary tables, the estimate's breakdown, every picture as inline
 * SVG, and the caution. No script, font or style is fetched from anywhere; it reads the
 * same with scripts off. Errors: TB_ERR_USAGE (NULL), TB_ERR_NOMEM, TB_ERR_IO. */
TB_API tb_status tb_report_html(const tb_circuit *ckt, const tb_result *res, FILE *out);

/* ---- over frequency, as CSV ------------------------------------------- */

/* One row per sweep frequency of a feedback table of loop l (full precision, an
 * empty field where a value does not exist):
 *   "breakdown": freq_hz,AmG_re,AmG_im,loading_re,loading_im,loopgain_re,loopgain_im,
 *                feedthrough_re,feedthrough_im,error_pct,S_re,S_im,SA_re,SA_im
 *   "zport:NAME": freq_hz,Z_re,Z_im,Z0_re,Z0_im,Tsc_re,Tsc_im,Toc_re,Toc_im,Zb_re,Zb_im
 *   "break":     freq_hz,Tv_re,Tv_im,Ti_re,Ti_im,T_re,T_im,Tprobe_re,Tprobe_im
 * Errors: TB_ERR_NOT_FOUND (no such table: an unknown table name, no .ideal with
 * .io, no such .zport, no .break), TB_ERR_USAGE (NULL argument, l out of range),
 * TB_ERR_IO. */
TB_API tb_status tb_report_feedback_csv(const tb_circuit *ckt, const tb_result *res, size_t l, const char *table,
                                        FILE *out);

/* ---- distortion: weakly nonlinear, third-order Volterra series (docs/distortion.md) ---- */

/* One distortion ratio: |output at the product's frequency| / |output at the tone|. */
typedef struct {
    bool present; /* computed */
    double ratio; /* 0 when the product vanishes */
    bool has_db;  /* ratio > 0 */
    double db;    /* 20 log10 ratio */
} tb_dist_ratio;

/* The distortion of one configuration (the circuit as drawn, or one loop opened) at the
 * .volterra amplitude and tones, by nonlinear currents on the circuit matrix. */
typedef struct {
    bool computed;
    const char *why_absent;  /* a static phrase when !computed */
    double drive;            /* amplitude per tone that drives it (peak): amp of the .io source for
                              * the circuit as drawn; the injected controlling variable (V or A)
                              * of the opened loop source, chosen so that fund is the same */
    double fund;             /* |output| at freq (the .io output's unit) */
    tb_dist_ratio hd2;       /* at 2 freq */
    tb_dist_ratio hd3;       /* at 3 freq */
    tb_dist_ratio hd3_direct; /* the part of HD3 driven by the k3 terms */
    tb_dist_ratio hd3_inter; /* the part driven by second-order interaction (k2 times the
                              * second-order response) */
    tb_dist_ratio im2;       /* two tones of `drive` each: at freq + freq2 */
    tb_dist_ratio im2_diff;  /* at freq2 - freq */
    tb_dist_ratio im3;       /* at 2 freq - freq2 */
    bool has_iip3;
    double iip3;             /* input-referred third-order intercept: the drive per tone at which
                              * IM3 extrapolates (slope 2) to 1, in the drive's unit */
    double third;            /* the largest third-order term over the fundamental: max(HD3, IM3) */
    bool valid;              /* third <= limit: the third-order series is trusted */
} tb_dist_case;

typedef struct {
    bool computed;           /* .volterra, .io, a source with k2= or k3= */
    const char *why_absent;
    double amp;              /* as on .volterra */
    double freq_hz;
    double freq2_hz;
    double limit_pct;
    size_t nonlinear;        /* sources with k2= or k3= */
    tb_dist_case closed;     /* the circuit as drawn */
    size_t sweep_points;     /* HD2/HD3 over frequency: the .ac grid, thinned */
} tb_distortion;

/* Loop l opened (its source driven by an injected controlling variable, every other source
 * as drawn, the input source at zero), at the same output amplitude, against the circuit
 * as drawn; with the memoryless rules of thumb. */
typedef struct {
    bool computed;
    const char *why_absent;
    double complex T;            /* return ratio at freq (0 when infinite there) */
    tb_dist_case open;
    bool has_hd2_reduction;
    double hd2_reduction;        /* HD2 open / HD2 closed */
    bool has_hd3_reduction;
    double hd3_reduction;        /* HD3 open / HD3 closed */
    bool has_hd3_direct_reduction;
    double hd3_direct_reduction; /* the k3-driven part of HD3, open over closed */
    bool has_rule_hd2;           /* T finite at 2 freq */
    double complex T_2f;         /* T at 2 freq */
    double rule_hd2;             /* |1 + T(2f)|: the rule for HD2 at equal output amplitude (exact for
                                  * a memoryless stage, where T is the same at every frequency) */
    bool has_rule_hd3;           /* T finite at 3 freq */
    double complex T_3f;         /* T at 3 freq */
    double rule_hd3;             /* |1 + T(3f)|: the rule for the k3-driven part of HD3 at equal output
                                  * amplitude (the second-order interaction moves the whole of HD3
                                  * away from it; docs/distortion.md) */
} tb_distortion_loop;

/* HD2 and HD3 at one tone frequency of the sweep, as ratios (0: vanishes), with and
 * without loop l's feedback, at the output amplitude of the stated tone (the input scaled). */
typedef struct {
    double freq_hz;
    double amp;                  /* the input amplitude that gives that output here */
    bool has_closed;
    double hd2_closed;
    double hd3_closed;
    bool has_open;
    double hd2_open;
    double hd3_open;
    bool has_T;
    double T_mag;                /* |T| at the tone */
    bool valid;                  /* both within the limit (below) */
    bool valid_closed;           /* 3 HD3 with feedback within the .volterra limit (IM3 of a
                                  * memoryless cubic is 3 HD3) */
    bool valid_open;             /* likewise with the loop opened */
} tb_dist_sweep_point;

/* The distortion summary (computed false without .volterra, with why_absent). Errors:
 * TB_ERR_USAGE (NULL). */
TB_API tb_status tb_distortion_get(const tb_result *res, tb_distortion *out);
/* Loop l's comparison and, when pts is not NULL, its sweep (*count points, owned by res).
 * Errors: TB_ERR_USAGE (NULL, l out of range). */
TB_API tb_status tb_distortion_loop_get(const tb_result *res, size_t l, tb_distortion_loop *out,
                                        const tb_dist_sweep_point **pts, size_t *count);

/* ---- figures at chosen frequencies (tb_options.at_hz) ------------------ */

/* Loop l at one chosen frequency, from a fresh factorization of M there (not read
 * off the sweep grid). */
typedef struct {
    double f_hz;
    bool solved;            /* false: M is singular at f_hz (nothing below is set) */
    tb_point pt;            /* T, A, A_inf, A0, a and the flags saying which do not exist */
    bool has_T;             /* T finite */
    double T_db;            /* 20 log10 |T| (has_T and T != 0) */
    bool has_T_db;
    double T_phase_deg;     /* arg T in degrees, on the branch nearest the sweep's unwrapped
                             * phase at the closest grid point (has_T and T != 0) */
    double return_difference; /* |1 + T| (has_T) */
    tb_breakdown_point breakdown; /* the .ideal breakdown and desensitivity here */
    size_t ports;           /* .zport ports (tb_zport_count) */
    const tb_zpoint *zports; /* ports entries, port order, into res; NULL when ports is 0 */
} tb_spot;

/* Number of chosen frequencies analysed (tb_options.at_count; 0 when none). */
TB_API size_t tb_spot_count(const tb_result *res);
/* Loop l at chosen frequency i (in the order given). Errors: TB_ERR_USAGE (NULL, i or
 * l out of range). Thread safety: as every accessor, reads res only. */
TB_API tb_status tb_spot_get(const tb_result *res, size_t i, size_t l, tb_spot *out);

#ifdef __cplusplus
}
#endif
#endif
