/* tests/test_subckt.c: subcircuits expanded into hierarchical names, .param and {expressions},
 * K cards, and every diagnostic they make (exact text and position) */
#include <stdlib.h>

#include "testutil.h"

#include "circuit.h"

static tb_status parse(const char *text, tb_diag *diag, tb_circuit **out)
{
    return tb_circuit_parse(text, strlen(text), "t.net", diag, out);
}

static tb_circuit *parse_ok(const char *text)
{
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    tb_status st = parse(text, diag, &ckt);
    if (st != TB_OK)
        tu_print_diags(diag);
    tb_diag_free(diag);
    assert_int_equal(st, TB_OK);
    return ckt;
}

/* Diagnostic i formatted, all its lines. */
static const char *formatted(const tb_diag *diag, size_t i)
{
    static char buf[4096];
    tb_diag_format(diag, i, buf, sizeof buf);
    return buf;
}

static const tb_element *elem_of(const tb_circuit *ckt, const char *name)
{
    size_t i = 0;
    if (!tb_circuit_find_element(ckt, name, &i))
        print_error("no element '%s'\n", name);
    assert_true(tb_circuit_find_element(ckt, name, &i));
    return &ckt->elems[i];
}

static int node_of(const tb_circuit *ckt, const char *name)
{
    int index = -1;
    if (!tb_circuit_find_node(ckt, name, strlen(name), &index))
        print_error("no node '%s'\n", name);
    assert_true(tb_circuit_find_node(ckt, name, strlen(name), &index));
    return index;
}

/* Two nested levels, a definition after its use, pins, local nodes, ground. */
static void test_subckt_expands_hierarchy(void **state)
{
    (void)state;
    tb_circuit *ckt = parse_ok("hierarchy\n"
                               "V1 in 0 AC 1\n"
                               "X1 in out pair\n"
                               ".subckt pair a b\n"
                               "XA a m half\n"
                               "XB m b half\n"
                               ".ends pair\n"
                               ".SUBCKT half p q\n"
                               "R1 p n3 1k\n"
                               "c1 n3 GND 1n\n"
                               "E1 q 0 n3 0 2\n"
                               ".ENDS\n"
                               "Rl out 0 10k\n"
                               ".loop X1.XA.E1\n"
                               ".io V1 v(X1.m)\n");
    assert_int_equal(ckt->elem_count, 2 + 2 * 3);
    const tb_element *r = elem_of(ckt, "X1.XA.R1");
    assert_int_equal(r->kind, TB_EL_R);
    assert_int_equal(r->node[0], node_of(ckt, "in"));
    assert_int_equal(r->node[1], node_of(ckt, "X1.XA.n3"));
    assert_int_equal(r->loc.line, 9);
    assert_string_equal(r->loc.file, "t.net");
    assert_int_equal(elem_of(ckt, "x1.xa.C1")->node[1], 0);
    const tb_element *e = elem_of(ckt, "X1.XB.E1");
    assert_int_equal(e->node[0], node_of(ckt, "out"));
    assert_int_equal(e->node[2], node_of(ckt, "X1.XB.n3"));
    assert_int_equal(elem_of(ckt, "X1.XA.E1")->node[0], node_of(ckt, "X1.m"));
    assert_string_equal(ckt->loops[0].source, "X1.XA.E1");
    assert_int_equal(ckt->io.out_node[0], node_of(ckt, "X1.m"));
    tb_circuit_free(ckt);
}

