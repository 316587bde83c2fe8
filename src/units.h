/* src/units.h: numeric constants and unit conversions every layer shares (angles, dB) */
#ifndef TB_UNITS_H
#define TB_UNITS_H

#include <complex.h>

/* 2 pi: omega = TB_TWO_PI f. */
#define TB_TWO_PI 6.28318530717958647692528676655900577
/* Degrees per radian. */
#define TB_DEG_PER_RAD 57.295779513082320876798154814105

/* Wraps an angle difference in degrees into (-180, 180]. */
double tb_wrap180(double deg);
/* The step of the unwrapped phase of T from a point before to a point after one where T is
 * infinite (a pole of T on the j-omega axis): in (-360, 0]. The Nyquist path passes such a pole
 * on its right, where the phase of T falls (by 180 degrees for a simple pole), so the phase
 * after it does not depend on the rounding of the two phases (docs/stability.md). */
double tb_phase_step_past_pole(double deg);

/* Magnitude in dB, 20 log10 |z| (-INFINITY for zero: writers print it as absent). */
double tb_db(double complex z);

#endif
