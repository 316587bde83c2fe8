/* bench/parts.c: tbeta's per-point work and its parts, timed in process through tbeta's own code, for profiling */
/*
 * Usage: parts NETLIST [REPEATS [LOOP]]
 * (Not the benchmark's floor: bench/klu_floor.c measures that with code of its
 * own. This program goes through tbeta's reader, stamps and solver wrapper, to
 * split tbeta's per-point time into its parts.)
 * Reads NETLIST with tb_circuit_read, stamps it once, runs KLU's symbolic
 * analysis once and a pivoted factorization at the first sweep frequency,
 * then times per-point loops over the netlist's .ac grid, each the best of
 * REPEATS (default 3) passes over every frequency:
 *   floor     tb_mna_values + tb_solver_refactor + tb_solver_solve (1 RHS): the floor
 *   klu       tb_mna_values + klu_z_refactor + klu_z_solve (1 RHS): KLU alone,
 *             without tb_solver's pivot check
 *   loop      tb_mna_values + tb_solver_refactor + tb_loop_eval: tbeta's whole
 *             per-point work, in process
 * and, to account for the difference, its parts:
 *   values    tb_mna_values
 *   refactor  tb_mna_values + klu_z_refactor (KLU's row scaling included)
 *   rcond     klu_z_rcond, the pivot check of tb_solver_refactor
 *   solve1    klu_z_solve with 1 right-hand side
 *   solve2    klu_z_solve with 2 right-hand sides (x and w of one loop)
 * LOOP names one of these loops (e.g. "klu") to time only that one, for
 * profiling under perf or callgrind.
 * Prints one "key value" line per figure (seconds, counts) on stdout.
 * The benchmark includes klu.h itself to time KLU bare; the library keeps
 * that header to src/solve.c.
 */
#include <klu.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "alloc.h"
#include "circuit.h"
#include "loop.h"
#include "mna.h"
#include "solve.h"
#include "grid.h"
#include "tbeta.h"

static const double TWO_PI = 6.28318530717958647692528676655900577;

typedef enum {
    RUN_FLOOR,
    RUN_KLU,
    RUN_LOOP,
    RUN_VALUES,
    RUN_REFACTOR,
    RUN_RCOND,
    RUN_SOLVE1,
    RUN_SOLVE2,
    RUN_COUNT
} run_kind;

static const char *const run_names[] = {"floor_s",   "klu_s",     "loop_s",   "values_s",
                                         "refactor_s", "rcond_s", "solve1_s", "solve2_s"};
_Static_assert(sizeof run_names / sizeof run_names[0] == RUN_COUNT, "run_names out of step");

/* Everything the timed loops use, set up once. */
typedef struct {
    tb_circuit *ckt;
    tb_mna *mna;
    tb_solver *solver;
    tb_loop_work *work;
    klu_common common;
    klu_symbolic *symbolic;
    klu_numeric *numeric;
    double *freqs;
    size_t npoints;
    double *Mx;
    double complex *rhs;
    tb_point *row;
} bench;

static double now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

static int fail(const char *what)
{
    fprintf(stderr, "parts: %s failed\n", what);
    return 1;
}

static void print_diags(const tb_diag *diag)
{
    char buf[4096];
    for (size_t i = 0; i < tb_diag_count(diag); i++) {
        tb_diag_format(diag, i, buf, sizeof buf);
        fputs(buf, stderr);
    }
}

/* Reads, stamps, analyses; prints the time of each step. */
static int setup(bench *b, const char *path)
{
    tb_diag *diag = tb_diag_new();
    if (!diag)
        return fail("tb_diag_new");
    double t0 = now();
    tb_status st = tb_circuit_read(path, diag, &b->ckt);
    double t1 = now();
    if (st == TB_OK)
        st = tb_mna_build(b->ckt, diag, &b->mna);
    double t2 = now();
    if (st == TB_OK)
        st = tb_solver_new(b->mna, &b->solver);
    double t3 = now();
    print_diags(diag);
    tb_diag_free(diag);
    if (st != TB_OK)
        return fail(tb_status_str(st));
    printf("read_s %.6f\nstamp_s %.6f\nanalyze_s %.6f\n", t1 - t0, t2 - t1, t3 - t2);
    printf("nodes %zu\nunknowns %zu\nnnz %zu\n", b->ckt->node_count - 1, b->mna->n, b->mna->nnz);
    return 0;
}

