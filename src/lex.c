/* src/lex.c: the netlist lexer: physical lines, '+' continuation, comments, tokens, engineering values */
#include "lex.h"

#include <float.h>
#include <limits.h>
#include <stdint.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* ---- character classes ------------------------------------------------ */

/* Every byte not listed is a word character: printable ASCII other than
 * blanks and ( ) , = ; and every byte of a UTF-8 sequence. C_LEAD marks the
 * bytes an odd space can start with (tb_lex_odd_space): word characters
 * unless one starts there, so that only they need a closer look. */
enum { C_WORD = 0, C_BLANK, C_EOL, C_PUNCT, C_SEMI, C_BAD, C_BRACE, C_LEAD };

static const unsigned char char_class[256] = {
    [0x00] = C_BAD,   [0x01] = C_BAD,   [0x02] = C_BAD,   [0x03] = C_BAD,
    [0x04] = C_BAD,   [0x05] = C_BAD,   [0x06] = C_BAD,   [0x07] = C_BAD,
    [0x08] = C_BAD,   ['\t'] = C_BLANK, ['\n'] = C_EOL,   ['\v'] = C_BLANK,
    ['\f'] = C_BLANK, ['\r'] = C_EOL,   [0x0E] = C_BAD,   [0x0F] = C_BAD,
    [0x10] = C_BAD,   [0x11] = C_BAD,   [0x12] = C_BAD,   [0x13] = C_BAD,
    [0x14] = C_BAD,   [0x15] = C_BAD,   [0x16] = C_BAD,   [0x17] = C_BAD,
    [0x18] = C_BAD,   [0x19] = C_BAD,   [0x1A] = C_BAD,   [0x1B] = C_BAD,
    [0x1C] = C_BAD,   [0x1D] = C_BAD,   [0x1E] = C_BAD,   [0x1F] = C_BAD,
    [' '] = C_BLANK,  ['('] = C_PUNCT,  [')'] = C_PUNCT,  [','] = C_PUNCT,
    ['='] = C_PUNCT,  [';'] = C_SEMI,   [0x7F] = C_BAD,   ['{'] = C_BRACE,
    [0xC2] = C_LEAD,  [0xE2] = C_LEAD,  [0xE3] = C_LEAD,  [0xEF] = C_LEAD,
};

/* Class of the byte at i; the end of the input counts as a line end. */
static int class_at(const tb_lexer *lx, size_t i)
{
    return i < lx->len ? char_class[(unsigned char)lx->text[i]] : C_EOL;
}

/* Characters that look like blanks but are not (docs/netlist.md): typed by word
 * processors and copied from web pages, they would otherwise glue two fields into
 * one word. Each is a token of its own (TB_TOK_BAD) that messages name. */
static const struct {
    const char *bytes; /* its UTF-8 encoding */
    const char *name;
} odd_spaces[] = {
    {"\xC2\xA0", "no-break space (U+00A0)"},
    {"\xE2\x80\x80", "en quad (U+2000)"},
    {"\xE2\x80\x81", "em quad (U+2001)"},
    {"\xE2\x80\x82", "en space (U+2002)"},
    {"\xE2\x80\x83", "em space (U+2003)"},
    {"\xE2\x80\x84", "three-per-em space (U+2004)"},
    {"\xE2\x80\x85", "four-per-em space (U+2005)"},
    {"\xE2\x80\x86", "six-per-em space (U+2006)"},
    {"\xE2\x80\x87", "figure space (U+2007)"},
    {"\xE2\x80\x88", "punctuation space (U+2008)"},
    {"\xE2\x80\x89", "thin space (U+2009)"},
    {"\xE2\x80\x8A", "hair space (U+200A)"},
    {"\xE2\x80\x8B", "zero-width space (U+200B)"},
    {"\xE2\x80\xAF", "narrow no-break space (U+202F)"},
    {"\xE2\x81\x9F", "medium mathematical space (U+205F)"},
    {"\xE3\x80\x80", "ideographic space (U+3000)"},
    {"\xEF\xBB\xBF", "zero-width no-break space (U+FEFF)"},
};

size_t tb_lex_odd_space(const char *s, size_t len, const char **name)
{
    unsigned char c = len ? (unsigned char)s[0] : 0;
    if (c != 0xC2 && c != 0xE2 && c != 0xE3 && c != 0xEF)
        return 0;
    for (size_t k = 0; k < sizeof odd_spaces / sizeof odd_spaces[0]; k++) {
        size_t n = strlen(odd_spaces[k].bytes);
        if (n <= len && memcmp(s, odd_spaces[k].bytes, n) == 0) {
            if (name)
                *name = odd_spaces[k].name;
            return n;
        }
    }
    return 0;
}

