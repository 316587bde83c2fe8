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

/* Magnitude in dB, 20 log10 |z| (-INFINITY for zero: writers print it as absent). */
double tb_db(double complex z);

#endif
