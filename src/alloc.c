/* src/alloc.c: the one allocation module: overflow-checked sizes and one growth helper.
 * Tests inject allocation failures by linking with -Wl,--wrap=malloc (tests/test_oom.c). */
#define _DEFAULT_SOURCE /* MADV_HUGEPAGE (Linux) in <sys/mman.h> */
#include "alloc.h"

#include <stdint.h>
#include <stdlib.h>
#include <string.h>
#include <sys/mman.h>

static int overflows(size_t count, size_t size)
{
    return size != 0 && count > SIZE_MAX / size;
}

void *tb_malloc(size_t count, size_t size)
{
    if (overflows(count, size))
        return NULL;
    return malloc(count * size == 0 ? 1 : count * size);
}

void *tb_calloc(size_t count, size_t size)
{
    if (overflows(count, size))
        return NULL;
    return calloc(count == 0 ? 1 : count, size == 0 ? 1 : size);
}

void *tb_realloc(void *ptr, size_t count, size_t size)
{
    if (overflows(count, size))
        return NULL;
    return realloc(ptr, count * size == 0 ? 1 : count * size);
}

void tb_free(void *ptr)
{
    free(ptr);
}

tb_status tb_grow(void *array, size_t *cap, size_t need, size_t size, size_t limit)
{
    void **slot = array;
    if (need <= *cap)
        return TB_OK;
    if (need > limit)
        return TB_ERR_NOMEM;
    size_t next = *cap ? *cap : 8;
    while (next < need)
        next = next > limit / 2 ? limit : next * 2;
    void *bigger = tb_realloc(*slot, next, size);
    if (!bigger)
        return TB_ERR_NOMEM;
    *slot = bigger;
    *cap = next;
    return TB_OK;
}

char *tb_strndup(const char *s, size_t len)
{
    char *copy = tb_malloc(len + 1, 1);
    if (!copy)
        return NULL;
    memcpy(copy, s, len);
    copy[len] = '\0';
    return copy;
}

/* Huge pages of 2 MiB (x86-64, arm64 with 4 KiB pages); arrays below two of them are left alone. */
#define HUGE_PAGE ((size_t)2 << 20)

void tb_advise_large(void *p, size_t bytes)
{
#ifdef MADV_HUGEPAGE
    if (!p || bytes < 2 * HUGE_PAGE)
        return;
    uintptr_t start = ((uintptr_t)p + HUGE_PAGE - 1) & ~(uintptr_t)(HUGE_PAGE - 1);
    uintptr_t end = ((uintptr_t)p + bytes) & ~(uintptr_t)(HUGE_PAGE - 1);
    if (end > start)
        (void)madvise((void *)start, end - start, MADV_HUGEPAGE); /* a hint: failure changes nothing */
#else
    (void)p;
    (void)bytes;
#endif
}