/* Parameters: globals, defaults, per-instance values, local .param, scoping. */
static void test_subckt_parameters(void **state)
{
    (void)state;
    tb_circuit *ckt = parse_ok("parameters\n"
                               ".param rbase=1k gain={2*ten} ten=10\n"
                               ".subckt amp i o r=rbase k={-gain}\n"
                               ".param rin={r*3}\n"
                               "Rin i 0 {rin}\n"
                               "E1 o 0 i 0 {k}\n"
                               "Rout o 0 {r}\n"
                               ".ends\n"
                               "V1 a 0 AC {sqrt(4)}\n"
                               "X1 a b amp\n"
                               "X2 b c amp r={rbase/2} K=-3\n"
                               "R9 c 0 {1/(2*pi*1meg*1n)}\n"
                               ".loop X1.E1\n");
    assert_true(elem_of(ckt, "V1")->ac_mag == 2);
    assert_true(elem_of(ckt, "X1.Rout")->value == 1e3);
    assert_true(elem_of(ckt, "X1.Rin")->value == 3e3);
    assert_true(elem_of(ckt, "X1.E1")->value == -20);
    assert_true(elem_of(ckt, "X2.Rout")->value == 500);
    assert_true(elem_of(ckt, "X2.Rin")->value == 1500);
    assert_true(elem_of(ckt, "X2.E1")->value == -3);
    assert_true(elem_of(ckt, "R9")->value == 1 / (2 * 3.14159265358979323846 * 1e6 * 1e-9));
    tb_circuit_free(ckt);
}

/* An instance sees its parent's parameters before the globals. */
static void test_subckt_parameter_scope(void **state)
{
    (void)state;
    tb_circuit *ckt = parse_ok("scope\n"
                               ".param g=1 h=7\n"
                               ".subckt inner x\n"
                               "R1 x 0 {g*h}\n"
                               ".ends\n"
                               ".subckt outer x g=5\n"
                               "Xi x inner\n"
                               ".ends\n"
                               "Xo n outer g=3\n"
                               "Xn n inner\n"
                               "G1 n 0 n 0 1m\n"
                               ".loop G1\n");
    assert_true(elem_of(ckt, "Xo.Xi.R1")->value == 21);
    assert_true(elem_of(ckt, "Xn.R1")->value == 7);
    tb_circuit_free(ckt);
}

static void test_subckt_mutual_inductance(void **state)
{
    (void)state;
    tb_circuit *ckt = parse_ok("coupled\n"
                               ".subckt xfmr a b\n"
                               "Lp a 0 1m\n"
                               "Ls b 0 4m\n"
                               "Kps Lp Ls {0.5+0.25}\n"
                               ".ends\n"
                               "V1 in 0 AC 1\n"
                               "X1 in out xfmr\n"
                               "R1 out 0 50\n"
                               "k2 L1 L2 1\n"
                               "L1 n 0 1u\n"
                               "L2 n m 1u\n"
                               "G1 m 0 n 0 1m\n"
                               ".loop G1\n");
    const tb_element *k = elem_of(ckt, "X1.Kps");
    assert_int_equal(k->kind, TB_EL_K);
    assert_true(k->value == 0.75);
    assert_string_equal(ckt->elems[k->ctrl].name, "X1.Lp");
    assert_string_equal(ckt->elems[k->ctrl2].name, "X1.Ls");
    k = elem_of(ckt, "K2");
    assert_string_equal(ckt->elems[k->ctrl].name, "L1");
    assert_string_equal(ckt->elems[k->ctrl2].name, "L2");
    tb_circuit_free(ckt);
}

