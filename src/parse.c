/* src/parse.c: recursive-descent parser from netlist cards to a circuit: includes, parameters,
 * subcircuits expanded into hierarchical names, and reading netlist files */
#define _XOPEN_SOURCE 700 /* realpath */
#include <errno.h>
#include <limits.h>
#include <math.h>
#include <stdarg.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "alloc.h"
#include "circuit.h"
#include "device.h"
#include "diag.h"
#include "expect.h"
#include "expr.h"
#include "paramdep.h"
#include "grid.h"
#include "lex.h"
#include "netfile.h"
#include "nonlinear.h"
#include "spreadcard.h"
#include "suggest.h"
#include "tbeta.h"

/* Most points per decade, per octave or in all (lin) that .ac accepts. */
#define MAX_AC_POINTS 10000000L
/* Longest token text quoted in a message; a longer one is cut and ends in "...". */
#define QUOTE_MAX 40
#define QUOTE_SIZE (QUOTE_MAX + 4)
/* Deepest nesting of .include files, of subcircuit instances, of parameters
 * defined through other parameters. */
#define MAX_INCLUDE_DEPTH 64
/* Most files read through .include per netlist, counting each time a file is included
 * (a shared file too): the cap on fan-out (files including others twice, each level
 * doubling the work). */
#define MAX_INCLUSIONS ((size_t)10000)
#define MAX_INSTANCE_DEPTH 100
#define MAX_PARAM_CHAIN 32 /* others a parameter may lean on: 33 parameters in a chain */
/* Most subcircuit instances, and elements made by expanding them, per circuit. */
#define MAX_INSTANCES ((size_t)200000)
#define MAX_EXPANDED ((size_t)5000000)
/* Most pins of one subcircuit (and nodes of one X card). */
#define MAX_PINS ((size_t)100000)
/* Longest diagnostic message (with its include and instance context lines). */
#define MESSAGE_SIZE 2048

/* A parameter: a name bound to an expression, evaluated once on first use. */
typedef enum { PARAM_UNSET, PARAM_BUSY, PARAM_DONE, PARAM_FAILED } param_state;

typedef struct {
    const char *name; /* interned */
    tb_token expr;    /* a WORD (an expression without blanks) or an EXPR {...} */
    size_t src;       /* the source holding expr */
    double value;
    param_state state;
    size_t qid;       /* 1 + its quantity in the circuit's parameter table (paramdep.h), 0: none yet */
} param;

/* Parameters in definition order; looked up by name through index once there are more
 * than SMALL_LIST of them (an instance's copy of its definition's list has no index of
 * its own: it is looked up through the definition's, whose positions it shares). */
typedef struct {
    param *items;
    size_t count;
    size_t cap;
    tb_name_index index;
} param_list;

/* Lists up to this long are searched in order: no index (most subcircuits have a few
 * parameters, and a library may define a hundred thousand subcircuits). */
#define SMALL_LIST 8

/* A .subckt definition; its body is re-read for every instance. */
typedef struct {
    const char *name;
    tb_token at;            /* the name on the .subckt card */
    size_t src;
    const char **pins;      /* interned */
    size_t pin_count;
    size_t pin_cap;
    tb_name_index pin_index; /* once there are more than SMALL_LIST pins */
    param_list params;      /* defaults (the first default_count), then .param cards of the body */
    size_t default_count;
    size_t body_pos;        /* the body: text[body_pos..body_end) from line body_line */
    int body_line;
    size_t body_end;
    bool busy;              /* being expanded (recursion check) */
} subckt;

/* One subcircuit instance being expanded. */
typedef struct {
    const subckt *def;
    const char *path;  /* interned hierarchical name, "X1.X2" */
    size_t path_len;
    int *pins;         /* the caller's node for each pin */
    param_list params; /* the definition's, with the instance's values */
    tb_lexer lx;       /* over the body */
    size_t src;        /* where the X card is */
    tb_token at;       /* its name */
} frame;

/* A source text and where it was included from. */
typedef struct {
    const char *file; /* interned in the circuit */
    const char *text; /* owned by the circuit */
    size_t len;
    size_t parent;    /* the including source, SIZE_MAX for the netlist itself */
    int line;         /* the .include card's line in the parent */
} src_text;

/* Top-level cards found by the first pass one after the other in one source, parsed by
 * the second: a run ends at a card the first pass deals with (.include, .param,
 * .subckt, .end) and at the end of a file. One lexer reads the whole run. */
typedef struct {
    size_t src;
    size_t pos;   /* start of its first card's first physical line */
    int line;
    size_t count; /* its cards */
} card_run;

/* An open file of the first pass. */
typedef struct {
    tb_lexer lx;
    size_t src;
    char *canon; /* canonical path (malloc'd by realpath), NULL when unknown */
} open_file;

/* A file read through .include, kept so that including it again shares its text
 * (each file is read once) and a refused one is refused again without reading it. */
typedef struct {
    char id[48];      /* the file's identity (tb_netfile) */
    const char *file; /* the name it was first read under (interned in the circuit); NULL when refused */
    const char *text; /* owned by the circuit; NULL when refused */
    size_t len;
    tb_file_why why;  /* refused as binary: why; problem TB_FILE_OK otherwise */
    int foreign_line; /* refused as not a netlist: the line of its first card that is not one */
} known_file;

/* How this netlist is read (tb_read_options, resolved). */
typedef struct {
    bool allow_include;
    const char *include_root; /* as given, for messages; NULL: none */
    char *root_canon;         /* its canonical path (malloc'd by realpath) */
    size_t max_bytes;
} read_setup;

/* Names already taken by instances, with the line of each. */
typedef struct {
    const char *name; /* interned hierarchical name */
    int line;
} taken_name;

typedef struct {
    taken_name *items;
    size_t cap;
    size_t count;
    tb_name_index index;
} name_set;

typedef struct {
    tb_lexer *lx;   /* the lexer being read */
    size_t src;     /* its source */
    tb_token tok;   /* the current token */
    tb_token prev;  /* the token consumed before it */
    tb_token first; /* the current card's first token */
    char name[QUOTE_SIZE]; /* the card in messages: the element name, or ".ac" */
    tb_circuit *ckt;
    tb_diag *diag;
    int errors;
    tb_status status; /* TB_OK; TB_ERR_INPUT after an error; TB_ERR_NOMEM */
    src_text *srcs;
    size_t src_count;
    size_t src_cap;
    card_run *runs;
    size_t run_count;
    size_t run_cap;
    bool run_open;    /* the next card the first pass records may join the last run */
    param_list globals;
    subckt *defs;
    size_t def_count;
    size_t def_cap;
    tb_name_index def_index;
    frame *frames;    /* MAX_INSTANCE_DEPTH of them, allocated on first use */
    size_t depth;
    const param *chain[MAX_PARAM_CHAIN + 1]; /* parameters being evaluated */
    size_t chain_len;
    name_set instances;
    size_t expanded;  /* elements made inside instances */
    tb_token *words;  /* scratch: the words of an X or .subckt card */
    size_t word_count;
    size_t word_cap;
    char *scratch;    /* scratch: a hierarchical name */
    size_t scratch_cap;
    const read_setup *setup;
    size_t bytes;      /* text read, each file once */
    size_t inclusions; /* files read through .include, each time (past the limit: it was said) */
    known_file *known;
    size_t known_count;
    size_t known_cap;
    tb_name_index known_index; /* by id */
    size_t value_q;   /* 1 + the quantity of the last value() expression that read parameters, 0: none */
} parser;

/* ---- messages ----------------------------------------------------------- */

/* Token text for a message, cut at QUOTE_MAX bytes (on a UTF-8 boundary). */
static const char *quote(const tb_token *t, char buf[QUOTE_SIZE])
{
    size_t n = t->len;
    const char *dots = "";
    if (n > QUOTE_MAX) {
        n = QUOTE_MAX;
        while (n > 0 && ((unsigned char)t->ptr[n] & 0xC0) == 0x80)
            n--;
        dots = "...";
    }
    memcpy(buf, t->ptr, n); /* on every card: plain copies, no formatting */
    strcpy(buf + n, dots);
    return buf;
}

/* The physical line of source src holding at. */
static const char *line_at(const src_text *s, const char *at, size_t *len)
{
    tb_lexer lx = {.text = s->text, .len = s->len};
    return tb_lex_line(&lx, at, len);
}

/* Adds "included from F:L" for each file around source src, then
 * "in instance PATH (F:L)" for each instance being expanded, under the
 * diagnostic just recorded. */
static tb_status add_context(const parser *p, size_t src)
{
    tb_status st = TB_OK;
    for (size_t s = src; s < p->src_count && p->srcs[s].parent != SIZE_MAX && !st; s = p->srcs[s].parent)
        st = tb_diag_add_context(p->diag, "included from %s:%d", p->srcs[p->srcs[s].parent].file,
                                 p->srcs[s].line);
    for (size_t d = p->depth; d-- > 0 && !st;) {
        const frame *f = &p->frames[d];
        st = tb_diag_add_context(p->diag, "in instance %s (%s:%d)", f->path, p->srcs[f->src].file,
                                 f->at.line);
    }
    return st;
}

static void vreport_in(parser *p, tb_severity sev, size_t src, const tb_token *at,
                       const char *fmt, va_list ap)
{
    char msg[MESSAGE_SIZE];
    vsnprintf(msg, sizeof msg, fmt, ap);
    size_t line_len = 0;
    const char *line = line_at(&p->srcs[src], at->ptr, &line_len);
    if (tb_diag_add(p->diag, sev, p->srcs[src].file, at->line, at->col, line, line_len, "%s", msg) ||
        add_context(p, src)) {
        p->status = TB_ERR_NOMEM;
    } else if (sev == TB_SEV_ERROR) {
        p->errors++;
        if (p->status == TB_OK)
            p->status = TB_ERR_INPUT;
    }
}

/* Records an error at token at of source src; always false. */
static bool error_in(parser *p, size_t src, const tb_token *at, const char *fmt, ...)
    __attribute__((format(printf, 4, 5)));
static bool error_in(parser *p, size_t src, const tb_token *at, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    vreport_in(p, TB_SEV_ERROR, src, at, fmt, ap);
    va_end(ap);
    return false;
}

/* Records an error at token at of the current source; always false, so a
 * card can `return error(...)`. */
static bool error(parser *p, const tb_token *at, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));
static bool error(parser *p, const tb_token *at, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    vreport_in(p, TB_SEV_ERROR, p->src, at, fmt, ap);
    va_end(ap);
    return false;
}

static void warning(parser *p, const tb_token *at, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));
static void warning(parser *p, const tb_token *at, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    vreport_in(p, TB_SEV_WARNING, p->src, at, fmt, ap);
    va_end(ap);
}

static bool nomem(parser *p)
{
    p->status = TB_ERR_NOMEM;
    return false;
}

/* Reading stops: out of memory or too many errors. */
static bool stopped(const parser *p)
{
    return p->status == TB_ERR_NOMEM || p->errors >= TB_DIAG_MAX_ERRORS || tb_diag_full(p->diag);
}

/* The current token is TB_TOK_BAD: a control character or an odd space, named. */
static bool bad_char(parser *p)
{
    char text[128];
    return error(p, &p->tok, "%s", tb_lex_bad_text(&p->tok, text, sizeof text));
}

/* The empty position just after token t, where something missing was due. */
static tb_token after(const tb_token *t)
{
    tb_token end = *t;
    end.kind = TB_TOK_EOC;
    end.ptr += t->len;
    end.col = t->len >= (size_t)(INT_MAX - t->col) ? INT_MAX : t->col + (int)t->len;
    end.len = 0;
    return end;
}

/* Reports that `what` was expected at the current token; always false. */
static bool expected(parser *p, const char *what)
{
    char got[QUOTE_SIZE];
    if (p->tok.kind == TB_TOK_BAD)
        return bad_char(p);
    if (p->tok.kind == TB_TOK_EOC || p->tok.kind == TB_TOK_EOF) {
        tb_token end = after(&p->prev);
        if (p->prev.ptr == p->first.ptr)
            return error(p, &end, "expected %s after '%s'", what, quote(&p->prev, got));
        return error(p, &end, "expected %s for %s after '%s'", what, p->name, quote(&p->prev, got));
    }
    return error(p, &p->tok, "expected %s for %s, got '%s'", what, p->name, quote(&p->tok, got));
}

/* ---- tokens ------------------------------------------------------------- */

static void advance(parser *p)
{
    p->prev = p->tok;
    tb_lex_read(p->lx, &p->tok);
}

