/* src/feedback_type.c: the feedback topology (series or shunt at input and output) from Blackman's return ratios */
#include <strings.h>

#include "impedance.h"

static const char *const type_text[] = {
    [TB_AMP_UNKNOWN] = "not one of the four classic types",
    [TB_AMP_VOLTAGE] = "voltage amplifier (series-shunt feedback)",
    [TB_AMP_CURRENT] = "current amplifier (shunt-series feedback)",
    [TB_AMP_TRANSCONDUCTANCE] = "transconductance amplifier (series-series feedback)",
    [TB_AMP_TRANSRESISTANCE] = "transresistance amplifier (shunt-shunt feedback)",
};
_Static_assert(sizeof(type_text) / sizeof(type_text[0]) == TB_AMP_TRANSRESISTANCE + 1, "type_text in step");

const char *tb_amp_type_str(tb_amp_type type)
{
    return (unsigned)type <= TB_AMP_TRANSRESISTANCE ? type_text[type] : "unknown";
}

/* The port labelled name (case-insensitive); false when there is none. */
static bool find_port(const tb_result *res, size_t l, const char *name, tb_side *side)
{
    for (size_t p = 0; p < tb_zport_count(res); p++) {
        tb_zport_summary s;
        if (tb_zport_loop(res, p, l, &s, NULL) == TB_OK && strcasecmp(s.name, name) == 0) {
            *side = s.side;
            return true;
        }
    }
    return false;
}

/* Input mixing and output sampling name the type (common practice, e.g. the
 * series-shunt voltage amplifier of textbook feedback-amplifier chapters). */
tb_status tb_feedback_type_loop(const tb_result *res, size_t l, tb_feedback_type *out)
{
    if (!res || !out || l >= tb_result_loops(res))
        return TB_ERR_USAGE;
    tb_feedback_type ft = {0};
    ft.computed = find_port(res, l, "in", &ft.input) && find_port(res, l, "out", &ft.output);
    if (ft.computed) {
        bool in_series = ft.input == TB_SIDE_SERIES, in_shunt = ft.input == TB_SIDE_SHUNT;
        bool out_series = ft.output == TB_SIDE_SERIES, out_shunt = ft.output == TB_SIDE_SHUNT;
        ft.type = in_series && out_shunt    ? TB_AMP_VOLTAGE
                  : in_shunt && out_series  ? TB_AMP_CURRENT
                  : in_series && out_series ? TB_AMP_TRANSCONDUCTANCE
                  : in_shunt && out_shunt   ? TB_AMP_TRANSRESISTANCE
                                            : TB_AMP_UNKNOWN;
    }
    *out = ft;
    return TB_OK;
}
