/* tests/test_lex.c: the lexer: lines, continuation, comments, tokens, titles and engineering values */
#include <float.h>
#include <stdlib.h>

#include "testutil.h"

#include "lex.h"

/* A copy of text in a buffer of exactly its length (no NUL after it), so
 * that the address sanitizer catches any read past the end. */
static char *exact_copy(const char *text, size_t len)
{
    char *buf = malloc(len ? len : 1);
    assert_non_null(buf);
    memcpy(buf, text, len);
    return buf;
}

/* Renders the token stream of a netlist: "L:C:text" for a word, "L:C:[x]"
 * for punctuation, an orphan '+' ([+]) or a bad character ([!]); "|" for the
 * end of a card and "." for the end of the input. */
static void render(const char *text, size_t len, char *out, size_t size)
{
    char *buf = exact_copy(text, len);
    tb_lexer lx;
    tb_lex_init(&lx, buf, len);
    size_t used = 0;
    out[0] = '\0';
    for (int guard = 0; guard < 1000; guard++) {
        tb_token tok = tb_lex_next(&lx);
        char one[200];
        switch (tok.kind) {
        case TB_TOK_WORD:
            snprintf(one, sizeof one, "%d:%d:%.*s ", tok.line, tok.col, (int)tok.len, tok.ptr);
            break;
        case TB_TOK_PLUS:
            snprintf(one, sizeof one, "%d:%d:[+] ", tok.line, tok.col);
            break;
        case TB_TOK_BAD:
            snprintf(one, sizeof one, "%d:%d:[!] ", tok.line, tok.col);
            break;
        case TB_TOK_EOC:
            snprintf(one, sizeof one, "| ");
            break;
        case TB_TOK_EOF:
            snprintf(one, sizeof one, ".");
            break;
        default:
            snprintf(one, sizeof one, "%d:%d:[%.*s] ", tok.line, tok.col, (int)tok.len, tok.ptr);
            break;
        }
        used += (size_t)snprintf(out + used, size - used, "%s", one);
        assert_true(used < size);
        if (tok.kind == TB_TOK_EOF)
            break;
    }
    /* EOF stays EOF */
    assert_int_equal(tb_lex_next(&lx).kind, TB_TOK_EOF);
    free(buf);
}