/* Grid, work arrays, the first pivoted factorization (tb_solver and bare KLU). */
static int prepare(bench *b)
{
    b->npoints = tb_grid_count(&b->ckt->ac);
    b->freqs = tb_malloc(b->npoints, sizeof(double));
    b->Mx = tb_malloc(2 * b->mna->nnz, sizeof(double));
    b->rhs = tb_malloc(2 * b->mna->n, sizeof(double complex));
    b->row = tb_calloc(b->mna->loop_count, sizeof(tb_point));
    if (b->npoints == 0 || !b->freqs || !b->Mx || !b->rhs || !b->row)
        return fail("allocation");
    if (tb_loop_work_new(b->mna, &b->work))
        return fail("tb_loop_work_new");
    tb_grid_fill(&b->ckt->ac, b->freqs);
    size_t culprit = 0;
    tb_mna_values(b->mna, TWO_PI * b->freqs[0], b->Mx);
    double t0 = now();
    if (tb_solver_factor(b->solver, b->Mx, &culprit))
        return fail("tb_solver_factor");
    printf("factor_s %.6f\npoints %zu\n", now() - t0, b->npoints);
    klu_defaults(&b->common);
    b->symbolic = klu_analyze((int)b->mna->n, b->mna->Ap, b->mna->Ai, &b->common);
    if (!b->symbolic)
        return fail("klu_analyze");
    b->numeric = klu_z_factor(b->mna->Ap, b->mna->Ai, b->Mx, b->symbolic, &b->common);
    if (!b->numeric || b->common.status != KLU_OK)
        return fail("klu_z_factor");
    printf("lu_nnz %.0f\nblocks %d\n", (double)b->numeric->lnz + (double)b->numeric->unz,
           b->symbolic->nblocks);
    return 0;
}

/* b in the first column of rhs; with two columns, u of the first loop (or b again) in the second. */
static void put_rhs(const bench *b, int ncols)
{
    size_t n = b->mna->n;
    memset(b->rhs, 0, (size_t)ncols * n * sizeof(double complex));
    tb_svec_axpy(&b->mna->b, 1.0, b->rhs);
    if (ncols == 2)
        tb_svec_axpy(b->mna->loop_count ? &b->mna->loops[0].u : &b->mna->b, 1.0, b->rhs + n);
}

static int bare_refactor(bench *b)
{
    return klu_z_refactor(b->mna->Ap, b->mna->Ai, b->Mx, b->symbolic, b->numeric, &b->common);
}

static int bare_solve(bench *b, int ncols)
{
    put_rhs(b, ncols);
    return klu_z_solve(b->symbolic, b->numeric, (int)b->mna->n, ncols, (double *)b->rhs,
                       &b->common);
}

/* The work of one point; 1 when it succeeded. */
static int point(bench *b, run_kind kind, double omega)
{
    size_t culprit = 0;
    if (kind != RUN_RCOND && kind != RUN_SOLVE1 && kind != RUN_SOLVE2)
        tb_mna_values(b->mna, omega, b->Mx);
    switch (kind) {
    case RUN_FLOOR:
        put_rhs(b, 1);
        return !tb_solver_refactor(b->solver, b->Mx, 1e-6, &culprit) &&
               !tb_solver_solve(b->solver, b->rhs, 1);
    case RUN_KLU:
        return bare_refactor(b) && bare_solve(b, 1);
    case RUN_LOOP:
        return !tb_solver_refactor(b->solver, b->Mx, 1e-6, &culprit) &&
               !tb_loop_eval(b->mna, b->solver, b->Mx, omega, b->work, b->row);
    case RUN_VALUES:
        return 1;
    case RUN_REFACTOR:
        return bare_refactor(b);
    case RUN_RCOND:
        return klu_z_rcond(b->symbolic, b->numeric, &b->common);
    case RUN_SOLVE1:
        return bare_solve(b, 1);
    case RUN_SOLVE2:
        return bare_solve(b, 2);
    case RUN_COUNT:
        break;
    }
    return 0;
}

/* One timed pass over the grid; returns seconds per point, or -1 on failure. */
static double pass(bench *b, run_kind kind)
{
    double t0 = now();
    for (size_t i = 0; i < b->npoints; i++)
        if (!point(b, kind, TWO_PI * b->freqs[i]))
            return -1;
    return (now() - t0) / (double)b->npoints;
}

static double best_of(bench *b, run_kind kind, int repeats)
{
    double best = -1;
    for (int r = 0; r < repeats; r++) {
        double t = pass(b, kind);
        if (t < 0)
            return -1;
        if (best < 0 || t < best)
            best = t;
    }
    return best;
}

static void teardown(bench *b)
{
    if (b->numeric)
        klu_z_free_numeric(&b->numeric, &b->common);
    if (b->symbolic)
        klu_free_symbolic(&b->symbolic, &b->common);
    tb_loop_work_free(b->work);
    tb_solver_free(b->solver);
    tb_mna_free(b->mna);
    tb_circuit_free(b->ckt);
    tb_free(b->freqs);
    tb_free(b->Mx);
    tb_free(b->rhs);
    tb_free(b->row);
}

int main(int argc, char **argv)
{
    if (argc < 2 || argc > 4) {
        fputs("usage: floor NETLIST [REPEATS [LOOP]]\n", stderr);
        return 2;
    }
    int repeats = argc >= 3 ? atoi(argv[2]) : 3;
    const char *only = argc == 4 ? argv[3] : NULL;
    bench b = {0};
    int rc = setup(&b, argv[1]) || prepare(&b);
    for (int k = 0; rc == 0 && k < RUN_COUNT; k++) {
        size_t len = only ? strlen(only) : 0;
        if (only && (strncmp(run_names[k], only, len) != 0 || run_names[k][len] != '_'))
            continue;
        double t = best_of(&b, (run_kind)k, repeats < 1 ? 1 : repeats);
        if (t < 0)
            rc = fail(run_names[k]);
        else
            printf("%s %.9f\n", run_names[k], t);
    }
    teardown(&b);
    return rc;
}