/* Length of an odd space at byte i of the input, 0 when there is none. */
static size_t odd_space_at(const tb_lexer *lx, size_t i)
{
    return class_at(lx, i) == C_LEAD ? tb_lex_odd_space(lx->text + i, lx->len - i, NULL) : 0;
}

/* The end of the word that starts at i: word characters up to a blank, a line end,
 * punctuation, a control character or an odd space. */
static size_t word_end(const tb_lexer *lx, size_t i)
{
    const unsigned char *text = (const unsigned char *)lx->text;
    for (; i < lx->len; i++) {
        int cls = char_class[text[i]];
        if (cls != C_WORD && (cls != C_LEAD || odd_space_at(lx, i)))
            break;
    }
    return i;
}

static int clamp_int(size_t n)
{
    return n > INT_MAX ? INT_MAX : (int)n;
}

/* ---- lines -------------------------------------------------------------- */

static void skip_blanks(tb_lexer *lx)
{
    while (class_at(lx, lx->pos) == C_BLANK)
        lx->pos++;
}

/* Moves past the end of the current physical line (CR, LF or CRLF). */
static void next_line(tb_lexer *lx)
{
    const char *text = lx->text;
    while (lx->pos < lx->len && text[lx->pos] != '\n' && text[lx->pos] != '\r')
        lx->pos++;
    if (lx->pos < lx->len) {
        if (lx->text[lx->pos] == '\r' && lx->pos + 1 < lx->len && lx->text[lx->pos + 1] == '\n')
            lx->pos++;
        lx->pos++;
    }
    if (lx->line < INT_MAX)
        lx->line++;
    lx->line_start = lx->pos;
    lx->at_bol = true;
}

static tb_token make(const tb_lexer *lx, tb_tok_kind kind, size_t start, size_t len)
{
    tb_token tok = {kind, lx->text + start, len, lx->line, clamp_int(start - lx->line_start + 1)};
    return tok;
}

/* The empty token just after the last one handed out. */
static tb_token end_of_card(const tb_lexer *lx)
{
    tb_token tok = lx->last;
    tok.kind = TB_TOK_EOC;
    tok.ptr += tok.len;
    tok.col = tok.len >= (size_t)(INT_MAX - tok.col) ? INT_MAX : tok.col + (int)tok.len;
    tok.len = 0;
    return tok;
}

void tb_lex_init(tb_lexer *lx, const char *text, size_t len)
{
    *lx = (tb_lexer){.text = text, .len = len, .line = 1};
    if (len >= 3 && memcmp(text, "\xEF\xBB\xBF", 3) == 0)
        lx->pos = 3;
    skip_blanks(lx);
    size_t start = lx->pos;
    size_t end = start;
    while (class_at(lx, lx->pos) != C_EOL) {
        if (class_at(lx, lx->pos) != C_BLANK)
            end = lx->pos + 1;
        lx->pos++;
    }
    lx->title = make(lx, TB_TOK_WORD, start, end - start);
    next_line(lx);
}

void tb_lex_init_at(tb_lexer *lx, const char *text, size_t len, size_t pos, int line)
{
    *lx = (tb_lexer){.text = text, .len = len, .pos = pos, .line_start = pos, .line = line,
                     .at_bol = true};
    lx->title = make(lx, TB_TOK_WORD, pos, 0);
}

/* At the start of a physical line: skips blank and comment lines, then either
 * hands out a token (EOC, EOF, an orphan '+') and returns true, or leaves pos
 * at the line's first token and returns false. */
static bool begin_line(tb_lexer *lx, tb_token *tok)
{
    for (;;) {
        if (lx->pos >= lx->len) {
            *tok = lx->in_card ? end_of_card(lx) : make(lx, TB_TOK_EOF, lx->len, 0);
            lx->in_card = false;
            return true;
        }
        skip_blanks(lx);
        int cls = class_at(lx, lx->pos);
        char c = lx->pos < lx->len ? lx->text[lx->pos] : '\0';
        if (cls == C_EOL || cls == C_SEMI || c == '*') {
            next_line(lx);
            continue;
        }
        if (c != '+' && lx->in_card) {
            *tok = end_of_card(lx); /* stays at this line for the next card */
            lx->in_card = false;
            return true;
        }
        lx->at_bol = false;
        if (c != '+' || lx->in_card) {
            lx->pos += c == '+';
            lx->in_card = true;
            return false;
        }
        lx->in_card = true;
        *tok = make(lx, TB_TOK_PLUS, lx->pos, 1);
        lx->pos++;
        return true;
    }
}