/* Every new error: the netlist, and the first line of its first diagnostic. */
static const struct {
    const char *text;
    const char *first;
} bad_cases[] = {
    /* expressions */
    {"t\nR1 a 0 {1/0}\n", "t.net:2:10: error: division by zero"},
    {"t\nR1 a 0 {2*(1+}\n", "t.net:2:14: error: expected a number, a name or '(' at the end of the expression"},
    {"t\nR1 a 0 {2*x}\n", "t.net:2:11: error: undefined parameter 'x'"},
    {"t\nR1 a 0 {1+2\n", "t.net:2:8: error: '{' without '}' on the same line"},
    {"t\nR1 a 0 {sqrt(-4)}\n", "t.net:2:9: error: sqrt of a negative value (-4)"},
    {"t\nR1 a 0 {10^999}\n", "t.net:2:11: error: non-finite result"},
    {"t\nR1 a 0 {1k5}\n", "t.net:2:9: error: malformed value '1k5'"},
    {"t\nR1 a 0 {}\n", "t.net:2:9: error: empty expression"},
    {"t\nR1 a 0 {0}\n", "t.net:2:8: error: resistance of R1 must be non-zero"},
    /* .param */
    {"t\n.param\n", "t.net:2:7: error: expected a parameter name after '.param'"},
    {"t\n.param a\n", "t.net:2:9: error: expected '=' for .param after 'a'"},
    {"t\n.param a=\n", "t.net:2:10: error: expected a value or {expression} for .param after '='"},
    {"t\n.param 2a=1\n", "t.net:2:8: error: '2a' is not a parameter name (a letter or '_', then letters, digits or '_')"},
    {"t\n.param pi=3\n", "t.net:2:8: error: 'pi' is a built-in function or constant, not a parameter name"},
    {"t\n.param a=1\n.param A=2\n", "t.net:3:8: error: parameter 'A' is defined twice (first on line 2)"},
    {"t\n.param a={b} b={a}\n", "t.net:2:17: error: circular parameter definition a -> b -> a"},
    {"t\n.param a={a+1}\n", "t.net:2:11: error: circular parameter definition a -> a"},
    {"t\n.param a={b} b={c}\n", "t.net:2:17: error: undefined parameter 'c' (a -> b -> c)"},
    {"t\n.param a=1/0\n", "t.net:2:11: error: division by zero"},
    /* .subckt */
    {"t\n.subckt\n", "t.net:2:8: error: expected a subcircuit name after '.subckt'"},
    {"t\n.subckt s a\nR1 a 0 1\n", "t.net:2:1: error: .subckt s has no .ends"},
    {"t\n.ends\n", "t.net:2:1: error: .ends without .subckt"},
    {"t\n.subckt s a\n.ends t\n", "t.net:3:7: error: .ends t closes .subckt s"},
    {"t\n.subckt s a a\n.ends\n", "t.net:2:13: error: pin 'a' appears twice on .subckt s"},
    /* past eight names, lookups go through the name index: the same messages */
    {"t\n.subckt s a b c d e f g h i j B\n.ends\n", "t.net:2:31: error: pin 'B' appears twice on .subckt s"},
    {"t\n.param a=1 b=2 c=3 d=4 e=5 f=6 g=7 h=8 i=9 j=10 C=11\n",
     "t.net:2:49: error: parameter 'C' is defined twice (first on line 2)"},
    {"t\n.subckt s a b=1 c=2 d=3 e=4 f=5 g=6 h=7 i=8 j=9\n.param k={j} J=1\n.ends\n",
     "t.net:3:14: error: parameter 'J' is defined twice (first on line 2)"},
    {"t\n.subckt s x a=1 b=2 c=3 d=4 e=5 f=6 g=7 h=8 i=9\nR1 x 0 {i}\n.ends\nX1 n s z=1\n",
     "t.net:5:8: error: subcircuit 's' has no parameter 'z'"},
    {"t\n.subckt s a 0\n.ends\n", "t.net:2:13: error: ground '0' cannot be a pin of .subckt s"},
    {"t\n.subckt s a\n.ends\n.subckt S b\n.ends\n", "t.net:4:9: error: subcircuit 'S' is defined twice (first on line 2)"},
    {"t\n.subckt s a\n.subckt u b\n.ends\n.ends\n", "t.net:3:1: error: .subckt inside .subckt s: definitions do not nest"},
    {"t\n.subckt s a\n.loop E1\n.ends\n", "t.net:3:1: error: '.loop' is not allowed inside .subckt s"},
    {"t\n.subckt s a\n.include x.inc\n.ends\n", "t.net:3:1: error: '.include' is not allowed inside .subckt s"},
    {"t\n.subckt s a r=\n.ends\n", "t.net:2:15: error: expected a value or {expression} for .subckt after '='"},
    /* X */
    {"t\nX1\n", "t.net:2:3: error: expected a subcircuit name after 'X1'"},
    {"t\nX1 a b amp\n", "t.net:2:8: error: unknown subcircuit 'amp'"},
    {"t\n.subckt amp i o\n.ends\nX1 a b amp1\n", "t.net:4:8: error: unknown subcircuit 'amp1' (did you mean 'amp'?)"},
    {"t\n.subckt amp i o\n.ends\nX1 a amp\n", "t.net:4:6: error: X1 connects 1 node, but subcircuit 'amp' has 2 pins"},
    {"t\n.subckt amp i o r=1\n.ends\nX1 a b amp g=2\n", "t.net:4:12: error: subcircuit 'amp' has no parameter 'g'"},
    {"t\n.subckt amp i o r=1\n.ends\nX1 a b amp r=2 R=3\n", "t.net:4:16: error: parameter 'R' is set twice"},
    {"t\n.subckt amp i o r=1\n.ends\nX1 a b amp r=\n", "t.net:4:14: error: expected a value or {expression} for X1 after '='"},
    {"t\n.subckt amp i o r=1\n.ends\nX1 a b amp r={q}\n", "t.net:4:15: error: undefined parameter 'q'"},
    {"t\n.subckt amp i o\nR1 i o 1\n.ends\nX1 a b amp\nx1 c d amp\n", "t.net:6:1: error: duplicate instance name 'x1' (first on line 5)"},
    {"t\n.subckt a x\nX1 x a\n.ends\nXtop n a\n", "t.net:3:6: error: subcircuit 'a' instantiates itself: a -> a"},
    {"t\n.subckt a x\nXb x b\n.ends\n.subckt b x\nXa x a\n.ends\nXtop n a\n",
     "t.net:6:6: error: subcircuit 'a' instantiates itself: a -> b -> a"},
    {"t\n.subckt s a\nR1 a 0 {gm}\n.ends\nX1 n s\n", "t.net:3:9: error: undefined parameter 'gm'"},
    /* K */
    {"t\nK1\n", "t.net:2:3: error: expected an inductor name after 'K1'"},
    {"t\nK1 L1\n", "t.net:2:6: error: expected an inductor name for K1 after 'L1'"},
    {"t\nK1 L1 L2\n", "t.net:2:9: error: expected a coupling coefficient for K1 after 'L2'"},
    {"t\nK1 L1 L2 1.5\n", "t.net:2:10: error: coupling of K1 must be in (0, 1], got '1.5'"},
    {"t\nK1 L1 L2 0\n", "t.net:2:10: error: coupling of K1 must be in (0, 1], got '0'"},
    {"t\nK1 L1 L2 -0.5\n", "t.net:2:10: error: coupling of K1 must be in (0, 1], got '-0.5'"},
    {"t\nK1 L1 L2 0.5 x\n", "t.net:2:14: error: unexpected 'x' after the coupling of K1"},
    {"t\nL1 a 0 1m\nK1 L1 L9 0.5\nG1 a 0 a 0 1\n.loop G1\n", "t.net:3:1: error: K1 couples 'L9', which does not exist"},
    {"t\nL1 a 0 1m\nK1 L1 G1 0.5\nG1 a 0 a 0 1\n.loop G1\n",
     "t.net:3:1: error: K1 couples 'G1', a voltage-controlled current source; an inductor is expected"},
    {"t\nL1 a 0 1m\nK1 L1 l1 0.5\nG1 a 0 a 0 1\n.loop G1\n", "t.net:3:1: error: K1 couples 'L1' with itself"},
    {"t\nL1 a 0 1m\nL2 a 0 -1m\nK1 L1 L2 0.5\nG1 a 0 a 0 1\n.loop G1\n",
     "t.net:4:1: error: K1 couples 'L1' and 'L2', whose inductances differ in sign"},
};

