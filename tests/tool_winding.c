/* tests/tool_winding.c: prints the argument-principle counts of src/winding.c for tests/ref/winding_check.py */
/*
 * Usage: tool_winding NETLIST
 * For every .loop of NETLIST, one line
 *   NAME closed RHP DEGREE ORIGIN AXIS open RHP DEGREE ORIGIN AXIS evals N
 * with "-" for the four numbers of a count that was not made (the reason on stderr).
 * The walk starts on the netlist's own .ac range. Exit status 0, or 2 when the
 * netlist cannot be read or analysed.
 */
#include <stdio.h>

#include "alloc.h"
#include "circuit.h"
#include "grid.h"
#include "sweep.h"
#include "winding.h"

static void print_count(const char *kind, const tb_winding_count *c)
{
    if (c->counted)
        printf(" %s %zu %zu %zu %zu", kind, c->rhp, c->degree, c->at_origin, c->on_axis);
    else
        printf(" %s - - - -", kind);
}

int main(int argc, char **argv)
{
    if (argc != 2) {
        fprintf(stderr, "usage: tool_winding NETLIST\n");
        return 2;
    }
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    tb_sweep *sw = NULL;
    tb_status st = diag ? tb_circuit_read(argv[1], diag, &ckt) : TB_ERR_NOMEM;
    if (!st)
        st = tb_sweep_new(ckt, 1e-6, 1, diag, &sw);
    size_t np = st ? 0 : tb_grid_count(&ckt->ac);
    double *f = np > 1 ? tb_malloc(np, sizeof(double)) : NULL;
    if (!st && !f)
        st = np > 1 ? TB_ERR_NOMEM : TB_ERR_USAGE;
    if (!st)
        tb_grid_fill(&ckt->ac, f);
    for (size_t l = 0; !st && l < ckt->loop_count; l++) {
        tb_winding w;
        st = tb_winding_run(tb_sweep_probe(sw), l, f[0], f[np - 1], &w);
        if (st)
            break;
        printf("%s", ckt->elems[ckt->loops[l].elem].name);
        print_count("closed", &w.closed);
        print_count("open", &w.open);
        printf(" evals %zu\n", w.evaluations);
        if (!w.closed.counted)
            fprintf(stderr, "tool_winding: %s closed: %s\n", argv[1], w.closed.why);
        if (!w.open.counted)
            fprintf(stderr, "tool_winding: %s open: %s\n", argv[1], w.open.why);
    }
    if (st)
        fprintf(stderr, "tool_winding: %s: %s\n", argv[1], tb_status_str(st));
    tb_free(f);
    tb_sweep_free(sw);
    tb_circuit_free(ckt);
    tb_diag_free(diag);
    return st ? 2 : 0;
}
