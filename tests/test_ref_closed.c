/* tests/test_ref_closed.c: tbeta against published closed forms of feedback amplifiers.
 * Sources (see shared/references.md): the asymptotic-gain model, S. Rosenstark,
 * "A simplified method of feedback amplifier analysis", IEEE Trans. Educ. E-17(4),
 * 1974 (from memory), A = A_inf T/(1+T) + A0/(1+T); Bode's return ratio (H. W. Bode,
 * Network Analysis and Feedback Amplifier Design, 1945); single-pole bandwidth
 * extension f_cl = f_ol (1 + T0) (references.md section 4). Each expected value is
 * computed here from the circuit's element values by the closed form written
 * beside it, never copied from tbeta. */
#include "testutil.h"

static tb_point dc_of(const char *text)
{
    tb_circuit *ckt = NULL;
    tb_result *res = tu_analyse(text, &ckt);
    tb_point p;
    assert_true(tb_result_dc(res, 0, &p));
    tb_result_free(res);
    tb_circuit_free(ckt);
    return p;
}

/* references.md check 2a: ideal non-inverting VCVS stage, a = 1000, R2 = 9k, R1 = 1k:
 * T = a R1/(R1+R2), A_inf = 1 + R2/R1, A0 = 0. */
static void test_ref_closed_noninverting_ideal(void **state)
{
    (void)state;
    tb_point p = dc_of("ideal non-inverting\nVs in 0 AC 1\nE1 out 0 in n 1000\n"
                       "R2 out n 9k\nR1 n 0 1k\n.ac dec 1 1 10\n.loop E1\n.io Vs v(out)\n");
    double a = 1000, R1 = 1e3, R2 = 9e3;
    double T = a * R1 / (R1 + R2);
    double Ainf = 1 + R2 / R1;
    tu_close(p.T, T, 1e-12);
    tu_close(p.A_inf, Ainf, 1e-12);
    assert_true(cabs(p.A0) <= 1e-15);
    tu_close(p.A, Ainf * T / (1 + T), 1e-12);
}

/* references.md check 2a': non-inverting with Rs, Ri, Ro, RL (loaded beta):
 * Rfb = R2 + R1||(Ri+Rs); T = a [RL||Rfb/(Ro+RL||Rfb)] [R1||(Ri+Rs)/Rfb] [Ri/(Ri+Rs)];
 * A_inf = 1 + R2/R1; A0 = [Rn/(Rs+Ri+Rn)] [(Ro||RL)/(R2+Ro||RL)], Rn = R1||(R2+Ro||RL). */
static void test_ref_closed_noninverting_loaded(void **state)
{
    (void)state;
    tb_point p = dc_of("loaded non-inverting\nVs vs 0 AC 1\nRs vs p 10k\nRi p n 100k\n"
                       "E1 x 0 p n 1000\nRo x out 1k\nRL out 0 2k\nR2 out n 9k\nR1 n 0 1k\n"
                       ".ac dec 1 1 10\n.loop E1\n.io Vs v(out)\n");
    double a = 1000, Rs = 10e3, Ri = 100e3, Ro = 1e3, RL = 2e3, R2 = 9e3, R1 = 1e3;
    double Rfb = R2 + tu_par(R1, Ri + Rs);
    double T = a * (tu_par(RL, Rfb) / (Ro + tu_par(RL, Rfb))) * (tu_par(R1, Ri + Rs) / Rfb) * (Ri / (Ri + Rs));
    double Ainf = 1 + R2 / R1;
    double Rn = tu_par(R1, R2 + tu_par(Ro, RL));
    double A0 = (Rn / (Rs + Ri + Rn)) * (tu_par(Ro, RL) / (R2 + tu_par(Ro, RL)));
    tu_close(p.T, T, 1e-12);
    tu_close(p.A_inf, Ainf, 1e-12);
    tu_close(p.A0, A0, 1e-11);
    tu_close(p.A, (Ainf * T + A0) / (1 + T), 1e-12);
    tu_close(p.a, Ainf * T, 1e-12);
}

/* references.md check 2b': inverting stage with Rs, finite Ri and Ro:
 * A_inf = -R2/(Rs+R1) (the source resistance is part of beta). T by the
 * test-source method: break at the VCVS, output divider Ro vs (R2 + (Rs+R1)||Ri)
 * then R2 vs (Rs+R1)||Ri. */
