/* src/grid.h: frequency grids of the .ac directive (dec, oct, lin) */
#ifndef TB_GRID_H
#define TB_GRID_H

#include "circuit.h"

/* Number of frequencies of the grid spec (0 when the spec is unusable). */
size_t tb_grid_count(const tb_ac_spec *ac);
/* Fills f with the tb_grid_count(ac) frequencies of the grid, ascending:
 * dec/oct f_i = fstart * 10^(i/N) (2^(i/N)) up to fstop; lin N points inclusive. */
void tb_grid_fill(const tb_ac_spec *ac, double *f);

#endif
