/* src/probe.c: fresh factorizations at new frequencies on the sweep's solver, never the same matrix twice */
#include "probe.h"

#include "units.h"

tb_probe tb_probe_make(const tb_mna *mna, tb_solver *solver, tb_loop_work *work, double *Mx, tb_point *row,
                       double rcond_drop)
{
    return (tb_probe){.mna = mna, .solver = solver, .work = work, .Mx = Mx, .row = row, .rcond_drop = rcond_drop};
}

tb_status tb_probe_factor(tb_probe *probe, double f, bool pivot, size_t *culprit)
{
    if (probe->held && probe->held_f == f && (probe->held_pivoted || !pivot))
        return TB_OK;
    probe->held = false;
    probe->row_valid = false;
    probe->one_valid = false;
    tb_mna_values(probe->mna, TB_TWO_PI * f, probe->Mx);
    probe->factorizations++;
    tb_status st = pivot ? tb_solver_factor(probe->solver, probe->Mx, culprit)
                         : tb_solver_refactor(probe->solver, probe->Mx, probe->rcond_drop, culprit);
    if (st)
        return st;
    probe->held = true;
    probe->held_f = f;
    probe->held_pivoted = pivot;
    return TB_OK;
}

tb_status tb_probe_eval(tb_probe *probe, double f, size_t *culprit)
{
    probe->evaluations++;
    tb_status st = tb_probe_factor(probe, f, false, culprit);
    if (st || probe->row_valid)
        return st;
    st = tb_loop_eval(probe->mna, probe->solver, probe->Mx, TB_TWO_PI * f, probe->work, probe->row);
    probe->row_valid = st == TB_OK;
    return st;
}

tb_status tb_probe_eval_loop(tb_probe *probe, double f, size_t l, size_t *culprit)
{
    probe->evaluations++;
    tb_status st = tb_probe_factor(probe, f, false, culprit);
    if (st || probe->row_valid || (probe->one_valid && probe->one == l))
        return st;
    st = tb_loop_eval_one(probe->mna, probe->solver, probe->Mx, TB_TWO_PI * f, probe->work, l, probe->row);
    probe->one_valid = st == TB_OK;
    probe->one = l;
    return st;
}

tb_status tb_probe_q(tb_probe *probe, double f, size_t l, double complex *q, size_t *culprit)
{
    probe->evaluations++;
    tb_status st = tb_probe_factor(probe, f, false, culprit);
    if (st)
        return st;
    /* the loop's w column is overwritten (unrefined): no cached evaluation stays valid */
    probe->row_valid = false;
    probe->one_valid = false;
    return tb_loop_q(probe->mna, probe->solver, probe->work, l, q);
}

tb_status tb_probe_factor_gain(tb_probe *probe, double f, size_t l, double d, size_t *culprit)
{
    probe->held = false;
    probe->row_valid = false;
    probe->one_valid = false;
    const tb_loopvec *lv = &probe->mna->loops[l];
    tb_mna_values_gain(probe->mna, TB_TWO_PI * f, lv, lv->k * d, probe->Mx);
    probe->factorizations++;
    return tb_solver_factor(probe->solver, probe->Mx, culprit);
}

tb_solver *tb_probe_take_solver(tb_probe *probe)
{
    probe->held = false;
    probe->row_valid = false;
    probe->one_valid = false;
    return probe->solver;
}