static void test_lex_tokens(void **state)
{
    (void)state;
    static const struct {
        const char *text;
        const char *tokens;
    } cases[] = {
        {"title\nR1 a b 1k\n", "2:1:R1 2:4:a 2:6:b 2:8:1k | ."},
        /* no line end after the last card; the end of the buffer ends the token */
        {"t\nR1 a b 1k", "2:1:R1 2:4:a 2:6:b 2:8:1k | ."},
        {"", "."},
        {"just a title", "."},
        {"title\n", "."},
        {"t\n\n   \n\t\n", "."},
        /* the title is line 1 whatever it holds, even a card or a comment */
        {"R1 a b 1k\nR2 a b 1k\n", "2:1:R2 2:4:a 2:6:b 2:8:1k | ."},
        {"* title\n* comment\nR1\n", "3:1:R1 | ."},
        /* continuation: one card, each token on its own physical line */
        {"t\nR1 a\n+ b 1k\n", "2:1:R1 2:4:a 3:3:b 3:5:1k | ."},
        {"t\nR1 a\n   + b\n", "2:1:R1 2:4:a 3:6:b | ."},
        {"t\nR1 a\n+b\n+1k\nC1 x\n", "2:1:R1 2:4:a 3:2:b 4:2:1k | 5:1:C1 5:4:x | ."},
        /* comment and blank lines between a card and its '+' lines do not end it */
        {"t\nR1 a\n* note\n\n   \n+b 1k\nC1 b 0 1p\n",
         "2:1:R1 2:4:a 6:2:b 6:4:1k | 7:1:C1 7:4:b 7:6:0 7:8:1p | ."},
        /* '+' lines with nothing on them */
        {"t\nR1 a\n+\n+ ; c\n+b\n", "2:1:R1 2:4:a 5:2:b | ."},
        /* comments */
        {"t\n  * x y\nR1 a b 1k ; trailing (comment)\n; whole line\n",
         "3:1:R1 3:4:a 3:6:b 3:8:1k | ."},
        {"t\nR1 a;b\n", "2:1:R1 2:4:a | ."},
        /* '*' and '+' inside a line belong to words */
        {"t\nR1 a*b +c 1\n", "2:1:R1 2:4:a*b 2:8:+c 2:11:1 | ."},
        /* line ends: CRLF, CR, LF, mixed */
        {"t\r\nR1 a\r\n+ b\r\nC1 x y 1\r\n", "2:1:R1 2:4:a 3:3:b | 4:1:C1 4:4:x 4:6:y 4:8:1 | ."},
        {"t\rR1 a b 1\rC1 x 0 2\r", "2:1:R1 2:4:a 2:6:b 2:8:1 | 3:1:C1 3:4:x 3:6:0 3:8:2 | ."},
        {"t\n\r\nR1\r\rC1\n", "3:1:R1 | 5:1:C1 | ."},
        {"t\n\n\rR1", "4:1:R1 | ."},
        /* a byte order mark before the title */
        {"\xEF\xBB\xBFtitle\nR1 a b 1\n", "2:1:R1 2:4:a 2:6:b 2:8:1 | ."},
        /* blanks: space, tab, form feed, vertical tab; columns count bytes */
        {"t\n\tR1\ta\f b\vc\n", "2:2:R1 2:5:a 2:8:b 2:10:c | ."},
        /* punctuation is always a token of its own */
        {"t\n.io V1 v(a,b)\n.x k=v\n",
         "2:1:.io 2:5:V1 2:8:v 2:9:[(] 2:10:a 2:11:[,] 2:12:b 2:13:[)] | "
         "3:1:.x 3:4:k 3:5:[=] 3:6:v | ."},
        {"t\nv ( a , b )\n", "2:1:v 2:3:[(] 2:5:a 2:7:[,] 2:9:b 2:11:[)] | ."},
        /* a '+' with no card before it */
        {"t\n+ R1 a\nC1\n", "2:1:[+] 2:3:R1 2:6:a | 3:1:C1 | ."},
        {"t\n* c\n  +\n+ x\n", "3:3:[+] 4:3:x | ."},
        /* control characters are tokens of their own, to be reported */
        {"t\nR1 a\x01" "b\n", "2:1:R1 2:4:a 2:5:[!] 2:6:b | ."},
        {"t\n\x7f\n", "2:1:[!] | ."},
        /* bytes of UTF-8 sequences are word characters */
        {"t\nR1 n\xC5\x93ud 0 1\n", "2:1:R1 2:4:n\xC5\x93ud 2:10:0 2:12:1 | ."},
        /* ... except the characters that look like blanks: each is a token of its own,
         * to be reported by name, and ends the word before it */
        {"t\nR1\xC2\xA0" "a b\n", "2:1:R1 2:3:[!] 2:5:a 2:7:b | ."},
        {"t\nR1 a\xE2\x80\x89" "b\xE3\x80\x80\n", "2:1:R1 2:4:a 2:5:[!] 2:8:b 2:9:[!] | ."},
        {"t\n\xEF\xBB\xBFR1\n", "2:1:[!] 2:4:R1 | ."},
        /* a lone 0xC2 or 0xE2 byte is a word character like any other */
        {"t\nR1 \xC2\xC2 \xE2\x80\n", "2:1:R1 2:4:\xC2\xC2 2:7:\xE2\x80 | ."},
        /* {expression}: one token from '{' to the first '}' on its physical line,
         * blanks, ';', '(' and ',' inside it included; '{' also ends a word */
        {"t\nR1 a b {2 * (r; 1)}x\n", "2:1:R1 2:4:a 2:6:b 2:8:[{2 * (r; 1)}] 2:20:x | ."},
        {"t\nR1 a b{min(1,2)}\n", "2:1:R1 2:4:a 2:6:b 2:7:[{min(1,2)}] | ."},
        {"t\n.param k={1 + 2\n+ 3}\n", "2:1:.param 2:8:k 2:9:[=] 2:10:[{1 + 2] 3:3:3} | ."},
        {"t\nR1 {a}{b}\n", "2:1:R1 2:4:[{a}] 2:7:[{b}] | ."},
        /* the title may hold control characters; they are not lexed */
        {"t\x01\x02\nR1\n", "2:1:R1 | ."},
    };
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        char got[2000];
        render(cases[i].text, strlen(cases[i].text), got, sizeof got);
        if (strcmp(got, cases[i].tokens) != 0)
            print_error("case %zu: got \"%s\", want \"%s\"\n", i, got, cases[i].tokens);
        assert_string_equal(got, cases[i].tokens);
    }
}

