/* src/topology.c: structural checks before solving: floating nodes, source loops, dangling nodes */
#include "topology.h"

#include <stdarg.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "alloc.h"

/* Names quoted in one message, and the longest name quoted in full. */
#define LIST_NODES 3
#define LIST_ELEMS 3
#define LIST_LOOP 8
#define NAME_MAX_QUOTE 40
#define MESSAGE_SIZE 1024

/* Which equations a connection shows in. A group of nodes that no VOLT edge
 * ties to ground can shift its voltages freely (a null vector of M); one that
 * no CURR edge ties to ground has KCL rows summing to zero (a null row
 * combination). AC: capacitors connect; DC: they are open. */
typedef enum { NET_VOLT, NET_CURR } net_kind;

typedef struct {
    int a;
    int b;
    bool ctrl; /* an E/G controlling input pair, else the output terminals */
} pair;

/* One node pair of an element, as the floating passes read it: its nodes, and in
 * the top bits of a the nets (bit net_bit(net, ac)) in which it ties them together.
 * Built once, so that the passes read 8 bytes a pair instead of the element records. */
typedef struct {
    uint32_t a_nets;
    uint32_t b;
} edge;

#define EDGE_NODE_BITS 28
#define EDGE_NODE_MASK ((UINT32_C(1) << EDGE_NODE_BITS) - 1)
_Static_assert(TB_MAX_NODES <= EDGE_NODE_MASK, "a node index leaves the top 4 bits of an edge free");

static unsigned net_bit(net_kind net, bool ac)
{
    return 1u << (2 * (unsigned)net + (unsigned)ac);
}

/* Per-node flags. */
enum { REPORTED = 1, ROOT_SKIP = 2, ROOT_SEEN = 4, IO_NODE = 8 };

typedef struct {
    const tb_circuit *ckt;
    tb_topology_sink sink;
    void *ctx;
    size_t n;              /* nodes, ground included */
    int *parent;           /* union-find */
    int *size;
    unsigned char *flag;   /* REPORTED ... per node */
    unsigned char *terminals; /* output terminals attached to each node, counted up to 2 */
    unsigned char *taps;   /* controlling inputs attached to each node, counted up to 2 */
    uint32_t *touch;       /* an element attached to each node (the last one) */
    bool *sensed;          /* per element: a V source whose current F or H senses */
    bool dc_singular;
    edge *edges;           /* every node pair of every element, in element order */
    size_t edge_count;
    uint32_t *branchy;     /* the V, E, H and L elements, in order (the forest's candidates) */
    size_t branchy_count;
} topo;

/* ---- union-find --------------------------------------------------------- */

static void uf_reset(topo *t)
{
    for (size_t i = 0; i < t->n; i++) {
        t->parent[i] = (int)i;
        t->size[i] = 1;
    }
}

static int uf_find(const topo *t, int x)
{
    while (t->parent[x] != x) {
        t->parent[x] = t->parent[t->parent[x]]; /* path halving */
        x = t->parent[x];
    }
    return x;
}

/* Joins the sets of a and b; false when they were one set already. */
static bool uf_union(topo *t, int a, int b)
{
    int ra = uf_find(t, a);
    int rb = uf_find(t, b);
    if (ra == rb)
        return false;
    if (t->size[ra] < t->size[rb]) {
        int swap = ra;
        ra = rb;
        rb = swap;
    }
    t->parent[rb] = ra;
    t->size[ra] += t->size[rb];
    return true;
}

/* ---- elements as node pairs --------------------------------------------- */

static bool has_terminals(tb_elem_kind k)
{
    return k == TB_EL_R || k == TB_EL_C || k == TB_EL_L || k == TB_EL_V || k == TB_EL_I ||
           k == TB_EL_E || k == TB_EL_G || k == TB_EL_F || k == TB_EL_H;
}

/* The node pairs of e: its output terminals, and the controlling inputs of E, G. */
static int pairs_of(const tb_element *e, pair out[2])
{
    if (!has_terminals(e->kind))
        return 0;
    out[0] = (pair){e->node[0], e->node[1], false};
    if (e->kind != TB_EL_E && e->kind != TB_EL_G)
        return 1;
    out[1] = (pair){e->node[2], e->node[3], true};
    return 2;
}

