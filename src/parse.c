/* src/parse.c: recursive-descent parser from netlist cards to a circuit, and reading netlist files */
#include <errno.h>
#include <limits.h>
#include <math.h>
#include <stdarg.h>
#include <stdint.h>
#include <stdio.h>
#include <string.h>

#include "alloc.h"
#include "circuit.h"
#include "diag.h"
#include "lex.h"
#include "tbeta.h"

/* Most points per decade, per octave or in all (lin) that .ac accepts. */
#define MAX_AC_POINTS 10000000L
/* Longest token text quoted in a message; a longer one is cut and ends in "...". */
#define QUOTE_MAX 40
#define QUOTE_SIZE (QUOTE_MAX + 4)

typedef struct {
    tb_lexer lx;
    tb_token tok;   /* the current token */
    tb_token prev;  /* the token consumed before it */
    tb_token first; /* the current card's first token */
    char name[QUOTE_SIZE]; /* the card in messages: the element name as written, or ".ac" */
    tb_circuit *ckt;
    tb_diag *diag;
    int errors;
    tb_status status; /* TB_OK; TB_ERR_INPUT after an error; TB_ERR_NOMEM */
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

static void vreport(parser *p, tb_severity sev, const tb_token *at, const char *fmt, va_list ap)
{
    size_t line_len = 0;
    const char *line = tb_lex_line(&p->lx, at->ptr, &line_len);
    if (tb_diag_vadd(p->diag, sev, p->ckt->file, at->line, at->col, line, line_len, fmt, ap)) {
        p->status = TB_ERR_NOMEM;
    } else if (sev == TB_SEV_ERROR) {
        p->errors++;
        if (p->status == TB_OK)
            p->status = TB_ERR_INPUT;
    }
}

/* Records an error at token at; always false, so a card can `return error(...)`. */
static bool error(parser *p, const tb_token *at, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));
static bool error(parser *p, const tb_token *at, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    vreport(p, TB_SEV_ERROR, at, fmt, ap);
    va_end(ap);
    return false;
}

static void warning(parser *p, const tb_token *at, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));
static void warning(parser *p, const tb_token *at, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    vreport(p, TB_SEV_WARNING, at, fmt, ap);
    va_end(ap);
}

static bool nomem(parser *p)
{
    p->status = TB_ERR_NOMEM;
    return false;
}