/* A NUL byte is a control character like any other, not the end of the input. */
static void test_lex_nul_byte(void **state)
{
    (void)state;
    static const char text[] = "t\nR1 a\0b\n";
    char got[200];
    render(text, sizeof text - 1, got, sizeof got);
    assert_string_equal(got, "2:1:R1 2:4:a 2:5:[!] 2:6:b | .");
}

/* A bad token's message names what it is. */
static void test_lex_bad_text(void **state)
{
    (void)state;
    static const struct {
        const char *bytes;
        const char *text;
    } cases[] = {
        {"\x1B", "invalid control character 0x1B"},
        {"\x7F", "invalid control character 0x7F"},
        {"\xC2\xA0", "no-break space (U+00A0) between fields: separate them with plain spaces or tabs"},
        {"\xE2\x80\xAF", "narrow no-break space (U+202F) between fields: separate them with plain spaces or tabs"},
        {"\xE2\x80\x8B", "zero-width space (U+200B) between fields: separate them with plain spaces or tabs"},
    };
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        tb_token tok = {TB_TOK_BAD, cases[i].bytes, strlen(cases[i].bytes), 1, 1};
        char buf[160];
        assert_string_equal(tb_lex_bad_text(&tok, buf, sizeof buf), cases[i].text);
    }
    const char *name = NULL;
    assert_int_equal(tb_lex_odd_space("\xE2\x81\x9Fx", 4, &name), 3);
    assert_string_equal(name, "medium mathematical space (U+205F)");
    assert_int_equal(tb_lex_odd_space("\xE2\x81", 2, &name), 0); /* cut short */
    assert_int_equal(tb_lex_odd_space("\xC2\xA9", 2, NULL), 0);  /* the copyright sign */
}

/* The end of a card sits just after its last token, on that token's line. */
static void test_lex_end_of_card_position(void **state)
{
    (void)state;
    const char *text = "t\nR1 a\n+ bcd ; note\n\nC1";
    char *buf = exact_copy(text, strlen(text));
    tb_lexer lx;
    tb_lex_init(&lx, buf, strlen(text));
    tb_token tok;
    for (int i = 0; i < 3; i++)
        tok = tb_lex_next(&lx);
    assert_int_equal(tok.kind, TB_TOK_WORD);
    tok = tb_lex_next(&lx);
    assert_int_equal(tok.kind, TB_TOK_EOC);
    assert_int_equal(tok.line, 3);
    assert_int_equal(tok.col, 6);
    assert_ptr_equal(tok.ptr, buf + 12);
    assert_int_equal(tok.len, 0);
    free(buf);
}

static void test_lex_title(void **state)
{
    (void)state;
    static const struct {
        const char *text;
        const char *title;
    } cases[] = {
        {"  Two-stage amplifier  \nR1 a 0 1\n", "Two-stage amplifier"},
        {"\xEF\xBB\xBF Boot strap\r\n", "Boot strap"},
        {"\xEF\xBB\xBF", ""},
        {"", ""},
        {"\n", ""},
        {"x", "x"},
        {"\tT\t\rR1\n", "T"},
        {"R1 a b 1k\n", "R1 a b 1k"},
        {"Title ; with a semicolon * and a star\n", "Title ; with a semicolon * and a star"},
    };
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        size_t len = strlen(cases[i].text);
        char *buf = exact_copy(cases[i].text, len);
        tb_lexer lx;
        tb_lex_init(&lx, buf, len);
        assert_int_equal(lx.title.len, strlen(cases[i].title));
        assert_memory_equal(lx.title.ptr, cases[i].title, lx.title.len);
        free(buf);
    }
}