/* Whether pair p of e ties its two nodes together in the given net. */
static bool joins(const tb_element *e, const pair *p, net_kind net, bool ac)
{
    if (p->ctrl)
        return net == NET_VOLT; /* the controlled equation reads v(c+) - v(c-) */
    switch (e->kind) {
    case TB_EL_R:
    case TB_EL_L:
    case TB_EL_V:
    case TB_EL_E:
    case TB_EL_H:
        return true;
    case TB_EL_C:
        return ac;
    case TB_EL_G: /* a current into KCL rows, set by voltages elsewhere */
    case TB_EL_F:
        return net == NET_CURR;
    default:
        return false;
    }
}

/* ---- messages ----------------------------------------------------------- */

typedef struct {
    char text[MESSAGE_SIZE];
    size_t len;
} msgbuf;

static void put(msgbuf *m, const char *fmt, ...) __attribute__((format(printf, 2, 3)));
static void put(msgbuf *m, const char *fmt, ...)
{
    if (m->len >= sizeof m->text - 1)
        return;
    va_list ap;
    va_start(ap, fmt);
    int n = vsnprintf(m->text + m->len, sizeof m->text - m->len, fmt, ap);
    va_end(ap);
    if (n > 0)
        m->len = m->len + (size_t)n < sizeof m->text ? m->len + (size_t)n : sizeof m->text - 1;
}

/* 'name', cut after NAME_MAX_QUOTE bytes with "..." (quote = true), or bare. */
static void put_name(msgbuf *m, const char *name, bool quote)
{
    int n = (int)strnlen(name, NAME_MAX_QUOTE + 1);
    const char *dots = n > NAME_MAX_QUOTE ? "..." : "";
    if (n > NAME_MAX_QUOTE)
        n = NAME_MAX_QUOTE;
    put(m, quote ? "'%.*s%s'" : "%.*s%s", n, name, dots);
}

static void emit(topo *t, tb_severity sev, tb_loc loc, const msgbuf *m)
{
    t->sink(t->ctx, sev, loc, m->text);
}

static tb_loc whole_file(const topo *t)
{
    return (tb_loc){t->ckt->file, 0, 0};
}

/* ", " between items, then "name", and " and N more" after the last one shown. */
static void put_item(msgbuf *m, size_t i, size_t shown, size_t total, const char *name, bool quote)
{
    if (i >= shown)
        return;
    put(m, "%s", i ? ", " : "");
    put_name(m, name, quote);
    if (i + 1 == shown && total > shown)
        put(m, " and %zu more", total - shown);
}

/* The summary after the limit: "... and N more <what>". */
static void put_more(topo *t, tb_severity sev, size_t count, const char *what)
{
    if (count <= TB_TOPOLOGY_MAX_REPORTS)
        return;
    msgbuf m = {.len = 0};
    put(&m, "... and %zu more %s", count - TB_TOPOLOGY_MAX_REPORTS, what);
    emit(t, sev, whole_file(t), &m);
}

/* ---- floating groups -------------------------------------------------------- */

/* What crosses the boundary of one group: elements whose pair (not joining in
 * this net) has one node inside and one outside. */
typedef struct {
    size_t out[LIST_ELEMS];  /* output terminals crossing: current sources, capacitors at DC */
    size_t out_count;
    size_t ctrl[LIST_ELEMS]; /* controlling inputs crossing (CURR net only) */
    size_t ctrl_count;
    size_t touch;            /* an element with a node in the group */
    bool has_touch;
    size_t coupling;         /* a K coupling an inductor of the group */
    bool has_coupling;
} boundary;

static void note(size_t *list, size_t *count, size_t elem)
{
    if (*count < LIST_ELEMS)
        list[*count] = elem;
    (*count)++;
}

