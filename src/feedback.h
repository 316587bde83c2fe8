/* src/feedback.h: the hand estimate's error breakdown and the desensitivity of every loop */
#ifndef TB_FEEDBACK_H
#define TB_FEEDBACK_H

#include "probe.h"
#include "result.h"

/* Fills res->fb from the sweep table (res->pts, res->dc): the breakdown of
 * A - G into loading, finite loop gain and feedthrough at every point, the
 * frequency where the estimate stops holding (Brent on fresh solves through
 * probe), and the change of A at DC for the amplifier's gain changed by
 * +-spread, both from the model and by a fresh factorization of M with the
 * changed gain (probe->Mx and probe->solver are reused). Errors: TB_ERR_NOMEM,
 * TB_ERR_NUMERIC. */
/* The breakdown of one point (design.md: A = A_inf T/(1+T) + A0/(1+T)) against the
 * estimate G (has_estimate: .ideal given), and the desensitivity there. */
tb_breakdown_point tb_feedback_breakdown(const tb_point *pt, bool has_estimate, double G);

tb_status tb_feedback_run(const tb_circuit *ckt, tb_probe *probe, tb_result *res);

#endif
