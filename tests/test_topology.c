/* tests/test_topology.c: structural checks before solving (floating nodes, loops of sources
 * and inductors, dangling nodes), their limits, and the numerically singular message.
 * Each expected diagnostic is written out in full with its position; the errors also
 * have fixtures in tests/bad/. Whether a structure is singular follows from the MNA
 * equations (docs/algebra.md): a group of nodes whose common voltage shift changes no
 * equation, or a loop of branches whose circulating current changes none. */
#include <stdlib.h>

#include "testutil.h"

#include "circuit.h"

/* Parses text as "t.net"; the status, with the diagnostics in *diag_out. */
static tb_status parse(const char *text, tb_diag **diag_out, tb_circuit **ckt)
{
    *diag_out = tb_diag_new();
    assert_non_null(*diag_out);
    *ckt = NULL;
    return tb_circuit_parse(text, strlen(text), "t.net", *diag_out, ckt);
}

/* Diagnostic i is sev at line:col (0:0 for the whole file) with exactly this message. */
static void expect_diag(const tb_diag *diag, size_t i, tb_severity sev, int line, int col,
                        const char *message)
{
    const tb_diag_entry *e = tb_diag_get(diag, i);
    if (!e) {
        tu_print_diags(diag);
        print_error("no diagnostic %zu\n", i);
        fail();
    }
    if (e->severity != sev || e->line != line || e->col != col || strcmp(e->message, message)) {
        tu_print_diags(diag);
        print_error("diagnostic %zu: want %s at %d:%d: %s\n", i,
                    sev == TB_SEV_ERROR ? "error" : "warning", line, col, message);
        fail();
    }
}

/* An AC-coupled input with no bias resistor: node a has no DC path, the
 * warning says so once (the sweep adds no second word about DC) and DC values
 * come from the lowest sweep point. */
static void test_topology_dc_floating_input(void **state)
{
    (void)state;
    tb_diag *diag = NULL;
    tb_circuit *ckt = NULL;
    const char *text = "ac-coupled input, no bias resistor\n"
                       "Vin in 0 AC 1\n"
                       "C1 in a 1u\n"
                       "E1 o 0 a fb 1e3\n"
                       "R1 o fb 9k\n"
                       "R2 fb 0 1k\n"
                       ".loop E1\n"
                       ".io Vin v(o)\n"
                       ".ac dec 1 10 1k\n";
    assert_int_equal(parse(text, &diag, &ckt), TB_OK);
    assert_int_equal(tb_diag_count(diag), 1);
    expect_diag(diag, 0, TB_SEV_WARNING, 3, 1,
                "no DC path to ground from node 'a' (only capacitors or current sources lead "
                "to it: C1): DC is singular, DC values are taken at the lowest sweep frequency");
    assert_true(ckt->dc_singular);
    tb_result *res = NULL;
    assert_int_equal(tb_analyse(ckt, NULL, diag, &res), TB_OK);
    assert_int_equal(tb_diag_count(diag), 1);
    tb_point dc;
    assert_false(tb_result_dc(res, 0, &dc));
    tb_result_free(res);
    tb_circuit_free(ckt);
    tb_diag_free(diag);
}

/* A group of nodes tied to the rest only through capacitors and a current source. */
static void test_topology_dc_floating_group(void **state)
{
    (void)state;
    tb_diag *diag = NULL;
    tb_circuit *ckt = NULL;
    const char *text = "floating bias network\n"
                       "Vin in 0 AC 1\n"
                       "R1 in x 1k\n"
                       "G1 x 0 x 0 1m\n"    /* a diode-connected transconductor: 1 kohm */
                       "E1 o 0 x 0 -4\n"
                       "R2 o x 4k\n"
                       "Cc x b1 1n\n"
                       "Rb b1 b2 10k\n"
                       "Ib 0 b2 1u\n"
                       "Cd b2 0 1n\n"
                       ".loop E1\n"
                       ".io Vin v(o)\n"
                       ".ac dec 1 10 1k\n";
    assert_int_equal(parse(text, &diag, &ckt), TB_OK);
    assert_int_equal(tb_diag_count(diag), 1);
    expect_diag(diag, 0, TB_SEV_WARNING, 7, 1,
                "no DC path to ground from nodes 'b1', 'b2' (only capacitors or current sources "
                "lead to them: Cc, Ib, Cd): DC is singular, DC values are taken at the lowest "
                "sweep frequency");
    tb_circuit_free(ckt);
    tb_diag_free(diag);
}

