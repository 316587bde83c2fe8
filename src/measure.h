/* src/measure.h: DC values and the figures derived from them, unity-gain crossing, phase margin, -3 dB point */
#ifndef TB_MEASURE_H
#define TB_MEASURE_H

#include "result.h"
#include "units.h"

/* Fills res->phase: the unwrapped phase of T in degrees at every sweep point of
 * every loop, continuous from DC (0 for T(0) > 0). Points where T is infinite
 * carry the previous value. Errors: TB_ERR_NOMEM. */
tb_status tb_measure_phase_run(tb_result *res);

/* Fills res->measures (one per loop): the DC point (or the lowest sweep point)
 * and the figures derived from it, the unity crossing and phase margin (exact
 * from res->stab when the stability analysis ran, else on the grid), the
 * closed-loop -3 dB point, and the notes. Needs res->phase. Errors: TB_ERR_NOMEM. */
tb_status tb_measure_run(tb_result *res);

#endif
