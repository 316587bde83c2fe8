/* src/probe.c: every loop's feedback quantities at one arbitrary frequency by a fresh factorization */
#include "probe.h"

static const double TWO_PI = 6.28318530717958647692528676655900577;

tb_status tb_probe_eval(tb_probe *probe, double f, size_t *culprit)
{
    double omega = TWO_PI * f;
    tb_mna_values(probe->mna, omega, probe->Mx);
    probe->evaluations++;
    tb_status st = tb_solver_refactor(probe->solver, probe->Mx, probe->rcond_drop, culprit);
    if (st)
        return st;
    return tb_loop_eval(probe->mna, probe->solver, probe->Mx, omega, probe->work, probe->row);
}
