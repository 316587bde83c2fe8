/* tests/test_resonance.c: a lossless resonance exactly on a grid frequency, where T is infinite:
 * the infinite point is reported as such, the unity crossings on either side of it are found, and
 * the phase and the phase margin follow one convention whatever the grid */
#include "testutil.h"

#include <stdlib.h>

/* The fixtures (tests/stab/tank_on_grid_*.net): a transconductance gm = 1 mS across a parallel
 * tank L = 1 mH, C = 1/((2 pi 1 kHz)^2 L), with 1 kHz a point of every grid. T is the return
 * ratio of a source across its own load, T = gm Z = gm / (jwC + 1/(jwL)) (Bode's return ratio;
 * the tank's admittance from elementary circuit theory, common practice): infinite at
 * f0 = 1/(2 pi sqrt(LC)) = 1 kHz, +90 degrees below it and -90 degrees above. |T| = 1 where
 * gm w L = |1 - w^2 L C|: with x = f/f0 and a = gm w0 L, x = (-a + sqrt(a^2 + 4))/2 below and
 * (a + sqrt(a^2 + 4))/2 above (the roots of x^2 +- a x - 1 = 0). */
#define GM 1e-3
#define L_H 1e-3
#define F0 1000.0

static const char *const fixtures[] = {
    "tests/stab/tank_on_grid_dec.net",      /* .ac dec 10 100 10k */
    "tests/stab/tank_on_grid_dec_fine.net", /* .ac dec 1000 100 10k */
    "tests/stab/tank_on_grid_lin.net",      /* .ac lin 201 10 2010 */
    "tests/stab/tank_on_grid_lin_fine.net", /* .ac lin 20001 10 2010 */
};
#define FIXTURES (sizeof fixtures / sizeof fixtures[0])

static tb_result *analyse_file(const char *path, bool stability, tb_circuit **ckt)
{
    tb_diag *diag = tb_diag_new();
    assert_int_equal(tb_circuit_read(path, diag, ckt), TB_OK);
    tb_options opt;
    tb_options_init(&opt);
    opt.stability = stability;
    tb_result *res = NULL;
    tb_status st = tb_analyse(*ckt, &opt, diag, &res);
    if (st != TB_OK)
        tu_print_diags(diag);
    assert_int_equal(st, TB_OK);
    tb_diag_free(diag);
    return res;
}

static double crossing_hz(int side)
{
    double a = GM * 2.0 * TU_PI * F0 * L_H;
    return F0 * (side * a + sqrt(a * a + 4.0)) / 2.0;
}

static void close_rel(double got, double want, double rel, const char *what, const char *path)
{
    if (!(fabs(got - want) <= rel * fabs(want)))
        fail_msg("%s: %s is %.12g, closed form %.12g", path, what, got, want);
}

/* Both unity crossings at their closed-form frequencies, phases +90 and -90 (never 270 or
 * 450), margins -90 and +90 wrapped as everywhere; the headline (a tie) the lower one, the
 * same in the measures; no "never crosses" note; the infinite point counted. */
