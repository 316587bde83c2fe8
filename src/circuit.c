/* src/circuit.c: node table, element list, string arena, and validation after parsing */
#include "circuit.h"

#include <stdarg.h>
#include <stdint.h>
#include <stdio.h>
#include <string.h>

#include "alloc.h"
#include "diag.h"
#include "paramdep.h"
#include "suggest.h"
#include "topology.h"

/* ---- string arena ---------------------------------------------------- */

struct tb_strblock {
    struct tb_strblock *next;
    size_t used;
    size_t size;
    char data[];
};

#define STRBLOCK_SIZE ((size_t)16384)

const char *tb_circuit_intern(tb_circuit *ckt, const char *s, size_t len)
{
    struct tb_strblock *blk = ckt->strings;
    if (!blk || blk->size - blk->used < len + 1) {
        size_t size = len + 1 > STRBLOCK_SIZE ? len + 1 : STRBLOCK_SIZE;
        struct tb_strblock *fresh = tb_malloc(1, sizeof(*fresh) + size);
        if (!fresh)
            return NULL;
        fresh->next = blk;
        fresh->used = 0;
        fresh->size = size;
        ckt->strings = fresh;
        blk = fresh;
    }
    char *copy = blk->data + blk->used;
    memcpy(copy, s, len);
    copy[len] = '\0';
    blk->used += len + 1;
    return copy;
}

/* ---- life cycle ------------------------------------------------------ */

tb_status tb_circuit_create(const char *file, tb_circuit **out)
{
    tb_circuit *ckt = tb_calloc(1, sizeof(*ckt));
    if (!ckt)
        return TB_ERR_NOMEM;
    const char *name = file ? file : "<input>";
    ckt->file = tb_circuit_intern(ckt, name, strlen(name));
    int ground = 0;
    if (!ckt->file || tb_circuit_node(ckt, "0", 1, &ground) != TB_OK) {
        tb_circuit_free(ckt);
        return TB_ERR_NOMEM;
    }
    *out = ckt;
    return TB_OK;
}

void tb_circuit_free(tb_circuit *ckt)
{
    if (!ckt)
        return;
    struct tb_strblock *blk = ckt->strings;
    while (blk) {
        struct tb_strblock *next = blk->next;
        tb_free(blk);
        blk = next;
    }
    tb_free(ckt->title);
    tb_free(ckt->node_names);
    tb_names_free(&ckt->node_index);
    tb_names_free(&ckt->elem_index);
    tb_free(ckt->elems);
    tb_free(ckt->same_names);
    tb_free(ckt->loops);
    for (size_t i = 0; i < ckt->source_count; i++)
        if (ckt->sources[i].owned)
            tb_free(ckt->sources[i].text);
    tb_free(ckt->sources);
    tb_params_free(ckt->params);
    tb_free(ckt);
}

/* ---- source texts ------------------------------------------------------ */

/* Most source texts one circuit keeps (the netlist and its includes). */
#define MAX_SOURCES ((size_t)1000000)

/* Bytes of netlist per element card and per node, about (a short card, "R1 a b 1k",
 * is 10 bytes; a generated line of cards 25): the name indexes are sized from the
 * netlist's length so that they seldom grow, and an index too large costs only the
 * pages a probe touches. */
#define BYTES_PER_ELEMENT 32
#define BYTES_PER_NODE 64
/* Most entries reserved so: at most 2^24 slots of 8 bytes, whatever the length. */
#define RESERVE_MAX ((size_t)1 << 23)

static size_t reserve_for(size_t len, size_t bytes_each)
{
    return len / bytes_each < RESERVE_MAX ? len / bytes_each : RESERVE_MAX;
}

