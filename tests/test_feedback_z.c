/* tests/test_feedback_z.c: Blackman's impedance formula and the feedback topology against closed forms.
 * Source: R. B. Blackman, "Effect of feedback on impedance", Bell Syst. Tech. J. 22(3), 1943
 * (author/year confirmed, issue/pages from memory), Z = Z0 (1 + T_sc)/(1 + T_oc);
 * shared/references.md section 3, checks 3a-3d, whose closed forms are recomputed here from the
 * element values. Z is also checked against the direct driving-point solve (to 1e-9), Z0 against
 * a separate analysis with the source's gain at zero, and T_sc against the return ratio of a
 * separate netlist with the port shorted by a zero-volt source. */
#include "testutil.h"

typedef struct {
    tb_circuit *ckt;
    tb_result *res;
} run;

static tb_zport_summary port(const char *text, size_t p, run *r)
{
    r->res = tu_analyse(text, &r->ckt);
    tb_zport_summary s;
    assert_int_equal(tb_zport_loop(r->res, p, 0, &s, NULL), TB_OK);
    assert_true(s.dc.has_Z && s.dc.has_Z0 && s.dc.has_T_sc && s.dc.has_T_oc && s.dc.has_blackman);
    /* Blackman against the direct driving-point solve, at DC and every sweep point */
    tu_close(s.dc.Z_blackman, s.dc.Z, 1e-9);
    const tb_zpoint *pts = NULL;
    assert_int_equal(tb_zport_loop(r->res, p, 0, &s, &pts), TB_OK);
    for (size_t i = 0; i < tb_result_points(r->res); i++)
        tu_close(pts[i].Z_blackman, pts[i].Z, 1e-9);
    assert_true(s.has_max_diff && s.max_rel_diff <= 1e-9);
    return s;
}

static void done(run *r)
{
    tb_result_free(r->res);
    tb_circuit_free(r->ckt);
}

/* The loop's T at DC of a separate netlist. */
static double complex loop_T(const char *text)
{
    tb_circuit *ckt = NULL;
    tb_result *res = tu_analyse(text, &ckt);
    tb_point p;
    assert_true(tb_result_dc(res, 0, &p));
    tb_result_free(res);
    tb_circuit_free(ckt);
    return p.T;
}

/* Check 1 circuit (references.md): Rs = 1k, RF = RD = 10k, gm = 10 mS. */
#define SHUNT_SHUNT "Vs vs 0 AC 1\nRs vs g 1k\nRF g d 10k\nRD d 0 10k\n"
static const double Rs = 1e3, RF = 10e3, RD = 10e3, gm = 10e-3;

/* Check 3a: Zout at d, vs shorted: Z0 = RD || (RF + Rs), T_sc = 0 (d shorted: v_g = 0),
 * T_oc = gm RD Rs/(Rs + RF + RD), Z = Z0/(1 + T_oc) (= 1/1.1 mS). */
static void test_feedback_z_shunt_shunt_output(void **state)
{
    (void)state;
    run r;
    tb_zport_summary s = port("check 3a\n" SHUNT_SHUNT "G1 d 0 g 0 10m\n.ac dec 3 1 1meg\n.loop G1\n"
                              ".zport in v(g)\n.zport out v(d)\n", 1, &r);
    double Z0 = tu_par(RD, RF + Rs);
    double Toc = gm * RD * Rs / (Rs + RF + RD);
    tu_close(s.dc.Z0, Z0, 1e-12);
    assert_true(cabs(s.dc.T_sc) <= 1e-12);
    tu_close(s.dc.T_oc, Toc, 1e-12);
    tu_close(s.dc.Z, Z0 / (1 + Toc), 1e-12);
    assert_int_equal(s.side, TB_SIDE_SHUNT);
    /* shunt at both ports: a transresistance amplifier */
    tb_feedback_type ft;
    assert_int_equal(tb_feedback_type_loop(r.res, 0, &ft), TB_OK);
    assert_true(ft.computed);
    assert_int_equal(ft.input, TB_SIDE_SHUNT);
    assert_int_equal(ft.output, TB_SIDE_SHUNT);
    assert_int_equal(ft.type, TB_AMP_TRANSRESISTANCE);
    /* Z0 against the same circuit with gm = 0, solved directly */
    run r0;
    tb_zport_summary s0 = port("gm at zero\n" SHUNT_SHUNT "G1 d 0 g 0 0\n.ac dec 3 1 1meg\n.loop G1\n"
                               ".zport out v(d)\n", 0, &r0);
    tu_close(s.dc.Z0, s0.dc.Z, 1e-12);
    done(&r0);
    done(&r);
}