/* The token after the current one, not consumed. */
static tb_token peek_next(const parser *p)
{
    tb_lexer copy = *p->lx;
    return tb_lex_next(&copy);
}

static bool at_end(const parser *p)
{
    return p->tok.kind == TB_TOK_EOC || p->tok.kind == TB_TOK_EOF;
}

static bool accept(parser *p, tb_tok_kind kind)
{
    if (p->tok.kind != kind)
        return false;
    advance(p);
    return true;
}

static bool expect(parser *p, tb_tok_kind kind, const char *what)
{
    return accept(p, kind) || expected(p, what);
}

static bool accept_keyword(parser *p, const char *keyword)
{
    if (!tb_lex_is(&p->tok, keyword))
        return false;
    advance(p);
    return true;
}

/* The current token is a word (it is not consumed). */
static bool expect_word(parser *p, const char *what)
{
    return p->tok.kind == TB_TOK_WORD || expected(p, what);
}

/* Nothing may follow `last` (of element `of`, when not NULL) on this card. */
static bool end_of_card(parser *p, const char *last, const char *of)
{
    char got[QUOTE_SIZE];
    if (at_end(p))
        return true;
    if (p->tok.kind == TB_TOK_BAD)
        return bad_char(p);
    return error(p, &p->tok, "unexpected '%s' after %s%s%s", quote(&p->tok, got), last,
                 of ? " of " : "", of ? of : "");
}

static void skip_card(parser *p)
{
    while (!at_end(p))
        advance(p);
}

static const char *intern_n(parser *p, const char *s, size_t len)
{
    const char *copy = tb_circuit_intern(p->ckt, s, len);
    if (!copy)
        nomem(p);
    return copy;
}

static tb_loc loc_of(const parser *p, const tb_token *t)
{
    tb_loc loc = {p->srcs[p->src].file, t->line, t->col};
    return loc;
}

/* The current token starts like a number or is an expression (it may still be malformed). */
static bool looks_numeric(const parser *p)
{
    double ignored = 0;
    return p->tok.kind == TB_TOK_EXPR ||
           (p->tok.kind == TB_TOK_WORD &&
            tb_lex_value(p->tok.ptr, p->tok.len, &ignored) != TB_VALUE_NOT_NUMBER);
}

/* Case-insensitive equality of a NUL-terminated name and a token. */
static bool name_is(const char *name, const tb_token *t)
{
    if (strlen(name) != t->len)
        return false;
    for (size_t i = 0; i < t->len; i++)
        if (tb_lex_lower(name[i]) != tb_lex_lower(t->ptr[i]))
            return false;
    return true;
}

static bool is_ground(const tb_token *t)
{
    return (t->len == 1 && t->ptr[0] == '0') || tb_lex_is(t, "gnd");
}

/* ---- hierarchical names ------------------------------------------------- */

static const frame *top_frame(const parser *p)
{
    return p->depth ? &p->frames[p->depth - 1] : NULL;
}

/* The name of token t in the current instance: "PATH.t" (or t at top level),
 * in p->scratch; NULL when out of memory. */
static const char *scoped(parser *p, const tb_token *t, size_t *len)
{
    const frame *f = top_frame(p);
    size_t prefix = f ? f->path_len + 1 : 0;
    if (tb_grow(&p->scratch, &p->scratch_cap, prefix + t->len + 1, 1, SIZE_MAX / 2)) {
        nomem(p);
        return NULL;
    }
    if (f) {
        memcpy(p->scratch, f->path, f->path_len);
        p->scratch[f->path_len] = '.';
    }
    memcpy(p->scratch + prefix, t->ptr, t->len);
    p->scratch[prefix + t->len] = '\0';
    *len = prefix + t->len;
    return p->scratch;
}

/* Interns the current instance's name for token t. */
static const char *intern_scoped(parser *p, const tb_token *t)
{
    size_t len = 0;
    const char *name = scoped(p, t, &len);
    return name ? intern_n(p, name, len) : NULL;
}

/* ---- parameters and expressions ----------------------------------------- */

/* Where an expression is being evaluated: its token, source and scope. */
typedef struct {
    parser *p;
    const tb_token *tok;
    size_t src;
    size_t depth; /* parameters of frames below this depth and the globals are visible */
} eval_ctx;

static bool evaluate(parser *p, const tb_token *tok, size_t src, size_t depth, double *out);

/* The token at byte `offset` of the expression in tok (for messages). */
static tb_token expr_pos(const tb_token *tok, size_t offset)
{
    size_t skip = (tok->kind == TB_TOK_EXPR) + offset;
    tb_token at = *tok;
    at.ptr += skip;
    at.len = 0;
    at.col = skip >= (size_t)(INT_MAX - at.col) ? INT_MAX : at.col + (int)skip;
    return at;
}

static const char *param_name_of(const void *owner, size_t i)
{
    return ((const param_list *)owner)->items[i].name;
}

/* The parameter called name[0..len) in list, found through index (the list's own, or
 * that of the list it is a copy of); NULL when there is none. */
static param *find_param_in(param_list *list, const tb_name_index *index, const char *name, size_t len)
{
    size_t found = 0;
    if (index->cap)
        return tb_names_find(index, param_name_of, list, name, len, &found) ? &list->items[found] : NULL;
    for (size_t i = 0; i < list->count; i++)
        if (tb_name_eq_n(list->items[i].name, name, len))
            return &list->items[i];
    return NULL;
}

static param *find_param(param_list *list, const char *name, size_t len)
{
    return find_param_in(list, &list->index, name, len);
}

/* Indexes the last of count entries of owner, once count is past SMALL_LIST (all of
 * them the first time). On failure the index is dropped: the entries stay searchable
 * in order. */
static tb_status index_tail(tb_name_index *idx, tb_name_of name_of, const void *owner, size_t count)
{
    size_t ignored = 0;
    if (count <= SMALL_LIST)
        return TB_OK;
    for (size_t i = idx->cap ? count - 1 : 0; i < count; i++) {
        if (tb_names_add(idx, name_of, owner, i, &ignored)) {
            tb_names_free(idx);
            return TB_ERR_NOMEM;
        }
    }
    return TB_OK;
}

/* Appends prm to list (its name is new there). */
static tb_status add_param(param_list *list, const param *prm)
{
    if (tb_grow(&list->items, &list->cap, list->count + 1, sizeof(param), TB_MAX_ELEMENTS))
        return TB_ERR_NOMEM;
    list->items[list->count++] = *prm;
    return index_tail(&list->index, param_name_of, list, list->count);
}

static void free_params(param_list *list)
{
    tb_free(list->items);
    tb_names_free(&list->index);
}

static void free_subckt(subckt *def)
{
    tb_free(def->pins);
    tb_names_free(&def->pin_index);
    free_params(&def->params);
}

/* "a -> b -> c": the chain from index `from`, then last. */
static void chain_text(const parser *p, size_t from, const char *last, size_t last_len,
                       char *buf, size_t size)
{
    size_t n = 0;
    buf[0] = '\0';
    for (size_t i = from; i < p->chain_len && n < size; i++)
        n += (size_t)snprintf(buf + n, size - n, "%s -> ", p->chain[i]->name);
    if (n < size)
        snprintf(buf + n, size - n, "%.*s", (int)last_len, last);
}

/* The expression being evaluated read prm at byte offset (st: how reading it went): recorded
 * for the runs that change parameters (paramdep.h). */
static tb_status note_ref(parser *p, tb_status st, const param *prm, size_t offset)
{
    if (st == TB_OK && prm->qid && tb_params_ref(p->ckt->params, offset, prm->qid - 1) != TB_OK) {
        nomem(p);
        return TB_ERR_NOMEM;
    }
    return st;
}

/* Records the expression tok (of source src, evaluated to v with the references recorded
 * since mark) as a quantity of the parameter table: a parameter (name in the instance
 * prefix, NULL at the top level) or, with name NULL, a value that does not follow its
 * parameters in runs until an element card binds it. *q: 1 + the quantity. */
static bool record_quantity(parser *p, size_t mark, const tb_token *tok, size_t src, const char *prefix,
                            const char *name, double v, size_t *q)
{
    bool braced = tok->kind == TB_TOK_EXPR;
    tb_pquant proto = {.prefix = prefix, .name = name, .text = tok->ptr + braced, .len = tok->len - 2 * braced,
                       .value = v, .loc = {p->srcs[src].file, tok->line, tok->col}, .fixed = !name};
    size_t made = 0;
    if (tb_params_add(p->ckt->params, mark, &proto, &made) != TB_OK)
        return nomem(p);
    *q = made + 1;
    return true;
}

/* The value of parameter prm, found at frame depth `depth` (0: a global). */
static tb_status param_value(const eval_ctx *cx, param *prm, size_t depth, size_t offset,
                             double *out)
{
    parser *p = cx->p;
    char chain[MESSAGE_SIZE / 2];
    if (prm->state == PARAM_DONE) {
        *out = prm->value;
        return TB_OK;
    }
    if (prm->state == PARAM_FAILED)
        return TB_ERR_INPUT; /* reported already */
    tb_token at = expr_pos(cx->tok, offset);
    if (prm->state == PARAM_BUSY) {
        size_t from = 0;
        while (from < p->chain_len && p->chain[from] != prm)
            from++;
        chain_text(p, from, prm->name, strlen(prm->name), chain, sizeof chain);
        error_in(p, cx->src, &at, "circular parameter definition %s", chain);
        return TB_ERR_INPUT;
    }
    if (p->chain_len > MAX_PARAM_CHAIN) {
        error_in(p, cx->src, &at, "parameters defined through too many others (limit is %d)",
                 MAX_PARAM_CHAIN);
        return TB_ERR_INPUT;
    }
    prm->state = PARAM_BUSY;
    p->chain[p->chain_len++] = prm;
    double v = 0;
    size_t mark = tb_params_mark(p->ckt->params);
    bool ok = evaluate(p, &prm->expr, prm->src, depth, &v);
    p->chain_len--;
    if (ok)
        ok = record_quantity(p, mark, &prm->expr, prm->src, depth ? p->frames[depth - 1].path : NULL, prm->name,
                             v, &prm->qid);
    else
        tb_params_drop(p->ckt->params, mark);
    prm->state = ok ? PARAM_DONE : PARAM_FAILED;
    if (!ok)
        return p->status == TB_ERR_NOMEM ? TB_ERR_NOMEM : TB_ERR_INPUT;
    prm->value = v;
    *out = v;
    return TB_OK;
}

/* tb_expr_lookup: the instance's parameters, then its parents', then the globals. */
static tb_status lookup(void *ctx, const char *name, size_t len, size_t offset, double *out)
{
    const eval_ctx *cx = ctx;
    parser *p = cx->p;
    for (size_t d = cx->depth; d > 0; d--) {
        const frame *f = &p->frames[d - 1];
        param *prm = find_param_in((param_list *)&f->params, &f->def->params.index, name, len);
        if (prm)
            return note_ref(p, param_value(cx, prm, d, offset, out), prm, offset);
    }
    param *prm = find_param(&p->globals, name, len);
    if (prm)
        return note_ref(p, param_value(cx, prm, 0, offset, out), prm, offset);
    tb_token at = expr_pos(cx->tok, offset);
    if (p->chain_len == 0) {
        error_in(p, cx->src, &at, "undefined parameter '%.*s'", (int)len, name);
    } else {
        char chain[MESSAGE_SIZE / 2];
        chain_text(p, 0, name, len, chain, sizeof chain);
        error_in(p, cx->src, &at, "undefined parameter '%.*s' (%s)", (int)len, name, chain);
    }
    return TB_ERR_INPUT;
}

/* Evaluates the expression in tok (a WORD, or an EXPR with its braces) of
 * source src, in the scope of frame depth `depth`. */
static bool evaluate(parser *p, const tb_token *tok, size_t src, size_t depth, double *out)
{
    const char *text = tok->ptr;
    size_t len = tok->len;
    if (tok->kind == TB_TOK_EXPR) {
        if (len < 2 || text[len - 1] != '}')
            return error_in(p, src, tok, "'{' without '}' on the same line");
        text++;
        len -= 2;
    }
    eval_ctx cx = {p, tok, src, depth};
    tb_expr_error err;
    tb_status st = tb_expr_eval(text, len, lookup, &cx, out, &err);
    if (st == TB_ERR_NOMEM)
        return nomem(p);
    if (st != TB_OK && err.message[0]) {
        tb_token at = expr_pos(tok, err.offset);
        return error_in(p, src, &at, "%s", err.message);
    }
    return st == TB_OK;
}

