/* src/census.h: the return ratio of every controlled source, marked or not, over the sweep */
#ifndef TB_CENSUS_H
#define TB_CENSUS_H

#include "mna.h"
#include "solve.h"
#include "sweep.h"

/* Fills res->census (ranked by largest |T|) for every E, G, F, H of ckt: at DC
 * and each sweep frequency one refactorization and one multi-RHS solve of
 * M w_s = u_s for all sources s, T_s = q/(1 - q), q = k v'w_s; unity crossings
 * bracketed on the grid and refined by Brent on fresh factorizations. solver
 * holds mna's pattern; Mx is workspace of 2*nnz doubles. Errors: TB_ERR_NOMEM,
 * TB_ERR_SINGULAR, TB_ERR_NUMERIC. */
tb_status tb_census_run(const tb_circuit *ckt, const tb_mna *mna, tb_solver *solver, double *Mx,
                        double rcond_drop, tb_result *res);

#endif