/* Check 3b: Zin at g with the Rs branch removed: Z0 = RF + RD, T_sc = 0, T_oc = gm RD,
 * Z = (RF + RD)/(1 + gm RD). */
static void test_feedback_z_shunt_shunt_input(void **state)
{
    (void)state;
    run r;
    tb_zport_summary s = port("check 3b\nRF g d 10k\nRD d 0 10k\nG1 d 0 g 0 10m\n.ac dec 3 1 1meg\n.loop G1\n"
                              ".zport in v(g)\n", 0, &r);
    tu_close(s.dc.Z0, RF + RD, 1e-12);
    assert_true(cabs(s.dc.T_sc) <= 1e-12);
    tu_close(s.dc.T_oc, gm * RD, 1e-12);
    tu_close(s.dc.Z, (RF + RD) / (1 + gm * RD), 1e-12);
    done(&r);
}

/* Check 3c: emitter degeneration, Zin at the base: r_pi = 2.5k, RE = 100, gm = 40 mS, RC = 1k.
 * Z0 = r_pi + RE, T_oc = 0 (base open: v_be = 0), T_sc = gm (RE || r_pi),
 * Z = r_pi + (1 + gm r_pi) RE. T_sc is also the return ratio of the netlist with b grounded. */
static void test_feedback_z_series_input(void **state)
{
    (void)state;
    run r;
    const char *text = "check 3c\nRpi b e 2.5k\nRE e 0 100\nG1 c e b e 40m\nRC c 0 1k\n.ac dec 3 1 1meg\n"
                       ".loop G1\n.zport in v(b)\n";
    tb_zport_summary s = port(text, 0, &r);
    double rpi = 2.5e3, RE = 100, g = 40e-3;
    tu_close(s.dc.Z0, rpi + RE, 1e-12);
    assert_true(cabs(s.dc.T_oc) <= 1e-12);
    tu_close(s.dc.T_sc, g * tu_par(RE, rpi), 1e-12);
    tu_close(s.dc.Z, rpi + (1 + g * rpi) * RE, 1e-12);
    assert_int_equal(s.side, TB_SIDE_SERIES);
    tu_close(s.dc.T_sc, loop_T("3c shorted\nRpi b e 2.5k\nRE e 0 100\nG1 c e b e 40m\nRC c 0 1k\nVsh b 0 0\n"
                               ".ac dec 3 1 1meg\n.loop G1\n"), 1e-12);
    done(&r);
}

/* Check 3d: the same stage with ro = 50k c-e, base grounded, Zout at the collector (no RC):
 * Z0 = ro + RE || r_pi, T_oc = 0, T_sc = gm (RE || r_pi || ro), Z = ro + RE' + gm ro RE',
 * RE' = RE || r_pi. */
static void test_feedback_z_series_output(void **state)
{
    (void)state;
    run r;
    tb_zport_summary s = port("check 3d\nRpi 0 e 2.5k\nRE e 0 100\nG1 c e 0 e 40m\nRo c e 50k\n"
                              ".ac dec 3 1 1meg\n.loop G1\n.zport out v(c)\n", 0, &r);
    double rpi = 2.5e3, RE = 100, g = 40e-3, ro = 50e3;
    double REp = tu_par(RE, rpi);
    tu_close(s.dc.Z0, ro + REp, 1e-12);
    assert_true(cabs(s.dc.T_oc) <= 1e-12);
    tu_close(s.dc.T_sc, g * tu_par(REp, ro), 1e-12);
    tu_close(s.dc.Z, ro + REp + g * ro * REp, 1e-12);
    assert_int_equal(s.side, TB_SIDE_SERIES);
    done(&r);
}

