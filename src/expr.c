/* src/expr.c: recursive-descent evaluator of netlist expressions ({...} values and .param) */
#include "expr.h"

#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <string.h>

#include "lex.h"

typedef struct {
    const char *s;
    size_t len;
    size_t pos;
    int depth;
    tb_expr_lookup lookup;
    void *ctx;
    tb_expr_error *err;
    tb_status status; /* TB_OK until the first error */
} evaluator;

static bool fail(evaluator *ev, size_t offset, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));
static bool fail(evaluator *ev, size_t offset, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(ev->err->message, sizeof ev->err->message, fmt, ap);
    va_end(ap);
    ev->err->offset = offset;
    ev->status = TB_ERR_INPUT;
    return false;
}

static bool is_digit(char c)
{
    return c >= '0' && c <= '9';
}

static bool is_alpha(char c)
{
    return (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || c == '_';
}

static bool is_alnum(char c)
{
    return is_alpha(c) || is_digit(c);
}

static void skip_blanks(evaluator *ev)
{
    while (ev->pos < ev->len && (ev->s[ev->pos] == ' ' || ev->s[ev->pos] == '\t'))
        ev->pos++;
}

/* The next character (after blanks), or '\0' at the end. */
static char peek(evaluator *ev)
{
    skip_blanks(ev);
    return ev->pos < ev->len ? ev->s[ev->pos] : '\0';
}

static bool accept(evaluator *ev, char c)
{
    if (peek(ev) != c)
        return false;
    ev->pos++;
    return true;
}

/* Reports what stands at the current position instead of `what`. */
static bool unexpected(evaluator *ev, const char *what)
{
    char c = peek(ev);
    const char *space = NULL;
    if (c == '\0')
        return fail(ev, ev->pos, "expected %s at the end of the expression", what);
    if (tb_lex_odd_space(ev->s + ev->pos, ev->len - ev->pos, &space))
        return fail(ev, ev->pos, "expected %s in the expression, got a %s: write plain spaces", what,
                    space);
    size_t n = 1; /* the whole UTF-8 character */
    while (ev->pos + n < ev->len && n < 4 && ((unsigned char)ev->s[ev->pos + n] & 0xC0) == 0x80 &&
           (unsigned char)c >= 0xC0)
        n++;
    return fail(ev, ev->pos, "expected %s in the expression, got '%.*s'", what, (int)n, ev->s + ev->pos);
}

/* A non-finite intermediate result is an error at the operator that made it. */
static bool finite(evaluator *ev, size_t at, double v)
{
    return isfinite(v) || fail(ev, at, "non-finite result");
}

static bool expr(evaluator *ev, double *v);
static bool unary(evaluator *ev, double *v);

/* number -> digits [. digits] [e [+-] digits] {letter | digit}, read by tb_lex_value */
static bool number(evaluator *ev, double *v)
{
    size_t start = ev->pos;
    size_t i = start;
    while (i < ev->len && (is_digit(ev->s[i]) || ev->s[i] == '.'))
        i++;
    if (i < ev->len && (ev->s[i] == 'e' || ev->s[i] == 'E')) {
        size_t k = i + 1;
        if (k < ev->len && (ev->s[k] == '+' || ev->s[k] == '-'))
            k++;
        if (k < ev->len && is_digit(ev->s[k]))
            i = k;
    }
    while (i < ev->len && (is_alnum(ev->s[i]) || ev->s[i] == '.'))
        i++;
    ev->pos = i;
    switch (tb_lex_value(ev->s + start, i - start, v)) {
    case TB_VALUE_OK:
        return true;
    case TB_VALUE_RANGE:
        return fail(ev, start, "value '%.*s' is out of range", (int)(i - start), ev->s + start);
    default:
        return fail(ev, start, "malformed value '%.*s'", (int)(i - start), ev->s + start);
    }
}

typedef enum { F_SQRT, F_EXP, F_LOG, F_LOG10, F_ABS, F_MIN, F_MAX, F_NONE } func_id;

static const char *const func_names[] = {"sqrt", "exp", "log", "log10", "abs", "min", "max"};
_Static_assert(sizeof func_names / sizeof func_names[0] == F_NONE, "func_names in step");

static bool name_is(const char *s, size_t len, const char *word)
{
    if (strlen(word) != len)
        return false;
    for (size_t i = 0; i < len; i++)
        if (tb_lex_lower(s[i]) != word[i])
            return false;
    return true;
}

static func_id find_func(const char *s, size_t len)
{
    for (int f = 0; f < F_NONE; f++)
        if (name_is(s, len, func_names[f]))
            return (func_id)f;
    return F_NONE;
}

bool tb_expr_is_builtin(const char *name, size_t len)
{
    return name_is(name, len, "pi") || find_func(name, len) != F_NONE;
}

/* Applies a one-argument function, checking its domain. */
static bool apply1(evaluator *ev, func_id f, size_t at, double x, double *v)
{
    switch (f) {
    case F_SQRT:
        if (x < 0)
            return fail(ev, at, "sqrt of a negative value (%g)", x);
        *v = sqrt(x);
        break;
    case F_LOG:
    case F_LOG10:
        if (x <= 0)
            return fail(ev, at, "%s of a value that is not positive (%g)", func_names[f], x);
        *v = f == F_LOG ? log(x) : log10(x);
        break;
    case F_EXP:
        *v = exp(x);
        break;
    default:
        *v = fabs(x);
        break;
    }
    return finite(ev, at, *v);
}

/* call -> FUNC ( expr {, expr} ), the name already read */
static bool call(evaluator *ev, func_id f, size_t at, double *v)
{
    double args[2];
    int count = 0;
    size_t open = ev->pos;
    if (!accept(ev, '('))
        return unexpected(ev, "'(' after a function name");
    do {
        double x = 0;
        if (!expr(ev, &x))
            return false;
        if (count == 0)
            args[0] = x;
        else
            args[0] = f == F_MIN ? fmin(args[0], x) : fmax(args[0], x);
        count++;
    } while (accept(ev, ','));
    if (!accept(ev, ')'))
        return unexpected(ev, "',' or ')'");
    bool two = f == F_MIN || f == F_MAX;
    if (two ? count < 2 : count != 1)
        return fail(ev, open, "%s takes %s, got %d", func_names[f],
                    two ? "two or more arguments" : "one argument", count);
    if (two) {
        *v = args[0];
        return true;
    }
    return apply1(ev, f, at, args[0], v);
}

/* primary -> number | PI | NAME | call | ( expr ) */
static bool primary(evaluator *ev, double *v)
{
    char c = peek(ev);
    size_t start = ev->pos;
    if (c == '(') {
        ev->pos++;
        if (!expr(ev, v))
            return false;
        return accept(ev, ')') || unexpected(ev, "')'");
    }
    if (is_digit(c) || (c == '.' && start + 1 < ev->len && is_digit(ev->s[start + 1])))
        return number(ev, v);
    if (!is_alpha(c))
        return unexpected(ev, "a number, a name or '('");
    while (ev->pos < ev->len && is_alnum(ev->s[ev->pos]))
        ev->pos++;
    size_t n = ev->pos - start;
    func_id f = find_func(ev->s + start, n);
    if (f != F_NONE)
        return call(ev, f, start, v);
    if (name_is(ev->s + start, n, "pi")) {
        *v = 3.14159265358979323846;
        return true;
    }
    if (peek(ev) == '(')
        return fail(ev, start, "unknown function '%.*s'", (int)n, ev->s + start);
    tb_status st = ev->lookup(ev->ctx, ev->s + start, n, start, v);
    if (st != TB_OK) {
        ev->err->message[0] = '\0';
        ev->status = st;
        return false;
    }
    return true;
}

/* power -> primary [^ unary] */
static bool power(evaluator *ev, double *v)
{
    if (!primary(ev, v))
        return false;
    size_t at = ev->pos;
    if (!accept(ev, '^'))
        return true;
    at = ev->pos - 1;
    double e = 0;
    if (!unary(ev, &e))
        return false;
    *v = pow(*v, e);
    return finite(ev, at, *v);
}

/* unary -> (+|-) unary | power; the depth limit guards every recursion */
static bool unary(evaluator *ev, double *v)
{
    if (ev->depth >= TB_EXPR_MAX_DEPTH)
        return fail(ev, ev->pos, "expression nested too deeply (limit is %d levels)",
                    TB_EXPR_MAX_DEPTH);
    ev->depth++;
    bool ok;
    if (accept(ev, '-')) {
        ok = unary(ev, v);
        *v = -*v;
    } else if (accept(ev, '+')) {
        ok = unary(ev, v);
    } else {
        ok = power(ev, v);
    }
    ev->depth--;
    return ok;
}

/* term -> unary {(*|/) unary} */
static bool term(evaluator *ev, double *v)
{
    if (!unary(ev, v))
        return false;
    for (;;) {
        char op = peek(ev);
        if (op != '*' && op != '/')
            return true;
        size_t at = ev->pos++;
        double rhs = 0;
        if (!unary(ev, &rhs))
            return false;
        if (op == '/' && rhs == 0)
            return fail(ev, at, "division by zero");
        *v = op == '*' ? *v * rhs : *v / rhs;
        if (!finite(ev, at, *v))
            return false;
    }
}

/* expr -> term {(+|-) term} */
static bool expr(evaluator *ev, double *v)
{
    if (!term(ev, v))
        return false;
    for (;;) {
        char op = peek(ev);
        if (op != '+' && op != '-')
            return true;
        size_t at = ev->pos++;
        double rhs = 0;
        if (!term(ev, &rhs))
            return false;
        *v = op == '+' ? *v + rhs : *v - rhs;
        if (!finite(ev, at, *v))
            return false;
    }
}

tb_status tb_expr_eval(const char *text, size_t len, tb_expr_lookup lookup, void *ctx,
                       double *out, tb_expr_error *err)
{
    evaluator ev = {text, len, 0, 0, lookup, ctx, err, TB_OK};
    err->message[0] = '\0';
    err->offset = 0;
    double v = 0;
    if (peek(&ev) == '\0') {
        fail(&ev, 0, "empty expression");
        return ev.status;
    }
    if (!expr(&ev, &v))
        return ev.status;
    if (peek(&ev) != '\0') {
        unexpected(&ev, "an operator");
        return ev.status;
    }
    *out = v;
    return TB_OK;
}
