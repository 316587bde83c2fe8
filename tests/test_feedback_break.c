/* tests/test_feedback_break.c: loop gain at a wire break (Middlebrook's double injection) against closed forms.
 * Sources: R. D. Middlebrook, "Measurement of loop gain in feedback systems", Int. J. Electronics
 * 38(4), 1975 (title/journal/year confirmed; volume/pages from memory): 1/(1+T) = 1/(1+Tv) + 1/(1+Ti);
 * shared/references.md section 7, whose two-port forms (derived there) are recomputed here from the
 * element values: with Y the y-parameters of the rest of the circuit at the break (x: the side the
 * signal comes from, y: the side it goes on to), Tv = (Y12+Y22)/(Y11+Y21), Ti = (Y11+Y12)/(Y21+Y22),
 * T = (Y12 - Y21)/(Y11 + Y22 + 2 Y21). Check 7a: unilateral break, T equals Bode's return ratio of
 * the amplifier. Check 7b: bilateral break (a minor loop through Rmu), T differs from the return ratio. */
#include "testutil.h"

static tb_break_summary analyse_break(const char *text, tb_point *loop_dc, tb_circuit **ckt, tb_result **res)
{
    *res = tu_analyse(text, ckt);
    tb_break_summary s;
    assert_int_equal(tb_break_get(*res, &s, NULL), TB_OK);
    assert_true(s.computed && s.dc.has_T && s.dc.has_T_probe);
    assert_true(tb_result_dc(*res, 0, loop_dc));
    return s;
}

/* Check 7a: E1 v_x0 = a (0 - v_n), a = 1000; Ro x0-x; break x|y; R2 y-n; R1 n-0.
 * Y11 = 1/Ro, Y12 = a k/Ro (k = R1/(R1+R2)), Y21 = 0, Y22 = 1/(R1+R2);
 * Bode T of E1 = a k Rfb/(Ro + Rfb), Rfb = R1 + R2 (written out from the test-source procedure). */
static void test_feedback_break_unilateral(void **state)
{
    (void)state;
    tb_circuit *ckt = NULL;
    tb_result *res = NULL;
    tb_point p;
    tb_break_summary s = analyse_break("check 7a\nE1 x0 0 0 n 1000\nRo x0 x 1k\nVb x y 0\nR2 y n 9k\nR1 n 0 1k\n"
                                       ".ac dec 5 1 1meg\n.loop E1\n.break Vb\n",
                                       &p, &ckt, &res);
    double a = 1000, Ro = 1e3, R1 = 1e3, R2 = 9e3;
    double k = R1 / (R1 + R2);
    double Y11 = 1 / Ro, Y12 = a * k / Ro, Y21 = 0, Y22 = 1 / (R1 + R2);
    assert_true(s.dc.has_Tv && s.dc.has_Ti);
    tu_close(s.dc.Tv, (Y12 + Y22) / (Y11 + Y21), 1e-12);
    tu_close(s.dc.Ti, (Y11 + Y12) / (Y21 + Y22), 1e-12);
    double T = (Y12 - Y21) / (Y11 + Y22 + 2 * Y21);
    tu_close(s.dc.T, T, 1e-12);
    tu_close(s.dc.T_probe, T, 1e-12);
    tu_close(T, a * k * (R1 + R2) / (Ro + R1 + R2), 1e-12); /* the closed forms agree with each other */
    tu_close(p.T, T, 1e-12);                                /* and with the return ratio of E1 */
    /* either injection alone is wrong here (+10 % and x11) */
    assert_true(cabs(s.dc.Tv - T) > 0.09 * T && cabs(s.dc.Ti - T) > 10 * T);
    /* over frequency: a resistive loop, the same at every point */
    const tb_break_point *pts = NULL;
    assert_int_equal(tb_break_get(res, &s, &pts), TB_OK);
    for (size_t i = 0; i < tb_result_points(res); i++)
        tu_close(pts[i].T, T, 1e-12);
    tb_result_free(res);
    tb_circuit_free(ckt);
}

/* Check 7b at DC: r_pi = 5k y-0, gm = 20 mS (o to 0 by v_y), Rmu = 200k y-o, RD = 5k o-0, RF = 20k o-x,
 * R1 = 2k x-0, break x|y. Eliminating node o (Goo = GF + Gmu + GD):
 * Y11 = GF + G1 - GF^2/Goo, Y12 = -GF (Gmu - gm)/Goo, Y21 = -Gmu GF/Goo, Y22 = Gpi + Gmu - Gmu (Gmu - gm)/Goo.
 * Over frequency (Cy = 2 pF, Co = 1 pF) the same elimination with admittances Gpi + jwCy, GD + jwCo. */