/* paramdef -> NAME = (WORD | EXPR), appended to list (not evaluated). */
static bool param_def(parser *p, param_list *list, const char *what)
{
    char text[QUOTE_SIZE];
    if (!expect_word(p, "a parameter name"))
        return false;
    tb_token name = p->tok;
    bool valid = (tb_lex_lower(name.ptr[0]) >= 'a' && tb_lex_lower(name.ptr[0]) <= 'z') ||
                 name.ptr[0] == '_';
    for (size_t i = 1; i < name.len && valid; i++) {
        char c = tb_lex_lower(name.ptr[i]);
        valid = (c >= 'a' && c <= 'z') || (c >= '0' && c <= '9') || c == '_';
    }
    if (!valid)
        return error(p, &name, "'%s' is not a parameter name (a letter or '_', then letters, "
                     "digits or '_')", quote(&name, text));
    if (tb_expr_is_builtin(name.ptr, name.len))
        return error(p, &name, "'%s' is a built-in function or constant, not a parameter name",
                     quote(&name, text));
    param *earlier = find_param(list, name.ptr, name.len);
    if (earlier)
        return error(p, &name, "%s '%s' is defined twice (first on line %d)", what,
                     quote(&name, text), earlier->expr.line);
    advance(p);
    if (!expect(p, TB_TOK_EQUALS, "'='"))
        return false;
    if (p->tok.kind != TB_TOK_WORD && p->tok.kind != TB_TOK_EXPR)
        return expected(p, "a value or {expression}");
    param prm = {intern_n(p, name.ptr, name.len), p->tok, p->src, 0, PARAM_UNSET, 0};
    if (!prm.name)
        return false;
    if (add_param(list, &prm))
        return nomem(p);
    advance(p);
    return true;
}

/* ---- operands ----------------------------------------------------------- */

static const char *pin_name_of(const void *owner, size_t i)
{
    return ((const subckt *)owner)->pins[i];
}

/* The pin of def called name[0..len): true and its position in *found. */
static bool find_pin(const subckt *def, const char *name, size_t len, size_t *found)
{
    if (def->pin_index.cap)
        return tb_names_find(&def->pin_index, pin_name_of, def, name, len, found);
    for (size_t i = 0; i < def->pin_count; i++) {
        if (tb_name_eq_n(def->pins[i], name, len)) {
            *found = i;
            return true;
        }
    }
    return false;
}

/* The node called t here: in an instance a pin stands for the caller's node,
 * ground stays ground, and any other name becomes PATH.name. */
static bool resolve_node(parser *p, const tb_token *t, int *index)
{
    const frame *f = top_frame(p);
    if (f && is_ground(t)) {
        *index = 0;
        return true;
    }
    size_t pin = 0;
    if (f && find_pin(f->def, t->ptr, t->len, &pin)) {
        *index = f->pins[pin];
        return true;
    }
    size_t len = 0;
    const char *name = scoped(p, t, &len);
    if (!name)
        return false;
    if (p->ckt->node_count >= TB_MAX_NODES && !tb_circuit_find_node(p->ckt, name, len, index))
        return error(p, t, "too many nodes (limit is %zu)", TB_MAX_NODES);
    if (tb_circuit_node(p->ckt, name, len, index) != TB_OK)
        return nomem(p);
    return true;
}

/* node -> WORD */
static bool node(parser *p, int *index)
{
    if (!expect_word(p, "a node name") || !resolve_node(p, &p->tok, index))
        return false;
    advance(p);
    return true;
}

/* value -> WORD read by tb_lex_value | EXPR evaluated in the current scope */
static bool value(parser *p, const char *what, double *out)
{
    char text[QUOTE_SIZE];
    p->value_q = 0;
    if (p->tok.kind == TB_TOK_EXPR) {
        size_t mark = tb_params_mark(p->ckt->params);
        bool ok = evaluate(p, &p->tok, p->src, p->depth, out);
        if (ok && tb_params_refs(p->ckt->params, mark))
            ok = record_quantity(p, mark, &p->tok, p->src, NULL, NULL, *out, &p->value_q);
        tb_params_drop(p->ckt->params, mark);
        if (!ok)
            return false;
        advance(p);
        return true;
    }
    if (!expect_word(p, what))
        return false;
    switch (tb_lex_value(p->tok.ptr, p->tok.len, out)) {
    case TB_VALUE_OK:
        advance(p);
        return true;
    case TB_VALUE_NOT_NUMBER:
        return expected(p, what);
    case TB_VALUE_MALFORMED:
        return error(p, &p->tok, "malformed value '%s'", quote(&p->tok, text));
    case TB_VALUE_RANGE:
        return error(p, &p->tok, "value '%s' is out of range", quote(&p->tok, text));
    }
    return false;
}
/* ---- value ranges ------------------------------------------------------- */

/* The values a quantity may take (docs/netlist.md, "Value ranges"): zero when `zero`
 * allows it, otherwise a magnitude from lo to hi, either sign. Wide enough for every
 * realistic circuit, narrow enough that nothing the analysis forms from them leaves the
 * range of a double: conductances 1/R, jwC and jwL up to 1e15 Hz, their products in the
 * LU factors, natural frequencies 1/(RC) and R/L, a gain error in percent. */
typedef struct {
    double lo;
    double hi;
    bool zero;
    const char *text; /* the range in words, for the message */
} range;

static const range R_RANGE = {1e-12, 1e18, false, "from 1e-12 to 1e18 ohms in magnitude"};
static const range C_RANGE = {1e-21, 1e12, false, "from 1e-21 to 1e12 farads in magnitude"};
static const range L_RANGE = {1e-21, 1e12, false, "from 1e-21 to 1e12 henries in magnitude"};
/* gains of E, G, F, H and DC and AC values of V, I; .ideal gain and beta */
static const range GAIN_RANGE = {1e-15, 1e15, true, "0 or from 1e-15 to 1e15 in magnitude"};
static const range ESTIMATE_RANGE = {1e-15, 1e15, false, "from 1e-15 to 1e15 in magnitude"};
/* .ac (positive, checked first): the period of the lowest is 32 years, the highest is light */
static const range FREQ_RANGE = {1e-9, 1e15, false, "from 1e-9 to 1e15 Hz"};

static bool in_range(const range *r, double x)
{
    double m = fabs(x);
    return (r->zero && x == 0) || (m >= r->lo && m <= r->hi);
}

/* The value just read (p->prev) is `quantity` of `of` and must lie in r; a value of zero
 * that r refuses is "must be non-zero". */
static bool check_range(parser *p, const range *r, double x, const char *quantity, const char *of)
{
    char text[QUOTE_SIZE];
    if (in_range(r, x))
        return true;
    if (x == 0 && !r->zero)
        return error(p, &p->prev, "%s of %s must be non-zero", quantity, of);
    return error(p, &p->prev, "%s of %s must be %s, got '%s'", quantity, of, r->text,
                 quote(&p->prev, text));
}

/* ---- element cards ------------------------------------------------------ */

/* Starts element e of the given kind at the name token (the current one). */
static bool element_start(parser *p, tb_elem_kind kind, tb_element *e)
{
    *e = (tb_element){.kind = kind, .branch = -1, .loc = loc_of(p, &p->tok)};
    e->name = intern_scoped(p, &p->tok);
    if (!e->name)
        return false;
    if (p->depth) {
        tb_token full = {TB_TOK_WORD, e->name, strlen(e->name), 0, 0};
        quote(&full, p->name);
    }
    advance(p);
    return true;
}

/* Ends element e (nothing may follow its `part`) and adds it to the circuit. */
static bool element_end(parser *p, const tb_element *e, const char *part)
{
    if (!end_of_card(p, part, p->name))
        return false;
    if (p->ckt->elem_count >= TB_MAX_ELEMENTS)
        return error(p, &p->first, "too many elements (limit is %zu)", TB_MAX_ELEMENTS);
    if (p->depth && ++p->expanded > MAX_EXPANDED)
        return error(p, &p->first, "subcircuits expand to too many elements (limit is %zu)",
                     MAX_EXPANDED);
    if (tb_circuit_add_element(p->ckt, e) != TB_OK)
        return nomem(p);
    return true;
}

/* The element just added takes its value from quantity q (1 + index; 0: a plain value). */
static bool bind_value(parser *p, size_t q)
{
    if (q && tb_params_bind(p->ckt->params, q - 1, p->ckt->elem_count - 1) != TB_OK)
        return nomem(p);
    return true;
}

static const char *const quantity[TB_EL_COUNT] = {
    [TB_EL_R] = "resistance", [TB_EL_C] = "capacitance", [TB_EL_L] = "inductance",
};

/* rcard -> RNAME node node value   (C and L cards alike) */
static bool passive(parser *p, tb_elem_kind kind)
{
    tb_element e;
    const range *r = kind == TB_EL_R ? &R_RANGE : kind == TB_EL_C ? &C_RANGE : &L_RANGE;
    if (!element_start(p, kind, &e) || !node(p, &e.node[0]) || !node(p, &e.node[1]) ||
        !value(p, "a value", &e.value) || !check_range(p, r, e.value, quantity[kind], p->name))
        return false;
    size_t q = p->value_q;
    return element_end(p, &e, "the value") && bind_value(p, q);
}

/* vcard -> VNAME node node [[DC] value] [AC value [value]]   (I cards alike) */
static bool source(parser *p, tb_elem_kind kind)
{
    tb_element e;
    const char *part = NULL;
    if (!element_start(p, kind, &e) || !node(p, &e.node[0]) || !node(p, &e.node[1]))
        return false;
    if (accept_keyword(p, "dc") || looks_numeric(p)) {
        if (!value(p, "a DC value", &e.dc) || !check_range(p, &GAIN_RANGE, e.dc, "DC value", p->name))
            return false;
        part = "the DC value";
    }
    if (accept_keyword(p, "ac")) {
        if (!value(p, "an AC magnitude", &e.ac_mag) ||
            !check_range(p, &GAIN_RANGE, e.ac_mag, "AC magnitude", p->name))
            return false;
        part = "the AC magnitude";
        if (looks_numeric(p)) {
            if (!value(p, "an AC phase in degrees", &e.ac_phase_deg))
                return false;
            part = "the AC phase";
        }
    }
    if (!part && p->tok.kind == TB_TOK_WORD)
        return expected(p, "DC, AC or a value");
    return element_end(p, &e, part ? part : "the nodes");
}

/* keyed -> {KEY = value}: keys of keys[0..n) in any order, each at most once, up to the
 * card's end (lenient: up to the first word that is not followed by '='), into vals[i]
 * (seen[i] set, the value's token in at[i] when at is not NULL); `of` names the card in
 * messages (nonlinear.c) */
static bool keyed(parser *p, const tb_nl_key *keys, size_t n, const char *expected_text, const char *of,
                  bool lenient, double *vals, bool *seen, tb_token *at)
{
    char text[QUOTE_SIZE];
    while (!at_end(p)) {
        size_t k = 0;
        while (k < n && !tb_lex_is(&p->tok, keys[k].key))
            k++;
        if (k == n && lenient && peek_next(p).kind != TB_TOK_EQUALS)
            return true; /* not a key: the card's end reports it */
        if (k == n && p->tok.kind == TB_TOK_WORD && peek_next(p).kind == TB_TOK_EQUALS)
            return error(p, &p->tok, "unknown key '%s' on %s: expected %s", quote(&p->tok, text), of,
                         expected_text);
        if (k == n)
            return expected(p, expected_text);
        tb_token key = p->tok;
        if (seen[k])
            return error(p, &key, "'%s' is given twice on %s", quote(&key, text), of);
        advance(p);
        const range r = {keys[k].lo, keys[k].hi, keys[k].zero, keys[k].range_text};
        if (!expect(p, TB_TOK_EQUALS, "'='") || !value(p, keys[k].what, &vals[k]) ||
            !check_range(p, &r, vals[k], keys[k].key, of))
            return false;
        if (keys[k].positive && vals[k] < 0)
            return error(p, &p->prev, "%s of %s must be %s, got '%s'", keys[k].key, of, keys[k].range_text,
                         quote(&p->prev, text));
        seen[k] = true;
        if (at)
            at[k] = p->prev;
    }
    return true;
}

/* coefficients -> [keyed k2, k3]: the weak nonlinearity y = k x + k2 x^2 + k3 x^3 of a
 * controlled source, after its gain */
static bool coefficients(parser *p, tb_element *e)
{
    size_t n = 0;
    const tb_nl_key *keys = tb_nl_coef_keys(&n);
    double vals[TB_NL_COEF_COUNT] = {0, 0};
    bool seen[TB_NL_COEF_COUNT] = {false, false};
    if (!keyed(p, keys, n, tb_nl_coef_expected(), p->name, true, vals, seen, NULL))
        return false;
    e->k2 = vals[TB_NL_K2];
    e->k3 = vals[TB_NL_K3];
    return true;
}

