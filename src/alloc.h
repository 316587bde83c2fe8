/* src/alloc.h: the one allocation module: overflow-checked sizes and one growth helper */
#ifndef TB_ALLOC_H
#define TB_ALLOC_H

#include <stddef.h>

#include "tbeta.h"

void *tb_malloc(size_t count, size_t size);
void *tb_calloc(size_t count, size_t size);
void *tb_realloc(void *ptr, size_t count, size_t size);
void tb_free(void *ptr);

/* Makes room for at least need elements of size bytes in *array whose
 * capacity is *cap, doubling; refuses to go past limit elements.
 * TB_ERR_NOMEM on failure or when the limit would be passed (the array is unchanged). */
tb_status tb_grow(void *array, size_t *cap, size_t need, size_t size, size_t limit);

/* Advice that p[0..bytes), freshly allocated and not yet touched, is a large array
 * read at random (a hash table): where the system offers them (Linux transparent
 * huge pages in "madvise" mode), its aligned 2 MiB stretches are backed by huge
 * pages, so that a probe misses the address translation cache far less often. Only
 * a hint: nothing changes where it is not offered, and small arrays are left alone.
 * (Arrays filled in order gain nothing: measured in docs/performance.md.) */
void tb_advise_large(void *p, size_t bytes);

/* A copy of s[0..len) with a terminating NUL; NULL when out of memory. */
char *tb_strndup(const char *s, size_t len);

#endif
