/* src/names.c: the one name index: a case-insensitive hash from names to the positions of the entries that hold them */
#include "names.h"

#include <string.h>

#include "alloc.h"

/* ASCII lower case, whatever the locale. */
static unsigned char lower(char c)
{
    return (unsigned char)(c >= 'A' && c <= 'Z' ? c - 'A' + 'a' : c);
}

bool tb_name_eq(const char *a, const char *b)
{
    while (*a && lower(*a) == lower(*b)) {
        a++;
        b++;
    }
    return lower(*a) == lower(*b);
}

bool tb_name_eq_n(const char *a, const char *b, size_t len)
{
    for (size_t i = 0; i < len; i++)
        if (lower(a[i]) != lower(b[i]) || a[i] == '\0')
            return false;
    return a[len] == '\0';
}

/* Slots of one group: 8 slots of 8 bytes, one cache line when aligned. */
#define GROUP_BITS 3
#define GROUP_SLOTS ((size_t)1 << GROUP_BITS)
/* Most trailing digits read as a number (10^9 < 2^32). */
#define NUMBER_DIGITS 9

/* The eight bytes of w with ASCII capitals made lower case, all at once (bytes from
 * 0x80 up are left alone, as lower() leaves them). */
static uint64_t lower8(uint64_t w)
{
    const uint64_t ones = 0x0101010101010101u;
    const uint64_t high = 0x8080808080808080u;
    uint64_t low7 = w & ~high;
    uint64_t from_a = low7 + (0x80 - 'A') * ones; /* high bit set where the byte is >= 'A' */
    uint64_t past_z = low7 + (0x80 - 'Z' - 1) * ones; /* ... where it is > 'Z' */
    uint64_t capital = from_a & ~past_z & ~w & high;
    return w | capital >> 2; /* 0x80 >> 2 is the 0x20 between 'A' and 'a' */
}

/* Mixes eight more bytes into h. */
static uint64_t mix8(uint64_t h, uint64_t w)
{
    h = (h ^ w) * 0x9E3779B97F4A7C15u;
    return h ^ h >> 29;
}

/* The name's 32-bit hash. Generated and extracted netlists number their names (R1, R2,
 * ..., n1_1, n1_2, ...), and cards that follow each other use neighbouring numbers, so
 * names that differ only in the last bits of a trailing number share a group of slots:
 * the low GROUP_BITS bits of the hash are the number's, the rest a hash of everything
 * else (the name before the number in lower case, eight bytes at a time; its length and
 * the number's digits; the number without its low bits), with a final avalanche (from
 * splitmix64) so that every bit of it depends on every character. A new name is then
 * mostly in a cache line a neighbour's probe has just fetched. Slots keep the hash
 * whole, and it alone places an entry, so growing the table never reads a name back
 * (each read would be a cache miss). */
uint32_t tb_names_hash(const char *name, size_t len)
{
    size_t stem = len;
    while (stem > 0 && len - stem < NUMBER_DIGITS && name[stem - 1] >= '0' && name[stem - 1] <= '9')
        stem--;
    uint64_t h = 1469598103934665603u;
    size_t i = 0;
    for (; i + 8 <= stem; i += 8) {
        uint64_t w = 0;
        memcpy(&w, name + i, 8);
        h = mix8(h, lower8(w));
    }
    if (i < stem) {
        uint64_t w = 0;
        for (size_t k = 0; i + k < stem; k++)
            w |= (uint64_t)(unsigned char)name[i + k] << (8 * k);
        h = mix8(h, lower8(w));
    }
    uint32_t number = 0;
    for (size_t k = stem; k < len; k++)
        number = 10 * number + (uint32_t)(name[k] - '0');
    h = mix8(h, (uint64_t)len << 40 ^ (uint64_t)(len - stem) << 32 ^ (number >> GROUP_BITS));
    h ^= h >> 33;
    h *= 0xff51afd7ed558ccdu;
    h ^= h >> 33;
    return ((uint32_t)(h >> 32) & ~(uint32_t)(GROUP_SLOTS - 1)) | (number & (uint32_t)(GROUP_SLOTS - 1));
}

/* The first slot to probe for hash h: its group by Fibonacci hashing of the high bits
 * (which spreads them over tables of any size), its place in the group by the low bits. */
static size_t home_of(const tb_name_index *idx, uint32_t h)
{
    size_t group = (size_t)(((uint64_t)(h >> GROUP_BITS) * 0x9E3779B97F4A7C15u) >> (idx->shift + GROUP_BITS));
    return group << GROUP_BITS | (h & (GROUP_SLOTS - 1));
}

/* The slot holding name (hash h), or the empty slot where it would go. */
static tb_name_slot *find_slot(const tb_name_index *idx, tb_name_of name_of, const void *owner,
                               const char *name, size_t len, uint32_t h)
{
    size_t mask = idx->cap - 1;
    size_t i = home_of(idx, h);
    while (idx->slots[i].index1) {
        const tb_name_slot *slot = &idx->slots[i];
        if (slot->hash == h && tb_name_eq_n(name_of(owner, slot->index1 - 1), name, len))
            return &idx->slots[i];
        i = (i + 1) & mask;
    }
    return &idx->slots[i];
}