/* V with L, L with L, and an L on one node: each singular at DC only. */
static void test_topology_inductor_loops(void **state)
{
    (void)state;
    tb_diag *diag = NULL;
    tb_circuit *ckt = NULL;
    const char *text = "inductor loops\n"
                       "V1 a 0 AC 1\n"
                       "R1 a x 1k\n"
                       "E1 o 0 x 0 -2\n"
                       "R2 o x 2k\n"
                       "L1 a 0 1m\n"
                       "L2 o y 1m\n"
                       "  L3 y o 2m\n"
                       "R3 y 0 1k\n"
                       "L4 x x 1u\n"
                       ".loop E1\n"
                       ".io V1 v(o)\n"
                       ".ac dec 1 10 1k\n";
    assert_int_equal(parse(text, &diag, &ckt), TB_OK);
    assert_int_equal(tb_diag_count(diag), 3);
    expect_diag(diag, 0, TB_SEV_WARNING, 6, 1,
                "loop of voltage sources and inductors: V1, L1: singular at DC, DC values are "
                "taken at the lowest sweep frequency");
    expect_diag(diag, 1, TB_SEV_WARNING, 8, 3,
                "loop of inductors: L2, L3: singular at DC, DC values are taken at the lowest "
                "sweep frequency");
    expect_diag(diag, 2, TB_SEV_WARNING, 10, 1,
                "L4 has both terminals on node 'x': a shorted inductor, singular at DC, DC "
                "values are taken at the lowest sweep frequency");
    assert_true(ckt->dc_singular);
    tb_result *res = NULL;
    assert_int_equal(tb_analyse(ckt, NULL, diag, &res), TB_OK);
    assert_int_equal(tb_diag_count(diag), 3);
    tb_result_free(res);
    tb_circuit_free(ckt);
    tb_diag_free(diag);
}

/* A resistor with one end on a node of its own: warned, located at its card. */
static void test_topology_dangling(void **state)
{
    (void)state;
    tb_diag *diag = NULL;
    tb_circuit *ckt = NULL;
    const char *text = "typo in a node name\n"
                       "Vin in 0 AC 1\n"
                       "R1 in x 1k\n"
                       "E1 out 0 0 x 1e4\n"
                       "R2 out x 10k\n"
                       "  Rload outt 0 2k\n"
                       ".loop E1\n"
                       ".io Vin v(out)\n"
                       ".ac dec 1 10 1k\n";
    assert_int_equal(parse(text, &diag, &ckt), TB_OK);
    assert_int_equal(tb_diag_count(diag), 1);
    expect_diag(diag, 0, TB_SEV_WARNING, 6, 3,
                "node 'outt' is touched by only one element (Rload): a dangling connection?");
    tb_circuit_free(ckt);
    tb_diag_free(diag);
}

/* No warning for an open voltage-source output (a measurement E source), for
 * the .io output node behind a resistor, nor for a node a controlling input senses. */
static void test_topology_quiet_on_probes(void **state)
{
    (void)state;
    tb_diag *diag = NULL;
    tb_circuit *ckt = NULL;
    const char *text = "probes\n"
                       "Vin in 0 AC 1\n"
                       "R1 in x 1k\n"
                       "E1 out 0 0 x 1e4\n"
                       "R2 out x 10k\n"
                       "Ediff d 0 out x 1\n"  /* d: measurement output, nothing else */
                       "Rp out probe 1meg\n"  /* probe: the .io output */
                       "Rs out s 1k\n"        /* s: sensed by G1 */
                       "G1 z 0 s 0 1m\n"
                       "Rz z 0 1k\n"
                       ".loop E1\n"
                       ".io Vin v(probe)\n"
                       ".ac dec 1 10 1k\n";
    assert_int_equal(parse(text, &diag, &ckt), TB_OK);
    assert_int_equal(tb_diag_count(diag), 0);
    assert_false(ckt->dc_singular);
    tb_circuit_free(ckt);
    tb_diag_free(diag);
}