static void test_subckt_errors(void **state)
{
    (void)state;
    size_t failed = 0;
    for (size_t i = 0; i < sizeof bad_cases / sizeof bad_cases[0]; i++) {
        tb_diag *diag = tb_diag_new();
        tb_circuit *ckt = NULL;
        tb_status st = parse(bad_cases[i].text, diag, &ckt);
        char got[4096];
        tb_diag_format(diag, 0, got, sizeof got);
        got[strcspn(got, "\n")] = '\0';
        if (st != TB_ERR_INPUT || ckt || strcmp(got, bad_cases[i].first) != 0) {
            print_error("case %zu: status %d, first:\n  %s\nwant\n  %s\n", i, st, got,
                        bad_cases[i].first);
            failed++;
        }
        tb_circuit_free(ckt);
        tb_diag_free(diag);
    }
    assert_int_equal(failed, 0);
}

/* Errors inside an instance name the instance chain under the message. */
static void test_subckt_error_context(void **state)
{
    (void)state;
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    assert_int_equal(parse("context\n"
                           ".subckt leaf a\n"
                           "R1 a 0 {w}\n"
                           ".ends\n"
                           ".subckt mid a\n"
                           "XL a leaf\n"
                           ".ends\n"
                           "XM n mid\n",
                           diag, &ckt),
                     TB_ERR_INPUT);
    assert_string_equal(formatted(diag, 0), "t.net:3:9: error: undefined parameter 'w'\n"
                                            "  in instance XM.XL (t.net:6)\n"
                                            "  in instance XM (t.net:8)\n"
                                            "  R1 a 0 {w}\n"
                                            "          ^\n");
    tb_diag_free(diag);
}

