/* tests/test_paramdep.c: the parameter table kept from parsing and the per-run re-evaluation of element values */
#include <stdlib.h>

#include "testutil.h"

#include "circuit.h"
#include "paramdep.h"
#include "spreadcard.h"

static const char *const NET =
    "parameters\n"
    ".param cl=10p\n"
    ".param rtot=20k ratio=0.25\n"
    ".param rb={rtot*ratio}\n"
    ".param vdd=5\n"
    "Vs in 0 DC {vdd} AC 1\n"
    "RA in mid {rtot-rb}\n"
    "RB mid 0 {rb}\n"
    "CL mid 0 {cl}\n"
    "C2 mid 0 {2*cl+cl}\n"
    "R9 mid 0 1meg\n"
    ".subckt amp a b gbw=1meg\n"
    ".param g={2*pi*gbw*1p}\n"
    "G1 0 b a 0 {g}\n"
    "CC b 0 1p\n"
    ".ends\n"
    "X1 mid out amp gbw={10*1meg}\n"
    "X2 mid out2 amp\n"
    "RL out 0 1k\n"
    "RL2 out2 0 1k\n"
    "E9 o9 0 out 0 2\n"
    "R99 o9 0 1k\n"
    ".loop E9\n"
    ".ac dec 5 1 1meg\n";

/* |a - b| <= tol */
static void near(double a, double b, double tol)
{
    if (!(fabs(a - b) <= tol))
        fail_msg("%.17g differs from %.17g by more than %g", a, b, tol);
}

static size_t elem(const tb_circuit *ckt, const char *name)
{
    size_t e = 0;
    assert_true(tb_circuit_find_element(ckt, name, &e));
    return e;
}

static size_t param(tb_circuit *ckt, const char *name)
{
    size_t q = 0;
    assert_true(tb_params_find(ckt, name, &q));
    return q;
}

/* Every parameter is in the table under its hierarchical name, with its value; which set
 * element values, and which also set a value no run can change. */
static void test_paramdep_table(void **state)
{
    (void)state;
    tb_circuit *ckt = tu_parse(NET);
    tb_params *P = ckt->params;
    tb_params_settle(P);
    size_t q = param(ckt, "CL"); /* names ignore case */
    assert_string_equal(tb_spreadcard_param_name(ckt, q), "cl");
    assert_true(P->q[q].sets && !P->q[q].fixed);
    near(P->q[q].value, 10e-12, 1e-25);
    q = param(ckt, "x1.GBW");
    assert_string_equal(tb_spreadcard_param_name(ckt, q), "X1.gbw");
    near(P->q[q].value, 10e6, 1e-6);
    assert_true(P->q[q].sets);
    near(P->q[param(ckt, "X2.gbw")].value, 1e6, 1e-6);
    assert_true(P->q[param(ckt, "X2.g")].sets);
    q = param(ckt, "vdd");
    assert_true(P->q[q].fixed && !P->q[q].sets);
    assert_int_equal(P->q[q].fixed_loc.line, 6);
    size_t unused = 0;
    assert_false(tb_params_find(ckt, "gbw", &unused)); /* only instances have it */
    assert_false(tb_params_find(ckt, "X3.gbw", &unused));
    tb_circuit_free(ckt);
}

/* The compiled plan recomputes exactly what the netlist would give at the changed value:
 * each case is checked against the same netlist parsed with the parameter changed. */
static void check_against_reparse(const char *name, const char *from, const char *to, double value)
{
    tb_circuit *ckt = tu_parse(NET);
    tb_params_settle(ckt->params);
    size_t q = param(ckt, name);
    tb_pplan *pl = NULL;
    assert_int_equal(tb_pplan_new(ckt->params, &q, 1, &pl), TB_OK);
    double *values = calloc(ckt->elem_count, sizeof(double));
    double *work = calloc(tb_pplan_work(pl) + 1, sizeof(double));
    for (size_t e = 0; e < ckt->elem_count; e++)
        values[e] = ckt->elems[e].value;
    assert_true(tb_pplan_apply(pl, &value, work, values));
    /* the reference: the netlist text with the definition changed */
    char *text = strdup(NET);
    char *at = strstr(text, from);
    assert_non_null(at);
    size_t n = strlen(text) + strlen(to) + 1;
    char *changed = malloc(n);
    snprintf(changed, n, "%.*s%s%s", (int)(at - text), text, to, at + strlen(from));
    tb_circuit *ref = tu_parse(changed);
    assert_int_equal(ref->elem_count, ckt->elem_count);
    for (size_t e = 0; e < ckt->elem_count; e++)
        near(values[e], ref->elems[elem(ref, ckt->elems[e].name)].value,
                            1e-12 * fabs(ref->elems[e].value));
    free(text);
    free(changed);
    free(values);
    free(work);
    tb_pplan_free(pl);
    tb_circuit_free(ref);
    tb_circuit_free(ckt);
}

static void test_paramdep_reevaluate(void **state)
{
    (void)state;
    check_against_reparse("cl", "cl=10p", "cl=47p", 47e-12);
    check_against_reparse("ratio", "ratio=0.25", "ratio=0.6", 0.6);
    check_against_reparse("rb", "rb={rtot*ratio}", "rb=7k", 7e3);
    check_against_reparse("X1.gbw", "gbw={10*1meg}", "gbw=3meg", 3e6);
    check_against_reparse("X2.g", ".param g={2*pi*gbw*1p}\n", ".param g={2*pi*gbw*1p}\n", 2 * TU_PI * 1e6 * 1e-12);
}

/* The plan is small: only the expressions that read the target are compiled. */
static void test_paramdep_plan_size(void **state)
{
    (void)state;
    tb_circuit *ckt = tu_parse(NET);
    size_t q = param(ckt, "cl");
    tb_pplan *pl = NULL;
    assert_int_equal(tb_pplan_new(ckt->params, &q, 1, &pl), TB_OK);
    assert_int_equal(tb_pplan_work(pl), 3); /* cl, CL's value, C2's value */
    tb_pplan_free(pl);
    tb_circuit_free(ckt);
}

/* An expression that fails at the new value gives no values (the run is not analysed). */
static void test_paramdep_fails(void **state)
{
    (void)state;
    tb_circuit *ckt = tu_parse("f\n.param a=4\nR1 1 0 {sqrt(a)}\nR2 1 0 {1/(a-5)+2}\n"
                               ".param a2=1\nR3 1 0 {1k*a2}\nV1 1 0 AC 1\nE1 2 0 1 0 1\nR4 2 0 1\n"
                               ".loop E1\n.ac dec 5 1 1meg\n");
    size_t q = param(ckt, "a");
    tb_pplan *pl = NULL;
    double values[6] = {2, 0.5, 1e3, 0, 1, 1};
    double work[4];
    assert_int_equal(tb_pplan_new(ckt->params, &q, 1, &pl), TB_OK);
    double v = -1;
    assert_false(tb_pplan_apply(pl, &v, work, values));
    v = 9;
    assert_true(tb_pplan_apply(pl, &v, work, values));
    near(values[0], 3, 1e-15);
    near(values[1], 2.25, 1e-15);
    near(values[2], 1e3, 0); /* R3 does not read a */
    v = 5;
    assert_false(tb_pplan_apply(pl, &v, work, values)); /* 1/(a-5) */
    tb_pplan_free(pl);
    tb_circuit_free(ckt);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_paramdep_table),
        cmocka_unit_test(test_paramdep_reevaluate),
        cmocka_unit_test(test_paramdep_plan_size),
        cmocka_unit_test(test_paramdep_fails),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
