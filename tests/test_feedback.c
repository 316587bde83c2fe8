/* tests/test_feedback.c: the hand estimate's error breakdown and the desensitivity against closed forms.
 * Sources (shared/references.md): the asymptotic-gain model A = A_inf T/(1+T) + A0/(1+T)
 * (S. Rosenstark, IEEE Trans. Educ. E-17(4), 1974, from memory; references.md section 2,
 * checks 2a' and 2b'), Bode's return ratio (H. W. Bode, Network Analysis and Feedback
 * Amplifier Design, 1945), the gain sensitivity S = (1 - A0/A)/(1+T) (Bode/Chen,
 * references.md section 5, checks 5a and 5b). Every expected value is computed here from
 * the element values by the closed form written beside it, never copied from tbeta. */
#include "testutil.h"

typedef struct {
    tb_circuit *ckt;
    tb_result *res;
    tb_feedback_summary fs;
} run;

static run analyse(const char *text)
{
    run r = {0};
    r.res = tu_analyse(text, &r.ckt);
    assert_int_equal(tb_feedback_loop(r.res, 0, &r.fs), TB_OK);
    return r;
}

static void done(run *r)
{
    tb_result_free(r->res);
    tb_circuit_free(r->ckt);
}

/* references.md check 2b': inverting stage designed as -R2/R1 = -10, with Rs = 1k in series
 * with R1, Ri = 10k at the inverting node and Ro = 1k at the amplifier's output.
 * Derived here (written out): with the VCVS replaced by a unit test source, node n sees
 * Rn = Ri || (R1 + Rs) to ground, so T = a Rn/(Ro + R2 + Rn); the nullor (v_n = 0) gives
 * A_inf = -R2/(Rs + R1); with a = 0 the output divides v_n = Rx/(Rs + R1 + Rx),
 * Rx = Ri || (R2 + Ro), by Ro/(R2 + Ro): A0. A = (A_inf T + A0)/(1 + T). */
static const char inverting[] = "inverting stage 2b'\nVs vs 0 AC 1\nRs vs s 1k\nR1 s n 1k\nR2 n out 10k\n"
                                "Ri n 0 10k\nE1 e 0 0 n 1000\nRo e out 1k\n.ac dec 5 1 1k\n.loop E1\n"
                                ".io Vs v(out)\n.ideal gain=-10\n";

static void test_feedback_breakdown_inverting(void **state)
{
    (void)state;
    run r = analyse(inverting);
    double a = 1000, Rs = 1e3, R1 = 1e3, R2 = 10e3, Ri = 10e3, Ro = 1e3, G = -10;
    double Rn = tu_par(Ri, R1 + Rs);
    double T = a * Rn / (Ro + R2 + Rn);
    double Ainf = -R2 / (Rs + R1);
    double Rx = tu_par(Ri, R2 + Ro);
    double A0 = Rx / (Rs + R1 + Rx) * Ro / (R2 + Ro);
    double A = (Ainf * T + A0) / (1 + T);
    const tb_feedback_summary *fs = &r.fs;
    assert_true(fs->computed && fs->has_estimate && fs->dc.has_parts);
    tu_close(fs->estimate, G, 0);
    assert_true(fs->dc_hz == 0.0);
    tu_close(fs->dc.total, A - G, 1e-12);
    tu_close(fs->dc.part[TB_PART_LOADING], Ainf - G, 1e-12);
    tu_close(fs->dc.part[TB_PART_LOOP_GAIN], -Ainf / (1 + T), 1e-10);
    tu_close(fs->dc.part[TB_PART_FEEDTHROUGH], A0 / (1 + T), 1e-10);
    /* the parts add up to the total, A - G, with A from its own solve */
    double complex sum = fs->dc.part[0] + fs->dc.part[1] + fs->dc.part[2];
    tu_close(sum, fs->dc.total, 1e-13);
    assert_int_equal(fs->dominant_dc, TB_PART_LOADING);
    tu_close(fs->error_dc_pct, 100.0 * fabs(A - G) / fabs(G), 1e-12);
    assert_false(fs->holds_at_dc);
    assert_false(fs->has_limit);
    assert_true(fs->notes & (1u << TB_FNOTE_MISSES_AT_DC));
    /* over frequency: this resistive circuit gives the DC breakdown at every point */
    const tb_breakdown_point *pts = NULL;
    assert_int_equal(tb_feedback_points(r.res, 0, &pts), TB_OK);
    for (size_t i = 0; i < tb_result_points(r.res); i++) {
        assert_true(pts[i].has_parts);
        tu_close(pts[i].part[0] + pts[i].part[1] + pts[i].part[2], pts[i].total, 1e-13);
        tu_close(pts[i].total, A - G, 1e-12);
    }
    done(&r);
}

