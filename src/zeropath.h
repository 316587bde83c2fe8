/* src/zeropath.h: whether a loop's feedthrough A0 = c'M0^-1 b is zero by the circuit's structure */
#ifndef TB_ZEROPATH_H
#define TB_ZEROPATH_H

#include "mna.h"

/* *nil = true when c'M0^-1 b, with M0 the matrix of loop lv's circuit at gain zero, is
 * exactly zero at every frequency where M0 is non-singular, whatever the element values:
 * for every pair of an entry i of b and an entry j of c, M0 with row i and column j
 * deleted has no perfect matching on M0's non-zero positions (entries whose G and C are
 * both zero left out), so that minor's determinant, and with it (M0^-1)_ji, vanishes
 * identically. *nil = false when some pair has such a matching, or M0 itself has none.
 * Needs mna->has_io. Errors: TB_ERR_NOMEM (*nil untouched). */
tb_status tb_zeropath_feed_nil(const tb_mna *mna, const tb_loopvec *lv, bool *nil);

#endif