/* Series-series: emitter-degenerated stage with ro, driven through Rs = 1k, ports at the base and
 * the collector (RC = 1k as the load). Feedback raises both impedances (|1 + T_sc| > |1 + T_oc|);
 * Rs and RC carry part of the loop, so neither side is pure. */
static void test_feedback_z_series_series(void **state)
{
    (void)state;
    run r;
    r.res = tu_analyse("series-series\nVs vs 0 AC 1\nRs vs b 1k\nRpi b e 2.5k\nRE e 0 100\nG1 c e b e 40m\n"
                       "Ro c e 50k\nRC c 0 1k\n.ac dec 3 1 1meg\n.loop G1\n.io Vs v(c)\n"
                       ".zport in v(b)\n.zport out v(c)\n",
                       &r.ckt);
    tb_feedback_type ft;
    assert_int_equal(tb_feedback_type_loop(r.res, 0, &ft), TB_OK);
    assert_true(ft.computed);
    assert_int_equal(ft.input, TB_SIDE_SERIES);
    assert_int_equal(ft.output, TB_SIDE_SERIES);
    assert_int_equal(ft.type, TB_AMP_TRANSCONDUCTANCE);
    for (size_t p = 0; p < 2; p++) {
        tb_zport_summary s;
        assert_int_equal(tb_zport_loop(r.res, p, 0, &s, NULL), TB_OK);
        tu_close(s.dc.Z_blackman, s.dc.Z, 1e-9);
    }
    done(&r);
}

/* Series-shunt (references.md check 2a' circuit): shorting the output kills the feedback
 * (T_sc = 0 at out: shunt), and at the non-inverting input the feedback raises the
 * impedance: a voltage amplifier. */
static void test_feedback_z_series_shunt(void **state)
{
    (void)state;
    run r;
    r.res = tu_analyse("series-shunt\nVs vs 0 AC 1\nRs vs p 10k\nRi p n 100k\nE1 x 0 p n 1000\nRo x out 1k\n"
                       "RL out 0 2k\nR2 out n 9k\nR1 n 0 1k\n.ac dec 3 1 1meg\n.loop E1\n.io Vs v(out)\n"
                       ".zport in v(p)\n.zport out v(out)\n",
                       &r.ckt);
    tb_feedback_type ft;
    assert_int_equal(tb_feedback_type_loop(r.res, 0, &ft), TB_OK);
    assert_int_equal(ft.input, TB_SIDE_SERIES);
    assert_int_equal(ft.output, TB_SIDE_SHUNT);
    assert_int_equal(ft.type, TB_AMP_VOLTAGE);
    tb_zport_summary s;
    assert_int_equal(tb_zport_loop(r.res, 1, 0, &s, NULL), TB_OK);
    assert_true(cabs(s.dc.T_sc) <= 1e-12);
    assert_true(s.purity <= 1e-12);
    /* output: Z0 = Ro || RL || (R2 + R1 || (Ri + Rs)) with the amplifier's gain at zero */
    tu_close(s.dc.Z0, 1 / (1 / 1e3 + 1 / 2e3 + 1 / (9e3 + tu_par(1e3, 110e3))), 1e-12);
    tu_close(s.dc.Z_blackman, s.dc.Z, 1e-9);
    done(&r);
}

/* A port at the input source's terminals (references.md check 2b' circuit, inverting): the
 * impedance Vs sees. Derived here (written out): with a = 0 the amplifier output e is at ground, so
 * Z0 = Rs + R1 + Ri || (R2 + Ro); with feedback node n sees Gi + (1 + a)/(R2 + Ro) (no load at out),
 * so Z = Rs + R1 + 1/(Gi + (1 + a)/(R2 + Ro)). Vs as it is shorts the port: T_sc = T of check 2b';
 * with Vs open node n sees Ri alone: T_oc = a Ri/(Ro + R2 + Ri). Shorting lowers the loop gain, so
 * the feedback lowers the impedance: shunt. */