/* references.md check 2a': non-inverting stage with Rs, Ri, Ro, RL, stated as beta = 0.1.
 * T and A0 by the closed forms of 2a'; A_inf = 1 + R2/R1 = 1/beta exactly, so the loading
 * part is zero and the finite loop gain dominates. */
static void test_feedback_breakdown_noninverting_beta(void **state)
{
    (void)state;
    run r = analyse("loaded non-inverting\nVs vs 0 AC 1\nRs vs p 10k\nRi p n 100k\nE1 x 0 p n 1000\n"
                    "Ro x out 1k\nRL out 0 2k\nR2 out n 9k\nR1 n 0 1k\n.ac dec 5 1 1k\n.loop E1\n"
                    ".io Vs v(out)\n.ideal beta=0.1 tol=2\n");
    double a = 1000, Rs = 10e3, Ri = 100e3, Ro = 1e3, RL = 2e3, R2 = 9e3, R1 = 1e3;
    double Rfb = R2 + tu_par(R1, Ri + Rs);
    double T = a * (tu_par(RL, Rfb) / (Ro + tu_par(RL, Rfb))) * (tu_par(R1, Ri + Rs) / Rfb) * (Ri / (Ri + Rs));
    double Ainf = 1 + R2 / R1;
    double Rn = tu_par(R1, R2 + tu_par(Ro, RL));
    double A0 = (Rn / (Rs + Ri + Rn)) * (tu_par(Ro, RL) / (R2 + tu_par(Ro, RL)));
    double G = 1 / 0.1;
    const tb_feedback_summary *fs = &r.fs;
    tu_close(fs->estimate, G, 1e-15);
    tu_close(fs->tol_pct, 2, 0);
    assert_true(cabs(fs->dc.part[TB_PART_LOADING]) <= 1e-12 * G);
    tu_close(fs->dc.part[TB_PART_LOOP_GAIN], -Ainf / (1 + T), 1e-10);
    tu_close(fs->dc.part[TB_PART_FEEDTHROUGH], A0 / (1 + T), 1e-9);
    tu_close(fs->dc.total, (Ainf * T + A0) / (1 + T) - G, 1e-10);
    assert_int_equal(fs->dominant_dc, TB_PART_LOOP_GAIN);
    /* error 1.74 % < tol 2 %: holds at DC, and over the (resistive) sweep */
    assert_true(fs->holds_at_dc);
    assert_false(fs->has_limit);
    assert_true(fs->notes & (1u << TB_FNOTE_HOLDS_IN_SWEEP));
    done(&r);
}

/* One-pole loop, A0 = 0 and A_inf = G: A/G - 1 = -1/(1+T), T = T0/(1 + jx), x = f/fp.
 * |1 + T| = 1/tol gives (derived here) x^2 = ((1+T0)^2 - 1/tol^2)/(1/tol^2 - 1). */