tb_status tb_circuit_add_source(tb_circuit *ckt, const char *file, char *text, size_t len,
                                const char **file_out)
{
    if (ckt->source_count == 0 && /* the netlist itself */
        (tb_names_reserve(&ckt->elem_index, reserve_for(len, BYTES_PER_ELEMENT)) ||
         tb_names_reserve(&ckt->node_index, reserve_for(len, BYTES_PER_NODE)))) {
        tb_free(text);
        return TB_ERR_NOMEM;
    }
    const char *name = tb_circuit_intern(ckt, file, strlen(file));
    if (!name || tb_grow(&ckt->sources, &ckt->source_cap, ckt->source_count + 1,
                         sizeof(tb_source), MAX_SOURCES)) {
        tb_free(text);
        return TB_ERR_NOMEM;
    }
    ckt->sources[ckt->source_count++] = (tb_source){name, text, len, true};
    if (file_out)
        *file_out = name;
    return TB_OK;
}

tb_status tb_circuit_add_source_alias(tb_circuit *ckt, const char *file, const char *text, size_t len,
                                      const char **file_out)
{
    const char *name = tb_circuit_intern(ckt, file, strlen(file));
    if (!name || tb_grow(&ckt->sources, &ckt->source_cap, ckt->source_count + 1, sizeof(tb_source),
                         MAX_SOURCES))
        return TB_ERR_NOMEM;
    ckt->sources[ckt->source_count++] = (tb_source){name, (char *)text, len, false};
    if (file_out)
        *file_out = name;
    return TB_OK;
}

const char *tb_circuit_source_line(const tb_circuit *ckt, const char *file, int line, size_t *len)
{
    if (!ckt || !file || line < 1)
        return NULL;
    const tb_source *src = NULL;
    for (size_t i = ckt->source_count; i-- > 0 && !src;)
        if (ckt->sources[i].file == file || strcmp(ckt->sources[i].file, file) == 0)
            src = &ckt->sources[i];
    if (!src)
        return NULL;
    const char *text = src->text;
    size_t n = src->len;
    size_t pos = 0;
    for (int l = 1; l < line; l++) {
        while (pos < n && text[pos] != '\n' && text[pos] != '\r')
            pos++;
        if (pos >= n)
            return NULL;
        if (text[pos] == '\r' && pos + 1 < n && text[pos + 1] == '\n')
            pos++;
        pos++;
    }
    size_t end = pos;
    while (end < n && text[end] != '\n' && text[end] != '\r')
        end++;
    *len = end - pos;
    return text + pos;
}

/* ---- names ----------------------------------------------------------- */

static bool is_ground(const char *name, size_t len)
{
    return (len == 1 && name[0] == '0') || (len == 3 && tb_name_eq_n("gnd", name, 3));
}

static const char *node_name_of(const void *owner, size_t i)
{
    return ((const tb_circuit *)owner)->node_names[i];
}

static const char *elem_name_of(const void *owner, size_t i)
{
    return ((const tb_circuit *)owner)->elems[i].name;
}

bool tb_circuit_find_node(const tb_circuit *ckt, const char *name, size_t len, int *index)
{
    if (is_ground(name, len)) {
        *index = 0;
        return true;
    }
    size_t found = 0;
    if (!tb_names_find(&ckt->node_index, node_name_of, ckt, name, len, &found))
        return false;
    *index = (int)found;
    return true;
}

tb_status tb_circuit_node(tb_circuit *ckt, const char *name, size_t len, int *index)
{
    if (is_ground(name, len) && ckt->node_count > 0) {
        *index = 0;
        return TB_OK;
    }
    size_t n = ckt->node_count;
    if (tb_names_reserve(&ckt->node_index, n + 1)) /* ground is not in the index */
        return TB_ERR_NOMEM;
    uint32_t h = tb_names_hash(name, len);
    size_t found = 0;
    tb_name_slot *empty = NULL;
    if (tb_names_seek(&ckt->node_index, &ckt->node_recent, node_name_of, ckt, name, len, h, &found, &empty)) {
        *index = (int)found;
        return TB_OK;
    }
    if (tb_grow(&ckt->node_names, &ckt->node_cap, n + 1, sizeof(char *), TB_MAX_NODES))
        return TB_ERR_NOMEM;
    const char *copy = tb_circuit_intern(ckt, name, len);
    if (!copy)
        return TB_ERR_NOMEM;
    ckt->node_names[n] = copy;
    if (n > 0)
        tb_names_claim(empty, &ckt->node_recent, n, h);
    ckt->node_count++;
    *index = (int)n;
    return TB_OK;
}