static void test_lex_keyword_ignores_case(void **state)
{
    (void)state;
    const char *text = "t\nDC dC dcx ( .AC\n";
    tb_lexer lx;
    tb_lex_init(&lx, text, strlen(text));
    tb_token tok = tb_lex_next(&lx);
    assert_true(tb_lex_is(&tok, "dc"));
    tok = tb_lex_next(&lx);
    assert_true(tb_lex_is(&tok, "dc"));
    tok = tb_lex_next(&lx);
    assert_false(tb_lex_is(&tok, "dc"));
    tok = tb_lex_next(&lx);
    assert_false(tb_lex_is(&tok, "("));
    tok = tb_lex_next(&lx);
    assert_true(tb_lex_is(&tok, ".ac"));
    assert_false(tb_lex_is(&tok, ".a"));
}

static void test_lex_source_line(void **state)
{
    (void)state;
    const char *text = "t\r\nR1 a b\r\n+ c\rlast";
    size_t len = strlen(text);
    char *buf = exact_copy(text, len);
    tb_lexer lx;
    tb_lex_init(&lx, buf, len);
    size_t n = 0;
    const char *line = tb_lex_line(&lx, buf + 6, &n); /* the 'a' */
    assert_int_equal(n, 6);
    assert_memory_equal(line, "R1 a b", 6);
    line = tb_lex_line(&lx, buf + 9, &n); /* the CR after "R1 a b" */
    assert_int_equal(n, 6);
    assert_memory_equal(line, "R1 a b", 6);
    line = tb_lex_line(&lx, buf + len, &n); /* the end of the buffer */
    assert_int_equal(n, 4);
    assert_memory_equal(line, "last", 4);
    free(buf);
}

/* Value read from an exactly sized copy of text. */
static tb_value_status value_of(const char *text, size_t len, double *out)
{
    char *buf = exact_copy(text, len);
    tb_value_status st = tb_lex_value(buf, len, out);
    free(buf);
    return st;
}

/* These pairs define the value format (shared/design.md, "Netlist subset"):
 * each result must be the double nearest the decimal value, so exact
 * equality with the C literal of that decimal is required. */
static void test_lex_values(void **state)
{
    (void)state;
    static const struct {
        const char *text;
        double want;
    } cases[] = {
        {"1", 1},
        {"0", 0},
        {"-0", 0},
        {"+3", 3},
        {"42", 42},
        {"000123", 123},
        {"1.0000", 1},
        {".5", 0.5},
        {"5.", 5},
        {"-.25", -0.25},
        {"0.001", 0.001},
        {"1e-3", 1e-3},
        {"1E3", 1e3},
        {"1e+3", 1e3},
        {"2.5e-07", 2.5e-7},
        {"-4.7n", -4.7e-9},
        {"1f", 1e-15},
        {"1F", 1e-15}, /* femto, not farad: the suffix comes before unit letters */
        {"100p", 100e-12},
        {"3n", 3e-9},
        {"2.2u", 2.2e-6},
        {"2.2uF", 2.2e-6},
        {"1m", 1e-3},
        {"1M", 1e-3}, /* milli in any case */
        {"1mil", 1e-3}, /* no "mil" suffix: milli followed by the letters "il" */
        {"1k", 1e3},
        {"1K", 1e3},
        {"10kOhm", 1e4},
        {"4.7K", 4.7e3},
        {"1meg", 1e6},
        {"1MEG", 1e6},
        {"1Meg", 1e6},
        {"2.2megohm", 2.2e6},
        {"1g", 1e9},
        {"1G", 1e9},
        {"1t", 1e12},
        {"1T", 1e12},
        {"1.5e3k", 1.5e6},
        {"3.3e-2m", 3.3e-5},
        {"12.5V", 12.5},
        {"5Ohm", 5},
        {"1x", 1},
        {"1a", 1},
        {"1.", 1},
        {"1.e3", 1e3},
        {"0.1000000000000000055511151231257827021181583404541015625", 0.1},
        {"1e308", 1e308},
        {"1.7976931348623157e308", DBL_MAX},
        {"4.9e-324", 4.9e-324},
        {"1e-999", 0},
        {"1e-99999999999999999999999", 0},
        {"0e99999999999999999999", 0},
        {"0.000e999", 0},
    };
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        double got = -12345;
        tb_value_status st = value_of(cases[i].text, strlen(cases[i].text), &got);
        if (st != TB_VALUE_OK || got != cases[i].want)
            print_error("'%s': status %d, got %.17g, want %.17g\n", cases[i].text, st, got,
                        cases[i].want);
        assert_int_equal(st, TB_VALUE_OK);
        assert_true(got == cases[i].want);
    }
}

