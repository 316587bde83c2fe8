/* src/grid.h: frequency grids of the .ac directive (dec, oct, lin) */
#ifndef TB_GRID_H
#define TB_GRID_H

#include "circuit.h"

/* Most frequencies of one grid (docs/netlist.md; the parser refuses more). */
#define TB_GRID_MAX_POINTS ((size_t)10000000)

/* Number of frequencies the grid spec asks for, with no limit (0 when the spec
 * is unusable), as a double: it may be far beyond any size_t the sweep could use. */
double tb_grid_total(const tb_ac_spec *ac);
/* Number of frequencies of the grid spec (0 when the spec is unusable or asks for
 * more than TB_GRID_MAX_POINTS). */
size_t tb_grid_count(const tb_ac_spec *ac);
/* Fills f with the tb_grid_count(ac) frequencies of the grid, ascending:
 * dec/oct f_i = fstart * 10^(i/N) (2^(i/N)) up to fstop; lin N points inclusive. */
void tb_grid_fill(const tb_ac_spec *ac, double *f);

#endif
