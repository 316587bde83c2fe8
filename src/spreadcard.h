/* src/spreadcard.h: the .spread (tolerance) and .scan (parameter sweep) cards: reading, resolving */
#ifndef TB_SPREADCARD_H
#define TB_SPREADCARD_H

#include <stdbool.h>
#include <stddef.h>

#include "circuit.h"
#include "lex.h"

/* How a toleranced value is drawn (docs/netlist.md, ".spread"). */
typedef enum {
    TB_SPREAD_FLAT,  /* uniform within nominal +- width; corners at the two ends */
    TB_SPREAD_GAUSS, /* normal with sigma = width; corners at +- 3 sigma */
    TB_SPREAD_PICK   /* one of a list of values, each equally likely; corners at its least and greatest */
} tb_spread_dist;

/* Corners of a Gaussian spread lie this many sigma from the nominal value (common practice). */
#define TB_SPREAD_GAUSS_CORNER 3.0

/* One .spread card: the elements its pattern names vary as the distribution says. A
 * card with a group moves every element it names, and every element of the other cards
 * of that group, by one shared draw (matched parts, one process corner). */
typedef struct tb_spread_rule {
    struct tb_spread_rule *next;
    const char *pattern;   /* element name or pattern with * and ? (case-insensitive), interned */
    tb_spread_dist dist;
    double width;          /* FLAT: half-width; GAUSS: sigma (relative: a fraction of the value) */
    bool relative;         /* width given in percent */
    const double *values;  /* PICK: value_count values (absolute), in the string arena */
    size_t value_count;
    const char *group;     /* group name, interned; NULL: every element draws on its own */
    tb_loc loc;            /* the card */
    tb_loc pattern_loc;
    bool param;            /* the pattern names parameters: written {NAME} or {PATTERN}, or a bare
                            * name that is a parameter and no element (set by tb_spreadcard_resolve) */
} tb_spread_rule;

/* How a .scan axis spaces its values. */
typedef enum { TB_SCAN_LIST, TB_SCAN_LIN, TB_SCAN_LOG } tb_scan_kind;

#define TB_SCAN_MAX_AXES 2
#define TB_SCAN_MAX_POINTS 1000 /* values per axis */

/* One .scan card: the value of one element over a list or a range. */
typedef struct {
    const char *target;    /* element name as written, interned */
    size_t elem;           /* set by tb_spreadcard_resolve */
    tb_scan_kind kind;
    const double *values;  /* count values, in the string arena */
    size_t count;
    tb_loc loc;
    tb_loc target_loc;
    bool braced;           /* written {NAME}: a parameter */
    size_t param;          /* the parameter's quantity (paramdep.h), SIZE_MAX for an element (resolve) */
} tb_scan_axis;

/* Where a card is wrong and what was expected. */
typedef struct {
    tb_token at;
    char message[200];
} tb_card_error;

/* The spread and scan cards a circuit holds (a member of tb_circuit, in its arena). */
typedef struct tb_spread_cards {
    tb_spread_rule *rules;   /* in netlist order */
    tb_spread_rule *last;
    size_t rule_count;
    tb_scan_axis axes[TB_SCAN_MAX_AXES];
    size_t axis_count;
} tb_spread_cards;

/* Reads one .spread or .scan card: keyword is the card's first token, tok[0..count) the
 * tokens after it up to the end of the card, file the source's interned name. Records
 * live in ckt's string arena. Errors: TB_ERR_INPUT with *err filled (a token and the
 * message), TB_ERR_NOMEM. */
tb_status tb_spreadcard_read(tb_circuit *ckt, const char *file, const tb_token *keyword, const tb_token *tok,
                             size_t count, tb_card_error *err);

/* true for the keywords tb_spreadcard_read reads. */
bool tb_spreadcard_is(const tb_token *keyword);

/* After tb_circuit_finish: every .spread pattern must name at least one element with a
 * value (R C L E G F H K) or parameter that sets one, and every .scan target must be one
 * (docs/spread.md, "Parameters"). Located errors go to diag. Errors: TB_ERR_INPUT, TB_ERR_NOMEM. */
tb_status tb_spreadcard_resolve(tb_circuit *ckt, tb_diag *diag);

/* true when name matches pattern (* any run, ? one character; ASCII case ignored). */
bool tb_spreadcard_match(const char *pattern, const char *name);

/* true for the element kinds whose value a .spread or .scan card may change. */
bool tb_spreadcard_valued(tb_elem_kind kind);

/* true when a run may analyse an element of this kind at value v: finite, a resistor,
 * capacitor or inductor of the sign of its nominal value and not zero, a coupling within
 * (0, 1] (a parameter may take an element there). */
bool tb_spreadcard_value_ok(tb_elem_kind kind, double nominal, double v);

/* The parameter q's hierarchical name ("cl", "X1.gbw"; quantity q of ckt->params,
 * paramdep.h), interned in ckt with its label ("{cl}"); NULL when out of memory. */
const char *tb_spreadcard_param_name(tb_circuit *ckt, size_t q);

/* true when parameter quantity q (paramdep.h) may be changed by a run: it sets an element
 * value and nothing a run cannot change. */
bool tb_spreadcard_tunable(const tb_circuit *ckt, size_t q);

#endif