tb_token tb_lex_skip_card(tb_lexer *lx)
{
    tb_token tok;
    for (;;) {
        if (!lx->at_bol) /* the rest of this physical line: no token spans a line end */
            next_line(lx);
        if (begin_line(lx, &tok))
            return tok;
    }
}

static tb_tok_kind punct_kind(char c)
{
    switch (c) {
    case '(':
        return TB_TOK_LPAREN;
    case ')':
        return TB_TOK_RPAREN;
    case ',':
        return TB_TOK_COMMA;
    default:
        return TB_TOK_EQUALS;
    }
}

/* Hands out the token text[start..start + len) of the given kind into *out and records
 * it as the last one, field by field: a token assembled in memory and copied whole
 * just after would wait for its own fields to be stored (a store-forwarding stall on
 * every token). */
static void hand_out(tb_lexer *lx, tb_token *out, tb_tok_kind kind, size_t start, size_t len)
{
    const char *ptr = lx->text + start;
    int line = lx->line;
    int col = clamp_int(start - lx->line_start + 1);
    out->kind = kind;
    out->ptr = ptr;
    out->len = len;
    out->line = line;
    out->col = col;
    lx->last.kind = kind;
    lx->last.ptr = ptr;
    lx->last.len = len;
    lx->last.line = line;
    lx->last.col = col;
}

void tb_lex_read(tb_lexer *lx, tb_token *out)
{
    for (;;) {
        if (lx->at_bol && begin_line(lx, out)) {
            if (out->kind == TB_TOK_PLUS)
                lx->last = *out;
            return;
        }
        skip_blanks(lx);
        int cls = class_at(lx, lx->pos);
        size_t start = lx->pos;
        if (cls == C_EOL || cls == C_SEMI) {
            next_line(lx);
            continue;
        }
        lx->pos++;
        if (cls == C_PUNCT) {
            hand_out(lx, out, punct_kind(lx->text[start]), start, 1);
        } else if (cls == C_BRACE) {
            while (class_at(lx, lx->pos) != C_EOL && lx->text[lx->pos] != '}')
                lx->pos++;
            lx->pos += class_at(lx, lx->pos) != C_EOL;
            hand_out(lx, out, TB_TOK_EXPR, start, lx->pos - start);
        } else if (cls == C_BAD) {
            hand_out(lx, out, TB_TOK_BAD, start, 1);
        } else if (odd_space_at(lx, start)) {
            lx->pos = start + odd_space_at(lx, start);
            hand_out(lx, out, TB_TOK_BAD, start, lx->pos - start);
        } else {
            lx->pos = word_end(lx, lx->pos);
            hand_out(lx, out, TB_TOK_WORD, start, lx->pos - start);
        }
        return;
    }
}

tb_token tb_lex_next(tb_lexer *lx)
{
    tb_token tok;
    tb_lex_read(lx, &tok);
    return tok;
}

const char *tb_lex_line(const tb_lexer *lx, const char *at, size_t *len)
{
    const char *start = at;
    const char *end = at;
    const char *stop = lx->text + lx->len;
    while (start > lx->text && start[-1] != '\n' && start[-1] != '\r')
        start--;
    while (end < stop && *end != '\n' && *end != '\r')
        end++;
    *len = (size_t)(end - start);
    return start;
}

const char *tb_lex_bad_text(const tb_token *tok, char *buf, size_t size)
{
    const char *name = NULL;
    if (tb_lex_odd_space(tok->ptr, tok->len, &name))
        snprintf(buf, size, "%s between fields: separate them with plain spaces or tabs", name);
    else
        snprintf(buf, size, "invalid control character 0x%02X", (unsigned)(unsigned char)tok->ptr[0]);
    return buf;
}

bool tb_lex_is(const tb_token *tok, const char *keyword)
{
    size_t n = strlen(keyword);
    if (tok->kind != TB_TOK_WORD || tok->len != n)
        return false;
    for (size_t i = 0; i < n; i++)
        if (tb_lex_lower(tok->ptr[i]) != keyword[i])
            return false;
    return true;
}

/* ---- engineering values ------------------------------------------------- */