bool tb_circuit_find_element(const tb_circuit *ckt, const char *name, size_t *index)
{
    return tb_names_find(&ckt->elem_index, elem_name_of, ckt, name, strlen(name), index);
}

/* Elements waiting for the name index while their slots are fetched: enough to
 * overlap that many memory accesses, few enough that their names stay in cache. */
#define ELEM_PENDING 16
_Static_assert(ELEM_PENDING < TB_ELEM_HASH_RING, "a waiting element's hash stays in the ring");

/* Enters elements into the name index until at most `pending` wait. */
static tb_status index_elements(tb_circuit *ckt, size_t pending)
{
    for (; ckt->elem_count - ckt->elem_indexed > pending; ckt->elem_indexed++) {
        size_t i = ckt->elem_indexed;
        size_t first = SIZE_MAX;
        if (tb_names_add_hashed(&ckt->elem_index, elem_name_of, ckt, i, ckt->elem_hash[i % TB_ELEM_HASH_RING],
                                &first))
            return TB_ERR_NOMEM;
        if (first == SIZE_MAX)
            continue;
        if (tb_grow(&ckt->same_names, &ckt->same_name_cap, ckt->same_name_count + 1, sizeof(tb_same_name),
                    TB_MAX_ELEMENTS))
            return TB_ERR_NOMEM;
        ckt->same_names[ckt->same_name_count++] = (tb_same_name){i, first};
    }
    return TB_OK;
}

tb_status tb_circuit_add_element(tb_circuit *ckt, const tb_element *elem)
{
    if (tb_grow(&ckt->elems, &ckt->elem_cap, ckt->elem_count + 1, sizeof(tb_element),
                TB_MAX_ELEMENTS))
        return TB_ERR_NOMEM;
    tb_element *e = &ckt->elems[ckt->elem_count++];
    *e = *elem;
    uint32_t h = tb_names_hash(e->name, strlen(e->name));
    ckt->elem_hash[(ckt->elem_count - 1) % TB_ELEM_HASH_RING] = h;
    tb_names_prefetch(&ckt->elem_index, h);
    return index_elements(ckt, ELEM_PENDING);
}

tb_status tb_circuit_add_loop(tb_circuit *ckt, const tb_loop_spec *loop)
{
    if (tb_grow(&ckt->loops, &ckt->loop_cap, ckt->loop_count + 1, sizeof(tb_loop_spec),
                TB_MAX_LOOPS))
        return TB_ERR_NOMEM;
    ckt->loops[ckt->loop_count++] = *loop;
    return TB_OK;
}

/* ---- validation after parsing ------------------------------------------ */

typedef struct {
    tb_circuit *ckt;
    tb_diag *diag;
    tb_status status;
} checker;

static void report(checker *ck, tb_severity sev, tb_loc loc, const char *fmt, ...)
    __attribute__((format(printf, 4, 5)));
static void report(checker *ck, tb_severity sev, tb_loc loc, const char *fmt, ...)
{
    if (sev == TB_SEV_ERROR && tb_diag_full(ck->diag)) {
        ck->status = ck->status ? ck->status : TB_ERR_INPUT; /* enough errors shown already */
        return;
    }
    size_t src_len = 0;
    const char *file = loc.file ? loc.file : ck->ckt->file;
    const char *src = tb_circuit_source_line(ck->ckt, file, loc.line, &src_len);
    va_list ap;
    va_start(ap, fmt);
    tb_status st = tb_diag_vadd(ck->diag, sev, file, loc.line,
                                loc.col, src, src_len, fmt, ap);
    va_end(ap);
    if (st != TB_OK)
        ck->status = TB_ERR_NOMEM;
    else if (sev == TB_SEV_ERROR && ck->status == TB_OK)
        ck->status = TB_ERR_INPUT;
}