static void test_feedback_limit_one_pole(void **state)
{
    (void)state;
    run r = analyse("one-pole follower x10\nVs in 0 AC 1\nE1 x 0 in n 1000\nRp x y 1k\nCp y 0 1u\n"
                    "E2 out 0 y 0 1\nR2 out n 9k\nR1 n 0 1k\n.ac dec 10 1 1meg\n.loop E1\n.io Vs v(out)\n"
                    ".ideal gain=10\n");
    double T0 = 1000 * 0.1, fp = 1 / (2 * TU_PI * 1e3 * 1e-6), tol = 0.01;
    double x = sqrt((pow(1 + T0, 2) - 1 / (tol * tol)) / (1 / (tol * tol) - 1));
    const tb_feedback_summary *fs = &r.fs;
    assert_true(fs->holds_at_dc);
    assert_true(fs->has_limit);
    tu_close(fs->limit_hz, x * fp, 1e-9);
    /* at the limit the error is all finite loop gain (A_inf = G, A0 = 0) */
    assert_int_equal(fs->dominant_limit, TB_PART_LOOP_GAIN);
    tu_close(cabs(fs->at_limit.total) / 10.0, tol, 1e-9);
    done(&r);
}

/* references.md check 5a (circuit of 2a): a = 1000, beta = 0.1, A = a/(1 + a beta);
 * A(1050) and A(950) by the same closed form; first order 5 %/(1+T). The re-solve is also
 * checked against a separate analysis of the netlist with the changed gain. */
static void test_feedback_desensitivity_ideal(void **state)
{
    (void)state;
    run r = analyse("ideal non-inverting\nVs in 0 AC 1\nE1 out 0 in n 1000\nR2 out n 9k\nR1 n 0 1k\n"
                    ".ac dec 1 1 10\n.loop E1\n.io Vs v(out)\n");
    double beta = 0.1;
    double A = 1000 / (1 + 1000 * beta);
    double Ap = 1050 / (1 + 1050 * beta);
    double Am = 950 / (1 + 950 * beta);
    const tb_feedback_summary *fs = &r.fs;
    assert_false(fs->has_estimate);
    assert_true(fs->notes & (1u << TB_FNOTE_NO_ESTIMATE));
    tu_close(fs->spread_pct, 5, 0);
    tu_close(fs->dc.S, 1 / (1 + 1000 * beta), 1e-12);
    tu_close(fs->dc.S_A, fs->dc.S, 1e-12); /* A0 = 0 */
    assert_true(fs->has_change && fs->has_resolved);
    tu_close(fs->change_model[0], Ap / A - 1, 1e-9);
    tu_close(fs->change_model[1], Am / A - 1, 1e-9);
    tu_close(fs->change_resolved[0], Ap / A - 1, 1e-9);
    tu_close(fs->change_resolved[1], Am / A - 1, 1e-9);
    tu_close(fs->change_first_order[0], 0.05 / 101, 1e-12);
    /* first order: the exact change differs from S d by O(d^2 S) */
    assert_true(cabs(fs->change_resolved[0] - fs->change_first_order[0]) < 0.05 * 0.05 / 101 * 2);
    tb_circuit *ckt = NULL;
    tb_result *res = tu_analyse("ideal non-inverting, gain +5 %\nVs in 0 AC 1\nE1 out 0 in n 1050\nR2 out n 9k\n"
                                "R1 n 0 1k\n.ac dec 1 1 10\n.loop E1\n.io Vs v(out)\n", &ckt);
    tb_point p;
    assert_true(tb_result_dc(res, 0, &p));
    tu_close(fs->change_resolved[0], p.A / A - 1, 1e-9);
    tb_result_free(res);
    tb_circuit_free(ckt);
    done(&r);
}

/* references.md check 5b (circuit of check 1 / 2c, A0 != 0): Rs = 1k, RF = RD = 10k, gm = 10 mS.
 * Nodal closed form (references.md 2c): A(gm) = (GF - gm)/(GF + GD) * Gs/(Gs + GF - GF (GF - gm)/(GF + GD));
 * T = gm RD Rs/(Rs + RF + RD); A0 = RD/(Rs + RF + RD); S_A = (1 - A0/A)/(1+T). */
static double gm_stage(double gm)
{
    double Gs = 1e-3, GF = 1e-4, GD = 1e-4;
    return (GF - gm) / (GF + GD) * Gs / (Gs + GF - GF * (GF - gm) / (GF + GD));
}