/* Whether e is a K coupling an inductor with a node in the group. */
static bool couples_into(const topo *t, const tb_element *e, int root)
{
    if (e->kind != TB_EL_K)
        return false;
    const tb_element *l1 = &t->ckt->elems[e->ctrl];
    const tb_element *l2 = &t->ckt->elems[e->ctrl2];
    return uf_find(t, l1->node[0]) == root || uf_find(t, l2->node[0]) == root;
}

static void find_boundary(const topo *t, int root, net_kind net, bool ac, boundary *bd)
{
    *bd = (boundary){.out_count = 0};
    for (size_t i = 0; i < t->ckt->elem_count; i++) {
        const tb_element *e = &t->ckt->elems[i];
        if (!bd->has_coupling && couples_into(t, e, root)) {
            bd->coupling = i;
            bd->has_coupling = true;
        }
        pair ps[2];
        int np = pairs_of(e, ps);
        for (int k = 0; k < np; k++) {
            int ra = uf_find(t, ps[k].a);
            int rb = uf_find(t, ps[k].b);
            if (ra != root && rb != root)
                continue;
            if (!bd->has_touch) {
                bd->touch = i;
                bd->has_touch = true;
            }
            if (ra == rb || joins(e, &ps[k], net, ac))
                continue;
            if (ps[k].ctrl)
                note(bd->ctrl, &bd->ctrl_count, i);
            else
                note(bd->out, &bd->out_count, i);
        }
    }
}

/* "node 'a'" or "nodes 'a', 'b', 'c' and 4 more": the group's first nodes from first on. */
static void put_nodes(topo *t, msgbuf *m, int root, int first)
{
    size_t total = (size_t)t->size[root];
    put(m, total == 1 ? "node " : "nodes ");
    size_t shown = total < LIST_NODES ? total : LIST_NODES;
    size_t i = 0;
    for (size_t j = (size_t)first; j < t->n && i < shown; j++) {
        if (uf_find(t, (int)j) == root)
            put_item(m, i++, shown, total, t->ckt->node_names[j], true);
    }
}

static void put_elems(const topo *t, msgbuf *m, const size_t *list, size_t count)
{
    size_t shown = count < LIST_ELEMS ? count : LIST_ELEMS;
    for (size_t i = 0; i < shown; i++)
        put_item(m, i, shown, count, t->ckt->elems[list[i]].name, false);
}

static tb_loc group_loc(const topo *t, const boundary *bd)
{
    if (bd->out_count)
        return t->ckt->elems[bd->out[0]].loc;
    if (bd->ctrl_count)
        return t->ckt->elems[bd->ctrl[0]].loc;
    return bd->has_touch ? t->ckt->elems[bd->touch].loc : whole_file(t);
}

/* Error: nothing fixes the group's voltage relative to ground. */
static void say_no_voltage_path(topo *t, msgbuf *m, int root, int first, const boundary *bd)
{
    bool one = t->size[root] == 1;
    put_nodes(t, m, root, first);
    put(m, " %s no path to ground through any element that conducts or fixes a voltage: ",
        one ? "has" : "have");
    if (bd->out_count) {
        put(m, "%s connected only through current sources (", one ? "it is" : "they are");
        put_elems(t, m, bd->out, bd->out_count);
        put(m, ")");
    } else if (bd->has_coupling) {
        put(m, "only the magnetic coupling %s links %s to the rest of the circuit, and it fixes "
               "no voltage (give the winding a reference to ground, a resistor say)",
            t->ckt->elems[bd->coupling].name, one ? "it" : "them");
    } else {
        put(m, "nothing connects %s to the rest of the circuit", one ? "it" : "them");
    }
}

/* Error: no current can reach the group except from current sources. */
static void say_no_current_path(topo *t, msgbuf *m, int root, int first, const boundary *bd)
{
    bool one = t->size[root] == 1;
    put_nodes(t, m, root, first);
    if (bd->out_count) {
        put(m, " %s no path to ground for current: %s connected only through current sources (",
            one ? "has" : "have", one ? "it is" : "they are");
        put_elems(t, m, bd->out, bd->out_count);
        put(m, ") and controlled-source inputs (");
    } else {
        put(m, " %s attached to the rest of the circuit only through controlled-source inputs (",
            one ? "is" : "are");
    }
    put_elems(t, m, bd->ctrl, bd->ctrl_count);
    put(m, "), which draw no current");
    if (!bd->out_count)
        put(m, ": %s undefined", one ? "its voltage is" : "their voltages are");
}

