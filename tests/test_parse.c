/* tests/test_parse.c: the parser: cards into a circuit, directives, and every diagnostic it makes */
#include <stdlib.h>
#include <unistd.h>

#include "testutil.h"

#include "circuit.h"
#include "diag.h"

/* Parses text from a buffer of exactly its length (no NUL after it, freed
 * before returning, so the circuit must own everything it keeps). */
static tb_status parse_exact(const char *text, size_t len, tb_diag *diag, tb_circuit **out)
{
    char *buf = malloc(len ? len : 1);
    assert_non_null(buf);
    memcpy(buf, text, len);
    tb_status st = tb_circuit_parse(buf, len, "t.net", diag, out);
    free(buf);
    return st;
}

static tb_circuit *parse_ok(const char *text)
{
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    tb_status st = parse_exact(text, strlen(text), diag, &ckt);
    char buf[1024];
    for (size_t i = 0; st != TB_OK && i < tb_diag_count(diag); i++) {
        tb_diag_format(diag, i, buf, sizeof buf);
        print_error("%s", buf);
    }
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

/* The first line of diagnostic i. */
static const char *first_line(const tb_diag *diag, size_t i)
{
    static char buf[4096];
    tb_diag_format(diag, i, buf, sizeof buf);
    buf[strcspn(buf, "\n")] = '\0';
    return buf;
}

static int node_of(const tb_circuit *ckt, const char *name)
{
    int index = -1;
    assert_true(tb_circuit_find_node(ckt, name, strlen(name), &index));
    return index;
}

static const tb_element *elem_of(const tb_circuit *ckt, const char *name)
{
    size_t i = 0;
    assert_true(tb_circuit_find_element(ckt, name, &i));
    return &ckt->elems[i];
}

static void test_parse_every_card(void **state)
{
    (void)state;
    tb_circuit *ckt = parse_ok("  Loaded follower, invented for the tests  \n"
                               "* comment\n"
                               "Vin in 0 DC 1 AC 1 30\n"
                               "Iaux 0 x 2m\n"
                               "R1 in x 10k\n"
                               "Cload out 0 2.2p\n"
                               "L1 x y 1u\n"
                               "E1 out 0 x y 1e5\n"
                               "G1 0 y out 0 1m\n"
                               "Fsense y 0 Vs 2\n"
                               "Hz x 0 Vs 50 ; trailing comment\n"
                               "Vs out z\n"
                               "R2 z 0 1\n"
                               ".ac oct 12 10 1meg\n"
                               ".loop E1 G1\n"
                               ".io Vin v(out,z)\n"
                               ".end\n"
                               "not read: X1 ((\n");
    assert_string_equal(ckt->title, "Loaded follower, invented for the tests");
    assert_string_equal(ckt->file, "t.net");
    assert_int_equal(ckt->elem_count, 11);
    assert_int_equal(ckt->node_count, 6); /* 0 in x out y z */

    const tb_element *e = elem_of(ckt, "Vin");
    assert_int_equal(e->kind, TB_EL_V);
    assert_string_equal(e->name, "Vin");
    assert_int_equal(e->node[0], node_of(ckt, "in"));
    assert_int_equal(e->node[1], 0);
    assert_true(e->dc == 1 && e->ac_mag == 1 && e->ac_phase_deg == 30);
    assert_string_equal(e->loc.file, "t.net");
    assert_int_equal(e->loc.line, 3);
    assert_int_equal(e->loc.col, 1);

    e = elem_of(ckt, "Iaux");
    assert_int_equal(e->kind, TB_EL_I);
    assert_int_equal(e->node[0], 0);
    assert_int_equal(e->node[1], node_of(ckt, "x"));
    assert_true(e->dc == 2e-3 && e->ac_mag == 0 && e->ac_phase_deg == 0);

    e = elem_of(ckt, "R1");
    assert_int_equal(e->kind, TB_EL_R);
    assert_true(e->value == 1e4);
    assert_int_equal(e->branch, -1);
    e = elem_of(ckt, "Cload");
    assert_int_equal(e->kind, TB_EL_C);
    assert_true(e->value == 2.2e-12);
    e = elem_of(ckt, "L1");
    assert_int_equal(e->kind, TB_EL_L);
    assert_true(e->value == 1e-6);
    assert_int_equal(e->node[0], node_of(ckt, "x"));
    assert_int_equal(e->node[1], node_of(ckt, "y"));

    e = elem_of(ckt, "E1");
    assert_int_equal(e->kind, TB_EL_E);
    assert_int_equal(e->node[0], node_of(ckt, "out"));
    assert_int_equal(e->node[1], 0);
    assert_int_equal(e->node[2], node_of(ckt, "x"));
    assert_int_equal(e->node[3], node_of(ckt, "y"));
    assert_true(e->value == 1e5);
    assert_int_equal(e->loc.line, 8);
    e = elem_of(ckt, "G1");
    assert_int_equal(e->kind, TB_EL_G);
    assert_true(e->value == 1e-3);

    size_t vs = 0;
    assert_true(tb_circuit_find_element(ckt, "Vs", &vs));
    e = elem_of(ckt, "Fsense");
    assert_int_equal(e->kind, TB_EL_F);
    assert_string_equal(e->ctrl_name, "Vs");
    assert_int_equal(e->ctrl, vs);
    assert_true(e->value == 2);
    e = elem_of(ckt, "Hz");
    assert_int_equal(e->kind, TB_EL_H);
    assert_int_equal(e->ctrl, vs);
    assert_true(e->value == 50);
    e = elem_of(ckt, "Vs");
    assert_true(e->dc == 0 && e->ac_mag == 0);

    assert_true(ckt->ac.given);
    assert_int_equal(ckt->ac.kind, TB_GRID_OCT);
    assert_int_equal(ckt->ac.points, 12);
    assert_true(ckt->ac.fstart == 10 && ckt->ac.fstop == 1e6);
    assert_int_equal(ckt->ac.loc.line, 14);

    assert_int_equal(ckt->loop_count, 2);
    assert_string_equal(ckt->loops[0].source, "E1");
    assert_int_equal(ckt->loops[0].loc.line, 15);
    assert_int_equal(ckt->loops[0].loc.col, 7);
    assert_string_equal(ckt->loops[1].source, "G1");
    assert_int_equal(ckt->loops[1].loc.col, 10);

    assert_true(ckt->io.given);
    assert_string_equal(ckt->io.source, "Vin");
    assert_int_equal(ckt->io.out_kind, TB_OUT_V);
    assert_string_equal(ckt->io.out_a, "out");
    assert_string_equal(ckt->io.out_b, "z");
    assert_int_equal(ckt->io.out_node[0], node_of(ckt, "out"));
    assert_int_equal(ckt->io.out_node[1], node_of(ckt, "z"));
    assert_int_equal(ckt->io.loc.line, 16);
    assert_int_equal(ckt->io.loc.col, 1);
    assert_int_equal(ckt->io.out_loc.col, 9);
    tb_circuit_free(ckt);
}

static void test_parse_ignores_case(void **state)
{
    (void)state;
    tb_circuit *ckt = parse_ok("case test\n"
                               "vIN A 0 dc 0 Ac 1\n"
                               "r1 A b 1K\n"
                               "R2 a B 2MEG\n"
                               "e1 X 0 a 0 2\n"
                               "rl x 0 1\n"
                               ".AC DEC 10 1 1K\n"
                               ".LOOP E1\n"
                               ".Io Vin V(x)\n"
                               ".END\n");
    assert_int_equal(ckt->node_count, 4); /* 0 a b x */
    assert_int_equal(elem_of(ckt, "R1")->node[0], elem_of(ckt, "r2")->node[0]);
    assert_true(elem_of(ckt, "r2")->value == 2e6);
    assert_true(elem_of(ckt, "VIN")->ac_mag == 1);
    assert_int_equal(ckt->ac.kind, TB_GRID_DEC);
    assert_true(ckt->ac.fstop == 1e3);
    assert_int_equal(ckt->loops[0].elem, 3); /* e1 is the fourth element */
    assert_int_equal(ckt->io.out_kind, TB_OUT_V);
    assert_null(ckt->io.out_b);
    tb_circuit_free(ckt);
}

static void test_parse_ground_names(void **state)
{
    (void)state;
    tb_circuit *ckt = parse_ok("grounds\n"
                               "V1 a 0 AC 1\n"
                               "R1 a gnd 1\n"
                               "R2 a GND 1\n"
                               "E1 b Gnd a 0 1\n"
                               ".loop E1\n"
                               ".io V1 i(V1)\n");
    assert_int_equal(ckt->node_count, 3); /* 0 a b */
    assert_int_equal(elem_of(ckt, "R1")->node[1], 0);
    assert_int_equal(elem_of(ckt, "R2")->node[1], 0);
    assert_int_equal(elem_of(ckt, "E1")->node[1], 0);
    assert_int_equal(ckt->io.out_kind, TB_OUT_I);
    assert_string_equal(ckt->io.out_a, "V1");
    tb_circuit_free(ckt);
}

static void test_parse_sources(void **state)
{
    (void)state;
    tb_circuit *ckt = parse_ok("source forms\n"
                               "V1 a 0\n"
                               "V2 a b 3\n"
                               "V3 b c DC -2.5\n"
                               "I1 c d AC 2\n"
                               "I2 d e AC 2 -90\n"
                               "V4 e f 1 AC 0.5 45\n"
                               "R1 f 0 1\n"
                               "R2 d 0 1\n" /* else d hangs between I1 and I2 only */
                               "G1 f 0 a 0 1\n"
                               ".loop G1\n");
    const tb_element *e = elem_of(ckt, "V1");
    assert_true(e->dc == 0 && e->ac_mag == 0 && e->ac_phase_deg == 0);
    e = elem_of(ckt, "V2");
    assert_true(e->dc == 3 && e->ac_mag == 0);
    e = elem_of(ckt, "V3");
    assert_true(e->dc == -2.5);
    e = elem_of(ckt, "I1");
    assert_true(e->dc == 0 && e->ac_mag == 2 && e->ac_phase_deg == 0);
    e = elem_of(ckt, "I2");
    assert_true(e->ac_mag == 2 && e->ac_phase_deg == -90);
    e = elem_of(ckt, "V4");
    assert_true(e->dc == 1 && e->ac_mag == 0.5 && e->ac_phase_deg == 45);
    tb_circuit_free(ckt);
}

/* A card spread over '+' lines (with a comment between) is located at its first token. */
static void test_parse_continuation(void **state)
{
    (void)state;
    tb_circuit *ckt = parse_ok("continued\n"
                               "\n"
                               "  E1 out 0\n"
                               "* the controlling pair\n"
                               "+ in 0\n"
                               "+ 10\n"
                               "V1 in 0 AC 1\n"
                               "R1 out 0 1k\n"
                               ".loop\n"
                               "+ E1\n");
    const tb_element *e = elem_of(ckt, "E1");
    assert_int_equal(e->loc.line, 3);
    assert_int_equal(e->loc.col, 3);
    assert_int_equal(e->node[2], node_of(ckt, "in"));
    assert_true(e->value == 10);
    assert_int_equal(ckt->loops[0].loc.line, 10);
    assert_int_equal(ckt->loops[0].loc.col, 3);
    tb_circuit_free(ckt);
}

/* CR, CRLF and a byte order mark are all accepted. */
static void test_parse_line_ends(void **state)
{
    (void)state;
    static const char *const texts[] = {
        "\xEF\xBB\xBF" "ends\r\nV1 a 0 AC 1\r\nE1 b 0 a 0 2\r\n.loop E1\r\n",
        "ends\rV1 a 0 AC 1\rE1 b 0 a 0 2\r.loop E1",
        "ends\nV1 a 0 AC 1\r\nE1 b 0 a 0 2\r.loop E1\n",
    };
    for (size_t i = 0; i < sizeof texts / sizeof texts[0]; i++) {
        tb_circuit *ckt = parse_ok(texts[i]);
        assert_string_equal(ckt->title, "ends");
        assert_int_equal(elem_of(ckt, "E1")->loc.line, 3);
        assert_int_equal(ckt->loops[0].loc.line, 4);
        tb_circuit_free(ckt);
    }
}

/* Nothing after .end is read, not even malformed cards or control characters. */
static void test_parse_end_stops_reading(void **state)
{
    (void)state;
    tb_circuit *ckt = parse_ok("stop\nV1 a 0 AC 1\nE1 b 0 a 0 2\n.loop E1\n.ac lin 5 1 5\n"
                               ".End\nR9 ( \x01 1k5\n.loop Q\n.ac\n");
    assert_int_equal(ckt->elem_count, 2);
    assert_int_equal(ckt->loop_count, 1);
    tb_circuit_free(ckt);
}

static void test_parse_unknown_directive_warns(void **state)
{
    (void)state;
    const char *text = "warn\nV1 a 0 AC 1\n  .Options fast=1\n+ more\nE1 b 0 a 0 2\n"
                       ".loop E1\n.ac dec 1 1 10\n";
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    assert_int_equal(parse_exact(text, strlen(text), diag, &ckt), TB_OK);
    assert_int_equal(tb_diag_count(diag), 1);
    assert_int_equal(tb_diag_errors(diag), 0);
    assert_string_equal(formatted(diag, 0),
                        "t.net:3:3: warning: unknown directive '.Options' skipped\n"
                        "    .Options fast=1\n"
                        "    ^\n");
    assert_int_equal(ckt->elem_count, 2);
    tb_circuit_free(ckt);
    tb_diag_free(diag);
}

/* Without .ac the circuit gets a default grid (and tb_circuit_finish a warning). */
static void test_parse_default_ac(void **state)
{
    (void)state;
    tb_circuit *ckt = parse_ok("no ac\nV1 a 0 AC 1\nE1 b 0 a 0 2\n.loop E1\n");
    assert_true(ckt->ac.given);
    assert_int_equal(ckt->ac.loc.line, 0);
    tb_circuit_free(ckt);
}

/* Every parser error: the netlist, and the first line of its one diagnostic. */
static const struct {
    const char *text;
    const char *first;
} bad_cases[] = {
    /* lines and characters */
    {"t\n+ R1 a 0 1k\n", "t.net:2:1: error: '+' continues a card, but no card comes before it"},
    {"t\nR1 a\x01 0 1k\n", "t.net:2:5: error: invalid control character 0x01"},
    {"t\nR1 a 0 1k\x7f\n", "t.net:2:10: error: invalid control character 0x7F"},
    {"t\n\x02R1\n", "t.net:2:1: error: invalid control character 0x02"},
    {"t\nV1 a 0 \x1b[1m\n", "t.net:2:8: error: invalid control character 0x1B"},
    /* characters that look like blanks are named */
    {"t\nR1\xC2\xA0" "a 0 1k\n",
     "t.net:2:3: error: no-break space (U+00A0) between fields: separate them with plain spaces or tabs"},
    {"t\nR1 a 0\xE2\x80\x89" "1k\n",
     "t.net:2:7: error: thin space (U+2009) between fields: separate them with plain spaces or tabs"},
    {"t\n.param a=1\xC2\xA0" "b=2\n",
     "t.net:2:11: error: no-break space (U+00A0) between fields: separate them with plain spaces or tabs"},
    {"t\nR1 a 0 {2*\xC2\xA0" "3}\n",
     "t.net:2:11: error: expected a number, a name or '(' in the expression, got a no-break space "
     "(U+00A0): write plain spaces"},
    {"t\nR1 a 0 {2*\xCE\xA9}\n",
     "t.net:2:11: error: expected a number, a name or '(' in the expression, got '\xCE\xA9'"},
    /* the start of a card */
    {"t\n(R1 a 0 1)\n", "t.net:2:1: error: expected an element or a directive, got '('"},
    {"t\n=\n", "t.net:2:1: error: expected an element or a directive, got '='"},
    {"t\nU1 a 0 1k\n",
     "t.net:2:1: error: unknown element 'U1': 'U' is not one of the element letters R C L V I E G F H K Q M X"},
    {"t\n1R a 0 1\n",
     "t.net:2:1: error: unknown element '1R': '1' is not one of the element letters R C L V I E G F H K Q M X"},
    {"t\n\xCE\xA9" "1 a 0 1\n",
     "t.net:2:1: error: unknown element '\xCE\xA9" "1': '\xCE\xA9' is not one of the element "
     "letters R C L V I E G F H K Q M X"},
    /* R, C, L */
    {"t\nR1\n", "t.net:2:3: error: expected a node name after 'R1'"},
    {"t\nR1 a\n", "t.net:2:5: error: expected a node name for R1 after 'a'"},
    {"t\nR1 a 0\n", "t.net:2:7: error: expected a value for R1 after '0'"},
    {"t\nR1 a\n+ 0\n", "t.net:3:4: error: expected a value for R1 after '0'"},
    {"t\nR1 a 0 abc\n", "t.net:2:8: error: expected a value for R1, got 'abc'"},
    {"t\nR1 ( 0 1k\n", "t.net:2:4: error: expected a node name for R1, got '('"},
    {"t\nR1 a 0 1k5\n", "t.net:2:8: error: malformed value '1k5'"},
    {"t\nR1 a 0 1e999\n", "t.net:2:8: error: value '1e999' is out of range"},
    {"t\nR1 a 0 0\n", "t.net:2:8: error: resistance of R1 must be non-zero"},
    {"t\nc7 a 0 0.0p\n", "t.net:2:8: error: capacitance of c7 must be non-zero"},
    {"t\nLx a 0 -0\n", "t.net:2:8: error: inductance of Lx must be non-zero"},
    {"t\nR1 a 0 1e-400\n", "t.net:2:8: error: resistance of R1 must be non-zero"},
    /* value ranges: a denormal, and values whose conductance, jwC or pole leaves a double */
    {"t\nR1 a 0 1e-320\n",
     "t.net:2:8: error: resistance of R1 must be from 1e-12 to 1e18 ohms in magnitude, got '1e-320'"},
    {"t\nR1 a 0 -0.999e-12\n",
     "t.net:2:8: error: resistance of R1 must be from 1e-12 to 1e18 ohms in magnitude, got '-0.999e-12'"},
    {"t\nR1 a 0 1.001e18\n",
     "t.net:2:8: error: resistance of R1 must be from 1e-12 to 1e18 ohms in magnitude, got '1.001e18'"},
    {"t\nC1 a 0 1e300\n",
     "t.net:2:8: error: capacitance of C1 must be from 1e-21 to 1e12 farads in magnitude, got '1e300'"},
    {"t\nC1 a 0 1e-22\n",
     "t.net:2:8: error: capacitance of C1 must be from 1e-21 to 1e12 farads in magnitude, got '1e-22'"},
    {"t\nL1 a 0 {-1e13}\n",
     "t.net:2:8: error: inductance of L1 must be from 1e-21 to 1e12 henries in magnitude, got '{-1e13}'"},
    {"t\nE1 a 0 b 0 1e-320\n",
     "t.net:2:12: error: gain of E1 must be 0 or from 1e-15 to 1e15 in magnitude, got '1e-320'"},
    {"t\nG1 a 0 b 0 -2e15\n",
     "t.net:2:12: error: gain of G1 must be 0 or from 1e-15 to 1e15 in magnitude, got '-2e15'"},
    {"t\nF1 a 0 V1 1e16\n",
     "t.net:2:11: error: gain of F1 must be 0 or from 1e-15 to 1e15 in magnitude, got '1e16'"},
    {"t\nH1 a 0 V1 1e-16\n",
     "t.net:2:11: error: gain of H1 must be 0 or from 1e-15 to 1e15 in magnitude, got '1e-16'"},
    {"t\nV1 a 0 AC 1e-320\n",
     "t.net:2:11: error: AC magnitude of V1 must be 0 or from 1e-15 to 1e15 in magnitude, got '1e-320'"},
    {"t\nI1 a 0 1e300 AC 1\n",
     "t.net:2:8: error: DC value of I1 must be 0 or from 1e-15 to 1e15 in magnitude, got '1e300'"},
    {"t\nR1 a 0 1k foo\n", "t.net:2:11: error: unexpected 'foo' after the value of R1"},
    {"t\nR1 a 0 1k\n+ 2k\n", "t.net:3:3: error: unexpected '2k' after the value of R1"},
    {"t\nR1 a 0 1k=2\n", "t.net:2:10: error: unexpected '=' after the value of R1"},
    {"t\nR1 a 0 xxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxx\n",
     "t.net:2:8: error: expected a value for R1, got 'xxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxx...'"},
    /* V, I */
    {"t\nV1 a 0 foo\n", "t.net:2:8: error: expected DC, AC or a value for V1, got 'foo'"},
    {"t\nV1 a 0 DC\n", "t.net:2:10: error: expected a DC value for V1 after 'DC'"},
    {"t\nV1 a 0 DC x\n", "t.net:2:11: error: expected a DC value for V1, got 'x'"},
    {"t\nV1 a 0 DC AC 1\n", "t.net:2:11: error: expected a DC value for V1, got 'AC'"},
    {"t\nV1 a 0 AC\n", "t.net:2:10: error: expected an AC magnitude for V1 after 'AC'"},
    {"t\nI1 a 0 AC big\n", "t.net:2:11: error: expected an AC magnitude for I1, got 'big'"},
    {"t\nI1 a 0 1 AC 1 45 7\n", "t.net:2:18: error: unexpected '7' after the AC phase of I1"},
    {"t\nV1 a 0 1 DC 2\n", "t.net:2:10: error: unexpected 'DC' after the DC value of V1"},
    {"t\nV1 a 0 AC 1 DC 2\n", "t.net:2:13: error: unexpected 'DC' after the AC magnitude of V1"},
    {"t\nV1 a 0 (\n", "t.net:2:8: error: unexpected '(' after the nodes of V1"},
    {"t\nV1 a 0 1x5\n", "t.net:2:8: error: malformed value '1x5'"},
    {"t\nV1 a 0 AC 1 1k5\n", "t.net:2:13: error: malformed value '1k5'"},
    {"t\nI1 a\n", "t.net:2:5: error: expected a node name for I1 after 'a'"},
    /* E, G */
    {"t\nE1 out 0 in\n", "t.net:2:12: error: expected a node name for E1 after 'in'"},
    {"t\nG1 a 0 b 0\n", "t.net:2:11: error: expected a gain for G1 after '0'"},
    {"t\nG1 a 0 b 0 fast\n", "t.net:2:12: error: expected a gain for G1, got 'fast'"},
    {"t\nE1 a 0 b 0 2 3\n", "t.net:2:14: error: unexpected '3' after the gain of E1"},
    /* F, H */
    {"t\nF1 a 0\n", "t.net:2:7: error: expected a voltage source name for F1 after '0'"},
    {"t\nH1 a 0 (Vs) 2\n", "t.net:2:8: error: expected a voltage source name for H1, got '('"},
    {"t\nF1 a 0 Vs\n", "t.net:2:10: error: expected a gain for F1 after 'Vs'"},
    {"t\nH1 a 0 Vs 1 2\n", "t.net:2:13: error: unexpected '2' after the gain of H1"},
    /* .ac */
    {"t\n.ac\n", "t.net:2:4: error: expected dec, oct or lin after '.ac'"},
    {"t\n.AC log 10 1 1k\n", "t.net:2:5: error: expected dec, oct or lin for .ac, got 'log'"},
    {"t\n.ac dec\n", "t.net:2:8: error: expected a number of points for .ac after 'dec'"},
    {"t\n.ac dec many 1 1k\n", "t.net:2:9: error: expected a number of points for .ac, got 'many'"},
    {"t\n.ac dec 0 1 1k\n",
     "t.net:2:9: error: number of points of .ac must be a positive integer, got '0'"},
    {"t\n.ac oct 2.5 1 1k\n",
     "t.net:2:9: error: number of points of .ac must be a positive integer, got '2.5'"},
    {"t\n.ac lin -3 1 1k\n",
     "t.net:2:9: error: number of points of .ac must be a positive integer, got '-3'"},
    {"t\n.ac lin 1e8 1 1k\n",
     "t.net:2:9: error: number of points of .ac must be at most 10000000, got '1e8'"},
    {"t\n.ac dec 10\n", "t.net:2:11: error: expected a start frequency for .ac after '10'"},
    {"t\n.ac dec 10 0 1k\n", "t.net:2:12: error: start frequency of .ac must be positive, got '0'"},
    {"t\n.ac dec 10 -1 1k\n", "t.net:2:12: error: start frequency of .ac must be positive, got '-1'"},
    {"t\n.ac dec 10 1k\n", "t.net:2:14: error: expected a stop frequency for .ac after '1k'"},
    {"t\n.ac dec 10 1k 100\n",
     "t.net:2:15: error: stop frequency of .ac ('100') must not be below its start frequency ('1k')"},
    {"t\n.ac dec 10 1 1k 5\n", "t.net:2:17: error: unexpected '5' after the stop frequency of .ac"},
    {"t\n.ac lin 10 1e-300 1.7e308\n",
     "t.net:2:12: error: start frequency of .ac must be from 1e-9 to 1e15 Hz, got '1e-300'"},
    {"t\n.ac lin 10 1 1.1e15\n",
     "t.net:2:14: error: stop frequency of .ac must be from 1e-9 to 1e15 Hz, got '1.1e15'"},
    /* each number in range, the grid too large in all: located at the card */
    {"t\n.ac dec 1e7 1e-9 1e15\n",
     "t.net:2:1: error: the .ac grid has 240000001 frequencies in all (limit is 10000000)"},
    {"t\n.ac oct 5meg 1 4\n",
     "t.net:2:1: error: the .ac grid has 10000001 frequencies in all (limit is 10000000)"},
    {"t\n.ac dec 10 1 1k\n.ac lin 5 1 2\n",
     "t.net:3:1: error: second .ac directive (the first is on line 2)"},
    /* .loop */
    {"t\n.loop\n", "t.net:2:6: error: expected a controlled source name after '.loop'"},
    {"t\n.LOOP E1 (\n", "t.net:2:10: error: expected a controlled source name for .loop, got '('"},
    /* .io */
    {"t\n.io\n", "t.net:2:4: error: expected an input source name after '.io'"},
    {"t\n.io (\n", "t.net:2:5: error: expected an input source name for .io, got '('"},
    {"t\n.io Vin\n",
     "t.net:2:8: error: expected an output v(node), v(node,node) or i(source) for .io after 'Vin'"},
    {"t\n.io Vin out\n",
     "t.net:2:9: error: expected an output v(node), v(node,node) or i(source) for .io, got 'out'"},
    {"t\n.io Vin v\n", "t.net:2:10: error: expected '(' for .io after 'v'"},
    {"t\n.io Vin v out\n", "t.net:2:11: error: expected '(' for .io, got 'out'"},
    {"t\n.io Vin v(\n", "t.net:2:11: error: expected a node name for .io after '('"},
    {"t\n.io Vin v(a\n", "t.net:2:12: error: expected ',' or ')' for .io after 'a'"},
    {"t\n.io Vin v(a b)\n", "t.net:2:13: error: expected ',' or ')' for .io, got 'b'"},
    {"t\n.io Vin v(a,)\n", "t.net:2:13: error: expected a node name for .io, got ')'"},
    {"t\n.io Vin v(a,b\n", "t.net:2:14: error: expected ')' for .io after 'b'"},
    {"t\n.io Vin i(a,b)\n", "t.net:2:12: error: expected ')' for .io, got ','"},
    {"t\n.io Vin i()\n", "t.net:2:11: error: expected a voltage source name for .io, got ')'"},
    {"t\n.io Vin v(a) x\n", "t.net:2:14: error: unexpected 'x' after the output of .io"},
    {"t\n.io V1 v(a)\n.io V1 v(b)\n",
     "t.net:3:1: error: second .io directive (the first is on line 2)"},
    /* .end */
    {"t\n.end now\n", "t.net:2:6: error: unexpected 'now' after .end"},
    {"t\n.end\n+ (\n", "t.net:3:3: error: unexpected '(' after .end"},
};

/* Each bad card gives exactly one error (the card is abandoned, and the
 * reference checks of tb_circuit_finish do not run on a netlist with syntax
 * errors), at the line and column given, and no circuit. */
static void test_parse_errors(void **state)
{
    (void)state;
    for (size_t i = 0; i < sizeof bad_cases / sizeof bad_cases[0]; i++) {
        tb_diag *diag = tb_diag_new();
        tb_circuit *ckt = (tb_circuit *)&diag; /* must stay untouched */
        tb_status st = parse_exact(bad_cases[i].text, strlen(bad_cases[i].text), diag, &ckt);
        const char *got = first_line(diag, 0);
        if (st != TB_ERR_INPUT || tb_diag_errors(diag) != 1 ||
            strcmp(got, bad_cases[i].first) != 0)
            print_error("case %zu: status %d, %zu errors, first:\n  %s\nwant\n  %s\n", i, st,
                        tb_diag_errors(diag), got, bad_cases[i].first);
        assert_int_equal(st, TB_ERR_INPUT);
        assert_int_equal(tb_diag_errors(diag), 1);
        assert_string_equal(got, bad_cases[i].first);
        assert_ptr_equal(ckt, (tb_circuit *)&diag);
        tb_diag_free(diag);
    }
}

/* The ends of every value range are accepted, and the grid at its limit too. */
static void test_parse_value_range_ends(void **state)
{
    (void)state;
    tb_circuit *ckt = parse_ok("ends\nV1 a 0 0 AC 1e15\nI1 a 0 -1e-15 AC 0\nR1 a b 1e-12\nR2 b 0 -1e18\n"
                               "C1 b 0 1e-21\nC2 b 0 -1e12\nL1 b c 1e12\nL2 c 0 1e-21\nE1 d 0 a 0 0\n"
                               "G1 d 0 a 0 1e15\nRd d 0 1\nF1 d 0 V1 -1e-15\n.loop E1\n.io V1 v(d)\n"
                               ".ideal gain=1e15 tol=1e6\n.ac oct 5meg 1 2\n");
    assert_true(elem_of(ckt, "R1")->value == 1e-12);
    assert_true(elem_of(ckt, "R2")->value == -1e18);
    assert_true(elem_of(ckt, "C1")->value == 1e-21);
    assert_true(elem_of(ckt, "G1")->value == 1e15);
    assert_int_equal(ckt->ac.points, 5000000);
    tb_circuit_free(ckt);
    ckt = parse_ok("ends\nV1 a 0 AC 1\nE1 b 0 a 0 2\n.loop E1\n.ac lin 1e7 1e-9 1e15\n");
    assert_true(ckt->ac.fstart == 1e-9 && ckt->ac.fstop == 1e15);
    tb_circuit_free(ckt);
}

/* The source line is quoted and the caret lands under the column (tabs kept). */
static void test_parse_error_caret(void **state)
{
    (void)state;
    static const struct {
        const char *text;
        const char *want;
    } cases[] = {
        {"t\n\tR1 a 0 abc\n",
         "t.net:2:9: error: expected a value for R1, got 'abc'\n"
         "  \tR1 a 0 abc\n"
         "  \t       ^\n"},
        {"t\r\nR1 a 0\r\n",
         "t.net:2:7: error: expected a value for R1 after '0'\n"
         "  R1 a 0\n"
         "        ^\n"},
        {"t\rR1 a\r+ b ; nothing\rR2",
         "t.net:3:4: error: expected a value for R1 after 'b'\n"
         "  + b ; nothing\n"
         "     ^\n"},
        /* control codes in the quoted line are escaped, never sent to the terminal, and
         * the caret counts them as shown; a UTF-8 character takes one column */
        {"t\nR1 \xCE\xA9 \x1b[2J 1k\n",
         "t.net:2:7: error: invalid control character 0x1B\n"
         "  R1 \xCE\xA9 \\x1B[2J 1k\n"
         "       ^\n"},
        {"t\nR1 \x1b[2J\x07 0 x\n",
         "t.net:2:4: error: invalid control character 0x1B\n"
         "  R1 \\x1B[2J\\x07 0 x\n"
         "     ^\n"},
        {"t\nR1 a\x9b" "b \xff\xfe x\n",
         "t.net:2:11: error: expected a value for R1, got 'x'\n"
         "  R1 a\\x9Bb \\xFF\\xFE x\n"
         "                     ^\n"},
    };
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        tb_diag *diag = tb_diag_new();
        tb_circuit *ckt = NULL;
        assert_int_equal(parse_exact(cases[i].text, strlen(cases[i].text), diag, &ckt),
                         TB_ERR_INPUT);
        assert_string_equal(formatted(diag, 0), cases[i].want);
        tb_diag_free(diag);
    }
}

