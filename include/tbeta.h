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
    TB_ERR_NUMERIC = -6   /* a numerical failure other than singularity */
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

/* Parses a netlist held in memory (text[0..len), need not be NUL-terminated);
 * file names it in diagnostics. On success *out owns a new circuit (free with
 * tb_circuit_free). Errors: TB_ERR_INPUT (diagnostics in diag), TB_ERR_NOMEM,
 * TB_ERR_USAGE (NULL argument). Warnings may be added on success. */
TB_API tb_status tb_circuit_parse(const char *text, size_t len, const char *file,
                                  tb_diag *diag, tb_circuit **out);
/* Reads and parses the netlist file at path; TB_ERR_IO when it cannot be read
 * (with a diagnostic), otherwise as tb_circuit_parse. */
TB_API tb_status tb_circuit_read(const char *path, tb_diag *diag, tb_circuit **out);
/* Frees a circuit and every name it owns (NULL is fine). */
TB_API void tb_circuit_free(tb_circuit *ckt);

/* The netlist's first line, trimmed ("" when empty); owned by the circuit. */
TB_API const char *tb_circuit_title(const tb_circuit *ckt);
/* Number of .loop directives, and the name of loop i's controlled source as written. */
TB_API size_t tb_circuit_loop_count(const tb_circuit *ckt);
TB_API const char *tb_circuit_loop_name(const tb_circuit *ckt, size_t i);
/* Index of the loop whose source is called name (case-insensitive); TB_ERR_USAGE if none. */
TB_API tb_status tb_circuit_find_loop(const tb_circuit *ckt, const char *name, size_t *index);
/* true when the netlist has an .io directive (A, A_inf, A0 and a exist). */
TB_API bool tb_circuit_has_io(const tb_circuit *ckt);
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

typedef struct {
    bool dc;              /* evaluate f = 0 exactly when the circuit allows (default true) */
    double refactor_rcond_drop; /* a refactor whose min/max |U_ii| falls below this times the
                                 * last pivoted one's factors again with pivoting (default 1e-6) */
} tb_options;

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

/* ---- measures ------------------------------------------------------- */

/* Reasons a measure is absent or a value needs a word of caution. */
typedef enum {
    TB_NOTE_NO_IO = 0,       /* no .io directive: A, A_inf, A0, a and the -3 dB point are absent */
    TB_NOTE_NOT_IN_LOOP,     /* the source never sees its own output: not in a loop */
    TB_NOTE_DC_FROM_SWEEP,   /* DC is singular: "DC" values are those at the lowest sweep frequency */
    TB_NOTE_T_INF_DC,        /* T is infinite at DC (e.g. an integrator in the loop) */
    TB_NOTE_POSITIVE_FB_DC,  /* T(0) < 0: positive feedback at DC, phase margin absent */
    TB_NOTE_NO_UNITY,        /* |T| never falls through 1 in the sweep */
    TB_NOTE_NO_F3DB,         /* |A| never falls 3 dB below its DC value in the sweep */
    TB_NOTE_AINF_NONE_DC,    /* A_inf undefined at DC (T has a zero there) */
    TB_NOTE_FEEDTHROUGH,     /* A0 contributes more than 1 % of A at DC: A != a/(1+a*beta) */
    TB_NOTE_COUNT
} tb_note;

/* A short English sentence for a note; never NULL. */
TB_API const char *tb_note_str(tb_note note);

/* DC values and the foundation measures of one loop. A has_* flag false means
 * the value is absent; notes (bit 1u << tb_note) say why. */
typedef struct {
    tb_point dc;            /* values at DC (or at the lowest sweep point, see notes) */
    double dc_hz;           /* 0, or the lowest sweep frequency */
    bool has_unity;
    double unity_hz;        /* lowest frequency where |T| falls through 1 */
    bool has_phase_margin;
    double phase_margin_deg; /* 180 + unwrapped phase of T at unity_hz */
    bool has_f3db;
    double f3db_closed_hz;  /* lowest frequency where |A| < |A(0)|/sqrt(2) */
    unsigned notes;
} tb_measures;

/* Measures of loop l. Errors: TB_ERR_USAGE (NULL, l out of range), TB_ERR_NOMEM. */
TB_API tb_status tb_measure_loop(const tb_result *res, size_t l, tb_measures *out);

/* ---- writers -------------------------------------------------------- */

/* Human-readable report of every loop. Errors: TB_ERR_IO on a write failure. */
TB_API tb_status tb_report_text(const tb_circuit *ckt, const tb_result *res, FILE *out);
/* The same as one JSON document (full precision; absent values are null). */
TB_API tb_status tb_report_json(const tb_circuit *ckt, const tb_result *res, FILE *out);
/* Sweep table of loop l as CSV: header, then one row per sweep frequency. */
TB_API tb_status tb_report_csv(const tb_circuit *ckt, const tb_result *res, size_t l, FILE *out);

#ifdef __cplusplus
}
#endif
#endif