/* Warning: the group is tied to ground only through capacitors (and current sources). */
static void say_no_dc_path(topo *t, msgbuf *m, int root, int first, const boundary *bd)
{
    bool one = t->size[root] == 1;
    put(m, "no DC path to ground from ");
    put_nodes(t, m, root, first);
    put(m, " (only capacitors or current sources lead to %s: ", one ? "it" : "them");
    put_elems(t, m, bd->out, bd->out_count);
    put(m, "): DC is singular, DC values are taken at the lowest sweep frequency");
}

typedef void (*say_fn)(topo *t, msgbuf *m, int root, int first, const boundary *bd);

/* Union-find over the pairs that join their nodes in the given net. */
static void join_net(topo *t, net_kind net, bool ac)
{
    unsigned bit = net_bit(net, ac);
    uf_reset(t);
    for (size_t i = 0; i < t->edge_count; i++)
        if (t->edges[i].a_nets >> EDGE_NODE_BITS & bit)
            uf_union(t, (int)(t->edges[i].a_nets & EDGE_NODE_MASK), (int)t->edges[i].b);
}

/* Whether every node reaches ground in the given net with capacitors open: then
 * it does with them conducting too (each net at AC holds the same net at DC), and
 * neither pass of that net finds a group. */
static bool grounded_at_dc(topo *t, net_kind net)
{
    join_net(t, net, false);
    int ground = uf_find(t, 0);
    for (size_t i = 1; i < t->n; i++)
        if (uf_find(t, (int)i) != ground)
            return false;
    return true;
}

/* One pass: the groups of the given net not tied to ground, skipping those
 * with a node reported already; marks every node of the groups it finds.
 * *count: groups found so far (of this severity), reported while within the limit. */
static void floating_pass(topo *t, net_kind net, bool ac, tb_severity sev, say_fn say,
                          size_t *count)
{
    join_net(t, net, ac);
    for (size_t i = 0; i < t->n; i++)
        t->flag[i] &= (unsigned char)~(ROOT_SKIP | ROOT_SEEN);
    for (size_t i = 0; i < t->n; i++)
        if (t->flag[i] & REPORTED)
            t->flag[uf_find(t, (int)i)] |= ROOT_SKIP;
    int ground = uf_find(t, 0);
    for (size_t i = 1; i < t->n; i++) {
        int root = uf_find(t, (int)i);
        if (root == ground || (t->flag[root] & (ROOT_SKIP | ROOT_SEEN)))
            continue;
        t->flag[root] |= ROOT_SEEN;
        if (++*count > TB_TOPOLOGY_MAX_REPORTS)
            continue;
        boundary bd;
        find_boundary(t, root, net, ac, &bd);
        msgbuf m = {.len = 0};
        say(t, &m, root, (int)i, &bd);
        emit(t, sev, group_loc(t, &bd), &m);
    }
    for (size_t i = 1; i < t->n; i++)
        if (t->flag[uf_find(t, (int)i)] & ROOT_SEEN)
            t->flag[i] |= REPORTED;
}

static void check_floating(topo *t)
{
    bool volt_whole = grounded_at_dc(t, NET_VOLT);
    bool curr_whole = grounded_at_dc(t, NET_CURR);
    size_t errors = 0;
    if (!volt_whole)
        floating_pass(t, NET_VOLT, true, TB_SEV_ERROR, say_no_voltage_path, &errors);
    if (!curr_whole)
        floating_pass(t, NET_CURR, true, TB_SEV_ERROR, say_no_current_path, &errors);
    put_more(t, TB_SEV_ERROR, errors, "groups of nodes with no path to ground");
    size_t warnings = 0;
    if (!volt_whole)
        floating_pass(t, NET_VOLT, false, TB_SEV_WARNING, say_no_dc_path, &warnings);
    if (!curr_whole)
        floating_pass(t, NET_CURR, false, TB_SEV_WARNING, say_no_dc_path, &warnings);
    put_more(t, TB_SEV_WARNING, warnings, "groups of nodes with no DC path to ground");
    if (warnings)
        t->dc_singular = true;
}

