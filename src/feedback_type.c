/* src/feedback_type.c: the feedback topology (series or shunt at input and output) from Blackman's return ratios */
#include <strings.h>

#include "feedback_type.h"

#include "alloc.h"


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
static tb_feedback_type classify(const tb_result *res, size_t l)
{
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
    return ft;
}

tb_status tb_feedback_type_run(tb_result *res)
{
    res->ftype = tb_calloc(res->nloops ? res->nloops : 1, sizeof(tb_feedback_type));
    if (!res->ftype)
        return TB_ERR_NOMEM;
    for (size_t l = 0; l < res->nloops; l++)
        res->ftype[l] = classify(res, l);
    return TB_OK;
}
