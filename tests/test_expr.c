/* tests/test_expr.c: the expression evaluator: operators, functions, constants, suffixes, errors.
 * Expected values are computed here by C's own arithmetic and libm (the operators are defined
 * as those operations), never typed in as results. */
#include <float.h>
#include <stdlib.h>
#include <strings.h>

#include "testutil.h"

#include "expr.h"

/* Parameters for the tests: a = 3, rload = 10e3, g_m2 = 2e-3; "boom" fails. */
static tb_status lookup(void *ctx, const char *name, size_t len, size_t offset, double *value)
{
    (void)offset;
    int *calls = ctx;
    (*calls)++;
    static const struct {
        const char *name;
        double value;
    } table[] = {{"a", 3}, {"rload", 10e3}, {"g_m2", 2e-3}};
    for (size_t i = 0; i < sizeof table / sizeof table[0]; i++) {
        if (strlen(table[i].name) == len && strncasecmp(table[i].name, name, len) == 0) {
            *value = table[i].value;
            return TB_OK;
        }
    }
    return TB_ERR_INPUT;
}

static double eval_ok(const char *text)
{
    int calls = 0;
    double v = 0;
    tb_expr_error err;
    tb_status st = tb_expr_eval(text, strlen(text), lookup, &calls, &v, &err);
    if (st != TB_OK)
        print_error("'%s': %s at %zu\n", text, err.message, err.offset);
    assert_int_equal(st, TB_OK);
    return v;
}

static void test_expr_values(void **state)
{
    (void)state;
    const double pi = 3.14159265358979323846;
    const struct {
        const char *text;
        double want;
    } cases[] = {
        {"1", 1},
        {"1e-3", 1e-3},
        {".5", 0.5},
        {"5.", 5.0},
        {"2.2u", 2.2e-6},
        {"10kOhm", 10e3},
        {"1meg", 1e6},
        {"1F", 1e-15}, /* trade convention: F is femto (common practice) */
        {"1+2*3", 1 + 2 * 3},
        {"(1+2)*3", (1 + 2) * 3},
        {"10/4/5", 10.0 / 4 / 5},
        {"7-2-1", 7 - 2 - 1},
        {"2^3^2", 512},            /* right-associative: 2^(3^2) */
        {"-2^2", -4},              /* power binds tighter than unary minus */
        {"2^-1", 0.5},
        {"--3", 3},
        {"+3", 3},
        {"-(1k+1)", -(1e3 + 1)},
        {"sqrt(2)*1k", 0},         /* filled in below */
        {"exp(1)", 0},
        {"log(10)", 0},
        {"log10(1k)", 3},
        {"abs(-4.5)", 4.5},
        {"min(3, -1, 2)", -1},
        {"max(3, -1, 2)", 3},
        {"PI", pi},
        {"2*pi*1meg", 2 * pi * 1e6},
        {"a*rload", 3 * 10e3},
        {"A * RLOAD", 3 * 10e3},   /* names ignore case */
        {"1/(2*pi*rload*1n)", 0},
        {"g_m2 * rload", 2e-3 * 10e3},
        {" 1 + \t2 ", 3},
        {"SQRT(16)", 4},
    };
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        double want = cases[i].want;
        if (strcmp(cases[i].text, "sqrt(2)*1k") == 0)
            want = sqrt(2) * 1e3;
        else if (strcmp(cases[i].text, "exp(1)") == 0)
            want = exp(1);
        else if (strcmp(cases[i].text, "log(10)") == 0)
            want = log(10);
        else if (strcmp(cases[i].text, "1/(2*pi*rload*1n)") == 0)
            want = 1 / (2 * pi * 10e3 * 1e-9);
        else if (strcmp(cases[i].text, "2^3^2") == 0)
            want = pow(2, pow(3, 2));
        double got = eval_ok(cases[i].text);
        if (!(fabs(got - want) <= 4 * DBL_EPSILON * fabs(want)))
            print_error("'%s': got %.17g, want %.17g\n", cases[i].text, got, want);
        assert_true(fabs(got - want) <= 4 * DBL_EPSILON * fabs(want));
    }
}

