/* bench/spread_mc.c: Monte Carlo throughput against bare refactor + solve on the same matrices */
/*
 * Usage: spread_mc NETLIST SAMPLES [JOBS]
 * NETLIST must hold a .spread card. Times, in process:
 *   mc        tb_spread_monte_carlo with SAMPLES samples on JOBS threads (default 1): every
 *             sample a whole analysis (the point loop, crossings and margins, closed loop,
 *             step response) on the nominal circuit's symbolic analysis
 *   floor     SAMPLES passes over the grid of tb_mna_values + tb_solver_refactor +
 *             tb_solver_solve (one right-hand side) on the nominal matrices, one thread:
 *             the least any Monte Carlo of the grid could cost
 * the factorizations one full analysis of the nominal circuit spends (tb_result_stats) and the
 * mean a sample spent (tb_spreadset.factorizations: a sample computes only what the spread
 * records), which say where a sample's time beyond the floor goes: ratio_per_factorization is
 * mc over the floor's cost per factorization times the samples' factorizations. Prints "key
 * value" lines.
 */
#include <stdio.h>
#include <stdlib.h>
#include <time.h>

#include "circuit.h"
#include "grid.h"
#include "mna.h"
#include "solve.h"
#include "spread.h"
#include "spreadset.h"
#include "tbeta.h"

static double now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

static double floor_time(const tb_circuit *ckt, size_t samples)
{
    tb_mna *mna = NULL;
    tb_solver *solver = NULL;
    size_t n = tb_grid_count(&ckt->ac), culprit = 0;
    double *f = malloc(n * sizeof(double));
    double *Mx = NULL;
    double complex *x = NULL;
    if (!f || tb_mna_build(ckt, NULL, &mna) || tb_solver_new(mna, &solver))
        exit(2);
    Mx = malloc(2 * mna->nnz * sizeof(double));
    x = malloc(mna->n * sizeof(double complex));
    if (!Mx || !x)
        exit(2);
    tb_grid_fill(&ckt->ac, f);
    tb_mna_values(mna, 2 * 3.14159265358979 * f[0], Mx);
    if (tb_solver_factor(solver, Mx, &culprit))
        exit(2);
    double t0 = now();
    for (size_t s = 0; s < samples; s++)
        for (size_t i = 0; i < n; i++) {
            tb_mna_values(mna, 2 * 3.14159265358979 * f[i], Mx);
            if (tb_solver_refactor(solver, Mx, 1e-6, &culprit))
                exit(2);
            for (size_t k = 0; k < mna->n; k++)
                x[k] = 0;
            tb_svec_axpy(&mna->b, 1.0, x);
            if (tb_solver_solve(solver, x, 1))
                exit(2);
        }
    double t = now() - t0;
    free(f);
    free(Mx);
    free(x);
    tb_solver_free(solver);
    tb_mna_free(mna);
    return t;
}

int main(int argc, char **argv)
{
    if (argc < 3) {
        fprintf(stderr, "usage: spread_mc NETLIST SAMPLES [JOBS]\n");
        return 2;
    }
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    if (tb_circuit_read(argv[1], diag, &ckt) != TB_OK)
        return 2;
    tb_spread_options opt;
    tb_spread_options_init(&opt);
    opt.samples = (size_t)strtoul(argv[2], NULL, 10);
    opt.jobs = argc > 3 ? (unsigned)strtoul(argv[3], NULL, 10) : 1;
    tb_result *res = NULL;
    if (tb_analyse(ckt, &opt.analysis, diag, &res) != TB_OK)
        return 2;
    tb_stats st;
    tb_result_stats(res, &st);
    tb_result_free(res);
    double t0 = now();
    tb_spreadset *set = NULL;
    if (tb_spread_monte_carlo(ckt, &opt, diag, &set) != TB_OK)
        return 2;
    double mc = now() - t0;
    size_t analysed = 0;
    tb_spreadset_passed(set, &analysed);
    double fl = floor_time(ckt, opt.samples);
    printf("unknowns %zu\npoints %zu\nsamples %zu\nanalysed %zu\njobs %u\n", tb_circuit_unknowns(ckt),
           tb_grid_count(&ckt->ac), opt.samples, analysed, opt.jobs);
    printf("grid_factorizations %zu\nprobe_factorizations %zu\nstep_factorizations %zu\n", st.grid_factorizations,
           st.probe_factorizations, st.step_factorizations);
    /* the floor's cost of one factorization and solve, times the factorizations of the samples */
    double per = fl / ((double)opt.samples * (double)tb_grid_count(&ckt->ac));
    double all = 0;
    for (size_t r = 0; r < set->runs; r++)
        all += (double)set->factorizations[r];
    all /= (double)(set->runs ? set->runs : 1);
    printf("sample_factorizations_mean %.1f\n", all);
    printf("mc_s %.6g\nfloor_s %.6g\nratio %.4g\nratio_per_factorization %.4g\n", mc, fl, mc / fl,
           mc / (per * all * (double)opt.samples));
    tb_spreadset_free(set);
    tb_circuit_free(ckt);
    tb_diag_free(diag);
    return 0;
}
