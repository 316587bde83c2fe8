/* src/paramsens.h: sensitivities to parameters, by the chain rule through the element values they set */
#ifndef TB_PARAMSENS_H
#define TB_PARAMSENS_H

#include "circuit.h"

/* Parameters reported, at most (each costs a pass over the parameter table). */
#define TB_PARAMSENS_MAX 1000

/* The parameters whose sensitivities are reported: those a spread run may change
 * (tb_spreadcard_tunable) with a value other than zero, in table order, up to
 * TB_PARAMSENS_MAX. */
size_t tb_paramsens_count(const tb_circuit *ckt);

/* From the element entries elem[] (one per element with a value, R C L E G F H K, in netlist
 * order, as the adjoint method fills them), the parameters' entries out[0 ..
 * tb_paramsens_count): for parameter p, each figure is the sum over the elements e it sets of
 * the element's figure times d ln v_e / d ln p (the chain rule; every figure is linear in
 * the relative change), the derivative by a central difference of the element's
 * expression (relative step 1e-6). A figure is present when it is for every element
 * that moves. Errors: TB_ERR_NOMEM. */
tb_status tb_paramsens_fill(const tb_circuit *ckt, const tb_sens_entry *elem, tb_sens_entry *out);

#endif