/* ---- loops of voltage sources and inductors ------------------------------ */

/* Per-root flags of the forest's components. */
enum { COMP_SENSED = 16, COMP_EH = 32 };

static bool fixes_voltage(tb_elem_kind k)
{
    return k == TB_EL_V || k == TB_EL_E || k == TB_EL_H;
}

/* The spanning forest of the V/E/H/L branches, the elements that close a
 * loop in it, and the workspace of a breadth-first search along it. */
typedef struct {
    bool *tree;          /* per element: an edge of the forest */
    size_t *closing[2];  /* elements closing a loop: [0] of V/E/H only, [1] through an L */
    size_t count[2];
    size_t cap[2];
    size_t *adj_start;   /* the forest as adjacency lists: node -> tree elements */
    uint32_t *adj;
    int *queue;
    uint32_t *via;       /* the tree element the search reached each node through */
    size_t *stamp;       /* the search that reached each node */
    size_t search;
    size_t *path;        /* the elements of one loop */
} forest;

static void forest_free(forest *f)
{
    tb_free(f->tree);
    tb_free(f->closing[0]);
    tb_free(f->closing[1]);
    tb_free(f->adj_start);
    tb_free(f->adj);
    tb_free(f->queue);
    tb_free(f->via);
    tb_free(f->stamp);
    tb_free(f->path);
}

/* Union-find over V/E/H branches first, then L: a branch whose ends are
 * joined already closes a loop (of voltage sources, then through an inductor). */
static tb_status build_forest(topo *t, forest *f)
{
    const tb_circuit *ckt = t->ckt;
    uf_reset(t);
    for (int phase = 0; phase < 2; phase++) {
        for (size_t c = 0; c < t->branchy_count; c++) {
            size_t i = t->branchy[c];
            const tb_element *e = &ckt->elems[i];
            if (phase == 0 ? !fixes_voltage(e->kind) : e->kind != TB_EL_L)
                continue;
            if (uf_union(t, e->node[0], e->node[1])) {
                f->tree[i] = true;
                continue;
            }
            if (tb_grow(&f->closing[phase], &f->cap[phase], f->count[phase] + 1, sizeof(size_t),
                        ckt->elem_count))
                return TB_ERR_NOMEM;
            f->closing[phase][f->count[phase]++] = i;
        }
    }
    return TB_OK;
}

/* Adjacency lists of the forest, the search workspace and the component flags. */
static tb_status index_forest(topo *t, forest *f)
{
    const tb_circuit *ckt = t->ckt;
    f->adj_start = tb_calloc(t->n + 1, sizeof(size_t));
    f->queue = tb_malloc(t->n, sizeof(int));
    f->via = tb_malloc(t->n, sizeof(uint32_t));
    f->stamp = tb_calloc(t->n, sizeof(size_t));
    f->path = tb_malloc(t->n + 1, sizeof(size_t));
    if (!f->adj_start || !f->queue || !f->via || !f->stamp || !f->path)
        return TB_ERR_NOMEM;
    size_t edges = 0;
    for (size_t i = 0; i < ckt->elem_count; i++) {
        if (!f->tree[i])
            continue;
        f->adj_start[ckt->elems[i].node[0] + 1]++;
        f->adj_start[ckt->elems[i].node[1] + 1]++;
        edges++;
    }
    for (size_t v = 0; v < t->n; v++)
        f->adj_start[v + 1] += f->adj_start[v];
    f->adj = tb_malloc(2 * edges + 1, sizeof(uint32_t));
    if (!f->adj)
        return TB_ERR_NOMEM;
    for (size_t i = 0; i < ckt->elem_count; i++) {
        if (!f->tree[i])
            continue;
        for (int k = 0; k < 2; k++)
            f->adj[f->adj_start[ckt->elems[i].node[k]]++] = (uint32_t)i;
    }
    for (size_t v = t->n; v > 0; v--) /* the fill moved each start to the next one's */
        f->adj_start[v] = f->adj_start[v - 1];
    f->adj_start[0] = 0;
    for (size_t v = 0; v < t->n; v++)
        t->flag[v] &= (unsigned char)~(COMP_SENSED | COMP_EH);
    for (size_t i = 0; i < ckt->elem_count; i++) {
        const tb_element *e = &ckt->elems[i];
        if (e->kind == TB_EL_E || e->kind == TB_EL_H)
            t->flag[uf_find(t, e->node[0])] |= COMP_EH;
        else if (e->kind == TB_EL_V && t->sensed[i])
            t->flag[uf_find(t, e->node[0])] |= COMP_SENSED;
    }
    return TB_OK;
}