/* No text from the netlist or its name reaches a terminal as control codes: file
 * names and messages are kept escaped, like the quoted line. */
static void test_parse_escapes_user_text(void **state)
{
    (void)state;
    static const struct {
        const char *text;
        const char *want;
    } cases[] = {
        /* a C1 control (CSI) and a direction override inside a quoted word */
        {"t\nR1 a 0 x\xC2\x9B" "2J\n", "expected a value for R1, got 'x\\u009B2J'"},
        {"t\nR1 a 0 x\xE2\x80\xAE" "k1\n", "expected a value for R1, got 'x\\u202Ek1'"},
        /* bytes that are not UTF-8, and an overlong form of '/' */
        {"t\nR1 a 0 \xFF\xC0\xAF\n", "expected a value for R1, got '\\xFF\\xC0\\xAF'"},
        /* valid UTF-8 stays as it is */
        {"t\nR1 a 0 \xCE\xA9\n", "expected a value for R1, got '\xCE\xA9'"},
    };
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        tb_diag *diag = tb_diag_new();
        tb_circuit *ckt = NULL;
        assert_int_equal(parse_exact(cases[i].text, strlen(cases[i].text), diag, &ckt), TB_ERR_INPUT);
        assert_string_equal(tb_diag_get(diag, 0)->message, cases[i].want);
        tb_diag_free(diag);
    }
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    const char *text = "t\nR1 a 0 x\n";
    assert_int_equal(tb_circuit_parse(text, strlen(text), "lib\n\x1B[2Jpass.net", diag, &ckt), TB_ERR_INPUT);
    assert_string_equal(formatted(diag, 0), "lib\\x0A\\x1B[2Jpass.net:2:8: error: expected a value for R1, got 'x'\n"
                                            "  R1 a 0 x\n"
                                            "         ^\n");
    tb_diag_free(diag);
    char buf[16];
    assert_int_equal(tb_diag_escape("a\tb\x7F", 4, buf, sizeof buf), 10);
    assert_string_equal(buf, "a\\x09b\\x7F");
    assert_int_equal(tb_diag_escape("\x1B[1m", 4, buf, 4), 7); /* cut short, still NUL-terminated */
    assert_string_equal(buf, "\\x1");
}

