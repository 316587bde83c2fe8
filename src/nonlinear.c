/* src/nonlinear.c: what a netlist may say about weak nonlinearity: the polynomial keys of
 * E, G, F, H cards and of the .volterra request, with their ranges */
#include "nonlinear.h"

/* Coefficients reach 1e30 in magnitude: k3 of a transconductor in A/V^3 at a millivolt
 * scale, or of a current-controlled source in V/A^3 at a microamp scale, stays far inside. */
static const tb_nl_key coef_keys[TB_NL_COEF_COUNT] = {
    [TB_NL_K2] = {"k2", "a coefficient", 1e-30, 1e30, true, false, "0 or from 1e-30 to 1e30 in magnitude"},
    [TB_NL_K3] = {"k3", "a coefficient", 1e-30, 1e30, true, false, "0 or from 1e-30 to 1e30 in magnitude"},
};

/* The tone's frequency as .ac's range; the amplitude as a source value; the limit a percentage. */
static const tb_nl_key request_keys[TB_NL_REQ_COUNT] = {
    [TB_NL_AMP] = {"amp", "an amplitude", 1e-15, 1e15, false, true, "positive, from 1e-15 to 1e15"},
    [TB_NL_FREQ] = {"freq", "a frequency", 1e-9, 1e15, false, true, "from 1e-9 to 1e15 Hz"},
    [TB_NL_FREQ2] = {"freq2", "a frequency", 1e-9, 1e15, false, true, "from 1e-9 to 1e15 Hz"},
    [TB_NL_LIMIT] = {"limit", "a percentage", 1e-6, 50, false, true, "a percentage from 1e-6 to 50"},
};

const tb_nl_key *tb_nl_coef_keys(size_t *count)
{
    *count = TB_NL_COEF_COUNT;
    return coef_keys;
}

const char *tb_nl_coef_expected(void)
{
    return "k2=VALUE or k3=VALUE";
}

const tb_nl_key *tb_nl_request_keys(size_t *count)
{
    *count = TB_NL_REQ_COUNT;
    return request_keys;
}

const char *tb_nl_request_expected(void)
{
    return "amp=VALUE, freq=HZ, freq2=HZ or limit=PERCENT";
}

/* Default second tone: 10 % above the first (common practice puts the tones close together,
 * so that 2 f1 - f2 falls near them, inside the band). */
#define DEFAULT_FREQ2_RATIO 1.1
/* Default validity limit: a third-order output term above 1 % of the fundamental. */
#define DEFAULT_LIMIT_PCT 1.0

const char *tb_nl_request_make(const double *vals, const bool *seen, tb_volterra_spec *spec, int *key)
{
    *key = -1;
    if (!seen[TB_NL_AMP])
        return ".volterra needs the input amplitude: amp=VALUE";
    if (!seen[TB_NL_FREQ])
        return ".volterra needs the tone's frequency: freq=HZ";
    spec->given = true;
    spec->amp = vals[TB_NL_AMP];
    spec->freq_hz = vals[TB_NL_FREQ];
    spec->freq2_hz = seen[TB_NL_FREQ2] ? vals[TB_NL_FREQ2] : DEFAULT_FREQ2_RATIO * spec->freq_hz;
    spec->limit_pct = seen[TB_NL_LIMIT] ? vals[TB_NL_LIMIT] : DEFAULT_LIMIT_PCT;
    if (!(spec->freq2_hz > spec->freq_hz && spec->freq2_hz < 2 * spec->freq_hz)) {
        *key = TB_NL_FREQ2;
        return "freq2 of .volterra must lie above freq and below 2*freq (so that 2*freq - freq2 is "
               "a positive frequency below freq)";
    }
    return NULL;
}

bool tb_nl_is_nonlinear(const tb_element *e)
{
    return tb_elem_is_controlled(e->kind) && (e->k2 != 0 || e->k3 != 0);
}