static int other_end(const tb_element *e, int node)
{
    return e->node[0] == node ? e->node[1] : e->node[0];
}

/* The tree elements on the forest's path from node `from` to node `to` (in
 * one component) into f->path; returns their number. Breadth-first, iterative. */
static size_t tree_path(const topo *t, forest *f, int from, int to)
{
    const tb_element *elems = t->ckt->elems;
    size_t head = 0;
    size_t tail = 0;
    f->search++;
    f->queue[tail++] = from;
    f->stamp[from] = f->search;
    while (head < tail && f->stamp[to] != f->search) {
        int v = f->queue[head++];
        for (size_t k = f->adj_start[v]; k < f->adj_start[v + 1]; k++) {
            int w = other_end(&elems[f->adj[k]], v);
            if (f->stamp[w] == f->search)
                continue;
            f->stamp[w] = f->search;
            f->via[w] = f->adj[k];
            f->queue[tail++] = w;
        }
    }
    size_t len = 0;
    for (int v = to; v != from; v = other_end(&elems[f->via[v]], v))
        f->path[len++] = f->via[v];
    return len;
}

static int by_index(const void *a, const void *b)
{
    size_t x = *(const size_t *)a;
    size_t y = *(const size_t *)b;
    return (x > y) - (x < y);
}

/* Whether the loop path[0..len) is singular whatever the values: a
 * circulating current is a null vector unless an F or H senses a V source of
 * the loop; the branch rows add up to zero unless an E or H is in it. */
static bool loop_certain(const topo *t, const size_t *path, size_t len)
{
    bool has_eh = false;
    bool has_sensed = false;
    for (size_t i = 0; i < len; i++) {
        tb_elem_kind k = t->ckt->elems[path[i]].kind;
        has_eh = has_eh || k == TB_EL_E || k == TB_EL_H;
        has_sensed = has_sensed || (k == TB_EL_V && t->sensed[path[i]]);
    }
    return !(has_eh && has_sensed);
}

static void say_self_loop(topo *t, const tb_element *e, bool dc_only)
{
    msgbuf m = {.len = 0};
    put(&m, "%s has both terminals on node ", e->name);
    put_name(&m, t->ckt->node_names[e->node[0]], true);
    if (dc_only)
        put(&m, ": a shorted inductor, singular at DC, DC values are taken at the lowest sweep "
                "frequency");
    else
        put(&m, ": a loop of one voltage source, singular at every frequency");
    emit(t, dc_only ? TB_SEV_WARNING : TB_SEV_ERROR, e->loc, &m);
}

static void say_loop(topo *t, const tb_element *closing, const size_t *path, size_t len,
                     bool dc_only)
{
    bool has_source = false;
    for (size_t i = 0; i < len; i++)
        has_source = has_source || fixes_voltage(t->ckt->elems[path[i]].kind);
    msgbuf m = {.len = 0};
    put(&m, "loop of %s: ", !dc_only ? "voltage sources"
                            : has_source ? "voltage sources and inductors" : "inductors");
    size_t shown = len < LIST_LOOP ? len : LIST_LOOP;
    for (size_t i = 0; i < shown; i++)
        put_item(&m, i, shown, len, t->ckt->elems[path[i]].name, false);
    if (dc_only)
        put(&m, ": singular at DC, DC values are taken at the lowest sweep frequency");
    else
        put(&m, ": singular at every frequency");
    emit(t, dc_only ? TB_SEV_WARNING : TB_SEV_ERROR, closing->loc, &m);
}

