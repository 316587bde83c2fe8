/* src/wirebreak.h: loop gain at a wire break by voltage and current injection (Middlebrook) */
#ifndef TB_WIREBREAK_H
#define TB_WIREBREAK_H

#include "result.h"
#include "sweep.h"

/* The .break analysis: begin -> at (every sweep point) -> end. */
typedef struct tb_wirebreak tb_wirebreak;

/* State for ckt's .break (its source resolved by tb_circuit_finish) over
 * npoints grid points, with a workspace for each of lanes lanes
 * (tb_sweep_lanes). On success *out owns it (free with tb_wirebreak_free).
 * Errors: TB_ERR_NOMEM. */
tb_status tb_wirebreak_begin(const tb_circuit *ckt, const tb_mna *mna, size_t npoints, size_t lanes,
                             tb_wirebreak **out);

/* Per-point hook (self: a tb_wirebreak): one two-column solve on the sweep's
 * factorization, s1 = M^-1 e_j (the break source at 1 V: the voltage injection)
 * and s2 = M^-1 e_y (1 A into the joined node: the current injection), then Tv,
 * Ti and T (docs/feedback.md), stored for the point. Works in pt->lane's
 * workspace: safe to call concurrently for different points on different lanes.
 * Errors: TB_ERR_NUMERIC. */
tb_status tb_wirebreak_at(void *self, const tb_sweep_point *pt);

/* The DC point (the lowest when DC was not solved), the unity crossing and
 * phase margin on the grid, handed to res->wb. */
void tb_wirebreak_end(tb_wirebreak *w, tb_result *res);

void tb_wirebreak_free(tb_wirebreak *w);

#endif
