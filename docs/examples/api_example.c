/* docs/examples/api_example.c: a complete program on tbeta's C library (docs/api.md).
 * Reads a netlist, analyses it and prints, for every loop, T and A at DC, the phase
 * margin with its verdict, and the closed-loop -3 dB frequency; exit 1 when a loop is
 * not stable. Build against an installed tbeta:
 *     cc api_example.c $(pkg-config --cflags --libs tbeta) -o api_example */
#include <complex.h>
#include <stdio.h>

#include <tbeta.h>

static void print_diagnostics(const tb_diag *diag)
{
    char line[2048];
    for (size_t i = 0; i < tb_diag_count(diag); i++) {
        tb_diag_format(diag, i, line, sizeof line);
        fputs(line, stderr);
    }
}

int main(int argc, char **argv)
{
    if (argc != 2) {
        fprintf(stderr, "usage: %s NETLIST\n", argv[0]);
        return 2;
    }
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    tb_result *res = NULL;
    tb_options opt;
    tb_options_init(&opt); /* every field at its default: DC solved, stability on */
    tb_status st = diag ? tb_circuit_read(argv[1], diag, &ckt) : TB_ERR_NOMEM;
    if (st == TB_OK)
        st = tb_analyse(ckt, &opt, diag, &res);
    if (diag)
        print_diagnostics(diag);
    if (st != TB_OK) {
        fprintf(stderr, "%s: %s\n", argv[1], tb_status_str(st));
        tb_circuit_free(ckt);
        tb_diag_free(diag);
        return 2;
    }
    int unstable = 0;
    for (size_t l = 0; l < tb_result_loops(res); l++) {
        tb_measures m;
        tb_stability s;
        tb_measure_loop(res, l, &m);
        tb_stability_loop(res, l, &s);
        printf("loop %s\n", tb_circuit_loop_name(ckt, l));
        if (m.fig.has_T)
            printf("  T(0)   %.6g\n", creal(m.dc.T));
        if (m.fig.has_A)
            printf("  A(0)   %.6g\n", creal(m.dc.A));
        if (s.has_phase_margin)
            printf("  PM     %.3f deg\n", s.phase_margin_deg);
        if (m.has_f3db)
            printf("  f-3dB  %.6g Hz\n", m.f3db_closed_hz);
        printf("  verdict %s\n", tb_verdict_str(s.verdict));
        unstable += s.verdict != TB_VERDICT_STABLE;
    }
    tb_result_free(res);
    tb_circuit_free(ckt);
    tb_diag_free(diag);
    return unstable ? 1 : 0;
}