/* Significant digits kept: more than the 767 that can ever decide how a
 * decimal rounds to a double (from memory); digits past them only matter as
 * "some non-zero digit follows", kept as one sticky digit. */
#define VALUE_DIGITS 800
/* Exponents are saturated here: far outside a double, yet far from overflow. */
#define EXP_LIMIT 1000000000000000LL

/* value = 0.digits x 10^point */
typedef struct {
    char digits[VALUE_DIGITS];
    size_t count;
    bool sticky;
    long long point;
} decimal;

static bool is_digit(char c)
{
    return c >= '0' && c <= '9';
}

static bool is_letter(char c)
{
    return (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z');
}

static long long add_exp(long long a, long long b)
{
    long long sum = a + b;
    return sum > EXP_LIMIT ? EXP_LIMIT : sum < -EXP_LIMIT ? -EXP_LIMIT : sum;
}

/* Reads digits from s[i..n) into d (integer or fraction part); returns the
 * position after them. */
static size_t scan_digits(const char *s, size_t n, size_t i, decimal *d, bool fraction)
{
    for (; i < n && is_digit(s[i]); i++) {
        if (d->count == 0 && s[i] == '0') {
            if (fraction)
                d->point = add_exp(d->point, -1);
            continue;
        }
        if (d->count < VALUE_DIGITS)
            d->digits[d->count++] = s[i];
        else if (s[i] != '0')
            d->sticky = true;
        if (!fraction)
            d->point = add_exp(d->point, 1);
    }
    return i;
}

/* exponent -> (e|E) [+|-] digit {digit}, at s[*at]; false when no digit follows. */
static bool scan_exponent(const char *s, size_t n, size_t *at, long long *exp10)
{
    size_t i = *at + 1;
    bool negative = false;
    if (i < n && (s[i] == '+' || s[i] == '-'))
        negative = s[i++] == '-';
    if (i >= n || !is_digit(s[i]))
        return false;
    long long e = 0;
    for (; i < n && is_digit(s[i]); i++)
        if (e < EXP_LIMIT)
            e = e * 10 + (s[i] - '0');
    *exp10 = negative ? -e : e;
    *at = i;
    return true;
}

/* suffix -> f p n u m k meg g t, at s[i]; adds its power of ten to *exp10 and
 * returns the position after it (i itself when there is none). */
static size_t scan_suffix(const char *s, size_t n, size_t i, long long *exp10)
{
    static const struct {
        char letter;
        int exp10;
    } scale[] = {{'f', -15}, {'p', -12}, {'n', -9}, {'u', -6},
                 {'m', -3},  {'k', 3},   {'g', 9},  {'t', 12}};
    if (n - i >= 3 && tb_lex_lower(s[i]) == 'm' && tb_lex_lower(s[i + 1]) == 'e' &&
        tb_lex_lower(s[i + 2]) == 'g') {
        *exp10 += 6;
        return i + 3;
    }
    for (size_t k = 0; i < n && k < sizeof scale / sizeof scale[0]; k++) {
        if (tb_lex_lower(s[i]) == scale[k].letter) {
            *exp10 += scale[k].exp10;
            return i + 1;
        }
    }
    return i;
}

/* The double nearest to d x 10^exp10, through strtod on "DIGITSeN" (no
 * decimal point, so the locale plays no part). */

/* Writes "e<exp>" and a NUL (|exp| < 10^6 here); snprintf is too slow for every value. */
static void put_exponent(char *at, long long exp)
{
    char digits[24];
    int n = 0;
    unsigned long long mag = exp < 0 ? (unsigned long long)-exp : (unsigned long long)exp;
    do {
        digits[n++] = (char)('0' + mag % 10);
        mag /= 10;
    } while (mag > 0);
    *at++ = 'e';
    if (exp < 0)
        *at++ = '-';
    while (n > 0)
        *at++ = digits[--n];
    *at = '\0';
}

static tb_value_status compose(const decimal *d, bool negative, long long exp10, double *out)
{
    if (d->count == 0) {
        *out = 0.0;
        return TB_VALUE_OK;
    }
    long long magnitude = add_exp(d->point, exp10); /* 10^(magnitude-1) <= value < 10^magnitude */
    if (magnitude > 310)
        return TB_VALUE_RANGE;
    if (magnitude < -400) {
        *out = 0.0;
        return TB_VALUE_OK;
    }
    char buf[VALUE_DIGITS + 32];
    size_t k = d->count;
    memcpy(buf, d->digits, k);
    if (d->sticky)
        buf[k++] = '1';
    put_exponent(buf + k, magnitude - (long long)k);
    double v = strtod(buf, NULL);
    if (!isfinite(v))
        return TB_VALUE_RANGE;
    *out = negative ? -v : v;
    return TB_VALUE_OK;
}

/* ---- the fast path: plain decimals --------------------------------------- */

/* Most digits the fast path reads: their integer stays below 10^19 < 2^64. */
#define FAST_DIGITS 19
/* Digits at s[*at..n) into *m and *count (all digits, leading zeros too); false
 * when there are more than FAST_DIGITS in all. */
static bool fast_digits(const char *s, size_t n, size_t *at, uint64_t *m, int *count)
{
    size_t i = *at;
    for (; i < n && is_digit(s[i]); i++) {
        if (++*count > FAST_DIGITS)
            return false;
        *m = *m * 10 + (uint64_t)(s[i] - '0');
    }
    *at = i;
    return true;
}

/* The value of a plain decimal: [+|-] mantissa of at most FAST_DIGITS digits, an
 * exponent, a suffix and letters. When its digits make an
 * integer m <= 2^53 and its power of ten p is within 10^+-22, both are exact
 * doubles and one multiplication or division m x 10^p rounds correctly, as strtod
 * does (Clinger's fast path: W. D. Clinger, "How to read floating point numbers
 * accurately", PLDI 1990). False, with *out untouched, for anything else, which the
 * full reading below handles (errors included). */
static bool fast_value(const char *s, size_t n, double *out)
{
    static const double powers[] = {1e0,  1e1,  1e2,  1e3,  1e4,  1e5,  1e6,  1e7,
                                    1e8,  1e9,  1e10, 1e11, 1e12, 1e13, 1e14, 1e15,
                                    1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22};
    size_t i = 0;
    bool negative = i < n && s[i] == '-';
    i += i < n && (s[i] == '+' || s[i] == '-');
    uint64_t m = 0;
    int count = 0;
    if (!fast_digits(s, n, &i, &m, &count))
        return false;
    int whole = count;
    if (i < n && s[i] == '.') {
        i++;
        if (!fast_digits(s, n, &i, &m, &count))
            return false;
    }
    if (count == 0)
        return false;
    long long exp10 = -(long long)(count - whole);
    if (i < n && tb_lex_lower(s[i]) == 'e') {
        size_t at = i;
        long long e = 0;
        if (!scan_exponent(s, n, &at, &e)) /* saturated, never overflows */
            return false;
        exp10 += e;
        i = at;
    }
    i = scan_suffix(s, n, i, &exp10);
    while (i < n && is_letter(s[i]))
        i++;
    if (i != n)
        return false;
    if (m == 0) { /* any zero reads as +0, as below */
        *out = 0.0;
        return true;
    }
    if (m > ((uint64_t)1 << 53) || exp10 < -22 || exp10 > 22)
        return false;
    double v = exp10 >= 0 ? (double)m * powers[exp10] : (double)m / powers[-exp10];
    *out = negative ? -v : v;
    return true;
}

tb_value_status tb_lex_value(const char *s, size_t len, double *out)
{
    /* the fast path's one rounded operation needs doubles evaluated as doubles */
    if (FLT_EVAL_METHOD == 0 && fast_value(s, len, out))
        return TB_VALUE_OK;
    decimal d = {.count = 0};
    size_t i = 0;
    bool negative = false;
    if (i < len && (s[i] == '+' || s[i] == '-'))
        negative = s[i++] == '-';
    size_t start = i;
    i = scan_digits(s, len, i, &d, false);
    bool any = i > start;
    if (i < len && s[i] == '.') {
        start = ++i;
        i = scan_digits(s, len, i, &d, true);
        any = any || i > start;
    }
    if (!any)
        return TB_VALUE_NOT_NUMBER;
    /* An 'e' right after the mantissa must start an exponent: "1e" is a typo, not 1. */
    long long exp10 = 0;
    if (i < len && tb_lex_lower(s[i]) == 'e' && !scan_exponent(s, len, &i, &exp10))
        return TB_VALUE_MALFORMED;
    /* Trade convention (common practice): the suffix is read before any unit
     * letters, so "1F" is one femto(farad), "1M" one milli, "10kOhm" 10e3. */
    i = scan_suffix(s, len, i, &exp10);
    while (i < len && is_letter(s[i]))
        i++;
    if (i != len)
        return TB_VALUE_MALFORMED;
    return compose(&d, negative, exp10, out);
}
