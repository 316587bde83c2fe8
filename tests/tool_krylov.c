/* tests/tool_krylov.c: prints the poles src/krylov.c finds near a shift, for tests/ref/krylov_check.py */
/*
 * Usage: tool_krylov NETLIST F_HZ WANT
 * One block for the closed loop and one for each .loop's open loop (its source at
 * gain zero):
 *   closed|open NAME shift SHIFT_HZ count K converged 0|1 solves N
 *   RE IM RESIDUAL            (K lines, nearest the shift first)
 * Exit status 0, or 2 when the netlist cannot be read or a run fails.
 */
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>

#include "circuit.h"
#include "krylov.h"
#include "sweep.h"

static void print_found(const char *kind, const char *name, const tb_krylov_found *k)
{
    printf("%s %s shift %.17g count %zu converged %d solves %zu\n", kind, name, k->shift_hz, k->count,
           k->converged ? 1 : 0, k->solves);
    for (size_t i = 0; i < k->count; i++)
        printf("%.17g %.17g %.3g %.3g\n", creal(k->poles[i].s), cimag(k->poles[i].s), k->poles[i].residual, k->poles[i].backward);
}

int main(int argc, char **argv)
{
    if (argc != 4) {
        fprintf(stderr, "usage: tool_krylov NETLIST F_HZ WANT\n");
        return 2;
    }
    double f = strtod(argv[2], NULL);
    size_t want = (size_t)strtoul(argv[3], NULL, 10);
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    tb_sweep *sw = NULL;
    tb_status st = diag ? tb_circuit_read(argv[1], diag, &ckt) : TB_ERR_NOMEM;
    if (!st)
        st = tb_sweep_new(ckt, 1e-6, 1, diag, &sw);
    tb_krylov_found k;
    if (!st)
        st = tb_krylov_near(tb_sweep_probe(sw), f, SIZE_MAX, want, &k);
    if (!st)
        print_found("closed", "-", &k);
    for (size_t l = 0; !st && l < ckt->loop_count; l++) {
        st = tb_krylov_near(tb_sweep_probe(sw), f, l, want, &k);
        if (!st)
            print_found("open", ckt->elems[ckt->loops[l].elem].name, &k);
    }
    if (st)
        fprintf(stderr, "tool_krylov: %s: %s\n", argv[1], tb_status_str(st));
    tb_sweep_free(sw);
    tb_circuit_free(ckt);
    tb_diag_free(diag);
    return st ? 2 : 0;
}