/* Bad cards are reported one by one, in order, and good ones go on being read. */
static void test_parse_goes_on_after_errors(void **state)
{
    (void)state;
    const char *text = "t\nR1 a 0 x\nR2 a 0 1k\n.ac dec\n.weird\nE1 a 0 a\n";
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    assert_int_equal(parse_exact(text, strlen(text), diag, &ckt), TB_ERR_INPUT);
    assert_int_equal(tb_diag_count(diag), 4);
    assert_string_equal(first_line(diag, 0), "t.net:2:8: error: expected a value for R1, got 'x'");
    assert_string_equal(first_line(diag, 1),
                        "t.net:4:8: error: expected a number of points for .ac after 'dec'");
    assert_string_equal(first_line(diag, 2), "t.net:5:1: warning: unknown directive '.weird' skipped");
    assert_string_equal(first_line(diag, 3), "t.net:6:9: error: expected a node name for E1 after 'a'");
    tb_diag_free(diag);
}

/* The second pass reads the cards between the first pass's own cards (.param, .subckt,
 * .end) as runs: every card of every run is read once, in order, at its own line, across
 * comments, blank lines, continuations and a card that fails half-way. */
static void test_parse_cards_between_directives(void **state)
{
    (void)state;
    const char *text = "t\n"
                       "R1 a 0 1k\n"
                       "* a comment\n"
                       "\n"
                       "R2 a b\n"
                       "+ 2k ; the value on the next line\n"
                       ".param p=3k\n"
                       "R3 b 0 {p}\n"
                       "R4 b 0 1k y\n"
                       ".subckt two n\n"
                       "R1 n 0 1k\n"
                       ".ends\n"
                       "X1 b two\n"
                       "C1 b\n"
                       "+ 0 1p\n"
                       ".param q=1\n"
                       ".param r=2\n"
                       "R5 a 0 z\n"
                       "V1 a 0 AC 1\n"
                       ".end\n"
                       "R6 a 0 w\n";
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    assert_int_equal(parse_exact(text, strlen(text), diag, &ckt), TB_ERR_INPUT);
    assert_int_equal(tb_diag_count(diag), 2);
    assert_string_equal(first_line(diag, 0), "t.net:9:11: error: unexpected 'y' after the value of R4");
    assert_string_equal(first_line(diag, 1), "t.net:18:8: error: expected a value for R5, got 'z'");
    tb_diag_free(diag);
    const char *good = "t\nR1 a 0 1k\n* c\nR2 a b\n+ 2k\n.param p=3k\nR3 b 0 {p}\n"
                       ".subckt two n\nR1 n 0 1k\n.ends\nX1 b two\nC1 b\n+ 0 1p\n"
                       ".param q=1\n.param r=2\nV1 a 0 AC 1\nG1 b 0 a 0 1m\n.loop G1\n.ac dec 1 1 10\n"
                       ".end\nR6 a 0 w\n";
    ckt = parse_ok(good);
    const char *names[] = {"R1", "R2", "R3", "X1.R1", "C1", "V1", "G1"};
    const int lines[] = {2, 4, 7, 9, 12, 16, 17};
    assert_int_equal(ckt->elem_count, 7);
    for (size_t i = 0; i < 7; i++) {
        assert_string_equal(ckt->elems[i].name, names[i]);
        assert_int_equal(ckt->elems[i].loc.line, lines[i]);
    }
    assert_true(ckt->elems[2].value == 3e3);
    assert_int_equal(ckt->elems[4].node[1], 0);
    tb_circuit_free(ckt);
}