bool tb_names_find(const tb_name_index *idx, tb_name_of name_of, const void *owner, const char *name,
                   size_t len, size_t *found)
{
    if (!idx->cap)
        return false;
    const tb_name_slot *slot = find_slot(idx, name_of, owner, name, len, tb_names_hash(name, len));
    if (!slot->index1)
        return false;
    *found = slot->index1 - 1;
    return true;
}

/* The recent entry that hash h may occupy. */
static tb_name_slot *recent_slot(tb_name_recent *recent, uint32_t h)
{
    return &recent->slot[h % TB_NAMES_RECENT];
}

bool tb_names_find_recent(const tb_name_index *idx, tb_name_recent *recent, tb_name_of name_of,
                          const void *owner, const char *name, size_t len, size_t *found)
{
    if (!idx->cap)
        return false;
    uint32_t h = tb_names_hash(name, len);
    tb_name_slot *seen = recent_slot(recent, h);
    if (seen->index1 && seen->hash == h && tb_name_eq_n(name_of(owner, seen->index1 - 1), name, len)) {
        *found = seen->index1 - 1;
        return true;
    }
    const tb_name_slot *slot = find_slot(idx, name_of, owner, name, len, h);
    if (!slot->index1)
        return false;
    *seen = *slot;
    *found = slot->index1 - 1;
    return true;
}

bool tb_names_seek(tb_name_index *idx, tb_name_recent *recent, tb_name_of name_of, const void *owner,
                   const char *name, size_t len, uint32_t h, size_t *found, tb_name_slot **empty)
{
    tb_name_slot *seen = recent_slot(recent, h);
    if (seen->index1 && seen->hash == h && tb_name_eq_n(name_of(owner, seen->index1 - 1), name, len)) {
        *found = seen->index1 - 1;
        return true;
    }
    tb_name_slot *slot = find_slot(idx, name_of, owner, name, len, h);
    if (!slot->index1) {
        *empty = slot;
        return false;
    }
    *seen = *slot;
    *found = slot->index1 - 1;
    return true;
}

void tb_names_claim(tb_name_slot *empty, tb_name_recent *recent, size_t i, uint32_t h)
{
    *empty = (tb_name_slot){(uint32_t)(i + 1), h};
    *recent_slot(recent, h) = *empty;
}

void tb_names_remember(tb_name_recent *recent, tb_name_of name_of, const void *owner, size_t i)
{
    const char *nm = name_of(owner, i);
    uint32_t h = tb_names_hash(nm, strlen(nm));
    *recent_slot(recent, h) = (tb_name_slot){(uint32_t)(i + 1), h};
}

void tb_names_prefetch(const tb_name_index *idx, uint32_t h)
{
#ifdef __GNUC__
    if (idx->cap)
        __builtin_prefetch(&idx->slots[home_of(idx, h)], 1);
#else
    (void)idx;
    (void)h;
#endif
}

/* Doubles the table while it would be more than half full with `entries`; moves the
 * slots by their stored hashes, without looking at a name. */
tb_status tb_names_reserve(tb_name_index *idx, size_t entries)
{
    if (entries <= idx->cap / 2)
        return TB_OK;
    tb_name_index bigger = {NULL, idx->cap ? idx->cap * 2 : 64, idx->cap ? idx->shift - 1 : 58};
    while (entries > bigger.cap / 2) {
        bigger.cap *= 2;
        bigger.shift--;
    }
    bigger.slots = tb_calloc(bigger.cap, sizeof(tb_name_slot));
    if (!bigger.slots)
        return TB_ERR_NOMEM;
    tb_advise_large(bigger.slots, bigger.cap * sizeof(tb_name_slot));
    for (size_t k = 0; k < idx->cap; k++) {
        if (!idx->slots[k].index1)
            continue;
        size_t i = home_of(&bigger, idx->slots[k].hash);
        while (bigger.slots[i].index1) /* names in the old table are distinct */
            i = (i + 1) & (bigger.cap - 1);
        bigger.slots[i] = idx->slots[k];
    }
    tb_free(idx->slots);
    *idx = bigger;
    return TB_OK;
}

tb_status tb_names_add(tb_name_index *idx, tb_name_of name_of, const void *owner, size_t i,
                       size_t *earlier)
{
    const char *nm = name_of(owner, i);
    return tb_names_add_hashed(idx, name_of, owner, i, tb_names_hash(nm, strlen(nm)), earlier);
}

tb_status tb_names_add_hashed(tb_name_index *idx, tb_name_of name_of, const void *owner, size_t i,
                              uint32_t h, size_t *earlier)
{
    if (i >= TB_NAMES_MAX || tb_names_reserve(idx, i + 1))
        return TB_ERR_NOMEM;
    const char *nm = name_of(owner, i);
    size_t len = strlen(nm);
    tb_name_slot *slot = find_slot(idx, name_of, owner, nm, len, h);
    *earlier = slot->index1 ? slot->index1 - 1 : SIZE_MAX;
    if (!slot->index1)
        *slot = (tb_name_slot){(uint32_t)(i + 1), h};
    return TB_OK;
}

void tb_names_free(tb_name_index *idx)
{
    tb_free(idx->slots);
    *idx = (tb_name_index){NULL, 0, 0};
}