/* ecard -> ENAME node node node node value [k2=VALUE] [k3=VALUE]   (G cards alike) */
static bool vcontrolled(parser *p, tb_elem_kind kind)
{
    tb_element e;
    if (!element_start(p, kind, &e) || !node(p, &e.node[0]) || !node(p, &e.node[1]) ||
        !node(p, &e.node[2]) || !node(p, &e.node[3]) || !value(p, "a gain", &e.value) ||
        !check_range(p, &GAIN_RANGE, e.value, "gain", p->name))
        return false;
    size_t q = p->value_q;
    return coefficients(p, &e) && element_end(p, &e, "the gain") && bind_value(p, q);
}

/* fcard -> FNAME node node VNAME value [k2=VALUE] [k3=VALUE]   (H cards alike) */
static bool icontrolled(parser *p, tb_elem_kind kind)
{
    tb_element e;
    if (!element_start(p, kind, &e) || !node(p, &e.node[0]) || !node(p, &e.node[1]) ||
        !expect_word(p, "a voltage source name"))
        return false;
    e.ctrl_name = intern_scoped(p, &p->tok);
    if (!e.ctrl_name)
        return false;
    advance(p);
    if (!value(p, "a gain", &e.value) || !check_range(p, &GAIN_RANGE, e.value, "gain", p->name))
        return false;
    size_t q = p->value_q;
    return coefficients(p, &e) && element_end(p, &e, "the gain") && bind_value(p, q);
}

/* kcard -> KNAME LNAME LNAME value, the coupling 0 < k <= 1 */
static bool coupling(parser *p)
{
    char text[QUOTE_SIZE];
    tb_element e;
    if (!element_start(p, TB_EL_K, &e) || !expect_word(p, "an inductor name"))
        return false;
    e.ctrl_name = intern_scoped(p, &p->tok);
    if (!e.ctrl_name)
        return false;
    advance(p);
    if (!expect_word(p, "an inductor name"))
        return false;
    e.ctrl2_name = intern_scoped(p, &p->tok);
    if (!e.ctrl2_name)
        return false;
    advance(p);
    if (!value(p, "a coupling coefficient", &e.value))
        return false;
    if (!(e.value > 0 && e.value <= 1))
        return error(p, &p->prev, "coupling of %s must be in (0, 1], got '%s'", p->name,
                     quote(&p->prev, text));
    size_t q = p->value_q;
    return element_end(p, &e, "the coupling") && bind_value(p, q);
}

/* Length of the UTF-8 character starting s[0..len). */
static size_t char_len(const char *s, size_t len)
{
    size_t n = 1;
    if ((unsigned char)s[0] >= 0xC0)
        while (n < len && n < 4 && ((unsigned char)s[n] & 0xC0) == 0x80)
            n++;
    return n;
}

static bool card_words(parser *p);

/* qcard -> QNAME node node node [node] NAME = value {NAME = value}   (M cards alike)
 * Expanded into small-signal parts by device.c. */
static bool device(parser *p)
{
    tb_device_card card = {.first = p->tok, .label = p->name};
    tb_device_error err = {0};
    tb_device_parts parts;
    tb_element head;
    if (!element_start(p, TB_EL_G, &head) || !card_words(p))
        return false;
    card.name = head.name;
    card.loc = head.loc;
    if (tb_device_shape(p->name, &card.first, p->words, p->word_count, !at_end(p), &err))
        return error(p, &err.at, "%s", err.message);
    card.node_count = p->word_count;
    for (size_t i = 0; i < card.node_count; i++) {
        card.node_tok[i] = p->words[i];
        if (!resolve_node(p, &p->words[i], &card.node[i]))
            return false;
    }
    while (!at_end(p)) {
        if (card.key_count == TB_DEVICE_MAX_KEYS)
            return error(p, &p->tok, "too many keys on %s (limit is %d)", p->name, TB_DEVICE_MAX_KEYS);
        tb_device_key *k = &card.keys[card.key_count++];
        if (!expect_word(p, "a key"))
            return false;
        k->key = p->tok;
        advance(p);
        if (!expect(p, TB_TOK_EQUALS, "'='"))
            return false;
        k->at = p->tok;
        if (!value(p, "a value", &k->value))
            return false;
    }
    tb_status st = tb_device_expand(p->ckt, &card, &parts, &err);
    if (st == TB_ERR_NOMEM)
        return nomem(p);
    if (st)
        return error(p, &err.at, "%s", err.message);
    for (size_t i = 0; i < parts.count; i++)
        if (!element_end(p, &parts.part[i], "the keys"))
            return false;
    return true;
}

/* element -> rcard | vcard | ecard | fcard | kcard | qcard | mcard | xcard, chosen by the
 * name's first letter */
static bool instance(parser *p);

static bool element(parser *p)
{
    char refusal[TB_DEVICE_MESSAGE];
    switch (tb_lex_lower(p->tok.ptr[0])) {
    case 'r':
        return passive(p, TB_EL_R);
    case 'c':
        return passive(p, TB_EL_C);
    case 'l':
        return passive(p, TB_EL_L);
    case 'v':
        return source(p, TB_EL_V);
    case 'i':
        return source(p, TB_EL_I);
    case 'e':
        return vcontrolled(p, TB_EL_E);
    case 'g':
        return vcontrolled(p, TB_EL_G);
    case 'f':
        return icontrolled(p, TB_EL_F);
    case 'h':
        return icontrolled(p, TB_EL_H);
    case 'k':
        return coupling(p);
    case 'x':
        return instance(p);
    case 'q':
    case 'm':
        return device(p);
    default:
        if (tb_device_refusal(p->name, p->tok.ptr[0], refusal, sizeof refusal))
            return error(p, &p->tok, "%s", refusal);
        return error(p, &p->tok,
                     "unknown element '%s': '%.*s' is not one of the element letters "
                     "R C L V I E G F H K Q M X",
                     p->name, (int)char_len(p->tok.ptr, p->tok.len), p->tok.ptr);
    }
}

/* ---- directive cards ---------------------------------------------------- */

/* grid -> DEC | OCT | LIN */
static bool grid(parser *p, tb_grid_kind *kind)
{
    if (accept_keyword(p, "dec"))
        *kind = TB_GRID_DEC;
    else if (accept_keyword(p, "oct"))
        *kind = TB_GRID_OCT;
    else if (accept_keyword(p, "lin"))
        *kind = TB_GRID_LIN;
    else
        return expected(p, "dec, oct or lin");
    return true;
}

/* points -> value, a whole number from 1 to MAX_AC_POINTS */
static bool points(parser *p, long *count)
{
    char text[QUOTE_SIZE];
    double n = 0;
    if (!value(p, "a number of points", &n))
        return false;
    if (!(n >= 1) || n != floor(n))
        return error(p, &p->prev, "number of points of .ac must be a positive integer, got '%s'",
                     quote(&p->prev, text));
    if (n > (double)MAX_AC_POINTS)
        return error(p, &p->prev, "number of points of .ac must be at most %ld, got '%s'",
                     MAX_AC_POINTS, quote(&p->prev, text));
    *count = (long)n;
    return true;
}

/* accard -> .AC grid points value value */
static bool ac_card(parser *p)
{
    char text[QUOTE_SIZE];
    char other[QUOTE_SIZE];
    tb_ac_spec ac = {.given = true, .loc = loc_of(p, &p->tok)};
    if (p->ckt->ac.given)
        return error(p, &p->tok, "second .ac directive (the first is on line %d)",
                     p->ckt->ac.loc.line);
    advance(p);
    if (!grid(p, &ac.kind) || !points(p, &ac.points) ||
        !value(p, "a start frequency", &ac.fstart))
        return false;
    tb_token start = p->prev;
    if (!(ac.fstart > 0))
        return error(p, &start, "start frequency of .ac must be positive, got '%s'",
                     quote(&start, text));
    if (!check_range(p, &FREQ_RANGE, ac.fstart, "start frequency", ".ac") ||
        !value(p, "a stop frequency", &ac.fstop))
        return false;
    if (ac.fstop < ac.fstart)
        return error(p, &p->prev,
                     "stop frequency of .ac ('%s') must not be below its start frequency ('%s')",
                     quote(&p->prev, text), quote(&start, other));
    if (!check_range(p, &FREQ_RANGE, ac.fstop, "stop frequency", ".ac") ||
        !end_of_card(p, "the stop frequency of .ac", NULL))
        return false;
    double total = tb_grid_total(&ac);
    if (total > (double)TB_GRID_MAX_POINTS)
        return error(p, &p->first, "the .ac grid has %.0f frequencies in all (limit is %zu)", total,
                     TB_GRID_MAX_POINTS);
    p->ckt->ac = ac;
    return true;
}

/* loopcard -> .LOOP NAME {NAME} */
static bool loop_card(parser *p)
{
    advance(p);
    do {
        if (!expect_word(p, "a controlled source name"))
            return false;
        if (p->ckt->loop_count >= TB_MAX_LOOPS)
            return error(p, &p->tok, "too many .loop sources (limit is %zu)", TB_MAX_LOOPS);
        tb_loop_spec loop = {.source = intern_n(p, p->tok.ptr, p->tok.len),
                             .loc = loc_of(p, &p->tok)};
        if (!loop.source)
            return false;
        if (tb_circuit_add_loop(p->ckt, &loop) != TB_OK)
            return nomem(p);
        advance(p);
    } while (!at_end(p));
    return true;
}

/* Interns the current word as one operand of the .io output. */
static bool io_name(parser *p, const char *what, const char **name)
{
    if (!expect_word(p, what))
        return false;
    *name = intern_n(p, p->tok.ptr, p->tok.len);
    if (!*name)
        return false;
    advance(p);
    return true;
}

/* output -> V ( node [, node] ) | I ( NAME ) */
static bool io_output(parser *p, tb_io_spec *io)
{
    io->out_loc = loc_of(p, &p->tok);
    if (accept_keyword(p, "v"))
        io->out_kind = TB_OUT_V;
    else if (accept_keyword(p, "i"))
        io->out_kind = TB_OUT_I;
    else
        return expected(p, "an output v(node), v(node,node) or i(source)");
    if (!expect(p, TB_TOK_LPAREN, "'('"))
        return false;
    if (io->out_kind == TB_OUT_I)
        return io_name(p, "a voltage source name", &io->out_a) && expect(p, TB_TOK_RPAREN, "')'");
    if (!io_name(p, "a node name", &io->out_a))
        return false;
    if (accept(p, TB_TOK_COMMA))
        return io_name(p, "a node name", &io->out_b) && expect(p, TB_TOK_RPAREN, "')'");
    return expect(p, TB_TOK_RPAREN, "',' or ')'");
}

/* iocard -> .IO NAME output */
static bool io_card(parser *p)
{
    tb_io_spec io = {.given = true, .loc = loc_of(p, &p->tok)};
    if (p->ckt->io.given)
        return error(p, &p->tok, "second .io directive (the first is on line %d)",
                     p->ckt->io.loc.line);
    advance(p);
    if (!io_name(p, "an input source name", &io.source) || !io_output(p, &io) ||
        !end_of_card(p, "the output of .io", NULL))
        return false;
    p->ckt->io = io;
    return true;
}

/* margin -> (PM | GM) = value; a threshold of the stability verdict */
static bool margin(parser *p, tb_margin_spec *m)
{
    char text[QUOTE_SIZE];
    bool pm = accept_keyword(p, "pm");
    if (!pm && !accept_keyword(p, "gm"))
        return expected(p, "pm=DEGREES or gm=DB");
    tb_token key = p->prev;
    if ((pm && m->has_pm) || (!pm && m->has_gm))
        return error(p, &key, "'%s' is given twice on .margins", quote(&key, text));
    double x = 0;
    if (!expect(p, TB_TOK_EQUALS, "'='") ||
        !value(p, pm ? "a phase margin in degrees" : "a gain margin in dB", &x))
        return false;
    if (x < 0 || (pm && x >= 180))
        return error(p, &p->prev, "%s threshold of .margins must be %s, got '%s'", pm ? "pm" : "gm",
                     pm ? "from 0 to below 180 degrees" : "0 dB or more", quote(&p->prev, text));
    *(pm ? &m->has_pm : &m->has_gm) = true;
    *(pm ? &m->pm_min_deg : &m->gm_min_db) = x;
    return true;
}