/* Reading stops after 20 errors. */
static void test_parse_stops_after_20_errors(void **state)
{
    (void)state;
    char text[2000] = "many errors\n";
    for (int i = 1; i <= 30; i++)
        snprintf(text + strlen(text), sizeof text - strlen(text), "R%d a 0 bad\n", i);
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    assert_int_equal(parse_exact(text, strlen(text), diag, &ckt), TB_ERR_INPUT);
    assert_int_equal(tb_diag_count(diag), 20);
    assert_string_equal(first_line(diag, 19), "t.net:21:9: error: expected a value for R20, got 'bad'");
    tb_diag_free(diag);
    /* without a diagnostics list the parser counts for itself */
    assert_int_equal(parse_exact(text, strlen(text), NULL, &ckt), TB_ERR_INPUT);
}

/* .margins states the netlist's own stability thresholds, in any order, either optional. */
static void test_parse_margins(void **state)
{
    (void)state;
    tb_circuit *ckt = parse_ok("margins\nV1 a 0 AC 1\nR1 a b 1k\nE1 b 0 a 0 2\nR2 b 0 1k\n"
                               ".loop E1\n.MARGINS gm=6 PM=50\n");
    assert_true(tb_circuit_states_margins(ckt));
    assert_true(ckt->margins.has_pm && ckt->margins.pm_min_deg == 50);
    assert_true(ckt->margins.has_gm && ckt->margins.gm_min_db == 6);
    tb_circuit_free(ckt);
    ckt = parse_ok("margins\nV1 a 0 AC 1\nR1 a b 1k\nE1 b 0 a 0 2\nR2 b 0 1k\n.loop E1\n"
                   ".margins pm={90/2}\n");
    assert_true(ckt->margins.has_pm && ckt->margins.pm_min_deg == 45);
    assert_false(ckt->margins.has_gm);
    tb_circuit_free(ckt);
    ckt = parse_ok("no margins\nV1 a 0 AC 1\nR1 a b 1k\nE1 b 0 a 0 2\nR2 b 0 1k\n.loop E1\n");
    assert_false(tb_circuit_states_margins(ckt));
    tb_circuit_free(ckt);
}

