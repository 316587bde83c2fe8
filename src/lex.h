/* src/lex.h: the netlist lexer: physical lines, '+' continuation, comments, tokens, engineering values */
#ifndef TB_LEX_H
#define TB_LEX_H

#include <stdbool.h>
#include <stddef.h>

typedef enum {
    TB_TOK_WORD,   /* a name, node, keyword or value: a run of word characters */
    TB_TOK_LPAREN, /* ( */
    TB_TOK_RPAREN, /* ) */
    TB_TOK_COMMA,  /* , */
    TB_TOK_EQUALS, /* = */
    TB_TOK_EXPR,   /* {expression}: from '{' to the first '}' on the same physical
                    * line, both included; without a '}' it runs to the line's end */
    TB_TOK_PLUS,   /* a '+' line with no card before it to continue */
    TB_TOK_BAD,    /* one control character, which has no place in a netlist, or a
                    * character that looks like a blank but is not (tb_lex_odd_space) */
    TB_TOK_EOC,    /* end of the current card (logical line) */
    TB_TOK_EOF     /* end of the input */
} tb_tok_kind;

/* A token: a slice of the source buffer and where it starts. EOC and EOF
 * are empty slices just after the card's last token and at the end. */
typedef struct {
    tb_tok_kind kind;
    const char *ptr;
    size_t len;
    int line; /* physical line, 1-based */
    int col;  /* byte column in that line, 1-based */
} tb_token;

/* Lexer state over text[0..len), which need not be NUL-terminated and must
 * outlive the lexer and its tokens. */
typedef struct {
    const char *text;
    size_t len;
    size_t pos;        /* next byte to look at */
    size_t line_start; /* offset of the physical line holding pos */
    int line;          /* that line's number */
    bool at_bol;       /* pos is at the start of a physical line */
    bool in_card;      /* tokens of a card have been handed out and its EOC not yet */
    tb_token last;     /* the last token handed out */
    tb_token title;    /* the first line, blanks trimmed (a WORD slice, maybe empty) */
} tb_lexer;

/* Sets up lx over text[0..len): skips a UTF-8 byte order mark, takes the
 * first physical line as the title (lx->title), and stands at line 2. */
void tb_lex_init(tb_lexer *lx, const char *text, size_t len);

/* Sets up lx over text[0..len) to read the cards that start at pos, the
 * start of physical line `line` (no title): a subcircuit body or one card
 * read again. */
void tb_lex_init_at(tb_lexer *lx, const char *text, size_t len, size_t pos, int line);

/* The next token of the current card; TB_TOK_EOC when the card ends (the
 * next content line does not start with '+'), then the first token of the
 * next card; TB_TOK_EOF at the end of the input, and again at every later call.
 * Comment lines ('*' first after blanks), ';' comments and blank lines are
 * skipped, also between a card and its '+' lines. */
tb_token tb_lex_next(tb_lexer *lx);
/* tb_lex_next into *out (which must not be lx->last): for the parser's loop, which keeps
 * its current token in place. */
void tb_lex_read(tb_lexer *lx, tb_token *out);

/* Skips the rest of the current card (a card's tokens have been handed out and
 * its EOC not yet) without making its tokens, and returns what tb_lex_next would
 * at the card's end: TB_TOK_EOC, placed after the last token handed out (not
 * after the card's true last token). For a pass that reads only the first tokens
 * of cards; tokens that would be TB_TOK_BAD pass unnoticed. */
tb_token tb_lex_skip_card(tb_lexer *lx);

/* The physical line of the source holding at (text <= at <= text + len),
 * without its line end; its length goes to *len. */
const char *tb_lex_line(const tb_lexer *lx, const char *at, size_t *len);

/* The length of the UTF-8 character at s[0..len) when it is one that looks like
 * a blank but is not (the no-break space U+00A0, the spaces U+2000..U+200B,
 * U+202F, U+205F, U+3000, U+FEFF), with its name ("no-break space (U+00A0)") in
 * *name when name is not NULL; 0 otherwise. */
size_t tb_lex_odd_space(const char *s, size_t len, const char **name);

/* The message for a TB_TOK_BAD token, in buf: "invalid control character 0x1B",
 * or the odd space named; returns buf. */
const char *tb_lex_bad_text(const tb_token *tok, char *buf, size_t size);

/* ASCII lower case, independent of the locale. */
static inline char tb_lex_lower(char c)
{
    return c >= 'A' && c <= 'Z' ? (char)(c - 'A' + 'a') : c;
}

/* true when tok is a WORD equal to keyword (given in lower case), ignoring case. */
bool tb_lex_is(const tb_token *tok, const char *keyword);

typedef enum {
    TB_VALUE_OK,
    TB_VALUE_NOT_NUMBER, /* does not start with a number at all ("abc", ".", "-") */
    TB_VALUE_MALFORMED,  /* a number followed by something other than suffix and letters ("1k5", "1e") */
    TB_VALUE_RANGE       /* too large for a double ("1e999") */
} tb_value_status;

/* Reads an engineering value from s[0..len):
 *   value  -> [+|-] mantissa [exponent] [suffix] {letter}
 *   mantissa -> digit {digit} [. {digit}] | . digit {digit}
 *   exponent -> (e|E) [+|-] digit {digit}
 *   suffix -> f p n u m k meg g t (any case; m is milli, meg is mega)
 * Letters after the number or suffix are ignored ("10kOhm", "2.2uF"). The
 * result is the correctly rounded double of the decimal value; a value too
 * small for a double reads as 0. *out is set only on TB_VALUE_OK. */
tb_value_status tb_lex_value(const char *s, size_t len, double *out);

#endif
