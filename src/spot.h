/* src/spot.h: every loop's figures at chosen frequencies (--at), each by a fresh factorization */
#ifndef TB_SPOT_H
#define TB_SPOT_H

#include "impedance.h"

/* Checks a list of chosen frequencies: at most TB_AT_MAX, each finite and >= 0
 * (count 0 with at NULL is fine). Errors: TB_ERR_USAGE. */
tb_status tb_spot_check(const double *at, size_t count);

/* Fills res->spot: at each of the count frequencies of at (tb_spot_check'ed), M is factored
 * afresh through the probe, every loop evaluated there, its breakdown taken against the
 * .ideal estimate (res->fb, from tb_feedback_run) and, when ports is not NULL, every .zport
 * evaluated (tb_impedance_eval). A frequency where M is singular is stored as not solved.
 * Errors: TB_ERR_NOMEM, TB_ERR_NUMERIC. */
tb_status tb_spot_run(tb_probe *probe, tb_impedance *ports, size_t nports, const double *at, size_t count,
                      tb_result *res);

#endif
