/* tests/test_winding.c: right-half-plane counts by the argument principle (src/winding.c) on closed forms */
#include "testutil.h"

#include "sweep.h"
#include "winding.h"

typedef struct {
    tb_circuit *ckt;
    tb_diag *diag;
    tb_sweep *sw;
} fixture;

static fixture open_netlist(const char *text)
{
    fixture fx = {tu_parse(text), tb_diag_new(), NULL};
    assert_int_equal(tb_sweep_new(fx.ckt, 1e-6, 1, fx.diag, &fx.sw), TB_OK);
    return fx;
}

static void close_netlist(fixture *fx)
{
    tb_sweep_free(fx->sw);
    tb_diag_free(fx->diag);
    tb_circuit_free(fx->ckt);
}

/* x: C to ground, R to ground, a VCCS k v(x) into x (negative conductance when k > 0) and
 * the loop source GL drawing g v(x) out of x. det M(s) = s C + 1/R - k + g, one zero at
 * s = -(1/R - k + g)/C; det M0(s) = s C + 1/R - k (closed forms). */
static const char one_node[] = "one node with a loop\n"
                               "IS 0 x AC 1\nCx x 0 1n\nRx x 0 1k\nGn 0 x x 0 %g\nGL x 0 x 0 %g\n"
                               ".loop GL\n.ac dec 10 1k 1meg\n.end\n";

static tb_winding count_one_node(double k, double g)
{
    char text[512];
    snprintf(text, sizeof text, one_node, k, g);
    fixture fx = open_netlist(text);
    tb_winding w;
    assert_int_equal(tb_winding_run(tb_sweep_probe(fx.sw), 0, 1e3, 1e6, &w), TB_OK);
    close_netlist(&fx);
    return w;
}

static void test_winding_one_real_zero(void **state)
{
    (void)state;
    /* stable both ways: 1/R - k = 0.5 mS > 0 */
    tb_winding w = count_one_node(0.5e-3, 1e-3);
    assert_true(w.closed.counted && w.open.counted);
    assert_int_equal(w.closed.degree, 1);
    assert_int_equal(w.closed.rhp, 0);
    assert_int_equal(w.open.rhp, 0);
    assert_true(fabs(w.closed.half_turns - 0.5) < 0.01); /* one left-half-plane zero: +pi/2 */
    /* open loop unstable (1/R - k = -1 mS), closed loop stable (+1 mS) */
    w = count_one_node(2e-3, 2e-3);
    assert_int_equal(w.closed.rhp, 0);
    assert_int_equal(w.open.rhp, 1);
    assert_true(fabs(w.open.half_turns + 0.5) < 0.01);
    /* both unstable */
    w = count_one_node(2e-3, 0.5e-3);
    assert_int_equal(w.closed.rhp, 1);
    assert_int_equal(w.open.rhp, 1);
    assert_int_equal(w.closed.at_origin, 0);
    assert_int_equal(w.closed.on_axis, 0);
}

/* An integrator: with GL at zero, node x has only Cx (det M0(s) = s C, a zero at the
 * origin, not in the right half-plane); GL closes it to s C + g. */
static void test_winding_origin(void **state)
{
    (void)state;
    fixture fx = open_netlist("integrator closed by its loop\nIS 0 x AC 1\nCx x 0 1n\nGL x 0 x 0 1m\n"
                              ".loop GL\n.ac dec 10 1k 1meg\n.end\n");
    tb_winding w;
    assert_int_equal(tb_winding_run(tb_sweep_probe(fx.sw), 0, 1e3, 1e6, &w), TB_OK);
    assert_true(w.closed.counted && w.open.counted);
    assert_int_equal(w.open.at_origin, 1);
    assert_int_equal(w.open.rhp, 0);
    assert_int_equal(w.open.degree, 1);
    assert_int_equal(w.closed.at_origin, 0);
    assert_int_equal(w.closed.rhp, 0);
    close_netlist(&fx);
}

static void test_winding_usage(void **state)
{
    (void)state;
    char text[512];
    snprintf(text, sizeof text, one_node, 0.5e-3, 1e-3);
    fixture fx = open_netlist(text);
    tb_winding w;
    tb_probe *probe = tb_sweep_probe(fx.sw);
    assert_int_equal(tb_winding_run(probe, 1, 1e3, 1e6, &w), TB_ERR_USAGE); /* one loop only */
    assert_int_equal(tb_winding_run(probe, 0, 0.0, 1e6, &w), TB_ERR_USAGE);
    assert_int_equal(tb_winding_run(probe, 0, 1e6, 1e3, &w), TB_ERR_USAGE);
    assert_int_equal(tb_winding_run(NULL, 0, 1e3, 1e6, &w), TB_ERR_USAGE);
    close_netlist(&fx);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_winding_one_real_zero),
        cmocka_unit_test(test_winding_origin),
        cmocka_unit_test(test_winding_usage),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
