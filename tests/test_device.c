/* tests/test_device.c: Q and M cards expanded into their small-signal parts (names, nodes,
 * values, parts left out), in subcircuits too, and an error inside an instance */
#include <stdlib.h>

#include "testutil.h"

#include "circuit.h"

/* VT = k T/q with the SI's exact k and q (BIPM, the SI brochure, 9th edition). */
static double thermal_voltage(double celsius)
{
    return 1.380649e-23 * (celsius + 273.15) / 1.602176634e-19;
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
    if (strcmp(name, "0") == 0)
        return 0;
    assert_true(tb_circuit_find_node(ckt, name, strlen(name), &index));
    return index;
}

static bool has_element(const tb_circuit *ckt, const char *name)
{
    size_t i = 0;
    return tb_circuit_find_element(ckt, name, &i);
}

/* Part `name` is of `kind` between nodes a and b and has value v (relative 1e-15). */
static void part(const tb_circuit *ckt, const char *name, tb_elem_kind kind, const char *a,
                 const char *b, double v)
{
    const tb_element *e = elem_of(ckt, name);
    assert_int_equal(e->kind, kind);
    assert_int_equal(e->node[0], node_of(ckt, a));
    assert_int_equal(e->node[1], node_of(ckt, b));
    if (!(fabs(e->value - v) <= 1e-15 * fabs(v)))
        print_error("%s = %.17g, want %.17g\n", name, e->value, v);
    assert_true(fabs(e->value - v) <= 1e-15 * fabs(v));
}

/* The hybrid-pi model (Gray, Hurst, Lewis and Meyer, Analysis and Design of Analog Integrated
 * Circuits, chapter 1, from memory): gm = IC/VT, r_pi = beta/gm, r_o = VA/IC,
 * C_pi = gm/(2 pi fT) - C_mu, r_b into an internal base node. */
static void test_device_bipolar_parts(void **state)
{
    (void)state;
    tb_circuit *ckt = tu_parse("t\nV1 in 0 AC 1\nR1 in b 1k\n"
                               "Q1 c b e s icq=2m beta=80 vearly=25 ft=400meg cmu=1p rbb=60 ccs=0.5p tj=50\n"
                               "Rc c 0 1k\nRe e 0 50\nRs s 0 1\n.loop Q1\n");
    double gm = 2e-3 / thermal_voltage(50);
    const tb_element *g = elem_of(ckt, "Q1");
    assert_int_equal(g->kind, TB_EL_G);
    assert_int_equal(g->node[0], node_of(ckt, "c"));
    assert_int_equal(g->node[1], node_of(ckt, "e"));
    assert_int_equal(g->node[2], node_of(ckt, "Q1.bi"));
    assert_int_equal(g->node[3], node_of(ckt, "e"));
    assert_true(fabs(g->value - gm) <= 1e-15 * gm);
    part(ckt, "Q1.rpi", TB_EL_R, "Q1.bi", "e", 80 / gm);
    part(ckt, "Q1.ro", TB_EL_R, "c", "e", 25 / 2e-3);
    part(ckt, "Q1.cpi", TB_EL_C, "Q1.bi", "e", gm / (2 * TU_PI * 400e6) - 1e-12);
    part(ckt, "Q1.cmu", TB_EL_C, "Q1.bi", "c", 1e-12);
    part(ckt, "Q1.rbb", TB_EL_R, "b", "Q1.bi", 60);
    part(ckt, "Q1.ccs", TB_EL_C, "c", "s", 0.5e-12);
    tb_circuit_free(ckt);
}

/* Only what is given: no r_o without vearly, no C_pi without ft or cpi, no internal node
 * without rbb; the default temperature is 25 degrees C. */
static void test_device_bipolar_minimal(void **state)
{
    (void)state;
    tb_circuit *ckt = tu_parse("t\nV1 b 0 AC 1\nQ1 c b 0 icq=1m beta=100\nRc c 0 1k\n.loop Q1\n");
    double gm = 1e-3 / thermal_voltage(25);
    part(ckt, "Q1", TB_EL_G, "c", "0", gm);
    assert_int_equal(elem_of(ckt, "Q1")->node[2], node_of(ckt, "b"));
    part(ckt, "Q1.rpi", TB_EL_R, "b", "0", 100 / gm);
    assert_false(has_element(ckt, "Q1.ro"));
    assert_false(has_element(ckt, "Q1.cpi"));
    assert_false(has_element(ckt, "Q1.rbb"));
    int ignored = 0;
    assert_false(tb_circuit_find_node(ckt, "Q1.bi", 5, &ignored));
    tb_circuit_free(ckt);
}