static void test_lex_value_errors(void **state)
{
    (void)state;
    static const struct {
        const char *text;
        tb_value_status want;
    } cases[] = {
        {"", TB_VALUE_NOT_NUMBER},
        {"abc", TB_VALUE_NOT_NUMBER},
        {".", TB_VALUE_NOT_NUMBER},
        {"-", TB_VALUE_NOT_NUMBER},
        {"+", TB_VALUE_NOT_NUMBER},
        {"-.", TB_VALUE_NOT_NUMBER},
        {"e3", TB_VALUE_NOT_NUMBER},
        {".e3", TB_VALUE_NOT_NUMBER},
        {"k1", TB_VALUE_NOT_NUMBER},
        {"--1", TB_VALUE_NOT_NUMBER},
        {"+-1", TB_VALUE_NOT_NUMBER},
        {"inf", TB_VALUE_NOT_NUMBER},
        {"nan", TB_VALUE_NOT_NUMBER},
        {"1k5", TB_VALUE_MALFORMED},
        {"1meg2", TB_VALUE_MALFORMED},
        {"1e", TB_VALUE_MALFORMED},
        {"1e+", TB_VALUE_MALFORMED},
        {"1E-x", TB_VALUE_MALFORMED},
        {"1ee3", TB_VALUE_MALFORMED},
        {"1eV", TB_VALUE_MALFORMED},
        {"1.2.3", TB_VALUE_MALFORMED},
        {"1,5", TB_VALUE_MALFORMED},
        {"1%", TB_VALUE_MALFORMED},
        {"1k-", TB_VALUE_MALFORMED},
        {"0x10", TB_VALUE_MALFORMED},
        {"2.2\xC2\xB5" "F", TB_VALUE_MALFORMED}, /* micro sign: not one of the suffixes */
        {"1e999", TB_VALUE_RANGE},
        {"-1e999", TB_VALUE_RANGE},
        {"2e308", TB_VALUE_RANGE},
        {"1.8e308", TB_VALUE_RANGE},
        {"1e306meg", TB_VALUE_RANGE},
        {"1e99999999999999999999999", TB_VALUE_RANGE},
    };
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        double got = -12345;
        tb_value_status st = value_of(cases[i].text, strlen(cases[i].text), &got);
        if (st != cases[i].want)
            print_error("'%s': status %d, want %d\n", cases[i].text, st, cases[i].want);
        assert_int_equal(st, cases[i].want);
        assert_true(got == -12345); /* untouched on failure */
    }
}

/* Only len bytes are read: "1k5" cut to two bytes is 1k. */
static void test_lex_value_reads_only_its_slice(void **state)
{
    (void)state;
    double got = 0;
    assert_int_equal(value_of("1k5", 2, &got), TB_VALUE_OK);
    assert_true(got == 1e3);
    assert_int_equal(value_of("1meg", 2, &got), TB_VALUE_OK); /* "1m" */
    assert_true(got == 1e-3);
    assert_int_equal(value_of("1e5", 2, &got), TB_VALUE_MALFORMED); /* "1e" */
}

