/* src/step.h: closed-loop step response in the time domain by the trapezoidal rule */
#ifndef TB_STEP_H
#define TB_STEP_H

#include "probe.h"
#include "result.h"

/* Intervals of the step response: at least TB_STEP_STEPS, more so that h |s| <= 1/2
 * for the fastest closed-loop pole, at most TB_STEP_MAX_STEPS. */
#define TB_STEP_STEPS 4000
#define TB_STEP_MAX_STEPS 40000
/* Substeps of the first interval (see step.c). */
#define TB_STEP_START 64

/* Fills res->step, res->step_t and res->step_y: the response of c'x to a unit
 * step of b, G x + C dx/dt = b u(t), on a real factorization of G + (2/h) C
 * (KLU with zero imaginary parts) by the probe's solver (the same symbolic analysis). The span is 10 time constants of
 * the slowest closed-loop pole (res->stab[0].poles); absent (with the reason)
 * when the poles were not computed. Errors: TB_ERR_NOMEM, TB_ERR_NUMERIC; a singular
 * matrix leaves the response absent with the reason. */
tb_status tb_step_run(tb_probe *probe, tb_result *res);

#endif