static void test_feedback_desensitivity_feedthrough(void **state)
{
    (void)state;
    run r = analyse("gm stage with feedthrough\nVs vs 0 AC 1\nRs vs g 1k\nRF g d 10k\nRD d 0 10k\n"
                    "G1 d 0 g 0 10m\n.ac dec 1 1 10\n.loop G1\n.io Vs v(d)\n.ideal gain=-10 spread=5\n");
    double Rs = 1e3, RF = 10e3, RD = 10e3, gm = 10e-3;
    double T = gm * RD * Rs / (Rs + RF + RD);
    double A0 = RD / (Rs + RF + RD);
    double A = gm_stage(gm);
    const tb_feedback_summary *fs = &r.fs;
    tu_close(fs->dc.S, 1 / (1 + T), 1e-12);
    tu_close(fs->dc.S_A, (1 - A0 / A) / (1 + T), 1e-12);
    tu_close(fs->change_resolved[0], gm_stage(1.05 * gm) / A - 1, 1e-9);
    tu_close(fs->change_resolved[1], gm_stage(0.95 * gm) / A - 1, 1e-9);
    tu_close(fs->change_model[0], gm_stage(1.05 * gm) / A - 1, 1e-9);
    /* S_A d agrees with the re-solve to first order: the central difference of the two
     * re-solves differs from it by O(d^3); 1/(1+T) alone would be wrong by 0.05 % of A
     * (references.md 5b: S_A = 0.18365, 1/(1+T) = 0.17355) */
    double complex central = (fs->change_resolved[0] - fs->change_resolved[1]) / 2;
    assert_true(cabs(central - fs->change_first_order[0]) < 5e-5);
    assert_true(cabs(central - 0.05 * fs->dc.S) > 4e-4);
    /* references.md 2c: A_inf = -RF/Rs = -10 = the estimate: no loading */
    assert_true(cabs(fs->dc.part[TB_PART_LOADING]) < 1e-12);
    tu_close(fs->dc.part[TB_PART_FEEDTHROUGH], A0 / (1 + T), 1e-12);
    done(&r);
}

/* Without .io there is nothing to compare: computed is false, with the note. */
static void test_feedback_no_io(void **state)
{
    (void)state;
    run r = analyse("no io\nVs in 0 AC 1\nE1 out 0 in n 1000\nR2 out n 9k\nR1 n 0 1k\n.ac dec 1 1 10\n"
                    ".loop E1\n.ideal gain=10\n");
    assert_false(r.fs.computed);
    assert_true(r.fs.notes & (1u << TB_FNOTE_NO_IO));
    assert_false(r.fs.has_change);
    done(&r);
}

/* The tables over frequency: one header and one row per sweep point; the breakdown's error
 * column agrees with the parts; a table the netlist does not have is not found. */
static void test_feedback_csv(void **state)
{
    (void)state;
    run r = analyse(inverting);
    FILE *f = tmpfile();
    assert_non_null(f);
    assert_int_equal(tb_report_feedback_csv(r.ckt, r.res, 0, "breakdown", f), TB_OK);
    rewind(f);
    char line[2048];
    assert_non_null(fgets(line, sizeof line, f));
    assert_true(strncmp(line, "freq_hz,AmG_re,AmG_im,loading_re", 32) == 0);
    size_t rows = 0;
    while (fgets(line, sizeof line, f)) {
        double v[14];
        int got = sscanf(line, "%lf,%lf,%lf,%lf,%lf,%lf,%lf,%lf,%lf,%lf,%lf,%lf,%lf,%lf", &v[0], &v[1], &v[2], &v[3],
                         &v[4], &v[5], &v[6], &v[7], &v[8], &v[9], &v[10], &v[11], &v[12], &v[13]);
        assert_int_equal(got, 14);
        /* the parts add up to A - G in the printed digits */
        tu_close(v[3] + v[5] + v[7], v[1], 1e-13);
        tu_close(v[9], 100.0 * hypot(v[1], v[2]) / 10.0, 1e-13);
        rows++;
    }
    assert_int_equal(rows, tb_result_points(r.res));
    fclose(f);
    f = tmpfile();
    assert_non_null(f);
    assert_int_equal(tb_report_feedback_csv(r.ckt, r.res, 0, "break", f), TB_ERR_NOT_FOUND);
    assert_int_equal(tb_report_feedback_csv(r.ckt, r.res, 0, "zport:out", f), TB_ERR_NOT_FOUND);
    assert_int_equal(tb_report_feedback_csv(r.ckt, r.res, 0, "nonsense", f), TB_ERR_NOT_FOUND);
    fclose(f);
    done(&r);
}

