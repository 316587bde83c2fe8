/* src/grid.c: frequency grids of the .ac directive (dec, oct, lin) */
#include <float.h>
#include <math.h>

#include "grid.h"

static double grid_base(const tb_ac_spec *ac)
{
    return ac->kind == TB_GRID_DEC ? 10.0 : 2.0;
}

double tb_grid_total(const tb_ac_spec *ac)
{
    if (ac->points < 1 || !(ac->fstart > 0) || !(ac->fstop >= ac->fstart))
        return 0;
    if (ac->kind == TB_GRID_LIN)
        return (double)ac->points;
    /* the rounding of the logarithms is forgiven, relative to the count: an end
     * that is a whole number of steps away is on the grid */
    double x = (double)ac->points * log(ac->fstop / ac->fstart) / log(grid_base(ac));
    double steps = floor(x + 1e-9 + 1e-12 * x);
    return isfinite(steps) ? steps + 1 : DBL_MAX; /* ends beyond any grid: fstop/fstart overflows */
}

size_t tb_grid_count(const tb_ac_spec *ac)
{
    double total = tb_grid_total(ac);
    return total <= (double)TB_GRID_MAX_POINTS ? (size_t)total : 0;
}

void tb_grid_fill(const tb_ac_spec *ac, double *f)
{
    size_t count = tb_grid_count(ac);
    for (size_t i = 0; i < count; i++) {
        if (ac->kind == TB_GRID_LIN)
            f[i] = count == 1 ? ac->fstart
                              : ac->fstart + (ac->fstop - ac->fstart) * (double)i / (double)(count - 1);
        else
            f[i] = ac->fstart * pow(grid_base(ac), (double)i / (double)ac->points);
    }
}