/* Square law (Sedra and Smith, Microelectronic Circuits, from memory): gm = 2 ID/Vov,
 * gds = lambda ID, gmb = chi gm, C_gs = gm/(2 pi fT) - C_gd. */
static void test_device_mosfet_square_law(void **state)
{
    (void)state;
    tb_circuit *ckt = tu_parse("t\nV1 g 0 AC 1\n"
                               "M1 d g s b id=150u vov=0.3 clm=0.1 chi=0.2 ft=1g cgd=10f cdb=30f csb=40f\n"
                               "Rd d 0 10k\nRs s 0 1k\nRb b 0 1\n.loop M1\n");
    double gm = 2 * 150e-6 / 0.3;
    part(ckt, "M1", TB_EL_G, "d", "s", gm);
    assert_int_equal(elem_of(ckt, "M1")->node[2], node_of(ckt, "g"));
    part(ckt, "M1.gmb", TB_EL_G, "d", "s", 0.2 * gm);
    assert_int_equal(elem_of(ckt, "M1.gmb")->node[2], node_of(ckt, "b"));
    assert_int_equal(elem_of(ckt, "M1.gmb")->node[3], node_of(ckt, "s"));
    part(ckt, "M1.ro", TB_EL_R, "d", "s", 1 / (0.1 * 150e-6));
    part(ckt, "M1.cgs", TB_EL_C, "g", "s", gm / (2 * TU_PI * 1e9) - 10e-15);
    part(ckt, "M1.cgd", TB_EL_C, "g", "d", 10e-15);
    part(ckt, "M1.cdb", TB_EL_C, "d", "b", 30e-15);
    part(ckt, "M1.csb", TB_EL_C, "s", "b", 40e-15);
    tb_circuit_free(ckt);
}

/* Inside a subcircuit the parts and the internal node take the instance path, the keys
 * take the instance's parameters, and .loop names the transconductance hierarchically. */
static void test_device_in_subcircuit(void **state)
{
    (void)state;
    tb_circuit *ckt = tu_parse("t\n.subckt st in out ic=1m\nQ1 out in 0 icq={ic} beta=50 rbb=10\n"
                               "Rc out 0 1k\n.ends\nV1 a 0 AC 1\nR1 a b 1k\nX1 b c st ic=0.5m\n"
                               "X2 c d st\nRf d b 10k\n.loop X1.Q1 X2.Q1\n");
    part(ckt, "X1.Q1", TB_EL_G, "c", "0", 0.5e-3 / thermal_voltage(25));
    assert_int_equal(elem_of(ckt, "X1.Q1")->node[2], node_of(ckt, "X1.Q1.bi"));
    part(ckt, "X2.Q1", TB_EL_G, "d", "0", 1e-3 / thermal_voltage(25));
    part(ckt, "X1.Q1.rbb", TB_EL_R, "b", "X1.Q1.bi", 10);
    size_t loop = 0;
    assert_int_equal(tb_circuit_find_loop(ckt, "X2.Q1", &loop), TB_OK);
    tb_circuit_free(ckt);
}

/* An error inside an instance stands at the key in the definition, with the instance
 * chain under it. */
static void test_device_error_in_instance(void **state)
{
    (void)state;
    const char *text = "t\n.subckt st in out\nQ1 out in 0 icq=1m beta=50 ft=1g cmu=7p\n.ends\n"
                       "V1 a 0 AC 1\nX1 a b st\nRb b 0 1k\n";
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    assert_int_equal(tb_circuit_parse(text, strlen(text), "t.net", diag, &ckt), TB_ERR_INPUT);
    assert_null(ckt);
    char buf[2048];
    tb_diag_format(diag, 0, buf, sizeof buf);
    assert_string_equal(buf, "t.net:3:31: error: X1.Q1 has a negative Cpi: gm/(2*pi*ft) = "
                             "6.19459e-12 F is less than cmu = 7e-12 F (ft is too high for this icq "
                             "and cmu)\n  in instance X1 (t.net:6)\n"
                             "  Q1 out in 0 icq=1m beta=50 ft=1g cmu=7p\n"
                             "                                ^\n");
    tb_diag_free(diag);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_device_bipolar_parts),
        cmocka_unit_test(test_device_bipolar_minimal),
        cmocka_unit_test(test_device_mosfet_square_law),
        cmocka_unit_test(test_device_in_subcircuit),
        cmocka_unit_test(test_device_error_in_instance),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
