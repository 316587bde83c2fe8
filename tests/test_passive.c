/* tests/test_passive.c: the passive-blocks proof of P = 0 against LAPACK's QZ on the dense pencil,
 * on random passive RLC(+K) networks, active ones and buffered chains; and the factorizations
 * a large line's analysis spends with it. */
#include "testutil.h"

#include <stdlib.h>

#include "circuit.h"
#include "mna.h"
#include "passive.h"

/* LAPACK's QZ: A x = lambda B x. */
void dggev_(const char *jobvl, const char *jobvr, const int *n, double *a, const int *lda, double *b,
            const int *ldb, double *alphar, double *alphai, double *beta, double *vl, const int *ldvl,
            double *vr, const int *ldvr, double *work, const int *lwork, int *info, size_t jobvl_len,
            size_t jobvr_len);

#define TEXT_MAX 65536

/* A deterministic generator for the networks (splitmix64, S. Vigna; from memory). */
static uint64_t next_u64(uint64_t *s)
{
    uint64_t z = (*s += 0x9e3779b97f4a7c15ULL);
    z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
    z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
    return z ^ (z >> 31);
}

static double uniform(uint64_t *s, double lo, double hi)
{
    return lo + (hi - lo) * (double)(next_u64(s) >> 11) / 9007199254740992.0;
}

static int pick(uint64_t *s, int count)
{
    return (int)(next_u64(s) % (uint64_t)count);
}

/* Appends a formatted card to text (TEXT_MAX bytes). */
static void card(char *text, const char *fmt, ...)
{
    size_t used = strlen(text);
    va_list ap;
    va_start(ap, fmt);
    int w = vsnprintf(text + used, TEXT_MAX - used, fmt, ap);
    va_end(ap);
    assert_true(w > 0 && (size_t)w < TEXT_MAX - used);
}

/* What to put in a generated network. */
typedef struct {
    int nodes;
    bool inductors;   /* the spanning tree's branches are inductors (else resistors) */
    bool lossless;    /* no resistor at all */
    bool coupled;     /* K between disjoint pairs of the tree's inductors, k <= 0.99 */
    const char *first; /* name prefix of this block's nodes */
} shape;

/* One connected network on nodes PREFIX1..PREFIXn: a spanning tree (every node reaches
 * ground through it), a capacitor from every node to ground, n/2 further resistors and
 * capacitors between random nodes. Values in normalized units (near 1 ohm, 1 F, 1 H: the
 * algebra is the same at any scale, and QZ meets a well-scaled pencil). */
static void network(uint64_t *s, const shape *sh, char *text)
{
    const char *p = sh->first;
    const char *tree = sh->inductors || sh->lossless ? "L" : "R";
    card(text, "%s%s1 %s1 0 %.6g\n", tree, p, p, uniform(s, 0.5, 2));
    for (int i = 2; i <= sh->nodes; i++) {
        int j = 1 + pick(s, i - 1);
        bool flip = pick(s, 2); /* either orientation: a coupling's sign in the circuit follows it */
        card(text, "%s%s%d %s%d %s%d %.6g\n", tree, p, i, p, flip ? j : i, p, flip ? i : j, uniform(s, 0.5, 2));
    }
    for (int i = 1; i <= sh->nodes; i++)
        card(text, "C%sg%d %s%d 0 %.6g\n", p, i, p, i, uniform(s, 0.5, 2));
    for (int e = 0; e < sh->nodes / 2; e++) {
        int a = 1 + pick(s, sh->nodes), b = pick(s, sh->nodes + 1);
        if (a == b)
            continue;
        bool cap = sh->lossless || pick(s, 2);
        if (b == 0)
            card(text, "%s%sx%d %s%d 0 %.6g\n", cap ? "C" : "R", p, e, p, a, uniform(s, 0.5, 2));
        else
            card(text, "%s%sx%d %s%d %s%d %.6g\n", cap ? "C" : "R", p, e, p, a, p, b, uniform(s, 0.5, 2));
    }
    for (int i = 1; sh->coupled && i + 1 <= sh->nodes; i += 2)
        card(text, "K%s%d L%s%d L%s%d %.6g\n", p, i, p, i, p, i + 1, uniform(s, 0.01, 0.99));
}