/* Element names in instances are hierarchical, so two instances never clash,
 * but a name given twice in one body does, under its hierarchical name. */
static void test_subckt_duplicate_names(void **state)
{
    (void)state;
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    assert_int_equal(parse("dup\n.subckt s a\nR1 a 0 1\nr1 a 0 2\n.ends\nX1 n s\nX2 n s\n"
                           "G1 n 0 n 0 1\n.loop G1\n",
                           diag, &ckt),
                     TB_ERR_INPUT);
    char first[512];
    tb_diag_format(diag, 0, first, sizeof first);
    first[strcspn(first, "\n")] = '\0';
    assert_string_equal(first, "t.net:4:1: error: duplicate element name 'X1.r1' (first defined on line 3)");
    tb_diag_free(diag);
}

/* 101 nested distinct subcircuits pass the depth limit: a clear error, no deep recursion. */
static void test_subckt_depth_limit(void **state)
{
    (void)state;
    size_t size = 200 * 64;
    char *text = malloc(size);
    assert_non_null(text);
    size_t n = (size_t)snprintf(text, size, "deep\n");
    for (int i = 0; i < 101; i++)
        n += (size_t)snprintf(text + n, size - n, ".subckt s%d x\nXa x s%d\n.ends\n", i, i + 1);
    n += (size_t)snprintf(text + n, size - n, ".subckt s101 x\nR1 x 0 1\n.ends\nXtop n s0\n");
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    assert_int_equal(tb_circuit_parse(text, n, "t.net", diag, &ckt), TB_ERR_INPUT);
    char first[512];
    tb_diag_format(diag, 0, first, sizeof first);
    first[strcspn(first, "\n")] = '\0';
    /* the 100th level's card (s99's body, line 2 + 3 * 99 + 1) opens the 101st instance */
    assert_string_equal(first, "t.net:300:1: error: subcircuit instances nested too deeply (limit is 100 levels)");
    tb_diag_free(diag);
    free(text);
}

/* A subcircuit that doubles at every level is stopped by the expansion limits. */
static void test_subckt_expansion_limit(void **state)
{
    (void)state;
    char text[4096];
    size_t n = (size_t)snprintf(text, sizeof text, "doubling\n");
    for (int i = 0; i < 20; i++)
        n += (size_t)snprintf(text + n, sizeof text - n, ".subckt d%d x\nXa x d%d\nXb x d%d\n.ends\n",
                              i, i + 1, i + 1);
    n += (size_t)snprintf(text + n, sizeof text - n, ".subckt d20 x\nR1 x 0 1\n.ends\nXtop n d0\n");
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    assert_int_equal(tb_circuit_parse(text, n, "t.net", diag, &ckt), TB_ERR_INPUT);
    assert_non_null(strstr(tb_diag_get(diag, 0)->message, "too many subcircuit instances (limit is 200000)"));
    tb_diag_free(diag);
}

