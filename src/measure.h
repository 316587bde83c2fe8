/* src/measure.h: DC values, unity-gain crossing, phase margin, closed-loop -3 dB point */
#ifndef TB_MEASURE_H
#define TB_MEASURE_H

#include "sweep.h"

/* Unwrapped phase of T in degrees at every sweep point of loop l, continuous
 * from DC (0 for T(0) > 0). Points where T is infinite carry the previous value. */
void tb_measure_phase(const tb_result *res, size_t l, double *deg);

/* Degrees per radian. */
#define TB_DEG_PER_RAD 57.295779513082320876798154814105

/* Wraps an angle difference in degrees into (-180, 180]. */
double tb_wrap180(double deg);

/* Magnitude in dB, 20 log10 |z| (-INFINITY for zero: writers print it as absent). */
double tb_db(double complex z);

#endif
