/* src/passive.h: no zero of det M0(s) in the right half-plane, shown from the passivity of M0's diagonal blocks */
#ifndef TB_PASSIVE_H
#define TB_PASSIVE_H

#include "mna.h"

/* A connected part of a block's symmetric G or C that no diagonal-dominance test shows
 * positive semidefinite gets the dense test (LDL' with a tolerance) up to this many unknowns. */
#define TB_PASSIVE_DENSE 32

/* What the test found for one loop's M0 (or M itself). */
typedef struct {
    bool proven;           /* every diagonal block passive: det M0(s) has no zero with Re s > 0
                            * (unless it is zero at every s; docs/stability.md) */
    size_t blocks;         /* diagonal blocks: strongly connected parts of M0's non-zero pattern */
    size_t active_blocks;  /* blocks the test could not show passive */
    size_t largest_active; /* unknowns in the largest of them (0 when none) */
    size_t first_active;   /* an unknown of that block, SIZE_MAX when none */
} tb_passive;

/* Whether det M0(s), M0 = M with loop lv's source gain at zero (lv NULL: M itself), can
 * have a zero in the open right half-plane, without eigenvalues or factorizations, in
 * O(nnz) (plus dense work on connected parts of at most TB_PASSIVE_DENSE unknowns).
 * M0's non-zero pattern (entries whose G and C are both zero left out) is split into its
 * strongly connected parts (libbtf's btf_strongcomp on the pattern itself: the same index
 * set for a block's rows and columns), so that det M0 is the product of the blocks'
 * determinants and entries between blocks (a buffer's gain from one part into another)
 * do not matter. With every branch-current row (unknowns from mna->nodes on) negated, a
 * block B is passive when the symmetric part of its G and its C are positive
 * semidefinite and its C is symmetric: each connected part of those symmetric matrices
 * is diagonally dominant with a non-negative diagonal, or is after the diagonal scaling
 * D^-1/2 A D^-1/2, or passes the dense test. Then x*(G + sC)x = 0 with Re s > 0 forces
 * Gs x = C x = 0 and G x = 0, a null vector at every s (docs/stability.md, "Right-half-plane
 * count by passive blocks"). The tests hold within rounding of the stored values (a few
 * units in the last place per entry summed). Errors: TB_ERR_NOMEM, TB_ERR_USAGE (more
 * unknowns than libbtf's int indices allow); *out set only on success. */
tb_status tb_passive_open_loop(const tb_mna *mna, const tb_loopvec *lv, tb_passive *out);

#endif