/* Long digit strings: all significant digits count towards the rounding. */
static void test_lex_value_long_mantissa(void **state)
{
    (void)state;
    char text[2000];
    double got = 0;
    /* 0.(300 zeros)1 is 1e-301 */
    size_t n = (size_t)snprintf(text, sizeof text, "0.");
    memset(text + n, '0', 300);
    n += 300;
    n += (size_t)snprintf(text + n, sizeof text - n, "1");
    assert_int_equal(value_of(text, n, &got), TB_VALUE_OK);
    assert_true(got == 1e-301);
    /* 1 followed by 1000 zeros, times 1e-1000, is 1 (zeros past the kept digits) */
    text[0] = '1';
    memset(text + 1, '0', 1000);
    n = 1001 + (size_t)snprintf(text + 1001, sizeof text - 1001, "e-1000");
    assert_int_equal(value_of(text, n, &got), TB_VALUE_OK);
    assert_true(got == 1);
    /* 2^53 + 1 = 9007199254740993 lies exactly halfway between the doubles
     * 2^53 and 2^53 + 2; IEEE 754 round-to-nearest-even gives 2^53. */
    assert_int_equal(value_of("9007199254740993", 16, &got), TB_VALUE_OK);
    assert_true(got == 9007199254740992.0);
    /* The same with a non-zero digit 850 places further: just above halfway,
     * so it rounds up to 2^53 + 2, even though that digit lies beyond the
     * digits kept in full. */
    n = (size_t)snprintf(text, sizeof text, "9007199254740993");
    memset(text + n, '0', 850);
    n += 850;
    n += (size_t)snprintf(text + n, sizeof text - n, "1e-851");
    assert_int_equal(value_of(text, n, &got), TB_VALUE_OK);
    assert_true(got == 9007199254740994.0);
    /* 400 nines overflow */
    memset(text, '9', 400);
    assert_int_equal(value_of(text, 400, &got), TB_VALUE_RANGE);
}

/* A deterministic generator for the random values below (splitmix64, from memory). */
static uint64_t next_random(uint64_t *x)
{
    uint64_t z = (*x += 0x9E3779B97F4A7C15u);
    z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9u;
    z = (z ^ (z >> 27)) * 0x94D049BB133111EBu;
    return z ^ (z >> 31);
}

/* Appends count random digits to buf at *n; leading zeros come up now and then. */
static void put_digits(char *buf, size_t *n, int count, uint64_t *rng)
{
    for (int k = 0; k < count; k++)
        buf[(*n)++] = (char)('0' + (next_random(rng) % 4 == 0 ? 0 : next_random(rng) % 10));
}

/* Random engineering values against the C library's strtod as the outside reference
 * (glibc's strtod rounds correctly to nearest, ISO C 7.22.1.3 and the glibc manual,
 * "Parsing of Floats"): the same decimal written with its suffix folded into a plain
 * exponent must give the same double, bit for bit; one that is too large is a range
 * error. Short mantissas and small exponents come up most, as in netlists, and so do
 * the edges of exact arithmetic (2^53, 10^22). Zero digits read as +0 ("-0" too). */
