/* src/wirebreak.h: loop gain at a wire break by voltage and current injection (Middlebrook) */
#ifndef TB_WIREBREAK_H
#define TB_WIREBREAK_H

#include "mna.h"
#include "solve.h"
#include "sweep.h"

/* What tb_wirebreak_run leaves on the result (res->wb). */
typedef struct tb_wb_data {
    tb_break_summary sum;
    tb_break_point *pts; /* npoints */
} tb_wb_data;

/* With .break V: at DC (when res->has_dc) and every sweep frequency one
 * refactorization and one two-column solve on M: s1 = M^-1 e_j (the break source
 * at 1 V: the voltage injection) and s2 = M^-1 e_y (1 A into the joined node: the
 * current injection), then Tv, Ti and T (docs/feedback.md). Errors: TB_ERR_INPUT
 * (the name is not a V source; diagnostic in diag), TB_ERR_NOMEM, TB_ERR_SINGULAR,
 * TB_ERR_NUMERIC. */
tb_status tb_wirebreak_run(const tb_circuit *ckt, const tb_mna *mna, tb_solver *solver, double *Mx,
                           double rcond_drop, tb_diag *diag, tb_result *res);

void tb_wirebreak_free(tb_wb_data *wb);

#endif
