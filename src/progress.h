/* src/progress.h: one progress line on stderr while a long run goes on, on a terminal only */
#ifndef TB_PROGRESS_H
#define TB_PROGRESS_H

#include <stddef.h>

typedef struct tb_progress tb_progress;

/* A progress line about `what` ("sweep points", "netlists"), or NULL when none is to be shown:
 * stderr is not a terminal, the CI environment variable is set (a build log), or out of memory.
 * Nothing is shown before the run has taken a second; no colour is ever used. */
tb_progress *tb_progress_new(const char *what);

/* A tb_progress_fn (self: a tb_progress or NULL): rewrites the line with done of total, at most
 * ten times a second. Safe to call from several threads. */
void tb_progress_update(void *self, size_t done, size_t total);

/* Clears the line (when one was shown) and frees p (NULL is fine). */
void tb_progress_free(tb_progress *p);

#endif