/* The marked loop: a transconductance of random sign and size between two nodes of the block. */
static void marked_loop(uint64_t *s, const char *p, int nodes, char *text)
{
    double gm = uniform(s, 0.1, 100) * (pick(s, 2) ? 1 : -1);
    card(text, "GLOOP %s%d 0 %s%d 0 %.6g\n.loop GLOOP\n", p, 1 + pick(s, nodes), p, 1 + pick(s, nodes), gm);
}

/* The circuit's mna and loop 0's passivity test. */
typedef struct {
    tb_circuit *ckt;
    tb_mna *mna;
    tb_passive pv;
} built;

static built build(const char *text)
{
    built b = {tu_parse(text), NULL, {0}};
    tb_diag *diag = tb_diag_new();
    assert_int_equal(tb_mna_build(b.ckt, diag, &b.mna), TB_OK);
    tb_diag_free(diag);
    assert_int_equal(tb_passive_open_loop(b.mna, &b.mna->loops[0], &b.pv), TB_OK);
    return b;
}

static void built_free(built *b)
{
    tb_mna_free(b->mna);
    tb_circuit_free(b->ckt);
}

/* Zeros of det M0(s) = det(G0 + sC) right of the axis, by LAPACK's QZ (dggev) on the dense
 * pencil G0 x = s (-C) x, G0 being G with loop 0's gain at zero (own_g0 at its positions).
 * An eigenvalue is finite when |beta| > 1e-9 |alpha| (the pencil is near unit scale, so the
 * infinite ones come out at |s| ~ 1e16), and right of the axis when Re s > 1e-7 max(1, |s|)
 * (stability_check.py's rule, with an absolute floor for s near 0). */
static int qz_rhp(const tb_mna *mna)
{
    int n = (int)mna->n, info = 0, lwork = 8 * n + 16;
    double *G = calloc((size_t)n * (size_t)n, sizeof(double));
    double *C = calloc((size_t)n * (size_t)n, sizeof(double));
    double *v = malloc((size_t)(3 * n + lwork) * sizeof(double));
    assert_true(G && C && v);
    const tb_loopvec *lv = &mna->loops[0];
    for (int j = 0; j < n; j++) {
        for (int k = mna->Ap[j]; k < mna->Ap[j + 1]; k++) {
            double g = mna->Gx[k];
            for (int o = 0; o < lv->own_count; o++)
                if (lv->own_pos[o] == (size_t)k)
                    g = lv->own_g0[o];
            G[mna->Ai[k] + (size_t)j * (size_t)n] = g;
            C[mna->Ai[k] + (size_t)j * (size_t)n] = -mna->Cx[k];
        }
    }
    int one = 1;
    dggev_("N", "N", &n, G, &n, C, &n, v, v + n, v + 2 * n, NULL, &one, NULL, &one, v + 3 * n, &lwork, &info,
           1, 1);
    assert_int_equal(info, 0);
    int rhp = 0;
    for (int i = 0; i < n; i++) {
        double complex alpha = CMPLX(v[i], v[n + i]);
        double beta = v[2 * n + i];
        if (!(fabs(beta) > 1e-9 * cabs(alpha)))
            continue;
        double complex sv = alpha / beta;
        rhp += creal(sv) > 1e-7 * fmax(1.0, cabs(sv));
    }
    free(G);
    free(C);
    free(v);
    return rhp;
}

/* Random passive networks of 5 to 60 nodes (RC, RL with and without K, lossless LC), a
 * transconductance loop of either sign marked: the proof holds, and QZ finds no zero of
 * det M0 right of the axis. Passive RLC networks with a positive semidefinite inductance
 * matrix are positive real (Anderson and Vongpanitlerd, "Network Analysis and Synthesis",
 * 1973, ch. 2), so their natural frequencies lie in the closed left half-plane; the MNA
 * form of the argument: Odabasioglu, Celik and Pileggi, "PRIMA", IEEE TCAD 17(8), 1998, sec. III. */
