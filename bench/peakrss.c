/* bench/peakrss.c: runs one command, prints its wall-clock time and peak resident memory */
/*
 * Usage: peakrss OUTFILE COMMAND [ARG...]
 * Runs COMMAND with its standard output sent to OUTFILE (standard error is
 * left alone), waits for it, and prints on standard output
 *   wall_s      seconds from fork to the end of the wait (CLOCK_MONOTONIC)
 *   cpu_s       the child's user plus system time, every thread of it
 *   maxrss_kib  the child's peak resident set size, getrusage(RUSAGE_CHILDREN)
 *               (Linux reports ru_maxrss in KiB)
 * Exit status 0 when the command exited with 0, else 1.
 */
#include <fcntl.h>
#include <stdio.h>
#include <sys/resource.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>

static double now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

/* In the child: stdout to path, then exec; never returns. */
static void start(const char *path, char **argv)
{
    int fd = open(path, O_WRONLY | O_CREAT | O_TRUNC, 0644);
    if (fd < 0 || dup2(fd, STDOUT_FILENO) < 0) {
        perror(path);
        _exit(127);
    }
    close(fd);
    execvp(argv[0], argv);
    perror(argv[0]);
    _exit(127);
}

int main(int argc, char **argv)
{
    if (argc < 3) {
        fputs("usage: peakrss OUTFILE COMMAND [ARG...]\n", stderr);
        return 2;
    }
    fflush(stdout);
    double t0 = now();
    pid_t pid = fork();
    if (pid < 0) {
        perror("fork");
        return 1;
    }
    if (pid == 0)
        start(argv[1], argv + 2);
    int status = 0;
    if (waitpid(pid, &status, 0) < 0) {
        perror("waitpid");
        return 1;
    }
    double wall = now() - t0;
    struct rusage ru;
    if (getrusage(RUSAGE_CHILDREN, &ru) != 0) {
        perror("getrusage");
        return 1;
    }
    double cpu = (double)ru.ru_utime.tv_sec + 1e-6 * (double)ru.ru_utime.tv_usec + (double)ru.ru_stime.tv_sec +
                 1e-6 * (double)ru.ru_stime.tv_usec;
    printf("wall_s %.6f\ncpu_s %.6f\nmaxrss_kib %ld\n", wall, cpu, ru.ru_maxrss);
    if (!WIFEXITED(status) || WEXITSTATUS(status) != 0) {
        fprintf(stderr, "peakrss: %s did not finish cleanly (status %d)\n", argv[2], status);
        return 1;
    }
    return 0;
}
