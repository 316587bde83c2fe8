/* src/zeropath.c: whether a loop's feedthrough A0 = c'M0^-1 b is zero by the circuit's structure */
#include "zeropath.h"

#include <btf.h>
#include <limits.h>
#include <string.h>

#include "alloc.h"
#include "m0.h"

/* M0's non-zero pattern (CSC), its maximum matching and the search's workspace. */
typedef struct {
    size_t n;
    int *Fp;      /* n + 1 */
    int *Fi;      /* nnz */
    int *match;   /* row i is matched with column match[i] */
    int *row_of;  /* column j is matched with row row_of[j] */
    int *queue;   /* n: columns to visit */
    unsigned char *seen; /* n */
} pattern;

static void pattern_free(pattern *p)
{
    tb_free(p->Fp);
    tb_free(p->Fi);
    tb_free(p->match);
    tb_free(p->row_of);
    tb_free(p->queue);
    tb_free(p->seen);
}

/* Whether M0 without row i and column j still has a perfect matching: an augmenting
 * path, with respect to the full matching less its pairs at row i and column j, from
 * the column left free (match[i]) to the row left free (row_of[j]). */
static bool minor_matches(pattern *p, size_t i, size_t j)
{
    int free_col = p->match[i];
    int free_row = p->row_of[j];
    if ((size_t)free_col == j)
        return true;
    memset(p->seen, 0, p->n);
    size_t head = 0, tail = 0;
    p->queue[tail++] = free_col;
    p->seen[free_col] = 1;
    while (head < tail) {
        int col = p->queue[head++];
        for (int k = p->Fp[col]; k < p->Fp[col + 1]; k++) {
            int row = p->Fi[k];
            if ((size_t)row == i)
                continue;
            if (row == free_row)
                return true;
            int next = p->match[row];
            if (!p->seen[next]) {
                p->seen[next] = 1;
                p->queue[tail++] = next;
            }
        }
    }
    return false;
}

static bool every_pair_nil(pattern *p, const tb_svec *b, const tb_svec *c)
{
    for (int r = 0; r < b->count; r++)
        for (int s = 0; s < c->count; s++)
            if (minor_matches(p, b->idx[r], c->idx[s]))
                return false;
    return true;
}

tb_status tb_zeropath_feed_nil(const tb_mna *mna, const tb_loopvec *lv, bool *nil)
{
    size_t n = mna->n;
    if (n == 0 || n >= (size_t)INT_MAX / 5) {
        *nil = false;
        return TB_OK;
    }
    pattern p = {n, tb_malloc(n + 1, sizeof(int)), tb_malloc(mna->nnz ? mna->nnz : 1, sizeof(int)),
                 tb_malloc(n, sizeof(int)), tb_malloc(n, sizeof(int)), tb_malloc(5 * n, sizeof(int)),
                 tb_malloc(n, 1)};
    if (!p.Fp || !p.Fi || !p.match || !p.row_of || !p.queue || !p.seen) {
        pattern_free(&p);
        return TB_ERR_NOMEM;
    }
    tb_m0_pattern(mna, lv, p.Fp, p.Fi, NULL); /* the positions non-zero at some frequency */
    double work = 0;
    /* the queue (5n ints) is btf_maxtrans's workspace first */
    int matched = btf_maxtrans((int)n, (int)n, p.Fp, p.Fi, 0, &work, p.match, p.queue);
    bool result = false;
    if (matched == (int)n) {
        for (size_t r = 0; r < n; r++)
            p.row_of[p.match[r]] = (int)r;
        result = every_pair_nil(&p, &mna->b, &mna->c);
    }
    pattern_free(&p);
    *nil = result;
    return TB_OK;
}
