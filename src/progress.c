/* src/progress.c: one progress line on stderr while a long run goes on, on a terminal only */
#include "progress.h"

#include <pthread.h>
#include <stdbool.h>
#include <stdio.h>
#include <stdlib.h>
#include <time.h>
#include <unistd.h>

/* Seconds before the first line (short runs show none), and between two lines. */
#define FIRST_AFTER_S 1.0
#define EVERY_S 0.1

struct tb_progress {
    const char *what;
    pthread_mutex_t lock;
    double start;
    double last;   /* when the line was last written; 0 before the first */
    int width;     /* of the line last written, to clear it */
};

static double now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

tb_progress *tb_progress_new(const char *what)
{
    const char *ci = getenv("CI");
    if (!isatty(STDERR_FILENO) || (ci && ci[0]))
        return NULL;
    tb_progress *p = calloc(1, sizeof(*p));
    if (!p)
        return NULL;
    if (pthread_mutex_init(&p->lock, NULL) != 0) {
        free(p);
        return NULL;
    }
    p->what = what;
    p->start = now();
    return p;
}

void tb_progress_update(void *self, size_t done, size_t total)
{
    tb_progress *p = self;
    if (!p || total == 0)
        return;
    pthread_mutex_lock(&p->lock);
    double t = now();
    if (t - p->start >= FIRST_AFTER_S && t - p->last >= EVERY_S) {
        int n = fprintf(stderr, "\rtbeta: %zu of %zu %s (%.0f %%)", done, total, p->what,
                        100.0 * (double)done / (double)total);
        for (int i = n; i < p->width; i++)
            fputc(' ', stderr);
        fflush(stderr);
        p->width = n > p->width ? n : p->width;
        p->last = t;
    }
    pthread_mutex_unlock(&p->lock);
}

void tb_progress_free(tb_progress *p)
{
    if (!p)
        return;
    if (p->width > 0)
        fprintf(stderr, "\r%*s\r", p->width, "");
    pthread_mutex_destroy(&p->lock);
    free(p);
}
