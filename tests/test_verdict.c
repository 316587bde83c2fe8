/* tests/test_verdict.c: an unstable loop says so first, with where it will oscillate; gains carry units */
#include "testutil.h"

#include <stdlib.h>

static tb_result *analyse_file(const char *path, tb_circuit **ckt)
{
    tb_diag *diag = tb_diag_new();
    tb_result *res = NULL;
    assert_int_equal(tb_circuit_read(path, diag, ckt), TB_OK);
    assert_int_equal(tb_analyse(*ckt, NULL, diag, &res), TB_OK);
    tb_diag_free(diag);
    return res;
}

/* Three equal poles at p = 2 pi 1 kHz, T0 = 10: (1 + s/p)^3 = -10, so the right-half-plane
 * pair is s/p = -1 + 10^(1/3) e^(+-j pi/3) (references.md section 4, check 4c / 8c): it
 * oscillates near 10^(1/3) sin(60 deg) kHz = 1.865795 kHz. */
static void test_verdict_oscillation_frequency(void **state)
{
    (void)state;
    tb_circuit *ckt = NULL;
    tb_result *res = analyse_file("tests/stab/stab_threepole_unstable.net", &ckt);
    tb_measures m;
    assert_int_equal(tb_measure_loop(res, 0, &m), TB_OK);
    assert_false(m.stability_shown);
    assert_true(m.has_oscillation);
    assert_false(m.runaway);
    double want = cbrt(10.0) * sin(TU_PI / 3.0) * 1e3;
    tu_close(m.oscillation_hz, want, 1e-6);
    char *text = NULL;
    size_t len = 0;
    FILE *out = open_memstream(&text, &len);
    assert_int_equal(tb_report_text(ckt, res, out), TB_OK);
    fclose(out);
    const char *loop = strstr(text, "loop at G1");
    const char *verdict = strstr(text, "verdict: UNSTABLE: it will oscillate near 1.8658 kHz");
    const char *dc = strstr(text, "at DC (f = 0)");
    assert_non_null(loop);
    assert_non_null(verdict);
    assert_non_null(dc);
    assert_true(loop < verdict && verdict < dc); /* the verdict before any figure */
    assert_non_null(strstr(text, "[assumes a stable loop]"));
    free(text);
    tb_result_free(res);
    tb_circuit_free(ckt);
}

/* A real right-half-plane pole (positive feedback at DC, stated in the netlist's header):
 * no oscillation frequency, the output runs away. */
static void test_verdict_runaway(void **state)
{
    (void)state;
    tb_circuit *ckt = NULL;
    tb_result *res = analyse_file("tests/stab/stab_positive_feedback_rhp.net", &ckt);
    tb_measures m;
    assert_int_equal(tb_measure_loop(res, 0, &m), TB_OK);
    assert_false(m.stability_shown);
    assert_false(m.has_oscillation);
    assert_true(m.runaway);
    tb_result_free(res);
    tb_circuit_free(ckt);
}

/* A stable loop: nothing is marked. */
static void test_verdict_stable(void **state)
{
    (void)state;
    tb_circuit *ckt = NULL;
    tb_result *res = analyse_file("netlists/twopole_opamp_follower.net", &ckt);
    tb_measures m;
    assert_int_equal(tb_measure_loop(res, 0, &m), TB_OK);
    assert_true(m.stability_shown);
    assert_false(m.has_oscillation || m.runaway);
    tb_result_free(res);
    tb_circuit_free(ckt);
}

/* The gain's unit follows from .io (common practice): current in, voltage out is a
 * transimpedance (ohm, beta in S); voltage in, current out a transconductance (S, beta in
 * ohm); like quantities a ratio. */
static void test_verdict_gain_units(void **state)
{
    (void)state;
    static const struct {
        const char *io;
        const char *gain, *beta;
    } cases[] = {
        {"VS v(y)", "", ""},
        {"IS v(y)", "ohm", "S"},
        {"VS i(VM)", "S", "ohm"},
        {"IS i(VM)", "", ""},
    };
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        char text[512];
        snprintf(text, sizeof text,
                 "units\nVS in 0 AC 1\nIS 0 in AC 0\nR1 in x 1k\nE1 y 0 0 x 1000\nR2 y x 10k\nVM y z 0\nRL z 0 1k\n"
                 ".loop E1\n.io %s\n.ac dec 5 1 1k\n.end\n",
                 cases[i].io);
        tb_circuit *ckt = tu_parse(text);
        assert_string_equal(tb_circuit_gain_unit(ckt), cases[i].gain);
        assert_string_equal(tb_circuit_beta_unit(ckt), cases[i].beta);
        tb_circuit_free(ckt);
    }
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_verdict_oscillation_frequency),
        cmocka_unit_test(test_verdict_runaway),
        cmocka_unit_test(test_verdict_stable),
        cmocka_unit_test(test_verdict_gain_units),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