static void test_parse_margins_errors(void **state)
{
    (void)state;
    static const struct {
        const char *card;
        const char *first;
    } cases[] = {
        {".margins", "t.net:7:9: error: expected pm=DEGREES or gm=DB after '.margins'"},
        {".margins pm 45", "t.net:7:13: error: expected '=' for .margins, got '45'"},
        {".margins pm=-1", "t.net:7:13: error: pm threshold of .margins must be from 0 to below 180 degrees, got '-1'"},
        {".margins gm=-3", "t.net:7:13: error: gm threshold of .margins must be 0 dB or more, got '-3'"},
        {".margins pm=45 pm=50", "t.net:7:16: error: 'pm' is given twice on .margins"},
    };
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        char text[512];
        snprintf(text, sizeof text, "t\nV1 a 0 AC 1\nR1 a b 1k\nE1 b 0 a 0 2\nR2 b 0 1k\n.loop E1\n%s\n",
                 cases[i].card);
        tb_diag *diag = tb_diag_new();
        tb_circuit *ckt = NULL;
        assert_int_equal(parse_exact(text, strlen(text), diag, &ckt), TB_ERR_INPUT);
        assert_string_equal(first_line(diag, 0), cases[i].first);
        tb_diag_free(diag);
    }
}

/* The checks after parsing stop at 20 errors too. */
static void test_parse_finish_stops_after_20_errors(void **state)
{
    (void)state;
    char text[4000] = "many missing loop sources\nR1 a 0 1k\n.loop";
    for (int i = 1; i <= 40; i++)
        snprintf(text + strlen(text), sizeof text - strlen(text), " G%d", i);
    strcat(text, "\n");
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    assert_int_equal(parse_exact(text, strlen(text), diag, &ckt), TB_ERR_INPUT);
    assert_int_equal(tb_diag_errors(diag), 20);
    assert_string_equal(first_line(diag, 0), "t.net:3:7: error: .loop names 'G1', which does not exist");
    tb_diag_free(diag);
}