/* marginscard -> .MARGINS margin {margin} */
static bool margins_card(parser *p)
{
    tb_margin_spec m = {.given = true, .loc = loc_of(p, &p->tok)};
    if (p->ckt->margins.given)
        return error(p, &p->tok, "second .margins directive (the first is on line %d)",
                     p->ckt->margins.loc.line);
    advance(p);
    do {
        if (!margin(p, &m))
            return false;
    } while (!at_end(p));
    p->ckt->margins = m;
    return true;
}

/* idealcard -> .IDEAL (GAIN | BETA) = value {(TOL | SPREAD) = value}: the hand estimate
 * (gain, or the feedback factor beta whose inverse it is), the tolerance within which it
 * should hold and the amplifier-gain spread, both in percent (docs/feedback.md) */
static bool ideal_card(parser *p)
{
    char text[QUOTE_SIZE];
    static const char *const keys[4] = {"gain", "beta", "tol", "spread"};
    tb_ideal_spec id = {.given = true, .loc = loc_of(p, &p->tok)};
    bool seen[4] = {false, false, false, false};
    if (p->ckt->ideal.given)
        return error(p, &p->tok, "second .ideal directive (the first is on line %d)", p->ckt->ideal.loc.line);
    tb_token card_tok = p->tok;
    advance(p);
    do {
        int k = 0;
        while (k < 4 && !tb_lex_is(&p->tok, keys[k]))
            k++;
        if (k == 4)
            return expected(p, "gain=VALUE, beta=VALUE, tol=PERCENT or spread=PERCENT");
        tb_token key = p->tok;
        if (seen[k] || (k < 2 && (seen[0] || seen[1])))
            return error(p, &key, seen[k] ? "'%s' is given twice on .ideal" : "'%s' on .ideal: give gain= or beta=, not both",
                         quote(&key, text));
        advance(p);
        double x = 0;
        if (!expect(p, TB_TOK_EQUALS, "'='") || !value(p, k < 2 ? "a value" : "a percentage", &x))
            return false;
        if ((k < 2 && x == 0) || (k == 2 && !(x > 0 && x <= 1e6)) || (k == 3 && !(x > 0 && x < 100)))
            return error(p, &p->prev, "%s of .ideal must be %s, got '%s'", keys[k],
                         k < 2 ? "non-zero" : k == 2 ? "a positive percentage up to 1e6" : "a percentage above 0 and below 100",
                         quote(&p->prev, text));
        if (k < 2 && !check_range(p, &ESTIMATE_RANGE, x, keys[k], ".ideal"))
            return false;
        seen[k] = true;
        if (k < 2) {
            id.as_beta = k == 1;
            id.value = x;
        } else {
            *(k == 2 ? &id.has_tol : &id.has_spread) = true;
            *(k == 2 ? &id.tol_pct : &id.spread_pct) = x;
        }
    } while (!at_end(p));
    if (!seen[0] && !seen[1])
        return error(p, &card_tok, ".ideal needs the estimate: gain=VALUE or beta=VALUE");
    p->ckt->ideal = id;
    return true;
}

/* Largest number an .expect bound may reach (value, tolerance, either end): far beyond
 * any figure, small enough that the bound's ends stay finite. */
#define EXPECT_MAX 1e100

static bool fig_is_word(const tb_expect *x)
{
    return tb_figure_at((size_t)x->figure)->word;
}

/* The bound of an .expect card after its operator: op = EQ, GE, LE or IN (docs/check.md). */
static bool expect_bound(parser *p, tb_expect *x)
{
    char text[QUOTE_SIZE];
    const tb_figure *fig = tb_figure_at((size_t)x->figure);
    if (x->op == TB_XOP_EQ && accept_keyword(p, "none")) {
        x->op = TB_XOP_NONE;
        return true;
    }
    if (x->op == TB_XOP_EQ && fig->word) {
        int w = p->tok.kind == TB_TOK_WORD ? tb_figure_word_find(p->tok.ptr, p->tok.len) : -1;
        const char *best = w < 0 && p->tok.kind == TB_TOK_WORD ? tb_figure_word_suggest(quote(&p->tok, text)) : NULL;
        if (best)
            return error(p, &p->tok, "unknown verdict '%s' (did you mean '%s'?)", text, best);
        if (w < 0)
            return expected(p, "stable, marginal, unstable, undecided or none");
        x->value = w;
        advance(p);
        return true;
    }
    if (fig->word)
        return error(p, &p->prev, "'%s' is a word: compare it with '='", fig->name);
    size_t at = 0;
    size_t sign = 0;
    tb_token tol = p->tok;
    if (x->op == TB_XOP_EQ && p->tok.kind == TB_TOK_WORD &&
        tb_expect_find_pm(p->tok.ptr, p->tok.len, &at, &sign) && at > 0) {
        /* "10±1%": the value and its tolerance glued together */
        if (tb_lex_value(p->tok.ptr, at, &x->value) != TB_VALUE_OK)
            return error(p, &p->tok, "malformed value '%s'", quote(&p->tok, text));
        tol.ptr += at;
        tol.len -= at;
        tol.col += (int)at;
        advance(p);
    } else if (!value(p, "a value", x->op == TB_XOP_LE ? &x->hi : &x->lo)) {
        return false;
    } else if (x->op == TB_XOP_IN) {
        if (!value(p, "the upper end of the range", &x->hi))
            return false;
        if (x->hi < x->lo)
            return error(p, &p->prev, "range of .expect ends below its start");
        return true;
    } else if (x->op != TB_XOP_EQ) {
        return true;
    } else {
        x->value = x->lo;
        tol = p->tok;
        if (tol.kind != TB_TOK_WORD || !tb_expect_find_pm(tol.ptr, tol.len, &at, &sign) || at != 0)
            return expected(p, "a tolerance (±TOL or ±TOL%)");
        advance(p);
    }
    if (tol.len == sign) { /* "± 1%": the tolerance is the next word */
        if (p->tok.kind != TB_TOK_WORD)
            return expected(p, "a tolerance after '±'");
        tol = p->tok;
        sign = 0;
        advance(p);
    }
    if (!tb_expect_tolerance(tol.ptr + sign, tol.len - sign, &x->tol, &x->tol_pct))
        return error(p, &tol, "malformed tolerance '%s' (write ±1%% or ±0.5)", quote(&tol, text));
    x->lo = x->value - (x->tol_pct ? x->tol / 100.0 * fabs(x->value) : x->tol);
    x->hi = 2 * x->value - x->lo;
    return true;
}

/* expectcard -> .EXPECT LOOP.FIGURE (= value ±tol | = WORD | = NONE | >= value | <= value
 *               | IN value value): a bound on a figure the analysis reports (docs/check.md) */
static bool expect_card(parser *p)
{
    char text[QUOTE_SIZE];
    advance(p);
    if (!expect_word(p, "LOOP.FIGURE"))
        return false;
    tb_token target = p->tok;
    tb_expect x = {.loc = loc_of(p, &target)};
    size_t loop_len = 0;
    x.figure = tb_expect_split(target.ptr, target.len, &loop_len);
    if (x.figure < 0) {
        size_t off = 0;
        const char *best = tb_expect_suggest(target.ptr, target.len, &off);
        if (!best)
            return error(p, &target, "'%s' names no figure: write LOOP.FIGURE, FIGURE from the "
                         "table in docs/check.md (dc.A, phase_margin_deg, unity_hz, verdict, ...)",
                         quote(&target, text));
        tb_token part = target;
        part.ptr += off;
        part.len -= off;
        part.col += (int)off;
        return error(p, &part, "unknown figure '%s' in .expect (did you mean '%s'?)",
                     quote(&part, text), best);
    }
    x.target = intern_n(p, target.ptr, target.len);
    x.loop_name = intern_n(p, target.ptr, loop_len);
    if (!x.target || !x.loop_name)
        return false;
    advance(p);
    if (accept(p, TB_TOK_EQUALS)) {
        x.op = TB_XOP_EQ;
    } else if (accept_keyword(p, "in")) {
        x.op = TB_XOP_IN;
    } else if ((tb_lex_is(&p->tok, ">") || tb_lex_is(&p->tok, "<")) &&
               peek_next(p).kind == TB_TOK_EQUALS) {
        x.op = p->tok.ptr[0] == '>' ? TB_XOP_GE : TB_XOP_LE;
        advance(p);
        advance(p);
    } else {
        return expected(p, "'=', '>=', '<=' or 'in'");
    }
    if (!expect_bound(p, &x) || !end_of_card(p, "the bound of .expect", NULL))
        return false;
    if (x.op != TB_XOP_NONE && !fig_is_word(&x) &&
        !(fabs(x.lo) <= EXPECT_MAX && fabs(x.hi) <= EXPECT_MAX && fabs(x.tol) <= EXPECT_MAX))
        return error(p, &p->prev, "the bound of .expect %s must stay within ±1e100: write a smaller "
                     "value or tolerance", x.target);
    return tb_expect_add(p->ckt, &x) == TB_OK || nomem(p);
}

/* zportcard -> .ZPORT NAME (V ( node [, node] ) | I ( VNAME )): a port whose impedance is
 * reported with and without feedback (Blackman), a node pair or the terminals of a V source
 * as that source sees them; ports called in and out also classify the feedback */
static bool zport_card(parser *p)
{
    char text[QUOTE_SIZE];
    tb_circuit *ckt = p->ckt;
    tb_zport_spec zp = {.loc = loc_of(p, &p->tok)};
    advance(p);
    if (!expect_word(p, "a port name"))
        return false;
    for (size_t i = 0; i < ckt->zport_count; i++)
        if (name_is(ckt->zports[i].name, &p->tok))
            return error(p, &p->tok, "port '%s' is defined twice (first on line %d)", quote(&p->tok, text),
                         ckt->zports[i].loc.line);
    if (ckt->zport_count >= TB_MAX_ZPORTS)
        return error(p, &p->tok, "too many .zport ports (limit is %d)", TB_MAX_ZPORTS);
    if (!io_name(p, "a port name", &zp.name))
        return false;
    zp.at_source = accept_keyword(p, "i");
    if (!zp.at_source && !accept_keyword(p, "v"))
        return expected(p, "the port as v(node), v(node,node) or i(Vsource)");
    if (!expect(p, TB_TOK_LPAREN, "'('") ||
        !io_name(p, zp.at_source ? "a voltage source name" : "a node name", &zp.node_a))
        return false;
    if (!zp.at_source && accept(p, TB_TOK_COMMA) && !io_name(p, "a node name", &zp.node_b))
        return false;
    if (!expect(p, TB_TOK_RPAREN, zp.node_b || zp.at_source ? "')'" : "',' or ')'") ||
        !end_of_card(p, "the port of .zport", NULL))
        return false;
    ckt->zports[ckt->zport_count++] = zp;
    return true;
}

/* breakcard -> .BREAK NAME: the zero-volt V source in a loop wire where the loop gain is
 * found by double injection; its + node on the side the loop signal comes from */
static bool break_card(parser *p)
{
    tb_break_spec br = {.given = true, .loc = loc_of(p, &p->tok)};
    if (p->ckt->brk.given)
        return error(p, &p->tok, "second .break directive (the first is on line %d)", p->ckt->brk.loc.line);
    advance(p);
    if (!io_name(p, "a voltage source name", &br.source) || !end_of_card(p, "the source of .break", NULL))
        return false;
    p->ckt->brk = br;
    return true;
}

/* volterracard -> .VOLTERRA keyed amp, freq, freq2, limit: the distortion request (docs/distortion.md) */
static bool volterra_card(parser *p)
{
    size_t n = 0;
    const tb_nl_key *keys = tb_nl_request_keys(&n);
    double vals[TB_NL_REQ_COUNT] = {0, 0, 0, 0};
    bool seen[TB_NL_REQ_COUNT] = {false, false, false, false};
    tb_token card_tok = p->tok;
    tb_token at[TB_NL_REQ_COUNT] = {card_tok, card_tok, card_tok, card_tok};
    tb_volterra_spec spec = {.loc = loc_of(p, &p->tok)};
    if (p->ckt->volterra.given)
        return error(p, &p->tok, "second .volterra directive (the first is on line %d)",
                     p->ckt->volterra.loc.line);
    advance(p);
    if (!keyed(p, keys, n, tb_nl_request_expected(), ".volterra", false, vals, seen, at))
        return false;
    int bad = -1;
    const char *why = tb_nl_request_make(vals, seen, &spec, &bad);
    if (why)
        return error(p, bad < 0 ? &card_tok : &at[bad], "%s", why);
    p->ckt->volterra = spec;
    return true;
}