/* Reports the loops closed by f->closing[phase] (phase 1: through an inductor,
 * singular at DC only); returns how many were found. A loop that need not be
 * singular (see loop_certain) is not counted; past the report limit only
 * components where such loops can occur are searched, the others counted. */
static size_t report_loops(topo *t, forest *f, int phase)
{
    size_t found = 0;
    for (size_t c = 0; c < f->count[phase]; c++) {
        size_t i = f->closing[phase][c];
        const tb_element *e = &t->ckt->elems[i];
        int root = uf_find(t, e->node[0]);
        bool doubtful = (t->flag[root] & (COMP_SENSED | COMP_EH)) == (COMP_SENSED | COMP_EH);
        if (e->node[0] == e->node[1]) {
            if (++found <= TB_TOPOLOGY_MAX_REPORTS)
                say_self_loop(t, e, phase == 1);
            continue;
        }
        if (found >= TB_TOPOLOGY_MAX_REPORTS && !doubtful) {
            found++;
            continue;
        }
        if (found >= TB_TOPOLOGY_MAX_REPORTS)
            continue; /* a doubtful loop past the limit: not searched */
        size_t len = tree_path(t, f, e->node[0], e->node[1]);
        f->path[len++] = i;
        if (!loop_certain(t, f->path, len))
            continue;
        qsort(f->path, len, sizeof(size_t), by_index);
        found++;
        say_loop(t, e, f->path, len, phase == 1);
    }
    return found;
}

static tb_status check_source_loops(topo *t)
{
    forest f = {.search = 0};
    tb_status st = TB_ERR_NOMEM;
    f.tree = tb_calloc(t->ckt->elem_count + 1, sizeof(bool));
    if (!f.tree || build_forest(t, &f) != TB_OK)
        goto fail;
    if (f.count[0] + f.count[1] > 0) {
        if (index_forest(t, &f) != TB_OK)
            goto fail;
        put_more(t, TB_SEV_ERROR, report_loops(t, &f, 0), "loops of voltage sources");
        size_t dc_loops = report_loops(t, &f, 1);
        put_more(t, TB_SEV_WARNING, dc_loops, "loops of voltage sources and inductors");
        if (dc_loops)
            t->dc_singular = true;
    }
    st = TB_OK;
fail:
    forest_free(&f);
    return st;
}

/* ---- dangling nodes and the whole -------------------------------------------- */

static void check_dangling(topo *t)
{
    size_t found = 0;
    for (size_t v = 1; v < t->n; v++) {
        if (t->terminals[v] != 1 || t->taps[v] != 0 || (t->flag[v] & (REPORTED | IO_NODE)))
            continue;
        const tb_element *e = &t->ckt->elems[t->touch[v]];
        if (fixes_voltage(e->kind))
            continue; /* an open voltage-source output, e.g. a measurement E source */
        if (++found > TB_TOPOLOGY_MAX_REPORTS)
            continue;
        msgbuf m = {.len = 0};
        put(&m, "node ");
        put_name(&m, t->ckt->node_names[v], true);
        put(&m, " is touched by only one element (%s): a dangling connection?", e->name);
        emit(t, TB_SEV_WARNING, e->loc, &m);
    }
    put_more(t, TB_SEV_WARNING, found, "nodes touched by only one element");
}

/* The nets in which pair p of e joins its nodes (net_bit). */
static unsigned nets_of(const tb_element *e, const pair *p)
{
    unsigned nets = 0;
    for (int net = NET_VOLT; net <= NET_CURR; net++)
        for (int ac = 0; ac < 2; ac++)
            if (joins(e, p, (net_kind)net, ac))
                nets |= net_bit((net_kind)net, ac);
    return nets;
}