static void test_feedback_z_source_port(void **state)
{
    (void)state;
    run r;
    tb_zport_summary s = port("source port\nVs vs 0 AC 1\nRs vs s 1k\nR1 s n 1k\nR2 n out 10k\nRi n 0 10k\n"
                              "E1 e 0 0 n 1000\nRo e out 1k\n.ac dec 3 1 1meg\n.loop E1\n.io Vs v(out)\n"
                              ".zport in i(Vs)\n",
                              0, &r);
    double a = 1000, Rsrc = 1e3, R1 = 1e3, R2 = 10e3, Ri = 10e3, Ro = 1e3;
    assert_true(s.at_source);
    tu_close(s.dc.Z0, Rsrc + R1 + tu_par(Ri, R2 + Ro), 1e-12);
    tu_close(s.dc.Z, Rsrc + R1 + 1 / (1 / Ri + (1 + a) / (R2 + Ro)), 1e-12);
    tu_close(s.dc.T_sc, a * tu_par(Ri, R1 + Rsrc) / (Ro + R2 + tu_par(Ri, R1 + Rsrc)), 1e-12);
    tu_close(s.dc.T_oc, a * Ri / (Ro + R2 + Ri), 1e-10);
    assert_int_equal(s.side, TB_SIDE_SHUNT);
    done(&r);
}

/* A frequency-dependent loop: Blackman against the direct solve over the sweep
 * (checked in port()), with capacitors on both sides. */
static void test_feedback_z_over_frequency(void **state)
{
    (void)state;
    run r;
    port("reactive shunt-shunt\n" SHUNT_SHUNT "Cg g 0 1n\nCd d 0 2n\nCf g d 100p\nG1 d 0 g 0 10m\n"
         ".ac dec 10 1 100meg\n.loop G1\n.zport out v(d)\n",
         0, &r);
    done(&r);
}

/* A .zport node that does not exist is an error when the netlist is read, with its place
 * and the closest node. */
static void test_feedback_z_missing_node(void **state)
{
    (void)state;
    const char *text = "missing\n" SHUNT_SHUNT "G1 d 0 g 0 10m\n.ac dec 1 1 10\n.loop G1\n.zport out v(dd)\n";
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    assert_int_equal(tb_circuit_parse(text, strlen(text), "t.net", diag, &ckt), TB_ERR_INPUT);
    assert_null(ckt);
    char buf[512];
    tb_diag_format(diag, 0, buf, sizeof buf);
    buf[strcspn(buf, "\n")] = '\0';
    assert_string_equal(buf, "t.net:9:1: error: .zport out: node 'dd' does not exist (did you mean 'd'?)");
    tb_diag_free(diag);
}

static void test_feedback_z_words(void **state)
{
    (void)state;
    assert_string_equal(tb_side_str(TB_SIDE_SERIES), "series");
    assert_string_equal(tb_amp_type_str(TB_AMP_VOLTAGE), "voltage amplifier (series-shunt feedback)");
    tb_feedback_type ft;
    assert_int_equal(tb_feedback_type_loop(NULL, 0, &ft), TB_ERR_USAGE);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_feedback_z_shunt_shunt_output),
        cmocka_unit_test(test_feedback_z_shunt_shunt_input),
        cmocka_unit_test(test_feedback_z_series_input),
        cmocka_unit_test(test_feedback_z_series_output),
        cmocka_unit_test(test_feedback_z_series_series),
        cmocka_unit_test(test_feedback_z_series_shunt),
        cmocka_unit_test(test_feedback_z_source_port),
        cmocka_unit_test(test_feedback_z_over_frequency),
        cmocka_unit_test(test_feedback_z_missing_node),
        cmocka_unit_test(test_feedback_z_words),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
