/* bench/counts.c: the factorizations one analysis spends, from tb_result_stats
 * Usage: counts NETLIST [--all-sources]   prints "key value" lines */
#include <stdio.h>
#include <string.h>

#include "tbeta.h"

int main(int argc, char **argv)
{
    if (argc < 2) {
        fprintf(stderr, "usage: counts NETLIST [--all-sources]\n");
        return 2;
    }
    tb_options opt;
    tb_options_init(&opt);
    opt.census = argc > 2 && strcmp(argv[2], "--all-sources") == 0;
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    tb_result *res = NULL;
    tb_stats st = {0};
    tb_status rc = diag ? tb_circuit_read(argv[1], diag, &ckt) : TB_ERR_NOMEM;
    if (!rc)
        rc = tb_analyse(ckt, &opt, diag, &res);
    if (!rc)
        rc = tb_result_stats(res, &st);
    if (!rc) {
        printf("grid_points %zu\ngrid_factorizations %zu\ngrid_pivoted %zu\ngrid_solve_columns %zu\n"
               "probe_factorizations %zu\nstep_factorizations %zu\nprobe_solve_columns %zu\n",
               st.grid_points, st.grid_factorizations, st.grid_pivoted, st.grid_solve_columns,
               st.probe_factorizations, st.step_factorizations, st.probe_solve_columns);
    } else {
        fprintf(stderr, "counts: %s: %s\n", argv[1], tb_status_str(rc));
    }
    tb_result_free(res);
    tb_circuit_free(ckt);
    tb_diag_free(diag);
    return rc ? 2 : 0;
}
