/* src/grid.c: frequency grids of the .ac directive (dec, oct, lin) */
#include <math.h>

#include "grid.h"

#define TB_MAX_POINTS ((size_t)10000000)

static double grid_base(const tb_ac_spec *ac)
{
    return ac->kind == TB_GRID_DEC ? 10.0 : 2.0;
}

size_t tb_grid_count(const tb_ac_spec *ac)
{
    if (ac->points < 1 || !(ac->fstart > 0) || !(ac->fstop >= ac->fstart))
        return 0;
    if (ac->kind == TB_GRID_LIN)
        return (size_t)ac->points;
    double steps = floor(ac->points * log(ac->fstop / ac->fstart) / log(grid_base(ac)) + 1e-9);
    if (!(steps < (double)TB_MAX_POINTS))
        return 0;
    return (size_t)steps + 1;
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

