/* src/m0.h: the matrix M0 of a loop's circuit at gain zero, entry by entry: its G and its pattern */
#ifndef TB_M0_H
#define TB_M0_H

#include "mna.h"

/* G of M0 at CSC position k: mna's G, or at lv's own positions G without the source's
 * stamp (lv NULL: G itself). */
double tb_m0_g_at(const tb_mna *mna, const tb_loopvec *lv, size_t k);

/* M0's pattern (lv NULL: M's): the positions non-zero at some frequency (G0 or C), as CSC
 * column starts Fp (n + 1), rows Fi and, when Fk is not NULL, their positions in mna's
 * arrays Fk (each up to nnz). Returns the count. */
size_t tb_m0_pattern(const tb_mna *mna, const tb_loopvec *lv, int *Fp, int *Fi, int *Fk);

#endif