static const char *const kind_word[TB_EL_COUNT] = {
    "resistor", "capacitor", "inductor", "voltage source", "current source",
    "voltage-controlled voltage source", "voltage-controlled current source",
    "current-controlled current source", "current-controlled voltage source",
    "mutual inductance",
};
_Static_assert(sizeof(kind_word) / sizeof(kind_word[0]) == TB_EL_COUNT, "kind_word in step");

const char *tb_elem_kind_word(tb_elem_kind kind)
{
    return (unsigned)kind < TB_EL_COUNT ? kind_word[kind] : "element";
}

const char *tb_elem_role_word(const tb_element *e)
{
    if (e->kind != TB_EL_G || !e->name)
        return tb_elem_kind_word(e->kind);
    /* the last two components of a hierarchical name: "X1.M3.gmb" -> "M3", "gmb" */
    const char *last = e->name, *prev = NULL;
    for (const char *c = e->name; *c; c++)
        if (*c == '.') {
            prev = last;
            last = c + 1;
        }
    char lead = (char)(*last | 0x20); /* ASCII lower case */
    if (lead == 'q')
        return "gm of a bipolar transistor";
    if (lead == 'm')
        return "gm of a MOS transistor";
    if (prev && (*prev | 0x20) == 'm' && (last[0] | 0x20) == 'g' && (last[1] | 0x20) == 'm' &&
        (last[2] | 0x20) == 'b' && last[3] == '\0')
        return "body transconductance gmb of a MOS transistor";
    return tb_elem_kind_word(e->kind);
}

/* ---- "did you mean": the closest existing name, for messages -------------- */

typedef bool (*kind_test)(tb_elem_kind k);

static bool is_vsource(tb_elem_kind k)
{
    return k == TB_EL_V;
}

static bool is_independent(tb_elem_kind k)
{
    return k == TB_EL_V || k == TB_EL_I;
}

bool tb_elem_is_controlled(tb_elem_kind k)
{
    return k == TB_EL_E || k == TB_EL_G || k == TB_EL_F || k == TB_EL_H;
}

static bool is_controlled(tb_elem_kind k)
{
    return tb_elem_is_controlled(k);
}

/* " (did you mean 'NAME'?)" in buf, or "" when nothing is close enough. */
static const char *did_you_mean(const char *best, char *buf, size_t size)
{
    if (!best)
        return "";
    snprintf(buf, size, " (did you mean '%.*s'?)", TB_SUGGEST_MAX_LEN + TB_SUGGEST_MAX_LEN / 3,
             best);
    return buf;
}

/* Whether element i is named like an earlier one (same_names is in element order). */
static bool repeats_a_name(const tb_circuit *ckt, size_t i)
{
    size_t lo = 0;
    size_t hi = ckt->same_name_count;
    while (lo < hi) {
        size_t mid = lo + (hi - lo) / 2;
        if (ckt->same_names[mid].elem < i)
            lo = mid + 1;
        else
            hi = mid;
    }
    return lo < ckt->same_name_count && ckt->same_names[lo].elem == i;
}

/* The suggestion among elements whose kind passes `accept` and that skip
 * (per element, may be NULL) does not exclude. */
static const char *suggest_element(const tb_circuit *ckt, const char *name, kind_test accept,
                                   const bool *skip, char *buf, size_t size)
{
    tb_suggester s;
    tb_suggest_init(&s, name);
    for (size_t i = 0; i < ckt->elem_count; i++)
        if (accept(ckt->elems[i].kind) && !(skip && skip[i]) &&
            !repeats_a_name(ckt, i))
            tb_suggest_offer(&s, ckt->elems[i].name);
    return did_you_mean(tb_suggest_best(&s), buf, size);
}

/* The suggestion among the nodes other than ground. */
static const char *suggest_node(const tb_circuit *ckt, const char *name, char *buf, size_t size)
{
    tb_suggester s;
    tb_suggest_init(&s, name);
    for (size_t i = 1; i < ckt->node_count; i++)
        tb_suggest_offer(&s, ckt->node_names[i]);
    return did_you_mean(tb_suggest_best(&s), buf, size);
}

#define SUGGEST_SIZE (TB_SUGGEST_MAX_LEN * 2 + 32)

