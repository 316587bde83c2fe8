/* src/feedback_type.h: the feedback topology (series or shunt at input and output) from Blackman's return ratios */
#ifndef TB_FEEDBACK_TYPE_H
#define TB_FEEDBACK_TYPE_H

#include "result.h"

/* Fills res->ftype (one per loop) from the ports labelled "in" and "out" (the
 * impedance analysis must have run). Errors: TB_ERR_NOMEM. */
tb_status tb_feedback_type_run(tb_result *res);

#endif
