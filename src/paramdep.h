/* src/paramdep.h: which element values follow which parameters, kept from parsing to re-evaluate them per run */
#ifndef TB_PARAMDEP_H
#define TB_PARAMDEP_H

#include <stdbool.h>
#include <stddef.h>

#include "circuit.h"

/* One evaluated expression: a parameter (a .param, or a subcircuit instance's parameter
 * or body .param) or the value of an element card that names parameters. Its references
 * are quantities evaluated before it, so the table is in an order where each expression
 * comes after everything it reads. */
typedef struct {
    const char *prefix;    /* the instance path ("X1.X2"), or NULL at the top level */
    const char *name;      /* the parameter's name, or NULL for an element card's value */
    const char *text;      /* the expression, without braces, in a source text of the circuit */
    size_t len;
    size_t ref_first;      /* refs[ref_first .. ref_first + ref_count) */
    size_t ref_count;
    double value;          /* as the netlist gives it */
    tb_loc loc;            /* the expression */
    bool fixed;            /* sets a value no run can change (a source, a device key, a directive); */
    tb_loc fixed_loc;      /* there (set for a parameter by tb_params_settle) */
    bool sets;             /* sets at least one element value (tb_params_settle) */
    const char *full;      /* "X1.gbw", interned on first use by tb_spreadcard_param_name */
    const char *label;     /* "{X1.gbw}": the name in reports, interned with full */
} tb_pquant;

/* A name in an expression: the byte where it starts and the quantity it read. */
typedef struct {
    size_t offset;
    size_t q;
} tb_pref;

/* Element elem's value is quantity q. */
typedef struct {
    size_t elem;
    size_t q;
} tb_pdep;

typedef struct tb_params {
    tb_pquant *q;
    size_t count, cap;
    tb_pref *refs;
    size_t ref_count, ref_cap;
    tb_pdep *deps;
    size_t dep_count, dep_cap;
    tb_pref *rec;          /* the references of the expressions being evaluated, innermost last */
    size_t rec_count, rec_cap;
    bool settled;
} tb_params;

/* ---- while parsing ---------------------------------------------------------------- */

tb_params *tb_params_new(void);
void tb_params_free(tb_params *P);

/* Where the references of the expression about to be evaluated start. */
size_t tb_params_mark(const tb_params *P);
/* The expression being evaluated read quantity q at byte offset. Errors: TB_ERR_NOMEM. */
tb_status tb_params_ref(tb_params *P, size_t offset, size_t q);
/* Makes the references recorded since mark into quantity *q (the expression text[0..len),
 * its value): every parameter is recorded, an element value only when it reads one (the
 * caller asks: tb_params_refs). The recorded references are taken off. Errors: TB_ERR_NOMEM. */
tb_status tb_params_add(tb_params *P, size_t mark, const tb_pquant *proto, size_t *q);
/* References recorded since mark. */
size_t tb_params_refs(const tb_params *P, size_t mark);
/* Forgets the references recorded since mark (an evaluation that failed or needs none). */
void tb_params_drop(tb_params *P, size_t mark);
/* Element elem's value is quantity q (which was added fixed: now it is not). Errors: TB_ERR_NOMEM. */
tb_status tb_params_bind(tb_params *P, size_t q, size_t elem);

/* ---- after parsing ---------------------------------------------------------------- */

/* Spreads 'fixed' and 'sets' from the element values and other uses to the parameters
 * they read, directly or through others. Idempotent. */
void tb_params_settle(tb_params *P);
/* The parameter called name (case-insensitive): true and *q. */
bool tb_params_find(tb_circuit *ckt, const char *name, size_t *q);

/* ---- per run ----------------------------------------------------------------------- */

/* The compiled re-evaluation for a set of target parameters: only the expressions that
 * read one of them, directly or through others, in order, with every other reference's
 * value bound in. */
typedef struct tb_pplan tb_pplan;

/* For targets[0..n) (parameter quantities). Errors: TB_ERR_NOMEM. */
tb_status tb_pplan_new(const tb_params *P, const size_t *targets, size_t n, tb_pplan **out);
void tb_pplan_free(tb_pplan *pl);
/* Doubles of workspace tb_pplan_apply needs. */
size_t tb_pplan_work(const tb_pplan *pl);
/* With target i at tv[i], re-evaluates what depends on the targets and writes the element
 * values that follow into values[] (indexed by element). false when an expression fails
 * there (a square root of a negative number, a division by zero): the run has no values.
 * work: tb_pplan_work(pl) doubles. Pure: safe from several threads with their own work. */
bool tb_pplan_apply(const tb_pplan *pl, const double *tv, double *work, double *values);

#endif