/* What the element checks below need to look at, found in one pass over the elements,
 * which also numbers the branches: each pass reads every element record, and a large
 * circuit has few duplicates, F, H or K cards, often none. */
typedef struct {
    bool duplicates;
    bool sensing; /* F or H */
    bool coupling; /* K */
} element_census;

static element_census number_branches(tb_circuit *ckt)
{
    element_census found = {ckt->same_name_count > 0, false, false};
    ckt->branch_count = 0;
    for (size_t i = 0; i < ckt->elem_count; i++) {
        tb_element *e = &ckt->elems[i];
        tb_elem_kind k = e->kind;
        bool has_branch = k == TB_EL_V || k == TB_EL_L || k == TB_EL_E || k == TB_EL_H;
        e->branch = has_branch ? (long)ckt->branch_count++ : -1;
        found.sensing |= k == TB_EL_F || k == TB_EL_H;
        found.coupling |= k == TB_EL_K;
    }
    return found;
}

static void check_duplicates(checker *ck)
{
    tb_circuit *ckt = ck->ckt;
    for (size_t k = 0; k < ckt->same_name_count; k++) {
        const tb_element *e = &ckt->elems[ckt->same_names[k].elem];
        report(ck, TB_SEV_ERROR, e->loc, "duplicate element name '%s' (first defined on line %d)", e->name,
               ckt->elems[ckt->same_names[k].first].loc.line);
    }
}

static void check_sensing(checker *ck)
{
    tb_circuit *ckt = ck->ckt;
    for (size_t i = 0; i < ckt->elem_count; i++) {
        tb_element *e = &ckt->elems[i];
        if (e->kind != TB_EL_F && e->kind != TB_EL_H)
            continue;
        size_t j = 0;
        char hint[SUGGEST_SIZE];
        if (!tb_circuit_find_element(ckt, e->ctrl_name, &j))
            report(ck, TB_SEV_ERROR, e->loc,
                   "%s senses the current of '%s', which does not exist%s", e->name, e->ctrl_name,
                   suggest_element(ckt, e->ctrl_name, is_vsource, NULL, hint, sizeof hint));
        else if (ckt->elems[j].kind != TB_EL_V)
            report(ck, TB_SEV_ERROR, e->loc,
                   "%s senses the current of '%s', a %s; a voltage source is expected", e->name,
                   e->ctrl_name, kind_word[ckt->elems[j].kind]);
        else
            e->ctrl = j;
    }
}

/* K: both names must be inductors, distinct, of one sign (M = k sqrt(L1 L2)). */
static bool coupled_inductor(checker *ck, tb_element *e, const char *name, size_t *index)
{
    tb_circuit *ckt = ck->ckt;
    if (!tb_circuit_find_element(ckt, name, index)) {
        report(ck, TB_SEV_ERROR, e->loc, "%s couples '%s', which does not exist", e->name, name);
        return false;
    }
    if (ckt->elems[*index].kind != TB_EL_L) {
        report(ck, TB_SEV_ERROR, e->loc, "%s couples '%s', a %s; an inductor is expected",
               e->name, name, kind_word[ckt->elems[*index].kind]);
        return false;
    }
    return true;
}

static void check_coupling(checker *ck)
{
    tb_circuit *ckt = ck->ckt;
    for (size_t i = 0; i < ckt->elem_count; i++) {
        tb_element *e = &ckt->elems[i];
        size_t a = 0;
        size_t b = 0;
        if (e->kind != TB_EL_K || !coupled_inductor(ck, e, e->ctrl_name, &a) ||
            !coupled_inductor(ck, e, e->ctrl2_name, &b))
            continue;
        if (a == b)
            report(ck, TB_SEV_ERROR, e->loc, "%s couples '%s' with itself", e->name,
                   ckt->elems[a].name);
        else if ((ckt->elems[a].value > 0) != (ckt->elems[b].value > 0))
            report(ck, TB_SEV_ERROR, e->loc,
                   "%s couples '%s' and '%s', whose inductances differ in sign", e->name,
                   ckt->elems[a].name, ckt->elems[b].name);
        e->ctrl = a;
        e->ctrl2 = b;
    }
}