static void test_lex_value_random_against_strtod(void **state)
{
    (void)state;
    static const struct {
        const char *text;
        int exp10;
    } suffixes[] = {{"", 0},   {"f", -15}, {"p", -12}, {"n", -9}, {"u", -6}, {"m", -3}, {"k", 3},
                    {"meg", 6}, {"g", 9},  {"t", 12},  {"K", 3},  {"MEG", 6}, {"U", -6}, {"Meg", 6}};
    static const char *const units[] = {"", "Ohm", "V", "A", "Hz", "ohms"};
    static const char *const signs[] = {"", "+", "-"};
    uint64_t rng = 12345;
    size_t checked = 0;
    for (int trial = 0; trial < 200000; trial++) {
        char text[128];
        char ref[128];
        size_t n = (size_t)snprintf(text, sizeof text, "%s", signs[next_random(&rng) % 3]);
        size_t mant = n;
        int small = next_random(&rng) % 4 != 0;
        put_digits(text, &n, (int)(next_random(&rng) % (small ? 7 : 24)), &rng);
        if (next_random(&rng) % 2) {
            text[n++] = '.';
            put_digits(text, &n, (int)(next_random(&rng) % (small ? 5 : 22)), &rng);
        }
        bool digits = false;
        bool nonzero = false;
        for (size_t k = mant; k < n; k++) {
            digits = digits || (text[k] >= '0' && text[k] <= '9');
            nonzero = nonzero || (text[k] >= '1' && text[k] <= '9');
        }
        if (!digits)
            continue;
        size_t mant_end = n;
        long exp10 = 0;
        if (next_random(&rng) % 3 == 0) {
            exp10 = (long)(next_random(&rng) % (small ? 30 : 340)) * (next_random(&rng) % 2 ? 1 : -1);
            n += (size_t)snprintf(text + n, sizeof text - n, "%c%+ld", next_random(&rng) % 2 ? 'e' : 'E', exp10);
        }
        size_t pick = (size_t)(next_random(&rng) % (sizeof suffixes / sizeof suffixes[0]));
        n += (size_t)snprintf(text + n, sizeof text - n, "%s%s", suffixes[pick].text,
                              pick ? units[next_random(&rng) % 6] : "");
        snprintf(ref, sizeof ref, "%.*se%ld", (int)mant_end, text, exp10 + suffixes[pick].exp10);
        double want = strtod(ref, NULL);
        double got = 0;
        tb_value_status st = value_of(text, n, &got);
        if (isinf(want)) {
            assert_int_equal(st, TB_VALUE_RANGE);
            continue;
        }
        if (!nonzero)
            want = 0.0; /* zero digits read as +0; an underflow keeps its sign */
        assert_int_equal(st, TB_VALUE_OK);
        if (memcmp(&got, &want, sizeof got) != 0)
            fail_msg("'%s': got %.17g, strtod of '%s' gives %.17g", text, got, ref, want);
        checked++;
    }
    static const char *const edges[] = {"9007199254740992", "9007199254740993", "9007199254740991e22",
                                        "9007199254740993e-22", "1e22", "1e23", "1e-22", "1e-23",
                                        "4.9e-324", "1.7976931348623157e308", "123456789012345678e-5",
                                        "0.1", "0.3", "2.2u", "1.5meg", "47k", "1p", "3.3n"};
    for (size_t k = 0; k < sizeof edges / sizeof edges[0]; k++) {
        double got = 0;
        assert_int_equal(value_of(edges[k], strlen(edges[k]), &got), TB_VALUE_OK);
        char ref[64];
        long long e = 0;
        size_t len = strlen(edges[k]);
        size_t cut = strcspn(edges[k], "kmnpu");
        if (cut < len)
            e = edges[k][cut] == 'k' ? 3 : edges[k][cut] == 'u' ? -6 : edges[k][cut] == 'n' ? -9
                : edges[k][cut] == 'p' ? -12 : (len - cut == 3 ? 6 : -3);
        snprintf(ref, sizeof ref, "%.*se%lld", (int)cut, edges[k], e);
        double want = strtod(ref, NULL);
        assert_memory_equal(&got, &want, sizeof got);
    }
    assert_true(checked > 100000);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_lex_tokens),
        cmocka_unit_test(test_lex_nul_byte),
        cmocka_unit_test(test_lex_bad_text),
        cmocka_unit_test(test_lex_end_of_card_position),
        cmocka_unit_test(test_lex_title),
        cmocka_unit_test(test_lex_keyword_ignores_case),
        cmocka_unit_test(test_lex_source_line),
        cmocka_unit_test(test_lex_values),
        cmocka_unit_test(test_lex_value_errors),
        cmocka_unit_test(test_lex_value_reads_only_its_slice),
        cmocka_unit_test(test_lex_value_long_mantissa),
        cmocka_unit_test(test_lex_value_random_against_strtod),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
