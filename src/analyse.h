/* src/analyse.h: the driver's internal entry: an analysis on another's symbolic analysis */
#ifndef TB_ANALYSE_H
#define TB_ANALYSE_H

#include "sweep.h"
#include "tbeta.h"

/* tb_analyse, with the point loop on base's symbolic analysis when ckt stamps the same
 * pattern (tb_sweep_new_on): the analyses of a circuit at changed values (corners, Monte
 * Carlo, scans) then repeat only the numeric work. base may be NULL; it must outlive the
 * call and is only read, so several threads may analyse on one base at once. */
tb_status tb_analyse_on(const tb_circuit *ckt, const tb_options *opt, const tb_sweep *base, tb_diag *diag,
                        tb_result **out);

#endif