static void test_parse_loop_limit(void **state)
{
    (void)state;
    size_t size = 20 + 6 * 10001;
    char *text = malloc(size);
    assert_non_null(text);
    size_t n = (size_t)snprintf(text, size, "t\n.loop");
    for (int i = 0; i <= 10000; i++)
        n += (size_t)snprintf(text + n, size - n, " E%d", i % 10);
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    assert_int_equal(parse_exact(text, n, diag, &ckt), TB_ERR_INPUT);
    assert_int_equal(tb_diag_count(diag), 1);
    /* the 10001st name, E0, starts at column 7 + 3 * 10000 */
    assert_string_equal(first_line(diag, 0),
                        "t.net:2:30007: error: too many .loop sources (limit is 10000)");
    tb_diag_free(diag);
    free(text);
}

/* Absurdly long lines end in a clear message, in time and memory linear in their length. */
static void test_parse_long_lines(void **state)
{
    (void)state;
    static const struct {
        const char *head;
        char fill;
        const char *first;
    } cases[] = {
        {"t\nR1 a 0 ", '7', "t.net:2:8: error: value '7777777777777777777777777777777777777777...' is out of range"},
        {"t\nR1 a 0 {", '(', "t.net:2:109: error: expression nested too deeply (limit is 100 levels)"},
        {"t\nR1 a 0 {", '-', "t.net:2:109: error: expression nested too deeply (limit is 100 levels)"},
        {"t\n.subckt s", ' ', "t.net:2:1: error: .subckt s has no .ends"},
    };
    size_t n = 10000000;
    char *text = malloc(n + 64);
    assert_non_null(text);
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        size_t head = strlen(cases[i].head);
        memcpy(text, cases[i].head, head);
        memset(text + head, cases[i].fill, n);
        if (text[head - 1] == '{')
            text[head + n - 1] = '}';
        tb_diag *diag = tb_diag_new();
        tb_circuit *ckt = NULL;
        assert_int_equal(parse_exact(text, head + n, diag, &ckt), TB_ERR_INPUT);
        assert_string_equal(first_line(diag, 0), cases[i].first);
        tb_diag_free(diag);
    }
    /* an X card with a million nodes */
    size_t len = (size_t)snprintf(text, n, "t\nX1");
    for (int i = 0; i < 1000000; i++)
        len += (size_t)snprintf(text + len, n + 64 - len, " n");
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    assert_int_equal(parse_exact(text, len, diag, &ckt), TB_ERR_INPUT);
    assert_string_equal(first_line(diag, 0), "t.net:2:200006: error: too many pins (limit is 100000)");
    tb_diag_free(diag);
    free(text);
}