/* spreadcard -> .SPREAD ... | .SCAN ...: the card's tokens are read by spreadcard.c */
static bool spread_card(parser *p)
{
    tb_token keyword = p->tok;
    advance(p);
    p->word_count = 0;
    for (; !at_end(p); advance(p)) {
        if (p->tok.kind == TB_TOK_BAD)
            return bad_char(p);
        if (tb_grow(&p->words, &p->word_cap, p->word_count + 1, sizeof(tb_token), TB_MAX_NODES))
            return nomem(p);
        p->words[p->word_count++] = p->tok;
    }
    tb_card_error err;
    tb_status st = tb_spreadcard_read(p->ckt, p->srcs[p->src].file, &keyword, p->words, p->word_count, &err);
    if (st == TB_ERR_NOMEM)
        return nomem(p);
    return st == TB_OK || error(p, &err.at, "%s", err.message);
}

/* directive -> accard | loopcard | iocard | marginscard | endcard; any other is skipped with a warning */
static bool directive(parser *p)
{
    char text[QUOTE_SIZE];
    if (tb_lex_is(&p->tok, ".ac"))
        return ac_card(p);
    if (tb_lex_is(&p->tok, ".loop"))
        return loop_card(p);
    if (tb_lex_is(&p->tok, ".io"))
        return io_card(p);
    if (tb_lex_is(&p->tok, ".margins"))
        return margins_card(p);
    if (tb_lex_is(&p->tok, ".expect"))
        return expect_card(p);
    if (tb_lex_is(&p->tok, ".ideal"))
        return ideal_card(p);
    if (tb_lex_is(&p->tok, ".zport"))
        return zport_card(p);
    if (tb_lex_is(&p->tok, ".break"))
        return break_card(p);
    if (tb_lex_is(&p->tok, ".volterra"))
        return volterra_card(p);
    if (tb_spreadcard_is(&p->tok))
        return spread_card(p);
    if (tb_lex_is(&p->tok, ".end")) {
        /* endcard -> .END */
        advance(p);
        return end_of_card(p, ".end", NULL);
    }
    warning(p, &p->tok, "unknown directive '%s' skipped", quote(&p->tok, text));
    return true;
}


/* ---- subcircuit instances ------------------------------------------------ */

static const char *def_name_of(const void *owner, size_t i)
{
    return ((const parser *)owner)->defs[i].name;
}

static const subckt *find_subckt(const parser *p, const tb_token *name)
{
    size_t found = 0;
    return tb_names_find(&p->def_index, def_name_of, p, name->ptr, name->len, &found) ? &p->defs[found]
                                                                                    : NULL;
}

static const char *instance_name_of(const void *owner, size_t i)
{
    return ((const name_set *)owner)->items[i].name;
}

/* Adds an instance path; TB_ERR_INPUT (with *first_line the first one's) when it is taken. */
static tb_status claim_instance(parser *p, const char *path, int line, int *first_line)
{
    name_set *set = &p->instances;
    size_t found = 0;
    if (tb_names_find(&set->index, instance_name_of, set, path, strlen(path), &found)) {
        *first_line = set->items[found].line;
        return TB_ERR_INPUT;
    }
    if (tb_grow(&set->items, &set->cap, set->count + 1, sizeof(taken_name), MAX_INSTANCES))
        return TB_ERR_NOMEM;
    set->items[set->count] = (taken_name){path, line};
    if (tb_names_add(&set->index, instance_name_of, set, set->count, &found))
        return TB_ERR_NOMEM;
    set->count++;
    return TB_OK;
}

static void pop_frame(parser *p)
{
    frame *f = &p->frames[--p->depth];
    ((subckt *)f->def)->busy = false;
    tb_free(f->pins);
    tb_free(f->params.items);
}

/* "a -> b -> a": the definitions being expanded from the one called def. */
static void cycle_text(const parser *p, const subckt *def, char *buf, size_t size)
{
    size_t d = 0;
    while (d < p->depth && p->frames[d].def != def)
        d++;
    size_t n = 0;
    for (; d < p->depth && n < size; d++)
        n += (size_t)snprintf(buf + n, size - n, "%s -> ", p->frames[d].def->name);
    if (n < size)
        snprintf(buf + n, size - n, "%s", def->name);
}

/* Checks that def may be expanded here (no recursion, depth, count, unique name). */
static bool may_expand(parser *p, const subckt *def, const tb_token *name, const tb_token *at,
                       const char *path)
{
    char cycle[MESSAGE_SIZE / 2];
    int first_line = 0;
    if (def->busy) {
        cycle_text(p, def, cycle, sizeof cycle);
        return error(p, at, "subcircuit '%s' instantiates itself: %s", def->name, cycle);
    }
    if (p->depth >= MAX_INSTANCE_DEPTH)
        return error(p, name, "subcircuit instances nested too deeply (limit is %d levels)",
                     MAX_INSTANCE_DEPTH);
    if (p->instances.count >= MAX_INSTANCES)
        return error(p, name, "too many subcircuit instances (limit is %zu)", MAX_INSTANCES);
    tb_status st = claim_instance(p, path, name->line, &first_line);
    if (st == TB_ERR_NOMEM)
        return nomem(p);
    if (st != TB_OK)
        return error(p, name, "duplicate instance name '%s' (first on line %d)", path,
                     first_line);
    return true;
}

/* Opens a frame for instance `path` of def, connected to the words' nodes. */
static bool push_frame(parser *p, const subckt *def, const char *path, const tb_token *name)
{
    if (!p->frames) {
        p->frames = tb_calloc(MAX_INSTANCE_DEPTH, sizeof(frame));
        if (!p->frames)
            return nomem(p);
    }
    frame f = {.def = def, .path = path, .path_len = strlen(path), .src = p->src, .at = *name};
    f.pins = tb_malloc(def->pin_count, sizeof(int));
    f.params.items = tb_malloc(def->params.count, sizeof(param));
    if (!f.pins || !f.params.items) {
        tb_free(f.pins);
        tb_free(f.params.items);
        return nomem(p);
    }
    if (def->params.count)
        memcpy(f.params.items, def->params.items, def->params.count * sizeof(param));
    f.params.count = f.params.cap = def->params.count;
    /* the pins are nodes of the caller: resolve them before entering */
    for (size_t i = 0; i < def->pin_count; i++) {
        if (!resolve_node(p, &p->words[i + 1], &f.pins[i])) {
            tb_free(f.pins);
            tb_free(f.params.items);
            return false;
        }
    }
    tb_lex_init_at(&f.lx, p->srcs[def->src].text, def->body_end, def->body_pos, def->body_line);
    ((subckt *)def)->busy = true;
    p->frames[p->depth++] = f;
    return true;
}

/* Sets the instance's parameter values (evaluated in the caller's scope). */
static bool instance_params(parser *p, const subckt *def, param_list *values)
{
    char text[QUOTE_SIZE];
    while (!at_end(p)) {
        if (!expect_word(p, "a parameter name"))
            return false;
        tb_token name = p->tok;
        param *prm = find_param_in(values, &def->params.index, name.ptr, name.len);
        if (!prm || (size_t)(prm - values->items) >= def->default_count)
            return error(p, &name, "subcircuit '%s' has no parameter '%s'", def->name,
                         quote(&name, text));
        if (prm->state == PARAM_DONE)
            return error(p, &name, "parameter '%s' is set twice", quote(&name, text));
        advance(p);
        if (!expect(p, TB_TOK_EQUALS, "'='"))
            return false;
        if (p->tok.kind != TB_TOK_WORD && p->tok.kind != TB_TOK_EXPR)
            return expected(p, "a value or {expression}");
        size_t mark = tb_params_mark(p->ckt->params);
        if (!evaluate(p, &p->tok, p->src, p->depth - 1, &prm->value) ||
            !record_quantity(p, mark, &p->tok, p->src, p->frames[p->depth - 1].path, prm->name, prm->value,
                             &prm->qid)) {
            tb_params_drop(p->ckt->params, mark);
            return false;
        }
        prm->state = PARAM_DONE;
        advance(p);
    }
    return true;
}

/* Evaluates every parameter of the new instance, so that errors show once. */
static bool settle_params(parser *p)
{
    frame *f = &p->frames[p->depth - 1];
    for (size_t i = 0; i < f->params.count; i++) {
        double ignored = 0;
        tb_token whole = f->params.items[i].expr;
        eval_ctx cx = {p, &whole, f->params.items[i].src, p->depth};
        if (param_value(&cx, &f->params.items[i], p->depth, 0, &ignored) != TB_OK)
            return false;
    }
    return true;
}

/* The words of the card from the current token up to the first NAME '='. */
static bool card_words(parser *p)
{
    p->word_count = 0;
    while (p->tok.kind == TB_TOK_WORD && peek_next(p).kind != TB_TOK_EQUALS) {
        if (p->word_count > MAX_PINS + 1)
            return error(p, &p->tok, "too many pins (limit is %zu)", MAX_PINS);
        if (tb_grow(&p->words, &p->word_cap, p->word_count + 1, sizeof(tb_token), TB_MAX_NODES))
            return nomem(p);
        p->words[p->word_count++] = p->tok;
        advance(p);
    }
    return true;
}

/* "unknown subcircuit 'amp1'", with the closest defined name when there is one. */
static bool unknown_subckt(parser *p, const tb_token *sub)
{
    char text[QUOTE_SIZE];
    quote(sub, text);
    tb_suggester sg;
    tb_suggest_init(&sg, text);
    for (size_t i = 0; i < p->def_count; i++)
        tb_suggest_offer(&sg, p->defs[i].name);
    const char *best = tb_suggest_best(&sg);
    if (best)
        return error(p, sub, "unknown subcircuit '%s' (did you mean '%s'?)", text, best);
    return error(p, sub, "unknown subcircuit '%s'", text);
}

/* xcard -> XNAME {node} SUBCKT {NAME = value}; expanded by the caller's loop */
static bool instance(parser *p)
{
    tb_token name = p->tok;
    if (!card_words(p))
        return false;
    if (p->word_count < 2) {
        p->prev = name;
        return expected(p, "a subcircuit name");
    }
    tb_token sub = p->words[p->word_count - 1];
    const subckt *def = find_subckt(p, &sub);
    if (!def)
        return unknown_subckt(p, &sub);
    size_t nodes = p->word_count - 2;
    if (nodes != def->pin_count)
        return error(p, &sub, "%s connects %zu node%s, but subcircuit '%s' has %zu pin%s",
                     p->name, nodes, nodes == 1 ? "" : "s", def->name, def->pin_count,
                     def->pin_count == 1 ? "" : "s");
    const char *path = intern_scoped(p, &name);
    if (!path || !may_expand(p, def, &name, &sub, path))
        return false;
    if (!push_frame(p, def, path, &name))
        return false;
    frame *f = &p->frames[p->depth - 1];
    if (!instance_params(p, def, &f->params) || !settle_params(p)) {
        pop_frame(p);
        return false;
    }
    return true;
}

/* ---- the second pass: cards into the circuit ------------------------------ */

/* card -> element | directive; inside a subcircuit body the directives were
 * all dealt with by the first pass */
static void card(parser *p)
{
    char text[QUOTE_SIZE];
    p->first = p->tok;
    switch (p->tok.kind) {
    case TB_TOK_WORD:
        quote(&p->tok, p->name);
        if (p->tok.ptr[0] != '.') {
            element(p);
            return;
        }
        for (char *c = p->name; *c; c++)
            *c = tb_lex_lower(*c);
        if (!p->depth)
            directive(p);
        return;
    case TB_TOK_PLUS:
        error(p, &p->tok, "'+' continues a card, but no card comes before it");
        return;
    case TB_TOK_BAD:
        bad_char(p);
        return;
    default:
        error(p, &p->tok, "expected an element or a directive, got '%s'", quote(&p->tok, text));
        return;
    }
}

/* Reads the bodies of the instances opened by the last card, deepest first. */
static void expand(parser *p)
{
    while (p->depth > 0 && !stopped(p)) {
        frame *f = &p->frames[p->depth - 1];
        p->lx = &f->lx;
        p->src = f->def->src;
        advance(p);
        if (p->tok.kind == TB_TOK_EOF) {
            pop_frame(p);
            continue;
        }
        card(p);
        skip_card(p);
    }
}

static void second_pass(parser *p)
{
    tb_lexer lx;
    for (size_t r = 0; r < p->run_count && !stopped(p); r++) {
        const card_run *run = &p->runs[r];
        const src_text *s = &p->srcs[run->src];
        tb_lex_init_at(&lx, s->text, s->len, run->pos, run->line);
        for (size_t k = 0; k < run->count && !stopped(p); k++) {
            p->lx = &lx;
            p->src = run->src;
            advance(p);
            card(p);
            skip_card(p);
            expand(p);
        }
    }
    while (p->depth > 0)
        pop_frame(p);
}

