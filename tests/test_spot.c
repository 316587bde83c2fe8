/* tests/test_spot.c: the figures at chosen frequencies (tb_options.at_hz) against closed forms.
 * Circuit: a one-pole amplifier a(s) = a0/(1 + s R1 C1) (E1 driving R1 into C1, buffered by E2)
 * in a non-inverting loop with beta = Rg/(Rf + Rg). Closed forms (common practice, from the
 * circuit's node equations): T = a(s) beta, A = a(s)/(1 + a(s) beta), A_inf = 1/beta, A0 = 0
 * (E1 at zero gain leaves x at 0 V); the breakdown against G = 1/beta (shared/references.md
 * section 2): loading A_inf - G = 0, finite loop gain -A_inf/(1 + T), feedthrough 0; the
 * impedance at node y: a test current meets R1 to x = -a0 beta v_y and C1, so
 * Z = 1/((1 + a0 beta)/R1 + s C1) and, at zero gain, Z0 = 1/(1/R1 + s C1). The frequencies lie
 * on no grid point of the .ac sweep, so only fresh solves there can give these values. */
#include "testutil.h"

static const double a0 = 1e4, R1 = 1e3, C1 = 1.5e-7, beta = 0.1;

static const char one_pole[] = "spot closed form\n"
                               "V1 in 0 AC 1\n"
                               "E1 x 0 in fb 1e4\n"
                               "R1 x y 1k\n"
                               "C1 y 0 150n\n"
                               "E2 out 0 y 0 1\n"
                               "Rf out fb 9k\n"
                               "Rg fb 0 1k\n"
                               ".ac dec 5 10 1meg\n"
                               ".loop E1\n"
                               ".io V1 v(out)\n"
                               ".ideal gain=10\n"
                               ".zport py v(y)\n";

static tb_result *analyse_at(const char *text, const double *at, size_t count, tb_circuit **ckt, tb_status *st)
{
    *ckt = tu_parse(text);
    tb_options opt;
    tb_options_init(&opt);
    opt.at_hz = at;
    opt.at_count = count;
    tb_diag *diag = tb_diag_new();
    tb_result *res = NULL;
    *st = tb_analyse(*ckt, &opt, diag, &res);
    tb_diag_free(diag);
    return res;
}

static void test_spot_closed_form(void **state)
{
    (void)state;
    static const double at[] = {1234.5, 28284.27, 0.0, 3.3e6}; /* the last is above the sweep */
    tb_circuit *ckt = NULL;
    tb_status st;
    tb_result *res = analyse_at(one_pole, at, 4, &ckt, &st);
    assert_int_equal(st, TB_OK);
    assert_int_equal(tb_spot_count(res), 4);
    for (size_t i = 0; i < 4; i++) {
        tb_spot s;
        assert_int_equal(tb_spot_get(res, i, 0, &s), TB_OK);
        assert_true(s.solved && s.has_T && s.has_T_db);
        assert_true(s.f_hz == at[i]);
        double complex sj = I * 2.0 * TU_PI * at[i];
        double complex a = a0 / (1.0 + sj * R1 * C1);
        double complex T = a * beta;
        tu_close(s.pt.T, T, 1e-10);
        tu_close(s.return_difference, cabs(1.0 + T), 1e-10);
        tu_close(s.T_db, 20.0 * log10(cabs(T)), 1e-10);
        /* the branch of the sweep's unwrapped phase: a one-pole loop stays within (-90, 0] */
        tu_close(s.T_phase_deg, carg(T) * 180.0 / TU_PI, 1e-10);
        tu_close(s.pt.A, a / (1.0 + a * beta), 1e-10);
        tu_close(s.pt.A_inf, 1.0 / beta, 1e-10);
        assert_true(cabs(s.pt.A0) <= 1e-12);
        assert_true(s.breakdown.has_parts);
        assert_true(cabs(s.breakdown.part[TB_PART_LOADING]) <= 1e-12);
        tu_close(s.breakdown.part[TB_PART_LOOP_GAIN], -(1.0 / beta) / (1.0 + T), 1e-10);
        assert_true(cabs(s.breakdown.part[TB_PART_FEEDTHROUGH]) <= 1e-12);
        assert_int_equal(s.ports, 1);
        assert_true(s.zports[0].has_Z && s.zports[0].has_Z0 && s.zports[0].has_blackman);
        tu_close(s.zports[0].Z, 1.0 / ((1.0 + a0 * beta) / R1 + sj * C1), 1e-10);
        tu_close(s.zports[0].Z0, 1.0 / (1.0 / R1 + sj * C1), 1e-10);
        tu_close(s.zports[0].Z_blackman, s.zports[0].Z, 1e-10);
    }
    tb_spot s;
    assert_int_equal(tb_spot_get(res, 4, 0, &s), TB_ERR_USAGE);
    assert_int_equal(tb_spot_get(res, 0, 1, &s), TB_ERR_USAGE);
    assert_int_equal(tb_spot_get(NULL, 0, 0, &s), TB_ERR_USAGE);
    tb_result_free(res);
    tb_circuit_free(ckt);
}