static bool bad_char(parser *p)
{
    return error(p, &p->tok, "invalid control character 0x%02X",
                 (unsigned)(unsigned char)p->tok.ptr[0]);
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
    p->tok = tb_lex_next(&p->lx);
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

/* Checks that the card ends here; last names what came before ("the value of R1"). */
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

static const char *intern(parser *p, const tb_token *t)
{
    const char *s = tb_circuit_intern(p->ckt, t->ptr, t->len);
    if (!s)
        nomem(p);
    return s;
}

static tb_loc loc_of(const parser *p, const tb_token *t)
{
    tb_loc loc = {p->ckt->file, t->line, t->col};
    return loc;
}

/* The current token starts like a number (it may still be malformed). */
static bool looks_numeric(const parser *p)
{
    double ignored = 0;
    return p->tok.kind == TB_TOK_WORD &&
           tb_lex_value(p->tok.ptr, p->tok.len, &ignored) != TB_VALUE_NOT_NUMBER;
}

/* ---- operands ----------------------------------------------------------- */

/* node -> WORD */
static bool node(parser *p, int *index)
{
    if (!expect_word(p, "a node name"))
        return false;
    if (p->ckt->node_count >= TB_MAX_NODES &&
        !tb_circuit_find_node(p->ckt, p->tok.ptr, p->tok.len, index))
        return error(p, &p->tok, "too many nodes (limit is %zu)", TB_MAX_NODES);
    if (tb_circuit_node(p->ckt, p->tok.ptr, p->tok.len, index) != TB_OK)
        return nomem(p);
    advance(p);
    return true;
}

/* value -> WORD read by tb_lex_value */
static bool value(parser *p, const char *what, double *out)
{
    char text[QUOTE_SIZE];
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

/* ---- element cards ------------------------------------------------------ */

/* Starts element e of the given kind at the name token (the current one). */
static bool element_start(parser *p, tb_elem_kind kind, tb_element *e)
{
    *e = (tb_element){.kind = kind, .branch = -1, .loc = loc_of(p, &p->tok)};
    e->name = intern(p, &p->tok);
    if (!e->name)
        return false;
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
    if (tb_circuit_add_element(p->ckt, e) != TB_OK)
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
    if (!element_start(p, kind, &e) || !node(p, &e.node[0]) || !node(p, &e.node[1]) ||
        !value(p, "a value", &e.value))
        return false;
    if (e.value == 0.0)
        return error(p, &p->prev, "%s of %s must be non-zero", quantity[kind], p->name);
    return element_end(p, &e, "the value");
}

/* vcard -> VNAME node node [[DC] value] [AC value [value]]   (I cards alike) */
static bool source(parser *p, tb_elem_kind kind)
{
    tb_element e;
    const char *part = NULL;
    if (!element_start(p, kind, &e) || !node(p, &e.node[0]) || !node(p, &e.node[1]))
        return false;
    if (accept_keyword(p, "dc") || looks_numeric(p)) {
        if (!value(p, "a DC value", &e.dc))
            return false;
        part = "the DC value";
    }
    if (accept_keyword(p, "ac")) {
        if (!value(p, "an AC magnitude", &e.ac_mag))
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

/* ecard -> ENAME node node node node value   (G cards alike) */
static bool vcontrolled(parser *p, tb_elem_kind kind)
{
    tb_element e;
    if (!element_start(p, kind, &e) || !node(p, &e.node[0]) || !node(p, &e.node[1]) ||
        !node(p, &e.node[2]) || !node(p, &e.node[3]) || !value(p, "a gain", &e.value))
        return false;
    return element_end(p, &e, "the gain");
}

/* fcard -> FNAME node node VNAME value   (H cards alike) */
static bool icontrolled(parser *p, tb_elem_kind kind)
{
    tb_element e;
    if (!element_start(p, kind, &e) || !node(p, &e.node[0]) || !node(p, &e.node[1]) ||
        !expect_word(p, "a voltage source name"))
        return false;
    e.ctrl_name = intern(p, &p->tok);
    if (!e.ctrl_name)
        return false;
    advance(p);
    if (!value(p, "a gain", &e.value))
        return false;
    return element_end(p, &e, "the gain");
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

/* element -> rcard | vcard | ecard | fcard, chosen by the name's first letter */
static bool element(parser *p)
{
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
    default:
        return error(p, &p->tok,
                     "unknown element '%s': '%.*s' is not one of the element letters "
                     "R C L V I E G F H",
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
    if (!value(p, "a stop frequency", &ac.fstop))
        return false;
    if (ac.fstop < ac.fstart)
        return error(p, &p->prev,
                     "stop frequency of .ac ('%s') must not be below its start frequency ('%s')",
                     quote(&p->prev, text), quote(&start, other));
    if (!end_of_card(p, "the stop frequency of .ac", NULL))
        return false;
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
        tb_loop_spec loop = {.source = intern(p, &p->tok), .loc = loc_of(p, &p->tok)};
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
    *name = intern(p, &p->tok);
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

/* directive -> accard | loopcard | iocard | endcard; any other is skipped with a warning */
static bool directive(parser *p)
{
    char text[QUOTE_SIZE];
    if (tb_lex_is(&p->tok, ".ac"))
        return ac_card(p);
    if (tb_lex_is(&p->tok, ".loop"))
        return loop_card(p);
    if (tb_lex_is(&p->tok, ".io"))
        return io_card(p);
    if (tb_lex_is(&p->tok, ".end")) {
        /* endcard -> .END */
        advance(p);
        return end_of_card(p, ".end", NULL);
    }
    warning(p, &p->tok, "unknown directive '%s' skipped", quote(&p->tok, text));
    return true;
}

/* ---- netlist ------------------------------------------------------------ */

/* card -> element | directive */
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

/* netlist -> TITLE {card} [endcard ...]; stops at .end, after TB_DIAG_MAX_ERRORS
 * errors, or when memory runs out. A bad card is abandoned up to its end. */
static void netlist(parser *p)
{
    advance(p);
    while (p->tok.kind != TB_TOK_EOF) {
        bool is_end = tb_lex_is(&p->tok, ".end");
        card(p);
        while (!at_end(p))
            advance(p);
        if (is_end || p->status == TB_ERR_NOMEM || p->errors >= TB_DIAG_MAX_ERRORS ||
            tb_diag_full(p->diag))
            return;
        advance(p);
    }
}

tb_status tb_circuit_parse(const char *text, size_t len, const char *file, tb_diag *diag,
                           tb_circuit **out)
{
    if ((!text && len) || !out)
        return TB_ERR_USAGE;
    if (!text)
        text = "";
    tb_circuit *ckt = NULL;
    tb_status st = tb_circuit_create(file, &ckt);
    if (st != TB_OK)
        return st;
    parser p = {.ckt = ckt, .diag = diag, .status = TB_OK};
    tb_lex_init(&p.lx, text, len);
    ckt->title = tb_strndup(p.lx.title.ptr, p.lx.title.len);
    if (!ckt->title)
        p.status = TB_ERR_NOMEM;
    else
        netlist(&p);
    /* References are checked only in a netlist without syntax errors: an
     * abandoned card would make them report names that are in fact there. */
    st = p.status == TB_OK ? tb_circuit_finish(ckt, text, len, diag) : p.status;
    if (st != TB_OK) {
        tb_circuit_free(ckt);
        return st;
    }
    *out = ckt;
    return TB_OK;
}

/* ---- files -------------------------------------------------------------- */

static tb_status cannot_read(const char *path, int err, tb_diag *diag)
{
    char reason[128];
    if (strerror_r(err, reason, sizeof reason) != 0)
        snprintf(reason, sizeof reason, "error %d", err);
    if (tb_diag_add(diag, TB_SEV_ERROR, path, 0, 0, NULL, 0, "cannot read '%s': %s", path, reason))
        return TB_ERR_NOMEM;
    return TB_ERR_IO;
}

/* Reads the whole file at path into a new buffer *text of *len bytes. */
static tb_status slurp(const char *path, tb_diag *diag, char **text, size_t *len)
{
    FILE *f = fopen(path, "rb");
    if (!f)
        return cannot_read(path, errno, diag);
    char *buf = NULL;
    size_t cap = 0;
    size_t n = 0;
    tb_status st = TB_OK;
    for (;;) {
        if (tb_grow(&buf, &cap, n + 65536, 1, SIZE_MAX / 2)) {
            st = TB_ERR_NOMEM;
            break;
        }
        size_t want = cap - n;
        size_t got = fread(buf + n, 1, want, f);
        n += got;
        if (got < want)
            break;
    }
    if (st == TB_OK && ferror(f))
        st = cannot_read(path, errno ? errno : EIO, diag);
    fclose(f);
    if (st != TB_OK) {
        tb_free(buf);
        return st;
    }
    *text = buf;
    *len = n;
    return TB_OK;
}

tb_status tb_circuit_read(const char *path, tb_diag *diag, tb_circuit **out)
{
    if (!path || !out)
        return TB_ERR_USAGE;
    char *text = NULL;
    size_t len = 0;
    tb_status st = slurp(path, diag, &text, &len);
    if (st != TB_OK)
        return st;
    st = tb_circuit_parse(text, len, path, diag, out);
    tb_free(text);
    return st;
}