static void test_parse_usage(void **state)
{
    (void)state;
    tb_circuit *ckt = NULL;
    assert_int_equal(tb_circuit_parse("t\n", 2, "t.net", NULL, NULL), TB_ERR_USAGE);
    assert_int_equal(tb_circuit_parse(NULL, 3, "t.net", NULL, &ckt), TB_ERR_USAGE);
    assert_null(ckt);
    assert_int_equal(tb_circuit_read(NULL, NULL, &ckt), TB_ERR_USAGE);
    assert_int_equal(tb_circuit_read("x.net", NULL, NULL), TB_ERR_USAGE);
    /* no text at all is an empty netlist, which has nothing to analyse */
    tb_diag *diag = tb_diag_new();
    assert_int_equal(tb_circuit_parse(NULL, 0, NULL, diag, &ckt), TB_ERR_INPUT);
    assert_null(ckt);
    assert_string_equal(tb_diag_get(diag, 0)->file, "<input>");
    tb_diag_free(diag);
}

static void test_parse_read_file(void **state)
{
    (void)state;
    char path[] = "/tmp/tbeta-test-XXXXXX";
    int fd = mkstemp(path);
    assert_true(fd >= 0);
    const char *text = "\xEF\xBB\xBF Read from a file \r\nV1 a 0 AC 1\r\nE1 b 0 a 0 2\r\n.loop E1\r\n";
    assert_int_equal(write(fd, text, strlen(text)), (ssize_t)strlen(text));
    close(fd);
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    assert_int_equal(tb_circuit_read(path, diag, &ckt), TB_OK);
    assert_string_equal(ckt->title, "Read from a file");
    assert_string_equal(ckt->file, path);
    assert_int_equal(ckt->elem_count, 2);
    tb_circuit_free(ckt);
    tb_diag_free(diag);
    unlink(path);
}