/* At most TB_TOPOLOGY_MAX_REPORTS (10) of a kind, then one line with the rest. */
static void test_topology_limits(void **state)
{
    (void)state;
    char text[4000] = "many\nVin in 0 AC 1\nR1 in x 1k\nE1 o 0 0 x 10\nR2 o x 10k\n";
    for (int i = 1; i <= 13; i++)
        snprintf(text + strlen(text), sizeof text - strlen(text), "Rd%d o d%d 1k\n", i, i);
    strcat(text, ".loop E1\n.io Vin v(o)\n.ac dec 1 10 1k\n");
    tb_diag *diag = NULL;
    tb_circuit *ckt = NULL;
    assert_int_equal(parse(text, &diag, &ckt), TB_OK);
    assert_int_equal(tb_diag_count(diag), 11);
    expect_diag(diag, 9, TB_SEV_WARNING, 15, 1,
                "node 'd10' is touched by only one element (Rd10): a dangling connection?");
    expect_diag(diag, 10, TB_SEV_WARNING, 0, 0, "... and 3 more nodes touched by only one element");
    tb_circuit_free(ckt);
    tb_diag_free(diag);

    /* 12 nodes on current sources alone: 10 errors and the count of the rest */
    char bad[4000] = "many floating\nVin in 0 AC 1\nR1 in x 1k\nE1 o 0 0 x 10\nR2 o x 10k\n";
    for (int i = 1; i <= 12; i++)
        snprintf(bad + strlen(bad), sizeof bad - strlen(bad), "I%d 0 f%d 1u\n", i, i);
    strcat(bad, ".loop E1\n.io Vin v(o)\n.ac dec 1 10 1k\n");
    assert_int_equal(parse(bad, &diag, &ckt), TB_ERR_INPUT);
    assert_null(ckt);
    assert_int_equal(tb_diag_count(diag), 11);
    expect_diag(diag, 0, TB_SEV_ERROR, 6, 1,
                "node 'f1' has no path to ground through any element that conducts or fixes a "
                "voltage: it is connected only through current sources (I1)");
    expect_diag(diag, 10, TB_SEV_ERROR, 0, 0,
                "... and 2 more groups of nodes with no path to ground");
    tb_diag_free(diag);
}

/* A loop of 10^5 + 1 inductors (no recursion anywhere): the first 8 named. */
static void test_topology_long_loop(void **state)
{
    (void)state;
    enum { N = 100000 };
    size_t size = (size_t)N * 40 + 200;
    char *text = malloc(size);
    assert_non_null(text);
    size_t n = (size_t)snprintf(text, size, "long\nVin in 0 AC 1\nR1 in x 1k\nE1 o 0 0 x 10\n"
                                            "R2 o x 10k\n");
    for (int i = 1; i <= N; i++)
        n += (size_t)snprintf(text + n, size - n, "L%d n%d n%d 1u\n", i, i - 1, i);
    n += (size_t)snprintf(text + n, size - n, "Lb n%d 0 1u\nLa n0 0 1u\nRn n0 o 1k\n"
                                              ".loop E1\n.ac dec 1 10 1k\n", N);
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    assert_int_equal(tb_circuit_parse(text, n, "t.net", diag, &ckt), TB_OK);
    assert_int_equal(tb_diag_count(diag), 1);
    expect_diag(diag, 0, TB_SEV_WARNING, N + 7, 1,
                "loop of inductors: L1, L2, L3, L4, L5, L6, L7, L8 and 99994 more: singular at "
                "DC, DC values are taken at the lowest sweep frequency");
    tb_circuit_free(ckt);
    tb_diag_free(diag);
    free(text);
}

/* V1 and E1 in parallel, but F1 reads V1's current: the loop's circulating
 * current reaches F1 and E1's row reads v(x), so the matrix need not be
 * singular, and here is not: v(a) = 1, v(x) = v(a)/2 = 0.5 (E1), and F1 takes
 * the current that R1 needs (hand solution of the four equations). */
static void test_topology_sensed_loop_not_reported(void **state)
{
    (void)state;
    tb_circuit *ckt = NULL;
    tb_result *res = tu_analyse("sensed loop\n"
                                "V1 a 0 AC 1\n"
                                "E1 a 0 x 0 2\n"
                                "F1 x 0 V1 1\n"
                                "R1 x 0 1k\n"
                                ".loop E1\n"
                                ".io V1 v(x)\n"
                                ".ac dec 1 10 100\n",
                                &ckt);
    tu_close(tb_result_loop(res, 0)[0].A, 0.5, 1e-12);
    tb_result_free(res);
    tb_circuit_free(ckt);
}

