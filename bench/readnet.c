/* bench/readnet.c: times reading one netlist into a circuit ready for stamping, in process */
/*
 * Usage: readnet NETLIST [REPEATS [nnz]]
 * Calls tb_circuit_read REPEATS times (default 5): opening and reading the file,
 * lexing, parsing, the name index, the circuit's checks and the topology checks,
 * then frees the circuit. Prints one "key value" line per figure on stdout:
 *   bytes        the file's size
 *   wall_s       median wall-clock seconds of one read
 *   cpu_s        median CPU seconds (user + system) of one read
 *   mb_per_s     bytes / cpu_s / 10^6 (CPU time: less disturbed by other work)
 *   wall_mb_per_s  bytes / wall_s / 10^6
 * With "nnz", after the timed reads, reads once more, stamps (tb_mna_build) and prints
 *   unknowns, nnz  the size of M and its stored nonzeros
 * Peak memory is measured from outside (bench/peakrss runs `readnet NETLIST 1`).
 */
#include <stdio.h>
#include <stdlib.h>
#include <sys/resource.h>
#include <sys/stat.h>
#include <time.h>

#include "mna.h"
#include "tbeta.h"

#define MAX_REPEATS 64

static double now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

static double cpu_now(void)
{
    struct rusage ru;
    getrusage(RUSAGE_SELF, &ru);
    return (double)ru.ru_utime.tv_sec + 1e-6 * (double)ru.ru_utime.tv_usec + (double)ru.ru_stime.tv_sec +
           1e-6 * (double)ru.ru_stime.tv_usec;
}

static int by_value(const void *a, const void *b)
{
    double x = *(const double *)a;
    double y = *(const double *)b;
    return (x > y) - (x < y);
}

static double median(double *v, int n)
{
    qsort(v, (size_t)n, sizeof v[0], by_value);
    return n % 2 ? v[n / 2] : 0.5 * (v[n / 2 - 1] + v[n / 2]);
}

/* Reads and stamps path once; prints the size of M. */
static int print_nnz(const char *path)
{
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    tb_mna *mna = NULL;
    tb_status st = diag ? tb_circuit_read(path, diag, &ckt) : TB_ERR_NOMEM;
    if (st == TB_OK)
        st = tb_mna_build(ckt, diag, &mna);
    if (st == TB_OK)
        printf("unknowns %zu\nnnz %zu\n", mna->n, mna->nnz);
    else
        fprintf(stderr, "readnet: %s: %s\n", path, tb_status_str(st));
    tb_mna_free(mna);
    tb_circuit_free(ckt);
    tb_diag_free(diag);
    return st == TB_OK ? 0 : 1;
}

int main(int argc, char **argv)
{
    if (argc < 2) {
        fprintf(stderr, "usage: readnet NETLIST [REPEATS]\n");
        return 2;
    }
    int repeats = argc > 2 ? atoi(argv[2]) : 5;
    if (repeats < 1 || repeats > MAX_REPEATS)
        repeats = 5;
    struct stat stt;
    if (stat(argv[1], &stt) != 0) {
        perror(argv[1]);
        return 2;
    }
    double wall[MAX_REPEATS];
    double cpu[MAX_REPEATS];
    for (int r = 0; r < repeats; r++) {
        tb_diag *diag = tb_diag_new();
        tb_circuit *ckt = NULL;
        double w0 = now();
        double c0 = cpu_now();
        tb_status st = tb_circuit_read(argv[1], diag, &ckt);
        cpu[r] = cpu_now() - c0;
        wall[r] = now() - w0;
        if (st != TB_OK) {
            fprintf(stderr, "readnet: %s: %s\n", argv[1], tb_status_str(st));
            tb_diag_free(diag);
            return 1;
        }
        tb_circuit_free(ckt);
        tb_diag_free(diag);
    }
    double w = median(wall, repeats);
    double c = median(cpu, repeats);
    printf("bytes %lld\nwall_s %.4f\ncpu_s %.4f\nmb_per_s %.1f\nwall_mb_per_s %.1f\n", (long long)stt.st_size, w, c,
           (double)stt.st_size / c / 1e6, (double)stt.st_size / w / 1e6);
    return argc > 3 ? print_nnz(argv[1]) : 0;
}
