/* src/names.h: the one name index: a case-insensitive hash from names to the positions of the entries that hold them */
#ifndef TB_NAMES_H
#define TB_NAMES_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "tbeta.h"

/* Most entries one index holds: slots keep index + 1 in 32 bits. */
#define TB_NAMES_MAX ((size_t)UINT32_MAX - 1)

/* One slot: the entry's index + 1 (0 = empty) and its name's 32-bit hash, which
 * places the entry, and lets probes compare names only when the hashes agree. */
typedef struct {
    uint32_t index1;
    uint32_t hash;
} tb_name_slot;

/* Open addressing over entries that keep their own names: the index stores positions
 * and hashes only, and reads a name back through a tb_name_of. An empty index is
 * {NULL, 0, 0}; cap is a power of two, 2^(64 - shift). */
typedef struct {
    tb_name_slot *slots;
    size_t cap;
    unsigned shift;
} tb_name_index;

/* The NUL-terminated name of entry i of owner (a table the caller keeps). */
typedef const char *(*tb_name_of)(const void *owner, size_t i);

/* Records entry i (i < TB_NAMES_MAX), whose name is name_of(owner, i). When an entry
 * of the same name (ignoring ASCII case) is there already, it keeps the slot and
 * *earlier is its index; otherwise *earlier is SIZE_MAX. Entries need not be added in
 * order, but the table sizes itself for i + 1 of them. TB_ERR_NOMEM: nothing changed. */
tb_status tb_names_add(tb_name_index *idx, tb_name_of name_of, const void *owner, size_t i,
                       size_t *earlier);
/* The entry called name[0..len) (ignoring ASCII case): true and its index in *found,
 * or false. */
bool tb_names_find(const tb_name_index *idx, tb_name_of name_of, const void *owner, const char *name,
                   size_t len, size_t *found);
/* The entries found or added last, by their hash: a circuit being built refers to
 * the nodes of nearby cards again and again, and a probe of the index proper is a
 * cache miss once it outgrows the cache. Belongs to whoever builds the index (one
 * thread); all zero is empty. */
#define TB_NAMES_RECENT 64
typedef struct {
    tb_name_slot slot[TB_NAMES_RECENT];
} tb_name_recent;

/* tb_names_find, looking first among the recent entries and remembering a find there. */
bool tb_names_find_recent(const tb_name_index *idx, tb_name_recent *recent, tb_name_of name_of,
                          const void *owner, const char *name, size_t len, size_t *found);
/* Remembers entry i (just added) among the recent ones. */
void tb_names_remember(tb_name_recent *recent, tb_name_of name_of, const void *owner, size_t i);

/* Makes room for `entries` entries at once (the index grows by itself otherwise, moving
 * every slot at each doubling). TB_ERR_NOMEM: nothing changed. */
tb_status tb_names_reserve(tb_name_index *idx, size_t entries);

/* The hash of name[0..len) by which the index places it (equal for names equal but
 * for ASCII case), for the calls below that take it instead of computing it again. */
uint32_t tb_names_hash(const char *name, size_t len);

/* tb_names_add of an entry whose name has hash h (tb_names_hash). */
tb_status tb_names_add_hashed(tb_name_index *idx, tb_name_of name_of, const void *owner, size_t i,
                              uint32_t h, size_t *earlier);

/* Looks for name[0..len) (hash h) among the recent entries, then in the index (which
 * must not be empty; a find there is remembered): true and its index in *found; or
 * false, and *empty is the slot where tb_names_claim records it, valid while the index
 * is not changed otherwise. Find, then claim, adds a name with one probe: reserve room
 * for the entry first (tb_names_reserve), as claiming never grows the index. */
bool tb_names_seek(tb_name_index *idx, tb_name_recent *recent, tb_name_of name_of, const void *owner,
                   const char *name, size_t len, uint32_t h, size_t *found, tb_name_slot **empty);
/* Records entry i, whose name (hash h) tb_names_seek did not find, in the slot it gave,
 * and among the recent entries. name_of(owner, i) must give the name from the next
 * lookup on. */
void tb_names_claim(tb_name_slot *empty, tb_name_recent *recent, size_t i, uint32_t h);

/* Asks the processor to fetch the slot where a probe for a name of hash h starts, so
 * that a tb_names_add of it a little later need not wait for memory. Only a hint. */
void tb_names_prefetch(const tb_name_index *idx, uint32_t h);

/* Frees the slots (NULL is fine) and leaves an empty index. */
void tb_names_free(tb_name_index *idx);

/* Case-insensitive (ASCII) equality of two NUL-terminated names, and of a
 * NUL-terminated name a with b[0..len). */
bool tb_name_eq(const char *a, const char *b);
bool tb_name_eq_n(const char *a, const char *b, size_t len);

#endif