/* A node reached through capacitors only: M(0) is singular, so DC is reported as not solved
 * while a chosen frequency above it is (T = a0 beta C1/(C1 + C2) from the divider, flat). */
static void test_spot_singular_at_dc(void **state)
{
    (void)state;
    static const double at[] = {0.0, 777.0};
    tb_circuit *ckt = NULL;
    tb_status st;
    tb_result *res = analyse_at("capacitive input\nV1 in 0 AC 1\nC1 in a 1n\nC2 a 0 1n\nE1 out 0 a fb 100\n"
                                "R1 out fb 1k\nR2 fb 0 1k\n.ac dec 5 10 1meg\n.loop E1\n.io V1 v(out)\n",
                                at, 2, &ckt, &st);
    assert_int_equal(st, TB_OK);
    tb_spot s;
    assert_int_equal(tb_spot_get(res, 0, 0, &s), TB_OK);
    assert_false(s.solved);
    assert_int_equal(tb_spot_get(res, 1, 0, &s), TB_OK);
    assert_true(s.solved);
    tu_close(s.pt.T, 100.0 * 0.5, 1e-10);
    tu_close(s.pt.A, 0.5 * 100.0 / (1.0 + 100.0 * 0.5), 1e-10);
    tb_result_free(res);
    tb_circuit_free(ckt);
}

/* Lists the library refuses: negative, not finite, too long, or a count without a list. */
static void test_spot_refused(void **state)
{
    (void)state;
    static double at[TB_AT_MAX + 1];
    const double bad[] = {-1.0, NAN, INFINITY};
    for (size_t i = 0; i < 3; i++) {
        tb_circuit *ckt = NULL;
        tb_status st;
        tb_result *res = analyse_at(one_pole, &bad[i], 1, &ckt, &st);
        assert_int_equal(st, TB_ERR_USAGE);
        assert_null(res);
        tb_circuit_free(ckt);
    }
    tb_circuit *ckt = NULL;
    tb_status st;
    assert_null(analyse_at(one_pole, at, TB_AT_MAX + 1, &ckt, &st));
    assert_int_equal(st, TB_ERR_USAGE);
    tb_circuit_free(ckt);
    assert_null(analyse_at(one_pole, NULL, 1, &ckt, &st));
    assert_int_equal(st, TB_ERR_USAGE);
    tb_circuit_free(ckt);
    /* none asked: none stored */
    tb_result *res = analyse_at(one_pole, NULL, 0, &ckt, &st);
    assert_int_equal(st, TB_OK);
    assert_int_equal(tb_spot_count(res), 0);
    tb_result_free(res);
    tb_circuit_free(ckt);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_spot_closed_form),
        cmocka_unit_test(test_spot_singular_at_dc),
        cmocka_unit_test(test_spot_refused),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