/* A second .loop name is not offered the one already marked; a close one is. */
static void test_topology_loop_suggestions(void **state)
{
    (void)state;
    tb_diag *diag = NULL;
    tb_circuit *ckt = NULL;
    const char *text = "two\nVin in 0 AC 1\nR1 in x 1k\nE1 o 0 0 x 10\nR2 o x 10k\n"
                       "E2 p 0 o 0 1\nRp p 0 1k\n.loop E1 E3 Ex\n";
    assert_int_equal(parse(text, &diag, &ckt), TB_ERR_INPUT);
    expect_diag(diag, 0, TB_SEV_ERROR, 8, 10,
                ".loop names 'E3', which does not exist (did you mean 'E2'?)");
    expect_diag(diag, 1, TB_SEV_ERROR, 8, 13,
                ".loop names 'Ex', which does not exist (did you mean 'E2'?)");
    tb_diag_free(diag);
    text = "two\nVin in 0 AC 1\nR1 in x 1k\nE1 o 0 0 x 10\nR2 o x 10k\n.loop E1 E2\n";
    assert_int_equal(parse(text, &diag, &ckt), TB_ERR_INPUT);
    expect_diag(diag, 0, TB_SEV_ERROR, 6, 10, ".loop names 'E2', which does not exist");
    tb_diag_free(diag);
}

/* Singular by its values, not its structure: a follower of gain -1 in its own
 * loop has T = 1 at every frequency... with k = -1, v(o) = -(v(i) - v(o)) gives
 * 0 = -v(i): the return difference is zero. Reported at the first frequency,
 * with an SI prefix. */
static void singular_at(const char *ac, const char *want)
{
    char text[512];
    snprintf(text, sizeof text, "zero return difference\nVin i 0 AC 1\nE1 o 0 i o -1\n"
                                "Rl o 0 1k\n.loop E1\n.io Vin v(o)\n%s\n", ac);
    tb_diag *diag = NULL;
    tb_circuit *ckt = NULL;
    assert_int_equal(parse(text, &diag, &ckt), TB_OK);
    assert_int_equal(tb_diag_count(diag), 0);
    tb_result *res = NULL;
    assert_int_equal(tb_analyse(ckt, NULL, diag, &res), TB_ERR_SINGULAR);
    assert_null(res);
    expect_diag(diag, 0, TB_SEV_ERROR, 0, 0, want);
    tb_circuit_free(ckt);
    tb_diag_free(diag);
}

static void test_topology_numeric_singular(void **state)
{
    (void)state;
    singular_at(".ac lin 1 2.5meg 2.5meg",
                "the circuit matrix is singular at 2.5 MHz (zero pivot at the branch current of "
                "E1): element values make the equations dependent there, e.g. a loop whose "
                "return difference 1 + T is zero");
    singular_at(".ac dec 2 0.25 10",
                "the circuit matrix is singular at 250 mHz (zero pivot at the branch current of "
                "E1): element values make the equations dependent there, e.g. a loop whose "
                "return difference 1 + T is zero");
}

/* Singular at DC by its values (1k || -500 || 1k is infinite): the sweep's warning. */
static void test_topology_numeric_singular_dc(void **state)
{
    (void)state;
    tb_diag *diag = NULL;
    tb_circuit *ckt = NULL;
    const char *text = "negative resistor cancels at DC\nVin in 0 AC 1\nR1 in a 1k\nR2 a 0 1k\n"
                       "Rn a 0 -500\nC1 a 0 1n\nE1 o 0 a 0 2\nR3 o 0 1k\n.loop E1\n"
                       ".io Vin v(o)\n.ac dec 2 1k 100k\n";
    assert_int_equal(parse(text, &diag, &ckt), TB_OK);
    assert_false(ckt->dc_singular);
    tb_result *res = NULL;
    assert_int_equal(tb_analyse(ckt, NULL, diag, &res), TB_OK);
    assert_int_equal(tb_diag_count(diag), 1);
    expect_diag(diag, 0, TB_SEV_WARNING, 0, 0,
                "the circuit matrix is singular at DC (zero pivot at the branch current of Vin): "
                "element values make the equations dependent there, e.g. a loop whose return "
                "difference 1 + T is zero; DC values are those at the lowest sweep frequency");
    tb_result_free(res);
    tb_circuit_free(ckt);
    tb_diag_free(diag);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_topology_dc_floating_input),
        cmocka_unit_test(test_topology_dc_floating_group),
        cmocka_unit_test(test_topology_inductor_loops),
        cmocka_unit_test(test_topology_dangling),
        cmocka_unit_test(test_topology_quiet_on_probes),
        cmocka_unit_test(test_topology_limits),
        cmocka_unit_test(test_topology_long_loop),
        cmocka_unit_test(test_topology_sensed_loop_not_reported),
        cmocka_unit_test(test_topology_loop_suggestions),
        cmocka_unit_test(test_topology_numeric_singular),
        cmocka_unit_test(test_topology_numeric_singular_dc),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
