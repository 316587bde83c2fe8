/* src/impedance.h: port impedances with and without feedback (Blackman's formula) */
#ifndef TB_IMPEDANCE_H
#define TB_IMPEDANCE_H

#include "mna.h"
#include "solve.h"
#include "sweep.h"

/* What tb_impedance_run leaves on the result (res->zp). */
typedef struct tb_z_data {
    size_t ports;
    size_t loops;
    tb_zport_summary *sum; /* ports x loops, port-major */
    tb_zpoint *pts;        /* ports x loops x npoints */
} tb_z_data;

/* For every .zport of ckt and every loop: at DC (when res->has_dc) and each sweep
 * frequency one refactorization and one multi-RHS solve for y_p = M^-1 r_p (r_p: unit
 * test current into the port) and w_l = M^-1 u_l, then Z = r'y, Z0 = r'M0^-1 r by
 * Sherman-Morrison with one refinement step against M0's exact entries, T_oc = the
 * loop's T, T_sc from the port shorted (a bordered update of M0), and Blackman's
 * Z0 (1 + T_sc)/(1 + T_oc). Does nothing without .zport. Errors: TB_ERR_INPUT (a
 * port's node does not exist; diagnostic in diag), TB_ERR_NOMEM, TB_ERR_SINGULAR,
 * TB_ERR_NUMERIC. */
tb_status tb_impedance_run(const tb_circuit *ckt, const tb_mna *mna, tb_solver *solver, double *Mx,
                           double rcond_drop, tb_diag *diag, tb_result *res);

void tb_impedance_free(tb_z_data *zd);

#endif
