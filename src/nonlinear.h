/* src/nonlinear.h: what a netlist may say about weak nonlinearity: the polynomial keys of
 * E, G, F, H cards and of the .volterra request, with their ranges */
#ifndef TB_NONLINEAR_H
#define TB_NONLINEAR_H

#include <stdbool.h>
#include <stddef.h>

#include "circuit.h"

/* One KEY=VALUE a card accepts: the value must be zero when `zero` allows it, or have a
 * magnitude from lo to hi (positive only when `positive`). */
typedef struct {
    const char *key;        /* as written, case-insensitive */
    const char *what;       /* "a coefficient", for "expected ..." */
    double lo;
    double hi;
    bool zero;
    bool positive;
    const char *range_text; /* the range in words, for the message */
} tb_nl_key;

/* The coefficient keys of a controlled source, y = k x + k2 x^2 + k3 x^3 (docs/netlist.md):
 * k2, k3, in that order; *count receives 2. */
enum { TB_NL_K2 = 0, TB_NL_K3, TB_NL_COEF_COUNT };
const tb_nl_key *tb_nl_coef_keys(size_t *count);
/* "k2=VALUE or k3=VALUE": what may follow the gain. */
const char *tb_nl_coef_expected(void);

/* The keys of .volterra (docs/distortion.md): amp, freq, freq2, limit, in that order. */
enum { TB_NL_AMP = 0, TB_NL_FREQ, TB_NL_FREQ2, TB_NL_LIMIT, TB_NL_REQ_COUNT };
const tb_nl_key *tb_nl_request_keys(size_t *count);
/* "amp=VALUE, freq=HZ, freq2=HZ or limit=PERCENT" */
const char *tb_nl_request_expected(void);

/* The .volterra request from the values read (seen[i] for key i of tb_nl_request_keys):
 * fills *spec (defaults: freq2 = 1.1 freq, limit = 1 %) and returns NULL, or returns the
 * message of what is wrong across keys (a key missing, freq2 outside (freq, 2 freq)) and
 * sets *key to the offending key's index (-1: the card itself). */
const char *tb_nl_request_make(const double *vals, const bool *seen, tb_volterra_spec *spec, int *key);

/* true when element e carries a non-zero k2 or k3. */
bool tb_nl_is_nonlinear(const tb_element *e);

#endif
