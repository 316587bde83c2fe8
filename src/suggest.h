/* src/suggest.h: "did you mean ...": the existing name closest to a misspelt one */
#ifndef TB_SUGGEST_H
#define TB_SUGGEST_H

#include <stddef.h>

/* Names longer than this get no suggestion (the distance rows live on the stack). */
#define TB_SUGGEST_MAX_LEN 128

/* A running search for the candidate closest to one name. Distance: optimal
 * string alignment (insertions, deletions, substitutions, transpositions of two
 * adjacent characters; each costs 1), case-insensitive. A candidate is kept only
 * when its distance is at most max(1, len/3) for a name of len characters and
 * greater than 0 (a name equal to the one looked up is no suggestion). Ties go
 * to the candidate first in case-insensitive byte order (then plain byte order),
 * so the answer does not depend on the order candidates are offered in. */
typedef struct {
    const char *name;   /* the name looked up (not copied) */
    size_t len;
    size_t limit;       /* the largest distance accepted; 0 when no suggestion is possible */
    const char *best;   /* the best candidate so far (not copied), or NULL */
    size_t best_dist;
} tb_suggester;

/* Starts a search for name (NUL-terminated, kept by pointer until the search ends). */
void tb_suggest_init(tb_suggester *s, const char *name);
/* Considers one candidate (NUL-terminated, kept by pointer if it becomes the best).
 * Cost: O(1) when the lengths differ by more than the limit, otherwise at most
 * O(len * limit). No allocation. */
void tb_suggest_offer(tb_suggester *s, const char *candidate);
/* The closest candidate offered so far, or NULL when none is close enough. */
const char *tb_suggest_best(const tb_suggester *s);

/* The closest of candidates[0..count) to name, or NULL: the one-call form of
 * the three functions above. NULL entries are skipped. */
const char *tb_suggest(const char *name, const char *const *candidates, size_t count);

#endif