static void test_passive_random_rlc(void **state)
{
    (void)state;
    uint64_t seed = 20261205;
    char *text = malloc(TEXT_MAX);
    assert_non_null(text);
    for (int trial = 0; trial < 48; trial++) {
        shape sh = {.nodes = 5 + pick(&seed, 56), .inductors = trial % 4 != 0, .lossless = trial % 4 == 3,
                    .coupled = trial % 2 == 1, .first = "n"};
        sh.coupled = sh.coupled && sh.inductors;
        snprintf(text, TEXT_MAX, "random passive network %d\n", trial);
        network(&seed, &sh, text);
        marked_loop(&seed, "n", sh.nodes, text);
        built b = build(text);
        if (!b.pv.proven)
            print_error("trial %d: %zu of %zu blocks not shown passive\n%s", trial, b.pv.active_blocks,
                        b.pv.blocks, text);
        assert_true(b.pv.proven);
        assert_int_equal(b.pv.active_blocks, 0);
        assert_int_equal(b.pv.first_active, SIZE_MAX);
        assert_int_equal(qz_rhp(b.mna), 0);
        built_free(&b);
    }
    free(text);
}

/* RC networks with one strong negative resistor (-0.05 ohm, 20 S, more than every node's
 * other conductances) at a random node: G is symmetric with a negative eigenvalue and C is
 * positive definite, so G x = -s C x has a positive real root (the symmetric-definite
 * pencil's eigenvalues are real with the inertia of G: Sylvester's law of inertia, Golub
 * and Van Loan, "Matrix Computations", sec. 8.7; from memory). The proof must not claim
 * P = 0, and QZ finds the pole. */
static void test_passive_negative_resistor(void **state)
{
    (void)state;
    uint64_t seed = 77;
    char *text = malloc(TEXT_MAX);
    assert_non_null(text);
    for (int trial = 0; trial < 12; trial++) {
        shape sh = {.nodes = 5 + pick(&seed, 40), .first = "n"};
        snprintf(text, TEXT_MAX, "negative resistor %d\n", trial);
        network(&seed, &sh, text);
        card(text, "RNEG n%d 0 -0.05\n", 1 + pick(&seed, sh.nodes));
        marked_loop(&seed, "n", sh.nodes, text);
        built b = build(text);
        assert_false(b.pv.proven);
        assert_int_equal(b.pv.active_blocks, 1);
        assert_true(b.pv.first_active < b.mna->n);
        assert_true(qz_rhp(b.mna) >= 1);
        built_free(&b);
    }
    free(text);
}

/* A second gain loop inside the block (not the marked one): GA and GB, 3 S each way between
 * x and y, each with 1 ohm and 1 F to ground, joined weakly (100 ohm) to a passive network.
 * Alone, det = (1 + s)^2 - 9 has s = 2 (RC and controlled-source algebra); the weak tie
 * moves it little. The proof fails on that block; QZ finds the pole. The same pair with
 * opposite signs (a gyrator, lossless: G's symmetric part untouched) passes, and QZ agrees. */
static void test_passive_gain_loop_in_block(void **state)
{
    (void)state;
    uint64_t seed = 5;
    char *text = malloc(TEXT_MAX);
    assert_non_null(text);
    for (int gyrator = 0; gyrator < 2; gyrator++) {
        for (int trial = 0; trial < 6; trial++) {
            shape sh = {.nodes = 5 + pick(&seed, 30), .inductors = trial % 2, .first = "n"};
            snprintf(text, TEXT_MAX, "gain loop %d\n", trial);
            network(&seed, &sh, text);
            card(text, "RX x 0 1\nCX x 0 1\nRY y 0 1\nCY y 0 1\nRT x n%d 100\n", 1 + pick(&seed, sh.nodes));
            card(text, "GA x 0 y 0 3\nGB y 0 x 0 %s\n", gyrator ? "-3" : "3");
            marked_loop(&seed, "n", sh.nodes, text);
            built b = build(text);
            int rhp = qz_rhp(b.mna);
            assert_true(gyrator ? b.pv.proven : !b.pv.proven);
            assert_int_equal(rhp, gyrator ? 0 : 1);
            built_free(&b);
        }
    }
    free(text);
}

