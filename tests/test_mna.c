/* tests/test_mna.c: MNA stamps against the textbook rules (C.-W. Ho, A. E. Ruehli,
 * P. A. Brennan, "The modified nodal approach to network analysis", IEEE Trans.
 * Circuits Syst. CAS-22(6), 1975 (from memory); stamp conventions as written in
 * shared/references.md section 0), and the loop vectors u, v of design.md. */
#include "testutil.h"

#include <stdlib.h>

#include "circuit.h"
#include "mna.h"

typedef struct {
    tb_circuit *ckt;
    tb_mna *mna;
    double complex *M;
} fixture;

static fixture setup(const char *text, double omega)
{
    fixture f = {tu_parse(text), NULL, NULL};
    assert_int_equal(tb_mna_build(f.ckt, NULL, &f.mna), TB_OK);
    f.M = malloc(f.mna->n * f.mna->n * sizeof(double complex));
    assert_non_null(f.M);
    tb_mna_dense(f.mna, omega, f.M);
    return f;
}

static void teardown(fixture *f)
{
    free(f->M);
    tb_mna_free(f->mna);
    tb_circuit_free(f->ckt);
}

/* Unknown index of a node by name. */
static size_t node(const fixture *f, const char *name)
{
    int idx = 0;
    assert_true(tb_circuit_find_node(f->ckt, name, strlen(name), &idx));
    assert_true(idx > 0);
    return (size_t)idx - 1;
}

static size_t branch(const fixture *f, const char *elem)
{
    size_t e = 0;
    assert_true(tb_circuit_find_element(f->ckt, elem, &e));
    assert_true(f->ckt->elems[e].branch >= 0);
    return f->ckt->node_count - 1 + (size_t)f->ckt->elems[e].branch;
}

static double complex at(const fixture *f, size_t row, size_t col)
{
    return f->M[col * f->mna->n + row];
}

/* R, C and a VCCS: G[p][cp] += gm, G[p][cn] -= gm, G[n][cp] -= gm, G[n][cn] += gm. */
static void test_mna_conductance_stamps(void **state)
{
    (void)state;
    double w = 1e3;
    fixture f = setup("t\nR1 a b 2k\nC1 b 0 1u\nG1 a 0 b 0 3m\nR2 b 0 1k\n"
                      ".loop G1\n",
                      w);
    size_t a = node(&f, "a"), b = node(&f, "b");
    assert_int_equal(f.mna->n, 2);
    tu_close(at(&f, a, a), 0.5e-3, 1e-15);
    tu_close(at(&f, a, b), -0.5e-3 + 3e-3, 1e-15);
    tu_close(at(&f, b, a), -0.5e-3, 1e-15);
    tu_close(at(&f, b, b), 0.5e-3 + 1e-3 + I * w * 1e-6, 1e-15);
    /* u = e_a (current leaves a), v = e_b */
    const tb_loopvec *lv = &f.mna->loops[0];
    assert_int_equal(lv->u.count, 1);
    assert_int_equal(lv->u.idx[0], a);
    assert_true(lv->u.coef[0] == 1.0);
    assert_int_equal(lv->v.count, 1);
    assert_int_equal(lv->v.idx[0], b);
    assert_true(lv->k == 3e-3);
    teardown(&f);
}

/* V source and inductor branches; VCVS row v_p - v_n - mu (v_cp - v_cn) = 0;
 * i(V) flows into n+; inductor row v_p - v_n - jwL i = 0. */
static void test_mna_branch_stamps(void **state)
{
    (void)state;
    double w = 2e4;
    fixture f = setup("t\nV1 a 0 AC 1\nL1 a b 1m\nR1 b 0 10\nE1 c 0 b a 5\nR2 c 0 1\n"
                      ".loop E1\n.io V1 v(c)\n",
                      w);
    size_t a = node(&f, "a"), b = node(&f, "b"), c = node(&f, "c");
    size_t jv = branch(&f, "V1"), jl = branch(&f, "L1"), je = branch(&f, "E1");
    tu_close(at(&f, a, jv), 1, 0);
    tu_close(at(&f, jv, a), 1, 0);
    tu_close(at(&f, a, jl), 1, 0);
    tu_close(at(&f, b, jl), -1, 0);
    tu_close(at(&f, jl, a), 1, 0);
    tu_close(at(&f, jl, b), -1, 0);
    tu_close(at(&f, jl, jl), -I * w * 1e-3, 1e-15);
    tu_close(at(&f, je, c), 1, 0);
    tu_close(at(&f, je, b), -5, 0);
    tu_close(at(&f, je, a), 5, 0);
    tu_close(at(&f, c, je), 1, 0);
    /* E: u = -e_branch, v = e_b - e_a; the input excitation is the V1 branch row */
    const tb_loopvec *lv = &f.mna->loops[0];
    assert_int_equal(lv->u.count, 1);
    assert_int_equal(lv->u.idx[0], je);
    assert_true(lv->u.coef[0] == -1.0);
    assert_int_equal(lv->v.count, 2);
    assert_int_equal(f.mna->b.idx[0], jv);
    assert_int_equal(f.mna->c.idx[0], c);
    teardown(&f);
}