/* ---- the first pass: files, .include, .param, .subckt --------------------- */

/* Records the card at the current token for the second pass. */
static bool add_card(parser *p)
{
    if (p->run_open && p->runs[p->run_count - 1].src == p->src) {
        p->runs[p->run_count - 1].count++;
        return true;
    }
    const src_text *s = &p->srcs[p->src];
    size_t pos = (size_t)(p->tok.ptr - s->text) - (size_t)(p->tok.col - 1);
    if (tb_grow(&p->runs, &p->run_cap, p->run_count + 1, sizeof(card_run), SIZE_MAX / 64))
        return nomem(p);
    p->runs[p->run_count++] = (card_run){p->src, pos, p->tok.line, 1};
    p->run_open = true;
    return true;
}

/* paramcard -> .PARAM paramdef {paramdef} */
static bool param_card(parser *p, param_list *list)
{
    advance(p);
    do {
        if (!param_def(p, list, "parameter"))
            return false;
    } while (!at_end(p));
    return true;
}

/* subckthead -> .SUBCKT NAME {pin} {paramdef} */
static bool subckt_head(parser *p, subckt *def)
{
    char text[QUOTE_SIZE];
    advance(p);
    if (!expect_word(p, "a subcircuit name"))
        return false;
    def->at = p->tok;
    def->src = p->src;
    const subckt *earlier = find_subckt(p, &p->tok);
    if (earlier)
        return error(p, &p->tok, "subcircuit '%s' is defined twice (first on line %d)",
                     quote(&p->tok, text), earlier->at.line);
    def->name = intern_n(p, p->tok.ptr, p->tok.len);
    if (!def->name)
        return false;
    advance(p);
    if (!card_words(p))
        return false;
    for (size_t i = 0; i < p->word_count; i++) {
        size_t first = 0;
        if (find_pin(def, p->words[i].ptr, p->words[i].len, &first))
            return error(p, &p->words[i], "pin '%s' appears twice on .subckt %s",
                         quote(&p->words[i], text), def->name);
        if (is_ground(&p->words[i]))
            return error(p, &p->words[i], "ground '%s' cannot be a pin of .subckt %s",
                         quote(&p->words[i], text), def->name);
        if (tb_grow(&def->pins, &def->pin_cap, i + 1, sizeof(char *), TB_MAX_NODES))
            return nomem(p);
        def->pins[i] = intern_n(p, p->words[i].ptr, p->words[i].len);
        if (!def->pins[i])
            return false;
        def->pin_count = i + 1;
        if (index_tail(&def->pin_index, pin_name_of, def, def->pin_count))
            return nomem(p);
    }
    while (!at_end(p))
        if (!param_def(p, &def->params, "parameter"))
            return false;
    def->default_count = def->params.count;
    return true;
}

/* A directive inside a .subckt body (the body's cards are read per instance). */
static bool body_directive(parser *p, subckt *def)
{
    char text[QUOTE_SIZE];
    if (tb_lex_is(&p->tok, ".param"))
        return param_card(p, &def->params);
    if (tb_lex_is(&p->tok, ".subckt"))
        return error(p, &p->tok, ".subckt inside .subckt %s: definitions do not nest",
                     def->name);
    if (tb_lex_is(&p->tok, ".ac") || tb_lex_is(&p->tok, ".loop") || tb_lex_is(&p->tok, ".io") ||
        tb_lex_is(&p->tok, ".margins") || tb_lex_is(&p->tok, ".include") ||
        tb_lex_is(&p->tok, ".expect") ||
        tb_lex_is(&p->tok, ".ideal") || tb_lex_is(&p->tok, ".zport") || tb_lex_is(&p->tok, ".break") ||
        tb_lex_is(&p->tok, ".volterra") || tb_lex_is(&p->tok, ".end") || tb_spreadcard_is(&p->tok))
        return error(p, &p->tok, "'%s' is not allowed inside .subckt %s", quote(&p->tok, text),
                     def->name);
    warning(p, &p->tok, "unknown directive '%s' skipped", quote(&p->tok, text));
    return true;
}

/* subckt -> subckthead {card} .ENDS [NAME]; the body is kept as a text range */
static void subckt_card(parser *p)
{
    char text[QUOTE_SIZE];
    tb_token start = p->tok;
    if (tb_grow(&p->defs, &p->def_cap, p->def_count + 1, sizeof(subckt), TB_MAX_ELEMENTS)) {
        nomem(p);
        return;
    }
    subckt *def = &p->defs[p->def_count];
    *def = (subckt){.name = NULL};
    bool ok = subckt_head(p, def);
    skip_card(p);
    advance(p);
    def->body_pos = (size_t)(p->tok.ptr - p->srcs[p->src].text) - (size_t)(p->tok.col - 1);
    def->body_line = p->tok.line;
    while (p->tok.kind != TB_TOK_EOF && !tb_lex_is(&p->tok, ".ends") && !stopped(p)) {
        if (p->tok.kind == TB_TOK_WORD && p->tok.ptr[0] == '.' && def->name)
            body_directive(p, def);
        skip_card(p);
        advance(p);
    }
    if (p->tok.kind == TB_TOK_EOF) {
        if (ok)
            error(p, &start, ".subckt %s has no .ends", def->name);
    } else if (tb_lex_is(&p->tok, ".ends")) {
        def->body_end = (size_t)(p->tok.ptr - p->srcs[p->src].text) - (size_t)(p->tok.col - 1);
        advance(p);
        if (p->tok.kind == TB_TOK_WORD && ok && !name_is(def->name, &p->tok))
            error(p, &p->tok, ".ends %s closes .subckt %s", quote(&p->tok, text), def->name);
        else if (p->tok.kind == TB_TOK_WORD)
            advance(p);
        if (ok)
            end_of_card(p, ".ends", NULL);
    }
    size_t ignored = 0;
    if (ok && def->body_end > 0) {
        if (tb_names_add(&p->def_index, def_name_of, p, p->def_count, &ignored) == TB_OK) {
            p->def_count++;
            return;
        }
        nomem(p);
    }
    free_subckt(def);
}

/* Adds an entry to the sources (the netlist, or one inclusion of a file) whose text the
 * circuit holds under the interned name file. */
static bool add_src(parser *p, const char *file, const char *text, size_t len, size_t parent, int line)
{
    if (tb_grow(&p->srcs, &p->src_cap, p->src_count + 1, sizeof(src_text), SIZE_MAX / 64))
        return nomem(p);
    p->srcs[p->src_count++] = (src_text){file, text, len, parent, line};
    return true;
}

/* The path of an included file: relative to the including file's folder. */
static char *include_path(const char *including, const tb_token *t)
{
    const char *name = t->ptr;
    size_t len = t->len;
    if (len >= 2 && (name[0] == '"' || name[0] == '\'') && name[len - 1] == name[0]) {
        name++;
        len -= 2;
    }
    const char *slash = strrchr(including, '/');
    size_t dir = name[0] == '/' || !slash ? 0 : (size_t)(slash - including) + 1;
    char *path = tb_malloc(dir + len + 1, 1);
    if (!path)
        return NULL;
    memcpy(path, including, dir);
    memcpy(path + dir, name, len);
    path[dir + len] = '\0';
    return path;
}

/* "a.net -> b.net -> a.net": the open files from the one whose canonical path is canon. */
static void include_cycle(const parser *p, const open_file *files, size_t depth, const char *canon,
                          const char *path, char *buf, size_t size)
{
    size_t d = 0;
    while (d < depth && !(files[d].canon && strcmp(files[d].canon, canon) == 0))
        d++;
    size_t n = 0;
    for (; d < depth && n < size; d++)
        n += (size_t)snprintf(buf + n, size - n, "%s -> ", p->srcs[files[d].src].file);
    if (n < size)
        snprintf(buf + n, size - n, "%s", path);
}

static const char *known_id_of(const void *owner, size_t i)
{
    return ((const parser *)owner)->known[i].id;
}

/* Whether canon (a canonical path) lies inside the include root, when there is one. */
static bool inside_root(const parser *p, const char *canon)
{
    const char *root = p->setup->root_canon;
    if (!root)
        return true;
    size_t n = strlen(root);
    return strncmp(canon, root, n) == 0 && (n > 0 && (root[n - 1] == '/' || canon[n] == '/'));
}

/* Says why the included file path was not read, at its name on the .include card; false. */
static bool refused(parser *p, const tb_token *name, const char *path, const tb_file_why *why,
                    int foreign_line)
{
    char reason[160];
    if (foreign_line)
        return error(p, name, "'%s' is not a netlist: line %d does not start like a card (its text is "
                     "not shown)", path, foreign_line);
    tb_netfile_why_text(why, reason, sizeof reason);
    if (why->problem == TB_FILE_BINARY)
        return error(p, name, "'%s' is not a netlist: %s", path, reason);
    return error(p, name, "cannot read '%s': %s", path, reason);
}

/* Reads the file named path (at canon) for an .include card, or finds it read already:
 * *out is its record (which may say it was refused). Each file is read once: its text,
 * held by the circuit, serves every inclusion. A text that is not a netlist is freed
 * unread by anyone: it never reaches the circuit, whose sources messages quote. */
static bool read_included(parser *p, const tb_token *name, const char *path, const char *canon,
                          size_t *out)
{
    tb_netfile f;
    tb_file_why why = {.problem = TB_FILE_OK};
    if (tb_netfile_open(canon, true, &f, &why) != TB_OK)
        return refused(p, name, path, &why, 0);
    if (tb_names_find(&p->known_index, known_id_of, p, f.id, strlen(f.id), out)) {
        tb_netfile_close(&f);
        return true;
    }
    known_file k = {.why = {.problem = TB_FILE_OK}};
    memcpy(k.id, f.id, sizeof k.id);
    char *text = NULL;
    size_t len = 0;
    tb_status st = tb_netfile_load(&f, p->setup->max_bytes - p->bytes, &text, &len, &why);
    tb_netfile_close(&f);
    if (st == TB_ERR_NOMEM)
        return nomem(p);
    if (st != TB_OK && why.problem == TB_FILE_TOO_LARGE)
        why.limit = p->setup->max_bytes; /* the cap is on all files together */
    if (st != TB_OK && why.problem != TB_FILE_BINARY)
        return refused(p, name, path, &why, 0); /* too large, or a read error: not remembered */
    if (st != TB_OK) {
        k.why = why;
    } else if ((k.foreign_line = tb_netfile_foreign_line(text, len)) != 0) {
        tb_free(text);
    } else {
        if (tb_circuit_add_source(p->ckt, path, text, len, &k.file) != TB_OK) /* it owns text now */
            return nomem(p);
        k.text = text;
        k.len = len;
        p->bytes += len;
    }
    size_t ignored = 0;
    if (tb_grow(&p->known, &p->known_cap, p->known_count + 1, sizeof(known_file), MAX_INCLUSIONS + 1))
        return nomem(p);
    p->known[p->known_count] = k;
    if (tb_names_add(&p->known_index, known_id_of, p, p->known_count, &ignored))
        return nomem(p);
    *out = p->known_count++;
    return true;
}

/* The name under which an inclusion of file k through path is known to the circuit:
 * k's own when path is the name it was first read under, else an alias of its text. */
static const char *inclusion_name(parser *p, const known_file *k, const char *path)
{
    const char *name = NULL;
    if (strcmp(k->file, path) == 0)
        return k->file;
    if (tb_circuit_add_source_alias(p->ckt, path, k->text, k->len, &name) != TB_OK)
        nomem(p);
    return name;
}

/* The checks an .include card passes before its file is looked at; false after an error. */
static bool may_include(parser *p, const tb_token *name, size_t depth)
{
    if (!p->setup->allow_include)
        return error(p, name, ".include is not allowed: this netlist is read with includes turned off");
    if (depth >= MAX_INCLUDE_DEPTH)
        return error(p, name, "includes nested too deeply (limit is %d files)", MAX_INCLUDE_DEPTH);
    if (p->inclusions > MAX_INCLUSIONS)
        return false; /* said once already */
    if (p->inclusions == MAX_INCLUSIONS) {
        p->inclusions++;
        return error(p, name, "too many files read through .include (limit is %zu in all)", MAX_INCLUSIONS);
    }
    return true;
}

/* Where path (canonical: canon) may not be included from here: outside the include
 * root, or a cycle. false after an error. */
