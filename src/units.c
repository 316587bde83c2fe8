/* src/units.c: numeric constants and unit conversions every layer shares (angles, dB) */
#include "units.h"

#include <math.h>

double tb_db(double complex z)
{
    return 20.0 * log10(cabs(z));
}

double tb_phase_step_past_pole(double d)
{
    d = tb_wrap180(d);
    return d > 0.0 ? d - 360.0 : d;
}

double tb_wrap180(double d)
{
    d = fmod(d, 360.0);
    if (d <= -180.0)
        d += 360.0;
    else if (d > 180.0)
        d -= 360.0;
    return d;
}
