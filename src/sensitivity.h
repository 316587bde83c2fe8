/* src/sensitivity.h: normalized sensitivities of every loop's figures to every element (adjoint method) */
#ifndef TB_SENSITIVITY_H
#define TB_SENSITIVITY_H

#include "probe.h"
#include "result.h"

/* Fills res->sens (one per loop, entries ranked) for every R, C, L, E, G, F, H and K of
 * ckt: at DC (or the lowest sweep point), at the headline phase margin's unity crossing
 * and at the headline gain margin's phase crossing (from res->stab), each by a fresh
 * factorization through probe, the loops' x and w, and one multi-RHS transposed solve
 * for y = M^-T c and z_l = M^-T v_l. Errors: TB_ERR_NOMEM, TB_ERR_NUMERIC. */
tb_status tb_sensitivity_run(const tb_circuit *ckt, tb_probe *probe, tb_result *res);

/* The elements tb_sensitivity_at reports: every R, C, L, E, G, F, H and K of ckt. */
size_t tb_sensitivity_count(const tb_circuit *ckt);

/* Loop l's sensitivities at frequency f (Hz, 0 for DC), unranked, in netlist order, into
 * out (tb_sensitivity_count entries): T_mag, T_phase_deg, A_mag and A_inf_mag of each entry
 * hold their values at f, by one fresh factorization through probe and one transposed
 * solve; the crossing figures stay absent. Errors: TB_ERR_USAGE (l, f), TB_ERR_NOMEM,
 * TB_ERR_SINGULAR (M singular at f), TB_ERR_NUMERIC. */
tb_status tb_sensitivity_at(const tb_circuit *ckt, tb_probe *probe, size_t l, double f, tb_sens_entry *out);

#endif
