/* src/suggest.c: the existing name closest to a misspelt one (banded optimal string alignment) */
#include "suggest.h"

#include <ctype.h>
#include <stdbool.h>
#include <string.h>

#define ROW (TB_SUGGEST_MAX_LEN + 2)
#define BUCKETS 64

static inline int fold(char c)
{
    return tolower((unsigned char)c);
}

void tb_suggest_init(tb_suggester *s, const char *name)
{
    size_t len = name ? strlen(name) : 0;
    s->name = name;
    s->len = len;
    s->limit = len == 0 || len > TB_SUGGEST_MAX_LEN ? 0 : (len / 3 > 1 ? len / 3 : 1);
    s->best = NULL;
    s->best_dist = 0;
}

/* Case-insensitive byte order, then plain byte order: the tie-break. */
static int order(const char *a, const char *b)
{
    size_t i = 0;
    while (a[i] && fold(a[i]) == fold(b[i]))
        i++;
    int d = fold(a[i]) - fold(b[i]);
    return d ? d : strcmp(a, b);
}

/* A lower bound of the distance: every edit changes the character histogram
 * (folded into 64 buckets) by at most 2 in the L1 norm. */
static size_t histogram_bound(const char *a, size_t alen, const char *b, size_t blen)
{
    int count[BUCKETS] = {0};
    for (size_t i = 0; i < alen; i++)
        count[fold(a[i]) & (BUCKETS - 1)]++;
    for (size_t i = 0; i < blen; i++)
        count[fold(b[i]) & (BUCKETS - 1)]--;
    size_t l1 = 0;
    for (int k = 0; k < BUCKETS; k++)
        l1 += (size_t)(count[k] < 0 ? -count[k] : count[k]);
    return (l1 + 1) / 2;
}

static inline size_t min2(size_t a, size_t b)
{
    return a < b ? a : b;
}

/* OSA distance of a[0..m) and b[0..n) when it is at most limit, else limit + 1.
 * Only the band |i - j| <= limit is computed, and a row whose every cell
 * exceeds limit ends the work. Requires m <= TB_SUGGEST_MAX_LEN and
 * |m - n| <= limit. Rows run over b, columns over a. */
static size_t distance(const char *a, size_t m, const char *b, size_t n, size_t limit)
{
    size_t rows[3][ROW];
    const size_t inf = limit + 1;
    size_t *prev2 = rows[0];
    size_t *prev = rows[1];
    size_t *cur = rows[2];
    for (size_t j = 0; j <= m && j <= inf; j++)
        prev[j] = j <= limit ? j : inf;
    for (size_t i = 1; i <= n; i++) {
        size_t lo = i > limit ? i - limit : 1;
        size_t hi = min2(m, i + limit);
        cur[0] = i <= limit ? i : inf;
        if (lo > 1)
            cur[lo - 1] = inf;
        size_t row_min = cur[0];
        for (size_t j = lo; j <= hi; j++) {
            size_t cost = fold(a[j - 1]) != fold(b[i - 1]);
            size_t d = min2(prev[j - 1] + cost, min2(prev[j] + 1, cur[j - 1] + 1));
            bool swapped = i > 1 && j > 1 && fold(a[j - 1]) == fold(b[i - 2]) &&
                           fold(a[j - 2]) == fold(b[i - 1]);
            if (swapped)
                d = min2(d, prev2[j - 2] + 1);
            cur[j] = min2(d, inf);
            row_min = min2(row_min, cur[j]);
        }
        if (hi < m)
            cur[hi + 1] = inf;
        if (row_min > limit)
            return inf;
        size_t *spare = prev2;
        prev2 = prev;
        prev = cur;
        cur = spare;
    }
    return prev[m];
}

void tb_suggest_offer(tb_suggester *s, const char *candidate)
{
    if (!candidate || s->limit == 0)
        return;
    /* equal distances stay in the running for the tie-break */
    size_t limit = s->best ? min2(s->limit, s->best_dist) : s->limit;
    size_t n = strlen(candidate);
    if (n == 0)
        return;
    size_t gap = n > s->len ? n - s->len : s->len - n;
    if (gap > limit || histogram_bound(s->name, s->len, candidate, n) > limit)
        return;
    size_t d = distance(s->name, s->len, candidate, n, limit);
    if (d == 0 || d > limit)
        return;
    if (!s->best || d < s->best_dist || order(candidate, s->best) < 0) {
        s->best = candidate;
        s->best_dist = d;
    }
}

const char *tb_suggest_best(const tb_suggester *s)
{
    return s->best;
}

const char *tb_suggest(const char *name, const char *const *candidates, size_t count)
{
    tb_suggester s;
    tb_suggest_init(&s, name);
    for (size_t i = 0; i < count; i++)
        tb_suggest_offer(&s, candidates[i]);
    return tb_suggest_best(&s);
}