/* Three inductors of 1 H, winding 1 coupled to 2 and 3 with k = 0.95, 2 and 3 with 0.1:
 * every k <= 1, yet the inductance matrix is not positive semidefinite (on the span of
 * (1, 0, 0) and (0, 1, 1) it is [1, 0.95 sqrt 2; 0.95 sqrt 2, 1.1], determinant 1.1 - 1.805
 * < 0: a negative eigenvalue lambda), so with 1 ohm from each node to ground that mode goes
 * as exp(-R t / lambda), a pole at s = -1/lambda > 0 (RL algebra): not passive, and QZ
 * finds the pole. Perfect coupling of a pair (k = 1: semidefinite) passes. */
static void test_passive_coupled_inductors(void **state)
{
    (void)state;
    const char *bad = "three windings\nL1 a 0 1\nL2 b 0 1\nL3 c 0 1\nRA a 0 1\nRB b 0 1\nRC c 0 1\n"
                      "K12 L1 L2 0.95\nK13 L1 L3 0.95\nK23 L2 L3 0.1\nGLOOP a 0 c 0 2\n.loop GLOOP\n";
    built b = build(bad);
    assert_false(b.pv.proven);
    assert_true(qz_rhp(b.mna) >= 1);
    built_free(&b);
    const char *ideal = "ideal pair\nL1 a 0 1\nL2 b 0 4\nRA a 0 1\nRB b 0 2\nCA a 0 1\n"
                        "K12 L1 L2 1\nGLOOP a 0 b 0 2\n.loop GLOOP\n";
    b = build(ideal);
    assert_true(b.pv.proven);
    assert_int_equal(qz_rhp(b.mna), 0);
    built_free(&b);
    /* the same three windings at k = +0.7: no diagonal dominance (0.7 + 0.7 > 1), so the
     * dense test decides: eigenvalues 1 + 2(0.7) and 1 - 0.7 twice, positive */
    const char *three = "three windings, positive\nL1 a 0 1\nL2 b 0 1\nL3 c 0 1\nRA a 0 1\nRB b 0 1\n"
                        "RC c 0 1\nK12 L1 L2 0.7\nK13 L1 L3 0.7\nK23 L2 L3 0.7\nGLOOP a 0 c 0 2\n.loop GLOOP\n";
    b = build(three);
    assert_true(b.pv.proven);
    assert_int_equal(qz_rhp(b.mna), 0);
    built_free(&b);
}

/* Passive blocks joined by unilateral buffers of any gain and sign (E cards, and an F
 * reading a sense source in the block before it), as bench/gen_family.sh's buffered line:
 * each buffer's gain lies between two strongly connected parts, so the proof holds, and QZ
 * finds no zero right of the axis (det M0 is the product of the passive blocks'). */
