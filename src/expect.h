/* src/expect.h: .expect cards: the table of figures a netlist may bound, expectations, their evaluation */
#ifndef TB_EXPECT_H
#define TB_EXPECT_H

#include <stdbool.h>
#include <stddef.h>

#include "circuit.h"
#include "tbeta.h"

/* Which way a figure gets worse (used when comparing against a saved run). */
typedef enum {
    TB_WORSE_ANY = 0, /* any change beyond the tolerance is a regression (gains, frequencies) */
    TB_WORSE_LOWER,   /* a lower value is worse (margins, loop gain) */
    TB_WORSE_HIGHER,  /* a higher value is worse (overshoot, peaking) */
    TB_WORSE_FARTHER  /* a larger magnitude is worse (gain error) */
} tb_worse;

/* Everything a figure is read from: one loop's measures, stability and hand-estimate
 * breakdown, and the step response. */
typedef struct {
    const tb_measures *m;
    const tb_stability *st;
    const tb_step_figures *step;
    const tb_feedback_summary *fb; /* the hand estimate (.ideal) of the loop; may be NULL */
    const tb_distortion *dist;      /* .volterra distortion; may be NULL */
    const tb_distortion_loop *dl;   /* the loop opened at equal output; may be NULL */
} tb_figure_src;

/* One figure an expectation may name. get returns true with *x, or false with
 * *why (a static phrase) when the figure is absent. A word figure (the verdict)
 * holds its enumerator in *x. */
typedef struct {
    const char *name;
    const char *unit; /* "", "Hz", "deg", "dB", "s", "%" */
    tb_worse worse;
    bool word;
    bool (*get)(const tb_figure_src *src, double *x, const char **why);
    const char *what; /* one line for docs and --help */
} tb_figure;

/* One figure of one loop as measured: present with a finite value, or absent with why
 * (a static phrase). */
typedef struct {
    bool present;
    double value; /* 0 when absent */
    const char *why; /* NULL when present */
} tb_figure_value;

/* Every figure of loop l of res, in table order; out has tb_figure_count() entries. This is
 * what every .expect card of the loop is evaluated against (tb_expect_holds). Errors:
 * TB_ERR_USAGE (NULL, l out of range), TB_ERR_NOMEM. */
tb_status tb_figure_measure(const tb_result *res, size_t l, tb_figure_value *out);

/* The figure table: tb_figure_count() rows, in the order of docs/check.md. */
size_t tb_figure_count(void);
const tb_figure *tb_figure_at(size_t i);
/* Index of the figure called name[0..len) (case-sensitive), or -1. */
int tb_figure_find(const char *name, size_t len);
/* A word figure's value as text ("stable") and back (-1 when unknown). */
const char *tb_figure_word(double x);
int tb_figure_word_find(const char *s, size_t len);
/* The word closest to a misspelt one ("stabel" -> "stable"), or NULL. */
const char *tb_figure_word_suggest(const char *s);

typedef enum { TB_XOP_EQ, TB_XOP_GE, TB_XOP_LE, TB_XOP_IN, TB_XOP_NONE } tb_expect_op;

/* One .expect card. For TB_XOP_EQ on a number: |x - value| <= tol (tol_pct:
 * tol percent of |value|); on a word figure: x == value. GE: x >= lo; LE:
 * x <= hi; IN: lo <= x <= hi; NONE: the figure is absent. */
typedef struct tb_expect {
    struct tb_expect *next;
    const char *target;     /* LOOP.FIGURE as written, interned */
    const char *loop_name;  /* LOOP part, interned */
    int figure;             /* index into the figure table */
    size_t loop;            /* loop index, set by tb_expect_resolve */
    tb_expect_op op;
    double value;
    double tol;
    bool tol_pct;
    double lo;
    double hi;
    tb_loc loc;             /* of the target word */
} tb_expect;

/* Splits target[0..len) = LOOP.FIGURE at the dot before the longest figure
 * name it ends in; returns the figure index and sets *loop_len, or -1. */
int tb_expect_split(const char *target, size_t len, size_t *loop_len);
/* The closest figure name to the part of target after one of its dots, and
 * that part's offset; NULL when none is close. */
const char *tb_expect_suggest(const char *target, size_t len, size_t *offset);
/* Reads a tolerance "1%", "0.5", "2m" from s[0..len); false when malformed. */
bool tb_expect_tolerance(const char *s, size_t len, double *tol, bool *pct);
/* Offset of a tolerance sign ("±" or "+-") in s[0..len) and its length, or false. */
bool tb_expect_find_pm(const char *s, size_t len, size_t *at, size_t *sign_len);

/* Appends x (copied into the circuit's string arena, so the circuit frees it). */
tb_status tb_expect_add(tb_circuit *ckt, const tb_expect *x);
/* Resolves each expectation's loop name against the circuit's .loop list;
 * an unknown one is an error at its card ("did you mean"). TB_ERR_INPUT if any. */
tb_status tb_expect_resolve(tb_circuit *ckt, tb_diag *diag);

/* Evaluates x against a figure (present with value v, or absent); true when it holds. */
bool tb_expect_holds(const tb_expect *x, bool present, double v);
/* The bound of x for people: ">= 45", "in [1e+06, 2e+06]", "= 10 +- 1% [9.9, 10.1]". */
const char *tb_expect_bound_text(const tb_expect *x, char *buf, size_t size);
/* A figure value for people: "%.6g" plus unit, a word, or "absent". */
const char *tb_figure_text(int figure, bool present, double v, char *buf, size_t size);

#endif
