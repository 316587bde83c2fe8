/* src/m0.c: the matrix M0 of a loop's circuit at gain zero, entry by entry: its G and its pattern */
#include "m0.h"

double tb_m0_g_at(const tb_mna *mna, const tb_loopvec *lv, size_t k)
{
    for (int o = 0; lv && o < lv->own_count; o++)
        if (lv->own_pos[o] == k)
            return lv->own_g0[o];
    return mna->Gx[k];
}

size_t tb_m0_pattern(const tb_mna *mna, const tb_loopvec *lv, int *Fp, int *Fi, int *Fk)
{
    size_t nz = 0;
    Fp[0] = 0;
    for (size_t j = 0; j < mna->n; j++) {
        for (int k = mna->Ap[j]; k < mna->Ap[j + 1]; k++) {
            if (tb_m0_g_at(mna, lv, (size_t)k) == 0 && mna->Cx[k] == 0)
                continue;
            Fi[nz] = mna->Ai[k];
            if (Fk)
                Fk[nz] = k;
            nz++;
        }
        Fp[j + 1] = (int)nz;
    }
    return nz;
}