/* Per element: named by a .loop already (not a suggestion for another one).
 * NULL (with status TB_ERR_NOMEM) when out of memory. */
static bool *loop_sources(checker *ck)
{
    tb_circuit *ckt = ck->ckt;
    bool *named = tb_calloc(ckt->elem_count + 1, sizeof(bool));
    if (!named) {
        ck->status = TB_ERR_NOMEM;
        return NULL;
    }
    for (size_t l = 0; l < ckt->loop_count; l++) {
        size_t j = 0;
        if (tb_circuit_find_element(ckt, ckt->loops[l].source, &j))
            named[j] = true;
    }
    return named;
}

static void report_missing_loop(checker *ck, const tb_loop_spec *lp, bool **named)
{
    char hint[SUGGEST_SIZE];
    if (!*named)
        *named = loop_sources(ck);
    const char *mean = *named ? suggest_element(ck->ckt, lp->source, is_controlled, *named, hint,
                                                sizeof hint)
                              : "";
    report(ck, TB_SEV_ERROR, lp->loc, ".loop names '%s', which does not exist%s", lp->source, mean);
}

static void check_loops(checker *ck)
{
    tb_circuit *ckt = ck->ckt;
    if (ckt->loop_count == 0) {
        tb_loc whole = {ckt->file, 0, 0};
        report(ck, TB_SEV_ERROR, whole,
               "nothing to analyse: no .loop directive marks a controlled source (E, G, F or H)");
    }
    bool *named = NULL; /* made when a name is missing */
    for (size_t l = 0; l < ckt->loop_count; l++) {
        tb_loop_spec *lp = &ckt->loops[l];
        size_t j = 0;
        if (!tb_circuit_find_element(ckt, lp->source, &j)) {
            report_missing_loop(ck, lp, &named);
            continue;
        }
        if (!is_controlled(ckt->elems[j].kind)) {
            report(ck, TB_SEV_ERROR, lp->loc,
                   ".loop names '%s', a %s; a controlled source (E, G, F or H) is expected",
                   lp->source, kind_word[ckt->elems[j].kind]);
            continue;
        }
        lp->elem = j;
        for (size_t m = 0; m < l; m++)
            if (tb_name_eq(ckt->loops[m].source, lp->source))
                report(ck, TB_SEV_ERROR, lp->loc, "'%s' is marked by .loop twice (first on line %d)",
                       lp->source, ckt->loops[m].loc.line);
    }
    tb_free(named);
}

static void check_io_node(checker *ck, const char *name, int *node)
{
    char hint[SUGGEST_SIZE];
    if (name && !tb_circuit_find_node(ck->ckt, name, strlen(name), node))
        report(ck, TB_SEV_ERROR, ck->ckt->io.out_loc, ".io output node '%s' does not exist%s", name,
               suggest_node(ck->ckt, name, hint, sizeof hint));
}

static void check_io(checker *ck)
{
    tb_io_spec *io = &ck->ckt->io;
    if (!io->given)
        return;
    size_t j = 0;
    char hint[SUGGEST_SIZE];
    if (!tb_circuit_find_element(ck->ckt, io->source, &j))
        report(ck, TB_SEV_ERROR, io->loc, ".io input '%s' does not exist%s", io->source,
               suggest_element(ck->ckt, io->source, is_independent, NULL, hint, sizeof hint));
    else if (ck->ckt->elems[j].kind != TB_EL_V && ck->ckt->elems[j].kind != TB_EL_I)
        report(ck, TB_SEV_ERROR, io->loc,
               ".io input '%s' is a %s; an independent V or I source is expected", io->source,
               kind_word[ck->ckt->elems[j].kind]);
    else
        io->source_elem = j;
    if (io->out_kind == TB_OUT_V) {
        io->out_node[0] = io->out_node[1] = 0;
        check_io_node(ck, io->out_a, &io->out_node[0]);
        check_io_node(ck, io->out_b, &io->out_node[1]);
        return;
    }
    if (!tb_circuit_find_element(ck->ckt, io->out_a, &j))
        report(ck, TB_SEV_ERROR, io->out_loc, ".io output i(%s): '%s' does not exist%s", io->out_a,
               io->out_a, suggest_element(ck->ckt, io->out_a, is_vsource, NULL, hint, sizeof hint));
    else if (ck->ckt->elems[j].kind != TB_EL_V)
        report(ck, TB_SEV_ERROR, io->out_loc,
               ".io output i(%s): '%s' is a %s; currents are read through voltage sources",
               io->out_a, io->out_a, kind_word[ck->ckt->elems[j].kind]);
    else
        io->out_elem = j;
}