static void test_feedback_break_bilateral(void **state)
{
    (void)state;
    tb_circuit *ckt = NULL;
    tb_result *res = NULL;
    tb_point p;
    tb_break_summary s = analyse_break("check 7b\nRpi y 0 5k\nCy y 0 2p\nG1 o 0 y 0 20m\nRmu y o 200k\nRD o 0 5k\n"
                                       "Co o 0 1p\nRF o x 20k\nR1 x 0 2k\nVb x y 0\n.ac dec 4 1k 10g\n.loop G1\n"
                                       ".break Vb\n",
                                       &p, &ckt, &res);
    const tb_break_point *pts = NULL;
    assert_int_equal(tb_break_get(res, &s, &pts), TB_OK);
    const double *f = tb_result_freqs(res);
    for (size_t i = 0; i <= tb_result_points(res); i++) {
        double w = i == 0 ? 0 : 2 * TU_PI * f[i - 1];
        const tb_break_point *bp = i == 0 ? &s.dc : &pts[i - 1];
        double gm = 20e-3, GF = 1 / 20e3, G1 = 1 / 2e3, Gmu = 1 / 200e3;
        double complex Ypi = 1 / 5e3 + I * w * 2e-12, YD = 1 / 5e3 + I * w * 1e-12;
        double complex Goo = GF + Gmu + YD;
        double complex Y11 = GF + G1 - GF * GF / Goo, Y12 = -GF * (Gmu - gm) / Goo;
        double complex Y21 = -Gmu * GF / Goo, Y22 = Ypi + Gmu - Gmu * (Gmu - gm) / Goo;
        double complex T = (Y12 - Y21) / (Y11 + Y22 + 2 * Y21);
        tu_close(bp->Tv, (Y12 + Y22) / (Y11 + Y21), 1e-10);
        tu_close(bp->Ti, (Y11 + Y12) / (Y21 + Y22), 1e-10);
        tu_close(bp->T, T, 1e-10);
        tu_close(bp->T_probe, T, 1e-10);
    }
    /* the return ratio of G1 excludes the reverse transmission through Rmu: it differs */
    assert_true(cabs(p.T - s.dc.T) > 0.5 * cabs(s.dc.T));
    tb_result_free(res);
    tb_circuit_free(ckt);
}

/* A one-pole loop broken at the wire: the unity crossing and phase margin of T at the break
 * equal those of the (unilateral) return ratio: T = T0/(1 + jf/fp), fc = fp sqrt(T0^2 - 1),
 * PM = 180 - atan(sqrt(T0^2 - 1)) (references.md section 4). Read on the grid: rel 1e-3. */
static void test_feedback_break_unity(void **state)
{
    (void)state;
    tb_circuit *ckt = NULL;
    tb_result *res = NULL;
    tb_point p;
    tb_break_summary s = analyse_break("one pole\nE1 x0 0 0 n 1000\nRp x0 m 1k\nCp m 0 1u\nE2 x 0 m 0 1\nVb x y 0\n"
                                       "R2 y n 9k\nR1 n 0 1k\n.ac dec 200 1 1meg\n.loop E1\n.break Vb\n",
                                       &p, &ckt, &res);
    double T0 = 100, fp = 1 / (2 * TU_PI * 1e3 * 1e-6);
    tu_close(s.dc.T, T0, 1e-12);
    /* x is driven by an ideal source (Y11 infinite): the current injection returns nothing
     * to the y side at DC, Ti is infinite (absent) and T = Tv */
    assert_false(s.dc.has_Ti);
    tu_close(s.dc.Tv, T0, 1e-12);
    assert_true(s.has_unity && s.has_phase_margin);
    tu_close(s.unity_hz, fp * sqrt(T0 * T0 - 1), 1e-3);
    tu_close(s.phase_margin_deg, 180 - atan(sqrt(T0 * T0 - 1)) * 180 / TU_PI, 1e-3);
    tb_result_free(res);
    tb_circuit_free(ckt);
}

/* text is refused when it is read, with want as its first diagnostic line. */
static void check_error(const char *text, const char *want)
{
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    assert_int_equal(tb_circuit_parse(text, strlen(text), "t.net", diag, &ckt), TB_ERR_INPUT);
    assert_null(ckt);
    char buf[512];
    tb_diag_format(diag, 0, buf, sizeof buf);
    buf[strcspn(buf, "\n")] = '\0';
    assert_string_equal(buf, want);
    tb_diag_free(diag);
}

/* .break must name an existing V source other than the .io input (checked when the netlist is read). */
static void test_feedback_break_errors(void **state)
{
    (void)state;
    check_error("b\nE1 x0 0 0 n 1000\nRo x0 y 1k\nR2 y n 9k\nR1 n 0 1k\n.ac dec 1 1 10\n.loop E1\n.break Vb\n",
                "t.net:8:1: error: .break names 'Vb', which does not exist");
    check_error("b\nE1 x0 0 0 n 1000\nRo x0 y 1k\nR2 y n 9k\nR1 n 0 1k\n.ac dec 1 1 10\n.loop E1\n.break Ro\n",
                "t.net:8:1: error: .break names 'Ro', a resistor; a zero-volt V source in the loop wire is expected");
    check_error("b\nVs in 0 AC 1\nE1 x0 0 in n 1000\nRo x0 y 1k\nR2 y n 9k\nR1 n 0 1k\n.ac dec 1 1 10\n.loop E1\n"
                ".io Vs v(y)\n.break Vs\n",
                "t.net:10:1: error: .break: 'Vs' is the .io input; mark a zero-volt source of its own");
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_feedback_break_unilateral),
        cmocka_unit_test(test_feedback_break_bilateral),
        cmocka_unit_test(test_feedback_break_unity),
        cmocka_unit_test(test_feedback_break_errors),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
