/* src/census.h: the return ratio of every controlled source, marked or not, over the sweep */
#ifndef TB_CENSUS_H
#define TB_CENSUS_H

#include "result.h"
#include "sweep.h"

/* The census of one analysis: begin -> at (every sweep point) -> end. */
typedef struct tb_census tb_census;

/* State for every E, G, F, H of ckt (their u, v, k from tb_mna_source_vectors)
 * over npoints grid points and DC, with a workspace for each of lanes lanes
 * (tb_sweep_lanes). On success *out owns it (free with tb_census_free).
 * Errors: TB_ERR_NOMEM. */
tb_status tb_census_begin(const tb_circuit *ckt, const tb_mna *mna, size_t npoints, size_t lanes,
                          tb_census **out);

/* Per-point hook (self: a tb_census): one multi-RHS solve of M w_s = u_s for
 * every source on the sweep's factorization, in pt->lane's workspace, and
 * q = k v'w_s of every source stored for the point (T_s = q/(1 - q)). Safe to
 * call concurrently for different points on different lanes. Errors: TB_ERR_NUMERIC. */
tb_status tb_census_at(void *self, const tb_sweep_point *pt);

/* Goes through the stored points in frequency order (DC first when res->has_dc):
 * the largest |T| and the grid brackets of every unity crossing; then refines
 * each bracketed crossing by Brent on fresh pivoted factorizations through
 * probe, groups the sources of one loop, ranks them by largest |T| and hands
 * the entries to res->census. Errors: TB_ERR_NOMEM. */
tb_status tb_census_end(tb_census *cs, tb_probe *probe, tb_result *res);

/* After the stability analysis: each flagged local loop's phase margin against
 * limits->pm_min_deg (pm_ok), and, for every marked loop whose circuit with its
 * gain at zero has right-half-plane poles (P > 0, from res->stab), which flagged
 * local cells cause them: the poles of the circuit with both gains at zero
 * (tb_poles_find, its checks on the circuit through probe's solver; only when the
 * stability analysis computed poles, so within the pole limit). Errors: TB_ERR_NOMEM. */
tb_status tb_census_judge(const tb_census *cs, tb_probe *probe, const tb_options *limits, tb_result *res);

void tb_census_free(tb_census *cs);

#endif
