/* tests/test_sensitivity.c: adjoint sensitivities against central finite differences of full analyses */
#include "testutil.h"

#include "circuit.h"

/* Relative step of the central differences: truncation error O(H^2) ~ 1e-10 of the second
 * derivative's scale, rounding ~ 1e-12 / H ~ 1e-7 of a figure's last digits. */
#define H 1e-5

typedef struct {
    tb_point dc;
    double pm_deg, pm_hz, gm_db;
    bool has_pm, has_gm;
} figures;

static figures analyse_figures(tb_circuit *ckt)
{
    tb_options opt;
    tb_options_init(&opt);
    tb_diag *diag = tb_diag_new();
    tb_result *res = NULL;
    assert_int_equal(tb_analyse(ckt, &opt, diag, &res), TB_OK);
    tb_measures m;
    tb_stability st;
    assert_int_equal(tb_measure_loop(res, 0, &m), TB_OK);
    assert_int_equal(tb_stability_loop(res, 0, &st), TB_OK);
    figures f = {m.dc, st.phase_margin_deg, st.phase_margin_hz, st.gain_margin_up_db, st.has_phase_margin,
                 st.has_gain_margin_up};
    tb_result_free(res);
    tb_diag_free(diag);
    return f;
}

static void close_to(double adjoint, double fd, const char *what, const char *element)
{
    if (fabs(adjoint - fd) > 1e-6 * fabs(fd) + 1e-7)
        fail_msg("%s of %s: adjoint %.12g, central differences %.12g", what, element, adjoint, fd);
}

/* Every element's adjoint sensitivities of one netlist against central differences
 * (the definition of the derivative; no closed form needed). */
static void check_netlist(const char *path)
{
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    assert_int_equal(tb_circuit_read(path, diag, &ckt), TB_OK);
    tb_options opt;
    tb_options_init(&opt);
    opt.sensitivity = true;
    tb_result *res = NULL;
    assert_int_equal(tb_analyse(ckt, &opt, diag, &res), TB_OK);
    tb_sensitivity s;
    assert_int_equal(tb_sensitivity_get(res, 0, &s), TB_OK);
    assert_true(s.computed);
    assert_true(s.count > 0);
    assert_true(s.dc_hz == 0.0);
    for (size_t i = 0; i < s.count; i++) {
        const tb_sens_entry *e = &s.entries[i];
        size_t idx = 0;
        if (e->element[0] == '{')
            continue; /* a parameter: tests/test_spreadparam.c */
        assert_true(tb_circuit_find_element(ckt, e->element, &idx));
        double p = ckt->elems[idx].value;
        ckt->elems[idx].value = p * (1 + H);
        figures up = analyse_figures(ckt);
        ckt->elems[idx].value = p * (1 - H);
        figures down = analyse_figures(ckt);
        ckt->elems[idx].value = p;
        if (e->has_T) {
            close_to(e->T_mag, (cabs(up.dc.T) - cabs(down.dc.T)) / (2 * H) / cabs((up.dc.T + down.dc.T) / 2), "|T|",
                     e->element);
            close_to(e->T_phase_deg, (carg(up.dc.T) - carg(down.dc.T)) / (2 * H) * 180 / TU_PI / 100, "phase of T",
                     e->element);
        }
        if (e->has_A)
            close_to(e->A_mag, (cabs(up.dc.A) - cabs(down.dc.A)) / (2 * H) / cabs((up.dc.A + down.dc.A) / 2), "|A|",
                     e->element);
        if (e->has_A_inf)
            close_to(e->A_inf_mag, (cabs(up.dc.A_inf) - cabs(down.dc.A_inf)) / (2 * H) / cabs((up.dc.A_inf + down.dc.A_inf) / 2),
                     "|A_inf|", e->element);
        if (e->has_pm && up.has_pm && down.has_pm) {
            close_to(e->pm_deg_pct, (up.pm_deg - down.pm_deg) / (2 * H) / 100, "phase margin", e->element);
            close_to(e->unity, (up.pm_hz - down.pm_hz) / (2 * H) / ((up.pm_hz + down.pm_hz) / 2), "unity frequency",
                     e->element);
        }
        if (e->has_gm && up.has_gm && down.has_gm)
            close_to(e->gm_db_pct, (up.gm_db - down.gm_db) / (2 * H) / 100, "gain margin", e->element);
    }
    tb_result_free(res);
    tb_circuit_free(ckt);
    tb_diag_free(diag);
}

static void test_sensitivity_two_stage(void **state)
{
    (void)state;
    check_netlist("netlists/twostage_follower_pm_52.net");
}

static void test_sensitivity_gain_margin(void **state)
{
    (void)state;
    check_netlist("tests/stab/stab_threepole.net");
}

static void test_sensitivity_ports_and_inductors(void **state)
{
    (void)state;
    check_netlist("tests/fb/noninverting_x20.net");
    check_netlist("docs/examples/transformer_feedback.net");
}

/* The loop's own gain: T is proportional to it, so its normalized sensitivity is 1 exactly
 * (design.md: T = k v'M0^-1 u, M0 free of k). */
static void test_sensitivity_own_gain(void **state)
{
    (void)state;
    tb_circuit *ckt = NULL;
    tb_options opt;
    tb_options_init(&opt);
    opt.sensitivity = true;
    tb_diag *diag = tb_diag_new();
    tb_result *res = NULL;
    assert_int_equal(tb_circuit_read("netlists/twostage_follower_pm_52.net", diag, &ckt), TB_OK);
    assert_int_equal(tb_analyse(ckt, &opt, diag, &res), TB_OK);
    tb_sensitivity s;
    tb_sensitivity_get(res, 0, &s);
    bool seen = false;
    for (size_t i = 0; i < s.count; i++) {
        if (!tb_name_eq(s.entries[i].element, tb_circuit_loop_name(ckt, 0)))
            continue;
        seen = true;
        assert_true(fabs(s.entries[i].T_mag - 1.0) < 1e-12);
        assert_true(fabs(s.entries[i].T_phase_deg) < 1e-12);
    }
    assert_true(seen);
    for (size_t i = 1; i < s.count; i++) /* ranked by the phase margin's sensitivity */
        assert_true(!s.entries[i].has_pm || fabs(s.entries[i - 1].pm_deg_pct) >= fabs(s.entries[i].pm_deg_pct));
    tb_result_free(res);
    tb_circuit_free(ckt);
    tb_diag_free(diag);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_sensitivity_two_stage),
        cmocka_unit_test(test_sensitivity_gain_margin),
        cmocka_unit_test(test_sensitivity_ports_and_inductors),
        cmocka_unit_test(test_sensitivity_own_gain),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