static void test_passive_buffered_chain(void **state)
{
    (void)state;
    uint64_t seed = 1234;
    char *text = malloc(TEXT_MAX);
    assert_non_null(text);
    for (int trial = 0; trial < 8; trial++) {
        int segments = 2 + pick(&seed, 4);
        snprintf(text, TEXT_MAX, "buffered chain %d\n", trial);
        char prefix[8][4];
        int nodes[8];
        for (int g = 0; g < segments; g++) {
            snprintf(prefix[g], sizeof prefix[g], "%c", 'a' + g);
            nodes[g] = 5 + pick(&seed, 15);
            shape sh = {.nodes = nodes[g], .inductors = (trial + g) % 2, .coupled = (trial + g) % 2,
                        .first = prefix[g]};
            network(&seed, &sh, text);
        }
        for (int g = 1; g < segments; g++) {
            double gain = uniform(&seed, 1, 1000) * (pick(&seed, 2) ? 1 : -1);
            card(text, "EBUF%d %sb 0 %s%d 0 %.6g\nRBUF%d %sb %s%d 1\n", g, prefix[g], prefix[g - 1],
                 1 + pick(&seed, nodes[g - 1]), gain, g, prefix[g], prefix[g], 1 + pick(&seed, nodes[g]));
        }
        card(text, "VS a1 as 0\nRS as 0 1\nFB b1 0 VS %.6g\n", uniform(&seed, -50, 50));
        marked_loop(&seed, "a", nodes[0], text);
        built b = build(text);
        assert_true(b.pv.proven);
        assert_true(b.pv.blocks >= (size_t)segments);
        assert_int_equal(qz_rhp(b.mna), 0);
        built_free(&b);
    }
    free(text);
}

/* A full analysis of a 3 000-section RC line (bench/gen_family.sh's line family: above the
 * pole limit of 500 and above what the argument principle's walk may spend, 5 000
 * factorizations): P comes from the passive blocks, no walk runs, and the fresh
 * factorizations stay at the margin scan's and the step response's (counted, never
 * timed). Before, the walk's estimate exceeded its budget and P = 0 was assumed. */
static void test_passive_large_line(void **state)
{
    (void)state;
    enum { SECTIONS = 3000 };
    char *text = malloc(64 * SECTIONS + 512);
    assert_non_null(text);
    size_t used = (size_t)sprintf(text, "RC line\nVIN in 0 AC 1\nRS in n1 1k\n");
    for (int i = 1; i <= SECTIONS; i++) {
        used += (size_t)sprintf(text + used, "C%d n%d 0 1p\n", i, i);
        if (i < SECTIONS)
            used += (size_t)sprintf(text + used, "R%d n%d n%d 10\n", i, i, i + 1);
    }
    sprintf(text + used, "RT n%d 0 1k\nGW n1 0 n%d 0 1u\n.loop GW\n.io VIN v(n%d)\n.ac dec 10 1 1g\n", SECTIONS,
            SECTIONS, SECTIONS);
    tb_circuit *ckt = tu_parse(text);
    free(text);
    tb_options opt;
    tb_options_init(&opt);
    tb_result *res = NULL;
    assert_int_equal(tb_analyse(ckt, &opt, NULL, &res), TB_OK);
    tb_stability st;
    assert_int_equal(tb_stability_loop(res, 0, &st), TB_OK);
    assert_true(st.unknowns > opt.pole_limit);
    assert_int_equal(st.ol_count_by, TB_COUNT_PASSIVE_BLOCKS);
    assert_int_equal(st.ol_rhp, 0);
    assert_true(st.notes & (1u << TB_SNOTE_RHP_BY_PASSIVE));
    assert_false(st.notes & (1u << TB_SNOTE_NYQUIST_ASSUMES_P0));
    assert_int_equal(st.winding_evaluations, 0);
    assert_int_equal(st.verdict, TB_VERDICT_STABLE);
    tb_stats stats;
    assert_int_equal(tb_result_stats(res, &stats), TB_OK);
    print_message("3000-section line: %zu probe factorizations, %zu for the step response\n",
                  stats.probe_factorizations, stats.step_factorizations);
    /* the walk alone would take about two per capacitor (docs/performance.md): 6 000 */
    assert_true(stats.probe_factorizations < 1000);
    tb_result_free(res);
    tb_circuit_free(ckt);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_passive_random_rlc),      cmocka_unit_test(test_passive_negative_resistor),
        cmocka_unit_test(test_passive_gain_loop_in_block), cmocka_unit_test(test_passive_coupled_inductors),
        cmocka_unit_test(test_passive_buffered_chain),  cmocka_unit_test(test_passive_large_line),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