/* F: current k i(Vs) from p through the source to n; H: row v_p - v_n - r i(Vs) = 0;
 * an I source's current leaves n+ and enters n-. */
static void test_mna_current_controlled_stamps(void **state)
{
    (void)state;
    fixture f = setup("t\nI1 a 0 AC 1\nVs a b 0\nR1 b 0 1k\nF1 c 0 Vs 7\nR2 c 0 1k\n"
                      "H1 d 0 Vs 300\nR3 d 0 1k\n.loop F1 H1\n.io I1 v(d)\n",
                      0);
    size_t a = node(&f, "a"), c = node(&f, "c"), d = node(&f, "d");
    size_t js = branch(&f, "Vs"), jh = branch(&f, "H1");
    tu_close(at(&f, c, js), 7, 0);
    tu_close(at(&f, jh, d), 1, 0);
    tu_close(at(&f, jh, js), -300, 0);
    assert_int_equal(f.mna->b.count, 1);
    assert_int_equal(f.mna->b.idx[0], a);
    assert_true(f.mna->b.coef[0] == -1.0);
    assert_int_equal(f.mna->loops[1].v.idx[0], js);
    assert_int_equal(f.mna->loops[1].u.idx[0], jh);
    teardown(&f);
}

/* Duplicate stamps at one position are summed into one CSC entry (KLU rejects duplicates). */
static void test_mna_duplicates_summed(void **state)
{
    (void)state;
    fixture f = setup("t\nR1 a 0 1k\nR2 a 0 1k\nR3 a 0 500\nG1 a 0 a 0 1m\n.loop G1\n", 0);
    assert_int_equal(f.mna->nnz, 1);
    tu_close(at(&f, 0, 0), 5e-3, 1e-15);
    teardown(&f);
}

/* K: the branch rows of the two inductors read v_p - v_n - jw L i - jw M i_other = 0,
 * so each has -jwM in the other's current column, M = k sqrt(L1 L2). */
static void test_mna_mutual_inductance_stamp(void **state)
{
    (void)state;
    double w = 3e3;
    fixture f = setup("t\nV1 p 0 AC 1\nL1 p 0 1m\nL2 s 0 4m\nK12 L1 L2 0.8\nR1 s 0 50\n"
                      "G1 d 0 d 0 1m\nRd d 0 1k\n.loop G1\n.io V1 i(V1)\n",
                      w);
    size_t j1 = branch(&f, "L1"), j2 = branch(&f, "L2");
    double M = 0.8 * sqrt(1e-3 * 4e-3);
    tu_close(at(&f, j1, j2), -I * w * M, 1e-15);
    tu_close(at(&f, j2, j1), -I * w * M, 1e-15);
    tu_close(at(&f, j1, j1), -I * w * 1e-3, 1e-15);
    tu_close(at(&f, j2, j2), -I * w * 4e-3, 1e-15);
    assert_int_equal(f.ckt->elems[3].branch, -1); /* K adds no unknown */
    teardown(&f);
}

/* Two coupled inductors, the secondary loaded by R: with i1 into L1 and i2 the
 * secondary's branch current (s through L2 to ground),
 *   v_p = jw L1 i1 + jw M i2,   v_s = jw M i1 + jw L2 i2,   i2 = -v_s / R
 * so v_s = jw M R i1 / (R + jw L2), i2 = -jw M i1 / (R + jw L2), and the input
 * impedance is Z = v_p / i1 = jw L1 + w^2 M^2 / (R + jw L2) (own derivation from
 * the coupled-inductor equations; the reflected-impedance form of circuit texts,
 * from memory). i(V1) flows into V1's n+, so i1 = -i(V1) and Z = -1 / A. */
static void test_mna_coupled_inductors_input_impedance(void **state)
{
    (void)state;
    tb_circuit *ckt = NULL;
    tb_result *res = tu_analyse("coupled pair\nV1 p 0 AC 1\nL1 p 0 1m\nL2 s 0 4m\n"
                                "K12 L2 L1 0.8\nR1 s 0 50\nG1 d 0 d 0 1m\nRd d 0 1k\n"
                                ".loop G1\n.io V1 i(V1)\n.ac dec 4 100 100k\n",
                                &ckt);
    double L1 = 1e-3, L2 = 4e-3, R = 50;
    double M = 0.8 * sqrt(L1 * L2);
    const double *freq = tb_result_freqs(res);
    const tb_point *pt = tb_result_loop(res, 0);
    for (size_t i = 0; i < tb_result_points(res); i++) {
        double w = 2 * TU_PI * freq[i];
        double complex Z = I * w * L1 + w * w * M * M / (R + I * w * L2);
        tu_close(-1.0 / pt[i].A, Z, 1e-12);
    }
    tb_result_free(res);
    tb_circuit_free(ckt);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_mna_conductance_stamps),
        cmocka_unit_test(test_mna_branch_stamps),
        cmocka_unit_test(test_mna_current_controlled_stamps),
        cmocka_unit_test(test_mna_duplicates_summed),
        cmocka_unit_test(test_mna_mutual_inductance_stamp),
        cmocka_unit_test(test_mna_coupled_inductors_input_impedance),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