/* A chain of parameters longer than 32 ends in a message, not deep recursion. */
static void test_subckt_parameter_chain_limit(void **state)
{
    (void)state;
    char text[4096];
    size_t n = (size_t)snprintf(text, sizeof text, "chain\n.param p0=1\n");
    for (int i = 1; i <= 40; i++)
        n += (size_t)snprintf(text + n, sizeof text - n, ".param p%d={p%d+1}\n", i, i - 1);
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    assert_int_equal(tb_circuit_parse(text, n, "t.net", diag, &ckt), TB_ERR_INPUT);
    char first[512];
    tb_diag_format(diag, 0, first, sizeof first);
    first[strcspn(first, "\n")] = '\0';
    /* evaluating p0..p40 in order settles each before the next: no chain forms */
    for (size_t i = 0; i < tb_diag_count(diag); i++)
        assert_null(strstr(tb_diag_get(diag, i)->message, "parameter"));
    assert_string_equal(first, "t.net: error: nothing to analyse: no .loop directive marks a "
                               "controlled source (E, G, F or H)");
    tb_diag_free(diag);
    /* defined in the reverse order, the first one needs all the others at once */
    n = (size_t)snprintf(text, sizeof text, "chain\n");
    for (int i = 40; i >= 1; i--)
        n += (size_t)snprintf(text + n, sizeof text - n, ".param p%d={p%d+1}\n", i, i - 1);
    n += (size_t)snprintf(text + n, sizeof text - n, ".param p0=1\n");
    diag = tb_diag_new();
    assert_int_equal(tb_circuit_parse(text, n, "t.net", diag, &ckt), TB_ERR_INPUT);
    tb_diag_format(diag, 0, first, sizeof first);
    first[strcspn(first, "\n")] = '\0';
    assert_string_equal(first, "t.net:34:12: error: parameters defined through too many others (limit is 32)");
    tb_diag_free(diag);
}

/* Past eight parameters, pins or definitions the lookups use the name index: what they
 * find is the same as in order (instance values, defaults, case, scopes). */
static void test_subckt_many_names(void **state)
{
    (void)state;
    char text[8192];
    size_t n = (size_t)snprintf(text, sizeof text, "many\n.param g0=1");
    for (int i = 1; i < 40; i++)
        n += (size_t)snprintf(text + n, sizeof text - n, " g%d={g%d+1}", i, i - 1);
    n += (size_t)snprintf(text + n, sizeof text - n, "\n.subckt s p0 p1 p2 p3 p4 p5 p6 p7 p8 p9 P10");
    for (int i = 0; i < 12; i++)
        n += (size_t)snprintf(text + n, sizeof text - n, " k%d=%d", i, i + 1);
    n += (size_t)snprintf(text + n, sizeof text - n, "\nR1 p10 p9 {K11*G39}\nR2 P0 0 {k0}\n.ends\n");
    for (int i = 0; i < 30; i++)
        n += (size_t)snprintf(text + n, sizeof text - n, ".subckt u%d a\nR1 a 0 %d\n.ends\n", i, i + 1);
    n += (size_t)snprintf(text + n, sizeof text - n, "X1 a0 a1 a2 a3 a4 a5 a6 a7 a8 a9 a10 S k11=5\n"
                                                     "X2 b U29\nX3 c u0\nV1 a0 0 AC 1\nE1 b 0 a0 0 1\n.loop E1\n"
                                                     "Rc c 0 1\n.ac dec 1 1 10\n");
    for (int i = 1; i < 11; i++)
        n += (size_t)snprintf(text + n, sizeof text - n, "Ra%d a%d 0 1\n", i, i);
    tb_circuit *ckt = parse_ok(text);
    assert_true(elem_of(ckt, "X1.R1")->value == 5 * 40);
    assert_true(elem_of(ckt, "X1.R2")->value == 1);
    int node = 0;
    assert_true(tb_circuit_find_node(ckt, "a10", 3, &node));
    assert_int_equal(elem_of(ckt, "X1.R1")->node[0], node);
    assert_true(elem_of(ckt, "X2.R1")->value == 30);
    assert_true(elem_of(ckt, "X3.R1")->value == 1);
    tb_circuit_free(ckt);
}