/* One node of a .zport card resolved into *node (0 for an absent - node, which is ground). */
static bool check_zport_node(checker *ck, const tb_zport_spec *zp, const char *name, int *node)
{
    char hint[SUGGEST_SIZE];
    *node = 0;
    if (!name || tb_circuit_find_node(ck->ckt, name, strlen(name), node))
        return true;
    report(ck, TB_SEV_ERROR, zp->loc, ".zport %s: node '%s' does not exist%s", zp->name, name,
           suggest_node(ck->ckt, name, hint, sizeof hint));
    return false;
}

/* .zport NAME i(V): V must be a voltage source; its index goes to source_elem. */
static void check_zport_source(checker *ck, tb_zport_spec *zp)
{
    size_t j = 0;
    char hint[SUGGEST_SIZE];
    bool found = tb_circuit_find_element(ck->ckt, zp->node_a, &j);
    if (found && ck->ckt->elems[j].kind == TB_EL_V) {
        zp->source_elem = j;
        return;
    }
    report(ck, TB_SEV_ERROR, zp->loc, ".zport %s: i(%s) needs a voltage source of that name%s",
           zp->name, zp->node_a,
           found ? "" : suggest_element(ck->ckt, zp->node_a, is_vsource, NULL, hint, sizeof hint));
}

/* Every .zport: existing nodes, two distinct ones (a, b), or a V source (source_elem). */
static void check_zports(checker *ck)
{
    tb_circuit *ckt = ck->ckt;
    for (size_t p = 0; p < ckt->zport_count; p++) {
        tb_zport_spec *zp = &ckt->zports[p];
        zp->a = 0;
        zp->b = 0;
        if (zp->at_source) {
            check_zport_source(ck, zp);
            continue;
        }
        int a = 0;
        int b = 0;
        if (!check_zport_node(ck, zp, zp->node_a, &a) || !check_zport_node(ck, zp, zp->node_b, &b))
            continue;
        if (a == b) {
            report(ck, TB_SEV_ERROR, zp->loc, ".zport %s: the port's two nodes are the same node",
                   zp->name);
            continue;
        }
        zp->a = a;
        zp->b = b;
    }
}

/* .break: an existing V source, not shorted to ground at both ends, not the .io input
 * (compared by name: the input resolves even when check_io reported something else). */
static void check_break(checker *ck)
{
    tb_circuit *ckt = ck->ckt;
    tb_break_spec *br = &ckt->brk;
    if (!br->given)
        return;
    size_t e = 0;
    char hint[SUGGEST_SIZE];
    if (!tb_circuit_find_element(ckt, br->source, &e)) {
        report(ck, TB_SEV_ERROR, br->loc, ".break names '%s', which does not exist%s", br->source,
               suggest_element(ckt, br->source, is_vsource, NULL, hint, sizeof hint));
        return;
    }
    const tb_element *el = &ckt->elems[e];
    size_t input = 0;
    if (el->kind != TB_EL_V)
        report(ck, TB_SEV_ERROR, br->loc,
               ".break names '%s', a %s; a zero-volt V source in the loop wire is expected",
               br->source, kind_word[el->kind]);
    else if (el->node[0] == 0 && el->node[1] == 0)
        report(ck, TB_SEV_ERROR, br->loc, ".break: '%s' has both ends at ground", br->source);
    else if (ckt->io.given && tb_circuit_find_element(ckt, ckt->io.source, &input) && input == e)
        report(ck, TB_SEV_ERROR, br->loc,
               ".break: '%s' is the .io input; mark a zero-volt source of its own", br->source);
    else
        br->elem = e;
}

