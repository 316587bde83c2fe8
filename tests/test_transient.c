/* tests/test_transient.c: TR-BDF2 with error control against closed-form step responses */
#include "testutil.h"

#include "mna.h"
#include "solve.h"
#include "transient.h"

/* A run of text's circuit; the caller frees *tr. */
static void run(const char *text, double h_first, double tol, tb_transient *tr)
{
    tb_circuit *ckt = tu_parse(text);
    tb_mna *mna = NULL;
    tb_solver *solver = NULL;
    assert_int_equal(tb_mna_build(ckt, NULL, &mna), TB_OK);
    assert_int_equal(tb_solver_new(mna, &solver), TB_OK);
    tb_transient_limits lim = {.h_first = h_first, .t_cap = 1.0, .tol = tol, .max_steps = 100000};
    assert_int_equal(tb_transient_run(mna, solver, &lim, tr), TB_OK);
    tb_solver_free(solver);
    tb_mna_free(mna);
    tb_circuit_free(ckt);
}

/* Largest |y_k - want(t_k)| over the samples after the first. */
static double worst_error(const tb_transient *tr, double (*want)(double))
{
    double worst = 0;
    for (size_t k = 1; k < tr->count; k++)
        worst = fmax(worst, fabs(tr->y[k] - want(tr->t[k])));
    return worst;
}

/* RC low-pass, tau = 1 ms: y = 1 - e^(-t/tau) (first-order circuit, common practice). */
static double rc_step(double t)
{
    return 1 - exp(-t / 1e-3);
}

static void test_transient_rc_closed_form(void **state)
{
    (void)state;
    tb_transient tr;
    run("rc\nVS in 0 AC 1\nR1 in out 1k\nC1 out 0 1u\nEX x 0 out 0 1\nRX x 0 1k\n.io VS v(out)\n.loop EX\n",
        1e-9, 3e-7, &tr);
    assert_true(tr.has_dc && tr.settled && !tr.diverged);
    tu_close(tr.y_dc, 1.0, 1e-12);
    double err = worst_error(&tr, rc_step);
    assert_true(err <= 1e-5);
    /* the summed estimate is not optimistic, nor far off (a wrong error constant would be) */
    assert_true(err <= tr.y_error && tr.y_error <= 20 * err);
    assert_true(tr.rejected <= 2);
    tu_close(tr.y[tr.count - 1], 1.0, 1e-5); /* it stops only once settled */
    tb_transient_free(&tr);
    tb_transient_free(NULL);
}

/* Second order: the local error per step is held at tol ~ h^3, so the global error goes as
 * h^2 ~ tol^(2/3): 1000 times tighter, 100 times smaller (common practice for an order-2 method). */
static void test_transient_second_order(void **state)
{
    (void)state;
    const char *text = "rc\nVS in 0 AC 1\nR1 in out 1k\nC1 out 0 1u\nEX x 0 out 0 1\nRX x 0 1k\n"
                       ".io VS v(out)\n.loop EX\n";
    tb_transient coarse, fine;
    run(text, 1e-9, 1e-6, &coarse);
    run(text, 1e-9, 1e-9, &fine);
    double ratio = worst_error(&coarse, rc_step) / worst_error(&fine, rc_step);
    assert_true(ratio >= 50 && ratio <= 200);
    tb_transient_free(&coarse);
    tb_transient_free(&fine);
}

/* Series RLC, R = 2 zeta sqrt(L/C) with zeta = 0.1, L = 1 mH, C = 1 uF: the voltage on C
 * follows the second-order step (Ogata, Modern Control Engineering, from memory):
 * y = 1 - e^(-zeta w0 t) (cos wd t + zeta/sqrt(1 - zeta^2) sin wd t). */
static double rlc_step(double t)
{
    double w0 = 1 / sqrt(1e-3 * 1e-6), zeta = 0.1, q = sqrt(1 - zeta * zeta), wd = w0 * q;
    return 1 - exp(-zeta * w0 * t) * (cos(wd * t) + zeta / q * sin(wd * t));
}

static void test_transient_rlc_closed_form(void **state)
{
    (void)state;
    tb_transient tr;
    run("rlc\nVS in 0 AC 1\nR1 in a 6.324555320336759\nL1 a out 1m\nC1 out 0 1u\nEX x 0 out 0 1\n"
        "RX x 0 1k\n.io VS v(out)\n.loop EX\n",
        1e-9, 3e-7, &tr);
    assert_true(tr.settled);
    double err = worst_error(&tr, rlc_step);
    assert_true(err <= 1e-4);
    assert_true(err <= tr.y_error && tr.y_error <= 20 * err);
    tb_transient_free(&tr);
}

/* R1 || C1 from in to out, R2 to ground: the output jumps to 1 at t = 0+ and decays to
 * G1/(G1 + G2) with tau = C1/(G1 + G2) (nodal analysis by hand). */
static double jump_step(double t)
{
    double G1 = 1e-3, G2 = 1.0 / 3e3, C1 = 1e-9, A0 = G1 / (G1 + G2);
    return A0 + (1 - A0) * exp(-t * (G1 + G2) / C1);
}

static void test_transient_jump_at_zero(void **state)
{
    (void)state;
    tb_transient tr;
    run("jump\nVS in 0 AC 1\nR1 in out 1k\nC1 in out 1n\nR2 out 0 3k\nEX x 0 out 0 1\nRX x 0 1k\n"
        ".io VS v(out)\n.loop EX\n",
        1e-9, 3e-7, &tr);
    assert_true(fabs(tr.y[0] - 1.0) <= 2e-3); /* one backward-Euler step of 1e-12 s: e^(-1e-12/tau) */
    assert_true(worst_error(&tr, jump_step) <= 1e-5);
    tb_transient_free(&tr);
}

/* A negative net conductance on the output (G1 injects 3 mA/V, the resistors take 2 mA/V):
 * the state grows as e^(t/tau); the run stops when it has grown 1000-fold. */
static void test_transient_diverges(void **state)
{
    (void)state;
    tb_transient tr;
    run("growing\nVS in 0 AC 1\nR0 in out 1k\nR1 out 0 1k\nC1 out 0 1u\nG1 0 out out 0 3m\n"
        ".io VS v(out)\n.loop G1\n",
        1e-9, 3e-7, &tr);
    assert_true(tr.diverged && !tr.settled);
    assert_true(fabs(tr.y[tr.count - 1]) > 100);
    tb_transient_free(&tr);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_transient_rc_closed_form),
        cmocka_unit_test(test_transient_second_order),
        cmocka_unit_test(test_transient_rlc_closed_form),
        cmocka_unit_test(test_transient_jump_at_zero),
        cmocka_unit_test(test_transient_diverges),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