/* Text of a netlist whose first parameter leans on `others` more through a chain,
 * used by the value of E1. */
static size_t chain_netlist(char *text, size_t size, int others)
{
    size_t n = (size_t)snprintf(text, size, "chain\nV1 a 0 AC 1\nE1 b 0 a 0 {p0}\n.loop E1\n");
    for (int i = 0; i < others; i++)
        n += (size_t)snprintf(text + n, size - n, ".param p%d={p%d}\n", i, i + 1);
    n += (size_t)snprintf(text + n, size - n, ".param p%d=2\n", others);
    return n;
}

/* The limit as docs/netlist.md states it: a parameter may lean on 32 others, not 33. */
static void test_subckt_parameter_chain_at_limit(void **state)
{
    (void)state;
    char text[4096];
    size_t n = chain_netlist(text, sizeof text, 32);
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    assert_int_equal(tb_circuit_parse(text, n, "t.net", diag, &ckt), TB_OK);
    size_t e = 0;
    assert_true(tb_circuit_find_element(ckt, "E1", &e));
    assert_true(ckt->elems[e].value == 2);
    tb_circuit_free(ckt);
    tb_diag_free(diag);
    n = chain_netlist(text, sizeof text, 33);
    diag = tb_diag_new();
    assert_int_equal(tb_circuit_parse(text, n, "t.net", diag, &ckt), TB_ERR_INPUT);
    char first[512];
    tb_diag_format(diag, 0, first, sizeof first);
    first[strcspn(first, "\n")] = '\0';
    /* p32 is on line 37; its reference to p33 is where the 34th parameter would join */
    assert_string_equal(first, "t.net:37:13: error: parameters defined through too many others (limit is 32)");
    tb_diag_free(diag);
}

/* An unknown directive in a body is skipped with one warning, not one per instance. */
static void test_subckt_unknown_directive_warns_once(void **state)
{
    (void)state;
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    assert_int_equal(parse("warn\n.subckt s a\n.temp 27\nR1 a 0 1\n.ends\nX1 n s\nX2 n s\n"
                           "G1 n 0 n 0 1\n.loop G1\n.ac dec 1 1 10\n",
                           diag, &ckt),
                     TB_OK);
    assert_int_equal(tb_diag_count(diag), 1);
    assert_string_equal(formatted(diag, 0), "t.net:3:1: warning: unknown directive '.temp' skipped\n"
                                            "  .temp 27\n"
                                            "  ^\n");
    tb_circuit_free(ckt);
    tb_diag_free(diag);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_subckt_expands_hierarchy),
        cmocka_unit_test(test_subckt_parameters),
        cmocka_unit_test(test_subckt_parameter_scope),
        cmocka_unit_test(test_subckt_mutual_inductance),
        cmocka_unit_test(test_subckt_errors),
        cmocka_unit_test(test_subckt_error_context),
        cmocka_unit_test(test_subckt_duplicate_names),
        cmocka_unit_test(test_subckt_depth_limit),
        cmocka_unit_test(test_subckt_expansion_limit),
        cmocka_unit_test(test_subckt_parameter_chain_limit),
        cmocka_unit_test(test_subckt_parameter_chain_at_limit),
        cmocka_unit_test(test_subckt_many_names),
        cmocka_unit_test(test_subckt_unknown_directive_warns_once),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