/* One meaning per status: what does not exist or was not computed is TB_ERR_NOT_FOUND,
 * a NULL argument or an index out of range TB_ERR_USAGE (the contracts in tbeta.h). */
static void test_feedback_not_found(void **state)
{
    (void)state;
    assert_int_equal(TB_ERR_NOT_FOUND, -7);
    assert_string_equal(tb_status_str(TB_ERR_NOT_FOUND), "not found");
    assert_string_equal(tb_status_str(TB_ERR_USAGE), "invalid use of the API");
    assert_string_equal(tb_status_str((tb_status)-8), "unknown status");
    /* without .io there is no step response and no breakdown */
    run r = analyse("no io\nVs in 0 AC 1\nE1 out 0 in n 1000\nR2 out n 9k\nR1 n 0 1k\nC1 out 0 1n\n"
                    ".ac dec 1 1 10\n.loop E1\n.ideal gain=10\n");
    size_t l = 99;
    assert_int_equal(tb_circuit_find_loop(r.ckt, "e1", &l), TB_OK);
    assert_int_equal(l, 0);
    assert_int_equal(tb_circuit_find_loop(r.ckt, "Q7", &l), TB_ERR_NOT_FOUND);
    assert_int_equal(tb_circuit_find_loop(r.ckt, NULL, &l), TB_ERR_USAGE);
    assert_int_equal(tb_circuit_find_loop(NULL, "E1", &l), TB_ERR_USAGE);
    FILE *f = tmpfile();
    assert_non_null(f);
    assert_int_equal(tb_report_step_csv(r.res, f), TB_ERR_NOT_FOUND);
    assert_int_equal(tb_report_step_csv(NULL, f), TB_ERR_USAGE);
    assert_int_equal(tb_report_step_csv(r.res, NULL), TB_ERR_USAGE);
    assert_int_equal(tb_report_feedback_csv(r.ckt, r.res, 0, "breakdown", f), TB_ERR_NOT_FOUND);
    assert_int_equal(tb_report_feedback_csv(r.ckt, r.res, 1, "breakdown", f), TB_ERR_USAGE);
    assert_int_equal(tb_report_feedback_csv(r.ckt, r.res, 0, NULL, f), TB_ERR_USAGE);
    assert_int_equal(tb_report_feedback_csv(NULL, r.res, 0, "break", f), TB_ERR_USAGE);
    assert_int_equal(ftell(f), 0); /* nothing written */
    fclose(f);
    done(&r);
}

static void test_feedback_words(void **state)
{
    (void)state;
    assert_string_equal(tb_part_str(TB_PART_LOADING), "loading");
    assert_string_equal(tb_part_str(TB_PART_COUNT), "unknown part");
    for (int n = 0; n < TB_FNOTE_COUNT; n++)
        assert_true(strlen(tb_fb_note_str((tb_fb_note)n)) > 10);
    tb_feedback_summary fs;
    assert_int_equal(tb_feedback_loop(NULL, 0, &fs), TB_ERR_USAGE);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_feedback_breakdown_inverting),
        cmocka_unit_test(test_feedback_breakdown_noninverting_beta),
        cmocka_unit_test(test_feedback_limit_one_pole),
        cmocka_unit_test(test_feedback_desensitivity_ideal),
        cmocka_unit_test(test_feedback_desensitivity_feedthrough),
        cmocka_unit_test(test_feedback_no_io),
        cmocka_unit_test(test_feedback_csv),
        cmocka_unit_test(test_feedback_not_found),
        cmocka_unit_test(test_feedback_words),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