static void test_ref_closed_inverting(void **state)
{
    (void)state;
    tb_point p = dc_of("inverting\nVs vs 0 AC 1\nRs vs m 1k\nR1 m n 1k\nRi n 0 10k\n"
                       "E1 x 0 0 n 1000\nRo x out 1k\nR2 out n 10k\n"
                       ".ac dec 1 1 10\n.loop E1\n.io Vs v(out)\n");
    double a = 1000, Rs = 1e3, R1 = 1e3, Ri = 10e3, Ro = 1e3, R2 = 10e3;
    double Rg = tu_par(Rs + R1, Ri);
    double T = a * ((R2 + Rg) / (Ro + R2 + Rg)) * (Rg / (R2 + Rg));
    double Ainf = -R2 / (Rs + R1);
    /* A0: E1 output at 0 V, so out sits on the divider Ro || ... driven through
     * Rs+R1, Ri and R2 from vs (own derivation, superposition of two dividers) */
    double Gn = 1 / (Rs + R1) + 1 / Ri + 1 / (R2 + Ro);
    double vn = (1 / (Rs + R1)) / Gn;
    double A0 = vn * Ro / (R2 + Ro);
    tu_close(p.T, T, 1e-12);
    tu_close(p.A_inf, Ainf, 1e-12);
    tu_close(p.A0, A0, 1e-11);
    tu_close(p.A, (Ainf * T + A0) / (1 + T), 1e-12);
}

/* references.md checks 1 and 2c: shunt-shunt gm stage with feedthrough through RF:
 * T = gm RD Rs/(Rs+RF+RD); A0 = RD/(Rs+RF+RD); A_inf = -RF/Rs; and the direct
 * nodal solution A = (GF-gm)/(GF+GD) * Gs/(Gs + GF - GF (GF-gm)/(GF+GD)). */
static void test_ref_closed_feedthrough_stage(void **state)
{
    (void)state;
    tb_point p = dc_of("gm stage\nVs vs 0 AC 1\nRs vs g 1k\nRF g d 10k\nRD d 0 10k\n"
                       "G1 d 0 g 0 10m\n.ac dec 1 1 10\n.loop G1\n.io Vs v(d)\n");
    double Rs = 1e3, RF = 10e3, RD = 10e3, gm = 10e-3;
    double Gs = 1 / Rs, GF = 1 / RF, GD = 1 / RD;
    tu_close(p.T, gm * RD * Rs / (Rs + RF + RD), 1e-12);
    tu_close(p.A0, RD / (Rs + RF + RD), 1e-12);
    tu_close(p.A_inf, -RF / Rs, 1e-12);
    double direct = (GF - gm) / (GF + GD) * Gs / (Gs + GF - GF * (GF - gm) / (GF + GD));
    tu_close(p.A, direct, 1e-12);
}

/* references.md section 4, check 4a: one-pole amplifier a0 = 1e5, fp = 10 Hz in a
 * loop with beta = 0.01 (buffered, so the divider does not load the pole):
 * A(s) = [A_inf T0/(1+T0)] / (1 + s/(wp (1+T0))), f3dB_cl = fp (1 + T0). */
static void test_ref_closed_bandwidth_extension(void **state)
{
    (void)state;
    double a0 = 1e5, fp = 10, R = 1e3, R2 = 99e3, R1 = 1e3;
    double C = 1 / (2 * TU_PI * R * fp);
    char text[1024];
    snprintf(text, sizeof text,
             "one-pole loop\nVs in 0 AC 1\nE1 a 0 in fb %.17g\nRp a b %.17g\nCp b 0 %.17g\n"
             "Eb out 0 b 0 1\nR2 out fb %.17g\nR1 fb 0 %.17g\n"
             ".ac dec 2000 1k 100k\n.loop E1\n.io Vs v(out)\n",
             a0, R, C, R2, R1);
    tb_circuit *ckt = NULL;
    tb_result *res = tu_analyse(text, &ckt);
    double beta = R1 / (R1 + R2);
    double T0 = a0 * beta;
    double Ainf = 1 / beta;
    double fcl = fp * (1 + T0);
    const double *f = tb_result_freqs(res);
    const tb_point *pts = tb_result_loop(res, 0);
    for (size_t i = 0; i < tb_result_points(res); i += 500) {
        double complex s = I * 2 * TU_PI * f[i];
        double complex want = Ainf * T0 / (1 + T0) / (1 + s / (2 * TU_PI * fcl));
        tu_close(pts[i].A, want, 1e-10);
        tu_close(pts[i].T, T0 / (1 + s / (2 * TU_PI * fp)), 1e-10);
    }
    tb_measures m;
    assert_int_equal(tb_measure_loop(res, 0, &m), TB_OK);
    assert_true(m.has_f3db);
    /* grid of 2000 points/decade, linear interpolation in (log f, dB): error well below 1e-5 */
    tu_close(m.f3db_closed_hz, fcl, 1e-5);
    /* gain-bandwidth conserved: |A(0)| f3dB_cl = a0 fp */
    tu_close(cabs(m.dc.A) * m.f3db_closed_hz, a0 * fp, 1e-5);
    tb_result_free(res);
    tb_circuit_free(ckt);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_ref_closed_noninverting_ideal),
        cmocka_unit_test(test_ref_closed_noninverting_loaded),
        cmocka_unit_test(test_ref_closed_inverting),
        cmocka_unit_test(test_ref_closed_feedthrough_stage),
        cmocka_unit_test(test_ref_closed_bandwidth_extension),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