static void topology_sink(void *ctx, tb_severity sev, tb_loc loc, const char *message)
{
    report(ctx, sev, loc, "%s", message);
}

/* Structural checks (src/topology.c), only once every reference resolved:
 * with a name missing, the structure is not the one the netlist means. */
static void check_topology(checker *ck)
{
    bool dc_singular = false;
    if (ck->status != TB_OK || ck->ckt->node_count < 2)
        return;
    if (tb_topology_check(ck->ckt, topology_sink, ck, &dc_singular) != TB_OK)
        ck->status = TB_ERR_NOMEM;
    ck->ckt->dc_singular = dc_singular;
}

tb_status tb_circuit_finish(tb_circuit *ckt, tb_diag *diag)
{
    checker ck = {ckt, diag, TB_OK};
    if (index_elements(ckt, 0) != TB_OK)
        return TB_ERR_NOMEM;
    element_census found = number_branches(ckt);
    if (found.duplicates)
        check_duplicates(&ck);
    if (found.sensing)
        check_sensing(&ck);
    if (found.coupling)
        check_coupling(&ck);
    check_loops(&ck);
    check_io(&ck);
    check_zports(&ck);
    check_break(&ck);
    check_topology(&ck);
    if (ckt->node_count < 2) {
        tb_loc whole = {ckt->file, 0, 0};
        report(&ck, TB_SEV_ERROR, whole, "the circuit has no node other than ground");
    }
    if (!ckt->ac.given) {
        tb_loc whole = {ckt->file, 0, 0};
        ckt->ac = (tb_ac_spec){true, TB_GRID_DEC, 20, 1.0, 1e9, whole};
        report(&ck, TB_SEV_WARNING, whole, "no .ac directive: sweeping dec 20 1 1g");
    }
    return ck.status;
}

/* ---- public read-only view ------------------------------------------------ */

const char *tb_circuit_title(const tb_circuit *ckt)
{
    return ckt && ckt->title ? ckt->title : "";
}

size_t tb_circuit_loop_count(const tb_circuit *ckt)
{
    return ckt ? ckt->loop_count : 0;
}

const char *tb_circuit_loop_name(const tb_circuit *ckt, size_t i)
{
    return ckt && i < ckt->loop_count ? ckt->loops[i].source : NULL;
}

tb_status tb_circuit_find_loop(const tb_circuit *ckt, const char *name, size_t *index)
{
    if (!ckt || !name || !index)
        return TB_ERR_USAGE;
    for (size_t i = 0; i < ckt->loop_count; i++) {
        if (tb_name_eq(ckt->loops[i].source, name)) {
            *index = i;
            return TB_OK;
        }
    }
    return TB_ERR_NOT_FOUND;
}

bool tb_circuit_states_margins(const tb_circuit *ckt)
{
    return ckt && ckt->margins.given;
}

bool tb_circuit_has_io(const tb_circuit *ckt)
{
    return ckt && ckt->io.given;
}

/* .io's input is a current source and its output a voltage (transimpedance), or the other
 * way round (transconductance); otherwise the gain is a ratio of like quantities. */
static int io_dimension(const tb_circuit *ckt)
{
    if (!ckt || !ckt->io.given)
        return 0;
    bool current_in = ckt->elems[ckt->io.source_elem].kind == TB_EL_I;
    bool current_out = ckt->io.out_kind == TB_OUT_I;
    return current_in == current_out ? 0 : current_in ? 1 : -1;
}

const char *tb_circuit_gain_unit(const tb_circuit *ckt)
{
    int d = io_dimension(ckt);
    return d > 0 ? "ohm" : d < 0 ? "S" : "";
}

const char *tb_circuit_beta_unit(const tb_circuit *ckt)
{
    int d = io_dimension(ckt);
    return d > 0 ? "S" : d < 0 ? "ohm" : "";
}

size_t tb_circuit_node_count(const tb_circuit *ckt)
{
    return ckt ? ckt->node_count : 0;
}