/* One more attachment: the checks ask only for none, one, or more. */
static void count_up(unsigned char *count)
{
    *count = *count < 2 ? (unsigned char)(*count + 1) : 2;
}

/* Room for the edges, two per element at most (the pages of the rest are never touched). */
static tb_status alloc_edges(topo *t)
{
    t->edges = tb_malloc(2 * t->ckt->elem_count + 1, sizeof(edge));
    return t->edges ? TB_OK : TB_ERR_NOMEM;
}

/* Terminal and controlling-input counts per node, the sensed V sources, the .io
 * nodes; the edges of the floating passes and the forest's candidates. */
static tb_status count_attachments(topo *t)
{
    const tb_circuit *ckt = t->ckt;
    size_t branchy_cap = 0;
    for (size_t i = 0; i < ckt->elem_count; i++) {
        const tb_element *e = &ckt->elems[i];
        pair ps[2];
        int np = pairs_of(e, ps);
        for (int k = 0; k < np; k++) {
            unsigned char *count = ps[k].ctrl ? t->taps : t->terminals;
            count_up(&count[ps[k].a]);
            count_up(&count[ps[k].b]);
            if (!ps[k].ctrl)
                t->touch[ps[k].a] = t->touch[ps[k].b] = (uint32_t)i;
            t->edges[t->edge_count++] = (edge){(uint32_t)ps[k].a | nets_of(e, &ps[k]) << EDGE_NODE_BITS,
                                               (uint32_t)ps[k].b};
        }
        if (fixes_voltage(e->kind) || e->kind == TB_EL_L) {
            if (tb_grow(&t->branchy, &branchy_cap, t->branchy_count + 1, sizeof(uint32_t),
                        ckt->elem_count))
                return TB_ERR_NOMEM;
            t->branchy[t->branchy_count++] = (uint32_t)i;
        }
        if ((e->kind == TB_EL_F || e->kind == TB_EL_H) && e->ctrl < ckt->elem_count)
            t->sensed[e->ctrl] = true;
    }
    if (ckt->io.given && ckt->io.out_kind == TB_OUT_V) {
        t->flag[ckt->io.out_node[0]] |= IO_NODE;
        t->flag[ckt->io.out_node[1]] |= IO_NODE;
    }
    return TB_OK;
}

static void topo_free(topo *t)
{
    tb_free(t->parent);
    tb_free(t->size);
    tb_free(t->flag);
    tb_free(t->terminals);
    tb_free(t->taps);
    tb_free(t->touch);
    tb_free(t->sensed);
    tb_free(t->edges);
    tb_free(t->branchy);
}

tb_status tb_topology_check(const tb_circuit *ckt, tb_topology_sink sink, void *ctx,
                            bool *dc_singular)
{
    topo t = {.ckt = ckt, .sink = sink, .ctx = ctx, .n = ckt->node_count};
    tb_status st = TB_ERR_NOMEM;
    t.parent = tb_malloc(t.n, sizeof(int));
    t.size = tb_malloc(t.n, sizeof(int));
    t.flag = tb_calloc(t.n, 1);
    t.terminals = tb_calloc(t.n, 1);
    t.taps = tb_calloc(t.n, 1);
    t.touch = tb_calloc(t.n, sizeof(uint32_t));
    t.sensed = tb_calloc(ckt->elem_count + 1, sizeof(bool));
    if (!t.parent || !t.size || !t.flag || !t.terminals || !t.taps || !t.touch || !t.sensed ||
        alloc_edges(&t) != TB_OK || count_attachments(&t) != TB_OK)
        goto fail;
    if (t.terminals[0] == 0) {
        msgbuf m = {.len = 0};
        put(&m, "no element is connected to ground (node '0' or 'gnd'): "
                "no node voltage is defined");
        emit(&t, TB_SEV_ERROR, whole_file(&t), &m);
    } else {
        check_floating(&t);
        if (check_source_loops(&t) != TB_OK)
            goto fail;
        check_dangling(&t);
    }
    *dc_singular = t.dc_singular;
    st = TB_OK;
fail:
    topo_free(&t);
    return st;
}