static void test_resonance_on_grid_point_crossings_found(void **state)
{
    (void)state;
    for (size_t k = 0; k < FIXTURES; k++) {
        tb_circuit *ckt = NULL;
        tb_result *res = analyse_file(fixtures[k], true, &ckt);
        tb_stability st;
        tb_measures m;
        assert_int_equal(tb_stability_loop(res, 0, &st), TB_OK);
        assert_int_equal(tb_measure_loop(res, 0, &m), TB_OK);
        assert_int_equal(st.unity_count, 2);
        assert_false(st.notes & (1u << TB_SNOTE_NO_UNITY));
        close_rel(st.unity[0].hz, crossing_hz(-1), 1e-9, "the rising crossing", fixtures[k]);
        close_rel(st.unity[1].hz, crossing_hz(+1), 1e-9, "the falling crossing", fixtures[k]);
        assert_int_equal(st.unity[0].direction, 1);
        assert_int_equal(st.unity[1].direction, -1);
        close_rel(st.unity[0].phase_deg, 90.0, 1e-9, "the phase below f0", fixtures[k]);
        close_rel(st.unity[1].phase_deg, -90.0, 1e-9, "the phase above f0", fixtures[k]);
        close_rel(st.unity[0].margin, -90.0, 1e-9, "the margin below f0", fixtures[k]);
        close_rel(st.unity[1].margin, 90.0, 1e-9, "the margin above f0", fixtures[k]);
        assert_true(st.has_phase_margin);
        assert_int_equal(st.phase_margin_index, 0);
        assert_true(m.has_phase_margin && m.phase_margin_deg == st.phase_margin_deg);
        assert_true(m.unity_hz == st.unity[0].hz);
        assert_int_equal(m.t_inf_points, 1);
        close_rel(m.t_inf_first_hz, F0, 1e-12, "the infinite point", fixtures[k]);
        assert_true(m.notes & (1u << TB_NOTE_T_INF_SWEEP));
        tb_result_free(res);
        tb_circuit_free(ckt);
    }
}

/* Without the stability analysis the grid estimate (the lowest grid segment where |T| falls
 * through 1) gives its phase margin wrapped into (-180, 180] too: +90 here, never 450. */
static void test_resonance_grid_margin_wrapped(void **state)
{
    (void)state;
    for (size_t k = 0; k < FIXTURES; k++) {
        tb_circuit *ckt = NULL;
        tb_result *res = analyse_file(fixtures[k], false, &ckt);
        tb_measures m;
        assert_int_equal(tb_measure_loop(res, 0, &m), TB_OK);
        assert_true(m.has_unity && m.has_phase_margin);
        assert_true(m.unity_hz > F0 && m.unity_hz < 1.3 * F0);
        close_rel(m.phase_margin_deg, 90.0, 1e-6, "the grid phase margin", fixtures[k]);
        tb_result_free(res);
        tb_circuit_free(ckt);
    }
}

/* The sweep table: the row at f0 leaves T, a, A0, dB and phase empty and its note says T is
 * infinite there; every other row is complete (note empty); each phase is +90 below f0 and
 * -90 above (one convention: the phase falls by 180 degrees past the pole); no nan or inf. */
static void test_resonance_csv_says_infinite(void **state)
{
    (void)state;
    for (size_t k = 0; k < FIXTURES; k++) {
        tb_circuit *ckt = NULL;
        tb_result *res = analyse_file(fixtures[k], false, &ckt);
        FILE *f = tmpfile();
        assert_non_null(f);
        assert_int_equal(tb_report_csv(ckt, res, 0, f), TB_OK);
        rewind(f);
        char line[1024];
        assert_non_null(fgets(line, sizeof line, f));
        assert_non_null(strstr(line, ",T_phase_deg,note\n"));
        size_t infinite = 0, rows = 0;
        while (fgets(line, sizeof line, f)) {
            rows++;
            assert_null(strstr(line, "nan"));
            assert_null(strstr(line, "inf,"));
            double fr = strtod(line, NULL);
            const char *note = strrchr(line, ',') + 1;
            if (fr == F0) {
                infinite++;
                assert_non_null(strstr(line, "1000,,,"));
                assert_int_equal(strncmp(note, "T infinite here", 15), 0);
                continue;
            }
            assert_string_equal(note, "\n");
            /* the phase: the 13th field */
            const char *c = line;
            for (int field = 0; field < 12; field++)
                c = strchr(c, ',') + 1;
            close_rel(strtod(c, NULL), fr < F0 ? 90.0 : -90.0, 1e-9, "a phase of the table", fixtures[k]);
        }
        assert_int_equal(infinite, 1);
        assert_int_equal(rows, tb_result_points(res));
        fclose(f);
        tb_result_free(res);
        tb_circuit_free(ckt);
    }
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_resonance_on_grid_point_crossings_found),
        cmocka_unit_test(test_resonance_grid_margin_wrapped),
        cmocka_unit_test(test_resonance_csv_says_infinite),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