static void test_parse_read_errors(void **state)
{
    (void)state;
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    assert_int_equal(tb_circuit_read("/nonexistent/amp.net", diag, &ckt), TB_ERR_IO);
    assert_null(ckt);
    assert_string_equal(formatted(diag, 0), "/nonexistent/amp.net: error: cannot read "
                                            "'/nonexistent/amp.net': No such file or directory\n");
    assert_int_equal(tb_diag_get(diag, 0)->line, 0);
    assert_int_equal(tb_circuit_read("tests", diag, &ckt), TB_ERR_IO);
    assert_string_equal(first_line(diag, 1), "tests: error: cannot read 'tests': not a regular file (a directory)");
    tb_diag_free(diag);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_parse_every_card),
        cmocka_unit_test(test_parse_ignores_case),
        cmocka_unit_test(test_parse_ground_names),
        cmocka_unit_test(test_parse_sources),
        cmocka_unit_test(test_parse_continuation),
        cmocka_unit_test(test_parse_line_ends),
        cmocka_unit_test(test_parse_end_stops_reading),
        cmocka_unit_test(test_parse_unknown_directive_warns),
        cmocka_unit_test(test_parse_default_ac),
        cmocka_unit_test(test_parse_errors),
        cmocka_unit_test(test_parse_value_range_ends),
        cmocka_unit_test(test_parse_error_caret),
        cmocka_unit_test(test_parse_escapes_user_text),
        cmocka_unit_test(test_parse_goes_on_after_errors),
        cmocka_unit_test(test_parse_cards_between_directives),
        cmocka_unit_test(test_parse_stops_after_20_errors),
        cmocka_unit_test(test_parse_margins),
        cmocka_unit_test(test_parse_margins_errors),
        cmocka_unit_test(test_parse_finish_stops_after_20_errors),
        cmocka_unit_test(test_parse_loop_limit),
        cmocka_unit_test(test_parse_long_lines),
        cmocka_unit_test(test_parse_usage),
        cmocka_unit_test(test_parse_read_file),
        cmocka_unit_test(test_parse_read_errors),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
