/* src/measure.h: DC values and the figures derived from them, unity-gain crossing, phase margin, -3 dB point */
#ifndef TB_MEASURE_H
#define TB_MEASURE_H

#include "result.h"
#include "units.h"

/* |T| in dB at grid point i of ctx: +INFINITY where T is infinite, NAN where it is absent. */
typedef double (*tb_db_fn)(const void *ctx, size_t i);

/* The lowest grid segment [*seg, *seg + 1] of n points where |T| falls through 1
 * (0 dB), and the fraction *t along it, linear in dB (1 when |T| is infinite at
 * the lower end); segments with an absent end are skipped. false when none. */
bool tb_grid_unity(tb_db_fn db_at, const void *ctx, size_t n, size_t *seg, double *t);
/* The frequency a fraction t from f0 to f1 on a log-frequency axis. */
double tb_grid_logf(double f0, double f1, double t);

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
