/* src/step.h: closed-loop step response: exact over the modes, else TR-BDF2 with error control; its figures */
#ifndef TB_STEP_H
#define TB_STEP_H

#include "probe.h"
#include "result.h"

/* Largest error estimate (relative to the larger of |A(0)| and |y(0+)|) of a
 * waveform whose figures are given; the modal sum must also pass its check
 * against fresh solves of H(jw) to this tolerance. */
#define TB_STEP_TOL 1e-6
/* Samples at most (beyond: absent, with the reason). */
#define TB_STEP_MAX_SAMPLES 200000
/* Accepted TR-BDF2 steps at most. */
#define TB_STEP_MAX_STEPS 100000

/* Fills res->step, res->step_t and res->step_y: the response of c'x to a unit
 * step of b, G x + C dx/dt = b u(t), x(0-) = 0. With closed-loop poles
 * (res->stab[0].has_poles) and a DC solution, the exact sum over the modes of
 * the pencil (modal.c), accepted only when it reproduces H(jw) from fresh
 * factorizations by the probe at every pole and over the poles' span;
 * otherwise TR-BDF2 with error control (transient.c) on real factorizations of
 * G + aC by the probe's solver (the same symbolic analysis). Figures (peak,
 * overshoot, rise, settling) are refined on the exact function or on the
 * cubic through the samples and their slopes; they are given only for a
 * trustworthy, settled waveform of a stable loop with non-zero DC gain.
 * Errors: TB_ERR_NOMEM; a singular or failed computation leaves the response
 * absent with the reason. */
tb_status tb_step_run(tb_probe *probe, tb_result *res);

/* The time-stepped route of tb_step_run on a thread of its own, beside the
 * stability analysis: for a circuit above pole_limit (no poles, so the route does
 * not depend on the stability analysis) with an input, a loop and capacitance;
 * otherwise *out is NULL and tb_step_run does the work later. The job has its own
 * solver over the probe's symbolic analysis (tb_solver_new_sharing) and reads only
 * the mna, res's frequencies and DC gain, which must not change until
 * tb_step_finish. Without a thread the work is done before returning. Errors:
 * TB_ERR_NOMEM. */
typedef struct tb_step_job tb_step_job;
tb_status tb_step_start(tb_probe *probe, const tb_result *res, size_t pole_limit, tb_step_job **out);

/* Waits for job (NULL: nothing) and frees it; with res, fills res->step, step_t and
 * step_y as tb_step_run would (the figures need res->stab). *factorizations (when
 * not NULL): the job's numeric factorizations. Returns the job's status. */
tb_status tb_step_finish(tb_step_job *job, tb_result *res, size_t *factorizations);

#endif