static bool may_open(parser *p, const tb_token *name, const open_file *files, size_t depth,
                     const char *path, const char *canon)
{
    char cycle[MESSAGE_SIZE / 2];
    if (!inside_root(p, canon))
        return error(p, name, "cannot include '%s': it lies outside the include root '%s'", path,
                     p->setup->include_root);
    for (size_t d = 0; d < depth; d++) {
        if (files[d].canon && strcmp(files[d].canon, canon) == 0) {
            include_cycle(p, files, depth, canon, path, cycle, sizeof cycle);
            return error(p, name, "'%s' includes itself: %s", path, cycle);
        }
    }
    return true;
}

/* includecard -> .INCLUDE FILE; opens the file as files[*depth] */
static bool include_card(parser *p, open_file *files, size_t *depth)
{
    char reason[128];
    advance(p);
    if (!expect_word(p, "a file name"))
        return false;
    tb_token name = p->tok;
    advance(p);
    if (!end_of_card(p, "the file name of .include", NULL) || !may_include(p, &name, *depth))
        return false;
    char *path = include_path(p->srcs[p->src].file, &name);
    if (!path)
        return nomem(p);
    char *canon = realpath(path, NULL);
    size_t k = 0;
    bool ok = canon && may_open(p, &name, files, *depth, path, canon) &&
              read_included(p, &name, path, canon, &k);
    if (!canon) {
        int err = errno;
        if (strerror_r(err, reason, sizeof reason) != 0)
            snprintf(reason, sizeof reason, "error %d", err);
        error(p, &name, "cannot read '%s': %s", path, reason);
    }
    const known_file *kf = ok ? &p->known[k] : NULL;
    if (ok && (kf->why.problem != TB_FILE_OK || kf->foreign_line))
        ok = refused(p, &name, path, &kf->why, kf->foreign_line);
    const char *file = ok ? inclusion_name(p, kf, path) : NULL;
    tb_free(path);
    if (!file || !add_src(p, file, kf->text, kf->len, p->src, name.line)) {
        free(canon);
        return false;
    }
    p->inclusions++;
    size_t skip = kf->len >= 3 && memcmp(kf->text, "\xEF\xBB\xBF", 3) == 0 ? 3 : 0;
    open_file *f = &files[(*depth)++];
    f->src = p->src_count - 1;
    f->canon = canon;
    tb_lex_init_at(&f->lx, kf->text, kf->len, skip, 1);
    return true;
}

/* One card of the first pass at the current token of files[*depth - 1]. */
static void first_card(parser *p, open_file *files, size_t *depth)
{
    p->first = p->tok;
    if (p->tok.kind != TB_TOK_WORD || p->tok.ptr[0] != '.') { /* an element card (or a bad one) */
        add_card(p);
        return;
    }
    quote(&p->tok, p->name);
    for (char *c = p->name; *c; c++)
        *c = tb_lex_lower(*c);
    if (tb_lex_is(&p->tok, ".include")) {
        include_card(p, files, depth);
    } else if (tb_lex_is(&p->tok, ".param")) {
        param_card(p, &p->globals);
    } else if (tb_lex_is(&p->tok, ".subckt")) {
        subckt_card(p);
    } else if (tb_lex_is(&p->tok, ".ends")) {
        error(p, &p->tok, ".ends without .subckt");
    } else if (tb_lex_is(&p->tok, ".end")) {
        /* endcard -> .END: the end of this file (of everything in the netlist itself) */
        advance(p);
        end_of_card(p, ".end", NULL);
        files[*depth - 1].lx.pos = files[*depth - 1].lx.len;
    } else {
        add_card(p);
        return;
    }
    p->run_open = false; /* the next card recorded starts a run */
}

/* Reads the netlist and its includes: records cards, parameters, subcircuits. */
static void first_pass(parser *p, open_file *files, size_t *depth)
{
    while (*depth > 0 && !stopped(p)) {
        open_file *f = &files[*depth - 1];
        p->lx = &f->lx;
        p->src = f->src;
        advance(p);
        if (p->tok.kind == TB_TOK_EOF) {
            free(f->canon);
            f->canon = NULL;
            (*depth)--;
            p->run_open = false;
            continue;
        }
        size_t before = *depth;
        first_card(p, files, depth);
        if (*depth == before && !at_end(p)) { /* the rest unread: no tokens made */
            p->prev = p->tok;
            p->tok = tb_lex_skip_card(p->lx);
        }
    }
}

/* Evaluates every global parameter once, so that errors show even when unused. */
static void settle_globals(parser *p)
{
    for (size_t i = 0; i < p->globals.count && !stopped(p); i++) {
        double ignored = 0;
        param *prm = &p->globals.items[i];
        eval_ctx cx = {p, &prm->expr, prm->src, 0};
        p->src = prm->src;
        param_value(&cx, prm, 0, 0, &ignored);
    }
}

static void free_parser(parser *p)
{
    for (size_t i = 0; i < p->def_count; i++) {
        free_subckt(&p->defs[i]);
    }
    tb_free(p->defs);
    tb_free(p->frames);
    free_params(&p->globals);
    tb_free(p->srcs);
    tb_free(p->runs);
    tb_free(p->instances.items);
    tb_names_free(&p->instances.index);
    tb_free(p->known);
    tb_names_free(&p->known_index);
    tb_names_free(&p->def_index);
    tb_free(p->words);
    tb_free(p->scratch);
}

/* netlist -> TITLE {card} [.END ...], the first pass then the second. */
static tb_status netlist(parser *p, const char *canon)
{
    open_file *files = tb_calloc(MAX_INCLUDE_DEPTH + 1, sizeof(open_file));
    if (!files) {
        nomem(p);
        return p->status;
    }
    size_t depth = 1;
    files[0].src = 0;
    files[0].canon = canon ? strdup(canon) : NULL;
    tb_lex_init(&files[0].lx, p->srcs[0].text, p->srcs[0].len);
    p->ckt->title = tb_strndup(files[0].lx.title.ptr, files[0].lx.title.len);
    if (!p->ckt->title)
        nomem(p);
    else
        first_pass(p, files, &depth);
    for (size_t d = 0; d < depth; d++)
        free(files[d].canon);
    tb_free(files);
    if (!stopped(p))
        settle_globals(p);
    if (!stopped(p))
        second_pass(p);
    return p->status;
}

/* Parses the source text (handed to the circuit) read from file, canonical path canon
 * (NULL when it is not a file), as setup says. */
static tb_status parse_owned(char *text, size_t len, const char *file, const char *canon,
                             const read_setup *setup, tb_diag *diag, tb_circuit **out)
{
    tb_circuit *ckt = NULL;
    const char *name = NULL;
    tb_status st = tb_circuit_create(file, &ckt);
    if (st != TB_OK) {
        tb_free(text);
        return st;
    }
    parser p = {.ckt = ckt, .diag = diag, .status = TB_OK, .setup = setup, .bytes = len};
    ckt->params = tb_params_new();
    if (!ckt->params) {
        tb_free(text);
        nomem(&p);
    } else if (tb_circuit_add_source(ckt, ckt->file, text, len, &name) != TB_OK)
        nomem(&p);
    else if (add_src(&p, name, text, len, SIZE_MAX, 0))
        netlist(&p, canon);
    free_parser(&p);
    /* References are checked only in a netlist without syntax errors: an
     * abandoned card would make them report names that are in fact there. */
    st = p.status == TB_OK ? tb_circuit_finish(ckt, diag) : p.status;
    if (st == TB_OK)
        st = tb_expect_resolve(ckt, diag); /* .expect names a .loop: every command refuses a typo */
    if (st == TB_OK)
        st = tb_spreadcard_resolve(ckt, diag);
    if (st != TB_OK) {
        tb_circuit_free(ckt);
        return st;
    }
    *out = ckt;
    return TB_OK;
}

void tb_read_options_init(tb_read_options *opt)
{
    if (opt)
        *opt = (tb_read_options){.allow_include = true, .include_root = NULL, .max_bytes = TB_READ_MAX_BYTES};
}

/* A diagnostic about the whole of file (no line); returns st, or TB_ERR_NOMEM when it
 * could not be recorded. */
static tb_status whole_file(tb_diag *diag, const char *file, tb_status st, const char *fmt, ...)
    __attribute__((format(printf, 4, 5)));
static tb_status whole_file(tb_diag *diag, const char *file, tb_status st, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    tb_status added = tb_diag_vadd(diag, TB_SEV_ERROR, file ? file : "<input>", 0, 0, NULL, 0, fmt, ap);
    va_end(ap);
    return added ? TB_ERR_NOMEM : st;
}

/* Resolves opt (NULL: the defaults) into *rs; the include root must be a folder.
 * TB_ERR_IO (with a diagnostic about file) when it is not. */
static tb_status setup_read(const tb_read_options *opt, const char *file, tb_diag *diag, read_setup *rs)
{
    tb_read_options defaults;
    tb_read_options_init(&defaults);
    if (!opt)
        opt = &defaults;
    *rs = (read_setup){opt->allow_include, opt->include_root, NULL, opt->max_bytes};
    if (!opt->include_root)
        return TB_OK;
    struct stat st;
    rs->root_canon = realpath(opt->include_root, NULL);
    int err = rs->root_canon ? (stat(rs->root_canon, &st) != 0 ? errno : S_ISDIR(st.st_mode) ? 0 : ENOTDIR)
                             : errno;
    if (!err)
        return TB_OK;
    free(rs->root_canon);
    rs->root_canon = NULL;
    char reason[128];
    if (strerror_r(err, reason, sizeof reason) != 0)
        snprintf(reason, sizeof reason, "error %d", err);
    return whole_file(diag, file, TB_ERR_IO, "cannot use '%s' as the include root: %s", opt->include_root,
                      reason);
}

tb_status tb_circuit_parse_with(const char *text, size_t len, const char *file,
                                const tb_read_options *opt, tb_diag *diag, tb_circuit **out)
{
    if ((!text && len) || !out)
        return TB_ERR_USAGE;
    read_setup rs;
    tb_status st = setup_read(opt, file, diag, &rs);
    if (st != TB_OK)
        return st;
    char reason[160];
    tb_file_why why = {.problem = TB_FILE_TOO_LARGE, .limit = rs.max_bytes};
    char *copy = len > rs.max_bytes ? NULL : tb_strndup(text ? text : "", len);
    if (len > rs.max_bytes)
        st = whole_file(diag, file, TB_ERR_INPUT, "%s", tb_netfile_why_text(&why, reason, sizeof reason));
    else
        st = copy ? parse_owned(copy, len, file, NULL, &rs, diag, out) : TB_ERR_NOMEM;
    free(rs.root_canon);
    return st;
}

tb_status tb_circuit_parse(const char *text, size_t len, const char *file, tb_diag *diag,
                           tb_circuit **out)
{
    return tb_circuit_parse_with(text, len, file, NULL, diag, out);
}

/* ---- files -------------------------------------------------------------- */

/* Reads the netlist file at path whole: regular, within the limit, no NUL byte. */
static tb_status read_netlist(const char *path, size_t limit, tb_diag *diag, char **text, size_t *len)
{
    char reason[160];
    tb_netfile f;
    tb_file_why why = {.problem = TB_FILE_OK};
    tb_status st = tb_netfile_open(path, false, &f, &why);
    if (st == TB_OK) {
        st = tb_netfile_load(&f, limit, text, len, &why);
        tb_netfile_close(&f);
    }
    if (st == TB_OK || st == TB_ERR_NOMEM)
        return st;
    tb_netfile_why_text(&why, reason, sizeof reason);
    if (why.problem == TB_FILE_BINARY) /* located, but nothing of it quoted */
        return tb_diag_add(diag, TB_SEV_ERROR, path, why.line, why.col, NULL, 0, "'%s' is not a netlist: %s",
                           path, reason)
                   ? TB_ERR_NOMEM
                   : TB_ERR_INPUT;
    return whole_file(diag, path, st, "cannot read '%s': %s", path, reason);
}

tb_status tb_circuit_read_with(const char *path, const tb_read_options *opt, tb_diag *diag,
                               tb_circuit **out)
{
    if (!path || !out)
        return TB_ERR_USAGE;
    read_setup rs;
    tb_status st = setup_read(opt, path, diag, &rs);
    char *text = NULL;
    size_t len = 0;
    if (st == TB_OK)
        st = read_netlist(path, rs.max_bytes, diag, &text, &len);
    if (st == TB_OK) {
        char *canon = realpath(path, NULL);
        st = parse_owned(text, len, path, canon, &rs, diag, out);
        free(canon);
    }
    free(rs.root_canon);
    return st;
}

tb_status tb_circuit_read(const char *path, tb_diag *diag, tb_circuit **out)
{
    return tb_circuit_read_with(path, NULL, diag, out);
}
