/* src/impedance.h: port impedances with and without feedback (Blackman's formula) */
#ifndef TB_IMPEDANCE_H
#define TB_IMPEDANCE_H

#include "result.h"
#include "sweep.h"

/* The .zport analysis: begin -> at (every sweep point) -> end. */
typedef struct tb_impedance tb_impedance;

/* State for every .zport of ckt (names resolved by tb_circuit_finish) and every
 * loop of mna, for npoints grid points, with a workspace for each of lanes lanes
 * (tb_sweep_lanes). On success *out owns it (free with tb_impedance_free).
 * Errors: TB_ERR_NOMEM. */
tb_status tb_impedance_begin(const tb_circuit *ckt, const tb_mna *mna, size_t npoints, size_t lanes,
                             tb_impedance **out);

/* Per-point hook (self: a tb_impedance): one multi-RHS solve on the sweep's
 * factorization for y_p = M^-1 r_p (r_p: unit test current into the port); the
 * loops' w_l = M^-1 u_l come from the point's loop evaluation. Then Z = r'y,
 * Z0 = r'M0^-1 r by Sherman-Morrison with one refinement step against M0's
 * exact entries (one more batched solve), T_oc = the loop's T, T_sc from the
 * port shorted (a bordered update of M0), and Blackman's Z0 (1 + T_sc)/(1 + T_oc),
 * stored for the point. Works in pt->lane's workspace: safe to call concurrently
 * for different points on different lanes. Errors: TB_ERR_NUMERIC. */
tb_status tb_impedance_at(void *self, const tb_sweep_point *pt);

/* Every port seen by every loop at one chosen frequency f, after tb_probe_eval(probe, f)
 * (the probe holds M(j 2 pi f) and every loop's point there): the figures of
 * tb_impedance_at into out[l * ports + p] (ports x loops entries), in lane 0's workspace
 * (call it after the point loop only). Errors: TB_ERR_USAGE (the probe holds another
 * frequency), TB_ERR_NUMERIC. */
tb_status tb_impedance_eval(tb_impedance *z, tb_probe *probe, double f, tb_zpoint *out);

/* The DC summaries (the lowest point when DC was not solved), the largest
 * difference between Blackman's Z and Z over the points, and each port's side,
 * handed to res->zp. */
void tb_impedance_end(tb_impedance *z, tb_result *res);

void tb_impedance_free(tb_impedance *z);

#endif