/* Every error: the message and the byte offset it points at. */
static void test_expr_errors(void **state)
{
    (void)state;
    const struct {
        const char *text;
        const char *message;
        size_t offset;
    } cases[] = {
        {"", "empty expression", 0},
        {"  ", "empty expression", 0},
        {"1+", "expected a number, a name or '(' at the end of the expression", 2},
        {"1 2", "expected an operator in the expression, got '2'", 2},
        {"(1+2", "expected ')' at the end of the expression", 4},
        {"1)", "expected an operator in the expression, got ')'", 1},
        {"*3", "expected a number, a name or '(' in the expression, got '*'", 0},
        {"1/0", "division by zero", 1},
        {"1/(a-3)", "division by zero", 1},
        {"1k5", "malformed value '1k5'", 0},
        {"2*1e", "malformed value '1e'", 2},
        {"1e999", "value '1e999' is out of range", 0},
        {"1e300*1e300", "non-finite result", 5},
        {"exp(1000)", "non-finite result", 0},
        {"10^400", "non-finite result", 2},
        {"sqrt(-1)", "sqrt of a negative value (-1)", 0},
        {"log(0)", "log of a value that is not positive (0)", 0},
        {"log10(-2)", "log10 of a value that is not positive (-2)", 0},
        {"sqrt(1, 2)", "sqrt takes one argument, got 2", 4},
        {"min(1)", "min takes two or more arguments, got 1", 3},
        {"max", "expected '(' after a function name at the end of the expression", 3},
        {"foo(1)", "unknown function 'foo'", 0},
        {"1 $ 2", "expected an operator in the expression, got '$'", 2},
    };
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        int calls = 0;
        double v = 42;
        tb_expr_error err;
        tb_status st = tb_expr_eval(cases[i].text, strlen(cases[i].text), lookup, &calls, &v, &err);
        if (st != TB_ERR_INPUT || strcmp(err.message, cases[i].message) != 0 ||
            err.offset != cases[i].offset)
            print_error("'%s': status %d, '%s' at %zu; want '%s' at %zu\n", cases[i].text, st,
                        err.message, err.offset, cases[i].message, cases[i].offset);
        assert_int_equal(st, TB_ERR_INPUT);
        assert_string_equal(err.message, cases[i].message);
        assert_int_equal(err.offset, cases[i].offset);
        assert_true(v == 42); /* untouched on failure */
    }
}

/* An unknown name goes to the lookup, whose error is passed on with an empty message. */
static void test_expr_lookup_errors(void **state)
{
    (void)state;
    int calls = 0;
    double v = 0;
    tb_expr_error err;
    assert_int_equal(tb_expr_eval("2*boom+1", 8, lookup, &calls, &v, &err), TB_ERR_INPUT);
    assert_string_equal(err.message, "");
    assert_int_equal(calls, 1);
    /* pi and the functions are not looked up */
    calls = 0;
    assert_int_equal(tb_expr_eval("pi+sqrt(a)", 10, lookup, &calls, &v, &err), TB_OK);
    assert_int_equal(calls, 1);
    assert_true(tb_expr_is_builtin("PI", 2));
    assert_true(tb_expr_is_builtin("log10", 5));
    assert_false(tb_expr_is_builtin("rload", 5));
}

/* Deep nesting is refused with a message, not by running out of stack. */
static void test_expr_depth_limit(void **state)
{
    (void)state;
    size_t n = 10000000; /* a 10^7-character expression */
    char *text = malloc(n);
    assert_non_null(text);
    memset(text, '(', n);
    int calls = 0;
    double v = 0;
    tb_expr_error err;
    assert_int_equal(tb_expr_eval(text, n, lookup, &calls, &v, &err), TB_ERR_INPUT);
    assert_string_equal(err.message, "expression nested too deeply (limit is 100 levels)");
    memset(text, '-', n);
    assert_int_equal(tb_expr_eval(text, n, lookup, &calls, &v, &err), TB_ERR_INPUT);
    assert_string_equal(err.message, "expression nested too deeply (limit is 100 levels)");
    /* just inside the limit is fine */
    char ok[2 * TB_EXPR_MAX_DEPTH + 2];
    size_t depth = TB_EXPR_MAX_DEPTH - 1;
    memset(ok, '(', depth);
    ok[depth] = '7';
    memset(ok + depth + 1, ')', depth);
    assert_int_equal(tb_expr_eval(ok, 2 * depth + 1, lookup, &calls, &v, &err), TB_OK);
    assert_true(v == 7);
    free(text);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_expr_values),
        cmocka_unit_test(test_expr_errors),
        cmocka_unit_test(test_expr_lookup_errors),
        cmocka_unit_test(test_expr_depth_limit),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
