/* bench/klu_floor.c: the per-point floor on a benchmark netlist's matrix, with its own reader and MNA and bare KLU */
/*
 * Usage: klu_floor NETLIST [PASSES [ftz]]
 *
 * Independent of tbeta's code: this program reads the netlist itself (the
 * cards bench/gen_family.sh writes: R, C, V with AC, E, G, .ac dec|lin,
 * .io SRC v(NODE); .loop and .end are ignored), numbers the unknowns itself
 * (nodes in order of first appearance, then the branch currents of V and E),
 * stamps M = G + jwC into triplets, sums duplicates into one CSC pattern and
 * calls KLU directly: klu_analyze once, klu_z_factor at the first frequency,
 * then, per pass over the .ac grid, at every point the values of M(jw),
 * klu_z_refactor and one klu_z_solve of the input's response x = M^-1 b
 * (b: the unit excitation of the .io source). That is the floor: the least
 * work any program needs per point on this matrix. (Where the reused pivot
 * order meets a zero pivot, klu_z_factor pivots afresh there and its order is
 * reused after; repivots_per_pass says how often.)
 *
 * Prints "key value" lines:
 *   unknowns nnz lu_nnz points   the matrix and the grid
 *   floor_s        median over PASSES (default 3) of a pass's time / points
 *   floor_cpu_s    the same in CPU time (CLOCK_PROCESS_CPUTIME_ID)
 *   floor_ftz_s    with "ftz": the same with subnormal results flushed to zero (x86 FTZ/DAZ)
 *   factor_s       with "ftz": a pivoted klu_z_factor (median of 3, at the first point)
 *   refactor_s     with "ftz": klu_z_refactor alone at the first point (median of 3)
 *   repivots_per_pass  pivoted factorizations a pass needed besides the first
 *   a_re a_im      x[out] at the first frequency: the closed-loop gain there,
 *                  for comparison with the first row of `tbeta sweep`
 * Exit status 0, or 1 with a message on stderr.
 */
#include <complex.h>
#include <ctype.h>
#include <klu.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <time.h>

#if defined(__x86_64__) || defined(__SSE2__)
#include <xmmintrin.h>
#define HAVE_MXCSR 1
#else
#define HAVE_MXCSR 0
#endif

static const double TWO_PI = 6.28318530717958647692528676655900577;

/* One stamp: M[row][col] += g + jw c. */
typedef struct {
    int row;
    int col;
    double g;
    double c;
} triplet;

typedef struct {
    char **names; /* open-addressing table of node names (ground not stored) */
    int *index;
    size_t cap;
    int nodes;
} node_table;

/* A V or E card, whose branch current is an unknown after the nodes. */
typedef struct {
    char kind;
    int p, n, cp, cn;
    double k;
    char *name;
} branch_card;

typedef struct {
    node_table nt;
    triplet *t;
    size_t nt_count, nt_cap;
    branch_card *br;
    size_t nbr, br_cap;
    char *io_source;
    int out_node;
    double f1, f2;
    int per, lin;
    int n;
    int *Ap, *Ai;
    double *G, *C;
    int nnz;
    int in_branch;
} netlist;

static void die(const char *msg, const char *arg)
{
    fprintf(stderr, "klu_floor: %s%s%s\n", msg, arg ? " " : "", arg ? arg : "");
    exit(1);
}

static void *xrealloc(void *p, size_t count, size_t size)
{
    if (size && count > (size_t)-1 / size)
        die("size overflow", NULL);
    size_t bytes = count * size;
    void *q = realloc(p, bytes > 0 ? bytes : 1);
    if (!q)
        die("out of memory", NULL);
    return q;
}

static size_t hash(const char *s)
{
    size_t h = 5381;
    for (; *s; s++)
        h = h * 33 + (unsigned char)tolower((unsigned char)*s);
    return h;
}

static int is_ground(const char *s)
{
    return strcmp(s, "0") == 0 || strcasecmp(s, "gnd") == 0;
}

/* The unknown of node s (-1: ground), numbered in order of first appearance. */
static int node(node_table *nt, const char *s)
{
    if (is_ground(s))
        return -1;
    if (2 * ((size_t)nt->nodes + 1) > nt->cap) {
        size_t cap = nt->cap ? 2 * nt->cap : 1024;
        char **names = xrealloc(NULL, cap, sizeof(char *));
        int *index = xrealloc(NULL, cap, sizeof(int));
        memset(names, 0, cap * sizeof(char *));
        for (size_t i = 0; i < nt->cap; i++) {
            if (!nt->names[i])
                continue;
            size_t j = hash(nt->names[i]) & (cap - 1);
            while (names[j])
                j = (j + 1) & (cap - 1);
            names[j] = nt->names[i];
            index[j] = nt->index[i];
        }
        free(nt->names);
        free(nt->index);
        nt->names = names;
        nt->index = index;
        nt->cap = cap;
    }
    size_t j = hash(s) & (nt->cap - 1);
    for (; nt->names[j]; j = (j + 1) & (nt->cap - 1))
        if (strcasecmp(nt->names[j], s) == 0)
            return nt->index[j];
    nt->names[j] = strdup(s);
    if (!nt->names[j])
        die("out of memory", NULL);
    nt->index[j] = nt->nodes++;
    return nt->index[j];
}

/* A value with an optional engineering suffix (f p n u m k meg g t). */
static double value(const char *s)
{
    char *end = NULL;
    double x = strtod(s, &end);
    if (end == s)
        die("not a value:", s);
    if (strncasecmp(end, "meg", 3) == 0)
        return x * 1e6;
    switch (tolower((unsigned char)*end)) {
    case 'f': return x * 1e-15;
    case 'p': return x * 1e-12;
    case 'n': return x * 1e-9;
    case 'u': return x * 1e-6;
    case 'm': return x * 1e-3;
    case 'k': return x * 1e3;
    case 'g': return x * 1e9;
    case 't': return x * 1e12;
    default: return x;
    }
}

static void stamp(netlist *nl, int row, int col, double g, double c)
{
    if (row < 0 || col < 0)
        return;
    if (nl->nt_count == nl->nt_cap) {
        nl->nt_cap = nl->nt_cap ? 2 * nl->nt_cap : 4096;
        nl->t = xrealloc(nl->t, nl->nt_cap, sizeof(triplet));
    }
    nl->t[nl->nt_count++] = (triplet){row, col, g, c};
}

/* A two-terminal admittance g + jw c between a and b. */
static void stamp_pair(netlist *nl, int a, int b, double g, double c)
{
    stamp(nl, a, a, g, c);
    stamp(nl, b, b, g, c);
    stamp(nl, a, b, -g, -c);
    stamp(nl, b, a, -g, -c);
}

static void add_branch(netlist *nl, branch_card bc)
{
    if (nl->nbr == nl->br_cap) {
        nl->br_cap = nl->br_cap ? 2 * nl->br_cap : 64;
        nl->br = xrealloc(nl->br, nl->br_cap, sizeof(branch_card));
    }
    bc.name = strdup(bc.name);
    if (!bc.name)
        die("out of memory", NULL);
    nl->br[nl->nbr++] = bc;
}

/* One card, its tokens in tok[0..count). */
static void card(netlist *nl, char **tok, int count)
{
    char kind = (char)toupper((unsigned char)tok[0][0]);
    if (kind == '.') {
        if (strcasecmp(tok[0], ".ac") == 0 && count >= 5) {
            nl->lin = strcasecmp(tok[1], "lin") == 0;
            nl->per = atoi(tok[2]);
            nl->f1 = value(tok[3]);
            nl->f2 = value(tok[4]);
        } else if (strcasecmp(tok[0], ".io") == 0 && count >= 3) {
            nl->io_source = strdup(tok[1]);
            char *open = strchr(tok[2], '(');
            char *close = open ? strchr(open, ')') : NULL;
            if (!open || !close)
                die(".io output must be v(NODE):", tok[2]);
            *close = '\0';
            nl->out_node = node(&nl->nt, open + 1);
        }
        return;
    }
    if ((kind == 'R' || kind == 'C') && count >= 4) {
        double x = value(tok[3]);
        int a = node(&nl->nt, tok[1]), b = node(&nl->nt, tok[2]);
        stamp_pair(nl, a, b, kind == 'R' ? 1.0 / x : 0, kind == 'C' ? x : 0);
    } else if (kind == 'G' && count >= 6) {
        int p = node(&nl->nt, tok[1]), n = node(&nl->nt, tok[2]);
        int cp = node(&nl->nt, tok[3]), cn = node(&nl->nt, tok[4]);
        double k = value(tok[5]);
        stamp(nl, p, cp, k, 0);
        stamp(nl, p, cn, -k, 0);
        stamp(nl, n, cp, -k, 0);
        stamp(nl, n, cn, k, 0);
    } else if (kind == 'V' && count >= 3) {
        add_branch(nl, (branch_card){'V', node(&nl->nt, tok[1]), node(&nl->nt, tok[2]), -1, -1, 0, tok[0]});
    } else if (kind == 'E' && count >= 6) {
        int p = node(&nl->nt, tok[1]), n = node(&nl->nt, tok[2]);
        int cp = node(&nl->nt, tok[3]), cn = node(&nl->nt, tok[4]);
        add_branch(nl, (branch_card){'E', p, n, cp, cn, value(tok[5]), tok[0]});
    } else {
        die("unsupported card:", tok[0]);
    }
}

static void read_netlist(const char *path, netlist *nl)
{
    FILE *f = fopen(path, "r");
    if (!f)
        die("cannot read", path);
    char line[4096];
    char *tok[16];
    int first = 1;
    while (fgets(line, sizeof line, f)) {
        if (first) { /* the title */
            first = 0;
            continue;
        }
        char *semi = strchr(line, ';');
        if (semi)
            *semi = '\0';
        int count = 0;
        for (char *s = strtok(line, " \t\r\n"); s && count < 16; s = strtok(NULL, " \t\r\n"))
            tok[count++] = s;
        if (count == 0 || tok[0][0] == '*')
            continue;
        if (strcasecmp(tok[0], ".end") == 0)
            break;
        card(nl, tok, count);
    }
    fclose(f);
    if (!nl->io_source || nl->per <= 0 || nl->f1 <= 0 || nl->f2 < nl->f1)
        die("the netlist needs .io and .ac", NULL);
}

/* Branch rows and columns once every node is known: x_p - x_n - k (x_cp - x_cn) = 0. */
static void stamp_branches(netlist *nl)
{
    nl->in_branch = -1;
    for (size_t i = 0; i < nl->nbr; i++) {
        const branch_card *bc = &nl->br[i];
        int j = nl->nt.nodes + (int)i;
        stamp(nl, bc->p, j, 1, 0);
        stamp(nl, bc->n, j, -1, 0);
        stamp(nl, j, bc->p, 1, 0);
        stamp(nl, j, bc->n, -1, 0);
        if (bc->kind == 'E') {
            stamp(nl, j, bc->cp, -bc->k, 0);
            stamp(nl, j, bc->cn, bc->k, 0);
        }
        if (bc->kind == 'V' && strcasecmp(bc->name, nl->io_source) == 0)
            nl->in_branch = j;
    }
    if (nl->in_branch < 0)
        die("the .io source is not a V card:", nl->io_source);
    nl->n = nl->nt.nodes + (int)nl->nbr;
}

static int by_column(const void *pa, const void *pb)
{
    const triplet *a = pa, *b = pb;
    if (a->col != b->col)
        return a->col < b->col ? -1 : 1;
    return (a->row > b->row) - (a->row < b->row);
}

/* Sorts the triplets by column and row and sums duplicates: KLU's CSC form. */
static void compress(netlist *nl)
{
    qsort(nl->t, nl->nt_count, sizeof(triplet), by_column);
    nl->Ap = xrealloc(NULL, (size_t)nl->n + 1, sizeof(int));
    nl->Ai = xrealloc(NULL, nl->nt_count, sizeof(int));
    nl->G = xrealloc(NULL, nl->nt_count, sizeof(double));
    nl->C = xrealloc(NULL, nl->nt_count, sizeof(double));
    int nz = 0;
    int col = 0;
    nl->Ap[0] = 0;
    for (size_t i = 0; i < nl->nt_count; i++) {
        const triplet *t = &nl->t[i];
        while (col < t->col)
            nl->Ap[++col] = nz;
        if (nz > nl->Ap[col] && nl->Ai[nz - 1] == t->row) {
            nl->G[nz - 1] += t->g;
            nl->C[nz - 1] += t->c;
            continue;
        }
        nl->Ai[nz] = t->row;
        nl->G[nz] = t->g;
        nl->C[nz] = t->c;
        nz++;
    }
    while (col < nl->n)
        nl->Ap[++col] = nz;
    nl->nnz = nz;
}

static size_t grid(const netlist *nl, double **freqs)
{
    size_t count = nl->lin ? (size_t)nl->per : (size_t)floor(nl->per * log10(nl->f2 / nl->f1) + 1e-9) + 1;
    *freqs = xrealloc(NULL, count, sizeof(double));
    for (size_t i = 0; i < count; i++)
        (*freqs)[i] = nl->lin ? (count == 1 ? nl->f1 : nl->f1 + (nl->f2 - nl->f1) * (double)i / (double)(count - 1))
                              : nl->f1 * pow(10.0, (double)i / nl->per);
    return count;
}

static void netlist_free(netlist *nl)
{
    for (size_t i = 0; i < nl->nt.cap; i++)
        free(nl->nt.names[i]);
    for (size_t i = 0; i < nl->nbr; i++)
        free(nl->br[i].name);
    free(nl->nt.names);
    free(nl->nt.index);
    free(nl->br);
    free(nl->t);
    free(nl->io_source);
    free(nl->Ap);
    free(nl->Ai);
    free(nl->G);
    free(nl->C);
}

static double clock_s(clockid_t id)
{
    struct timespec ts;
    clock_gettime(id, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

static double now(void)
{
    return clock_s(CLOCK_MONOTONIC);
}

static void values(const netlist *nl, double omega, double *Mx)
{
    for (int k = 0; k < nl->nnz; k++) {
        Mx[2 * k] = nl->G[k];
        Mx[2 * k + 1] = omega * nl->C[k];
    }
}

/* The solver's state. */
typedef struct {
    const netlist *nl;
    klu_common common;
    klu_symbolic *symbolic;
    klu_numeric *numeric;
    double *Mx;
    double complex *x;
    const double *freqs;
    size_t points;
    size_t repivots; /* refactors that met a zero pivot and were factored again */
} floor_run;

static void solve_input(floor_run *r)
{
    memset(r->x, 0, (size_t)r->nl->n * sizeof(double complex));
    r->x[r->nl->in_branch] = 1.0;
    if (!klu_z_solve(r->symbolic, r->numeric, r->nl->n, 1, (double *)r->x, &r->common))
        die("klu_z_solve failed", NULL);
}

/* A zero pivot in the reused order: a pivoted factorization there, its order reused after. */
static void repivot(floor_run *r)
{
    klu_z_free_numeric(&r->numeric, &r->common);
    r->numeric = klu_z_factor(r->nl->Ap, r->nl->Ai, r->Mx, r->symbolic, &r->common);
    if (!r->numeric || r->common.status != KLU_OK)
        die("klu_z_factor failed (singular?)", NULL);
    r->repivots++;
}

/* One pass over the grid: values, refactor, one solve per point; wall-clock seconds
 * per point (*cpu: CPU seconds per point). Each pass starts from a pivoted
 * factorization at the first point (not timed). */
static double pass(floor_run *r, int flush, double *cpu)
{
    values(r->nl, TWO_PI * r->freqs[0], r->Mx);
    repivot(r);
    r->repivots--;
#if HAVE_MXCSR
    unsigned mode = _mm_getcsr();
    if (flush)
        _mm_setcsr(mode | 0x8040); /* FTZ and DAZ */
#else
    (void)flush;
#endif
    double t0 = now();
    double c0 = clock_s(CLOCK_PROCESS_CPUTIME_ID);
    for (size_t i = 0; i < r->points; i++) {
        values(r->nl, TWO_PI * r->freqs[i], r->Mx);
        if (!klu_z_refactor(r->nl->Ap, r->nl->Ai, r->Mx, r->symbolic, r->numeric, &r->common) ||
            r->common.status != KLU_OK)
            repivot(r);
        solve_input(r);
    }
    double t = (now() - t0) / (double)r->points;
    *cpu = (clock_s(CLOCK_PROCESS_CPUTIME_ID) - c0) / (double)r->points;
#if HAVE_MXCSR
    _mm_setcsr(mode);
#endif
    return t;
}

static int by_value(const void *pa, const void *pb)
{
    double a = *(const double *)pa, b = *(const double *)pb;
    return (a > b) - (a < b);
}

static double median(double *v, int count)
{
    qsort(v, (size_t)count, sizeof(double), by_value);
    return count % 2 ? v[count / 2] : 0.5 * (v[count / 2 - 1] + v[count / 2]);
}

/* klu_z_factor and klu_z_refactor alone at the first point, median of 3 each. */
static void factor_times(floor_run *r, double *factor_s, double *refactor_s)
{
    double tf[3], tr[3];
    values(r->nl, TWO_PI * r->freqs[0], r->Mx);
    for (int k = 0; k < 3; k++) {
        double t0 = now();
        klu_numeric *num = klu_z_factor(r->nl->Ap, r->nl->Ai, r->Mx, r->symbolic, &r->common);
        tf[k] = now() - t0;
        if (!num)
            die("klu_z_factor failed", NULL);
        klu_z_free_numeric(&num, &r->common);
        t0 = now();
        if (!klu_z_refactor(r->nl->Ap, r->nl->Ai, r->Mx, r->symbolic, r->numeric, &r->common))
            die("klu_z_refactor failed", NULL);
        tr[k] = now() - t0;
    }
    *factor_s = median(tf, 3);
    *refactor_s = median(tr, 3);
}

int main(int argc, char **argv)
{
    if (argc < 2)
        die("usage: klu_floor NETLIST [PASSES]", NULL);
    int passes = argc > 2 ? atoi(argv[2]) : 3;
    int more = argc > 3 && strcmp(argv[3], "ftz") == 0;
    if (passes < 1 || passes > 1000)
        die("PASSES must be 1 to 1000", NULL);
    static netlist nl;
    nl.out_node = -1;
    read_netlist(argv[1], &nl);
    stamp_branches(&nl);
    compress(&nl);
    double *freqs = NULL;
    floor_run r = {.nl = &nl};
    r.points = grid(&nl, &freqs);
    r.freqs = freqs;
    r.Mx = xrealloc(NULL, 2 * (size_t)nl.nnz, sizeof(double));
    r.x = xrealloc(NULL, (size_t)nl.n, sizeof(double complex));
    klu_defaults(&r.common);
    r.symbolic = klu_analyze(nl.n, nl.Ap, nl.Ai, &r.common);
    if (!r.symbolic)
        die("klu_analyze failed", NULL);
    values(&nl, TWO_PI * freqs[0], r.Mx);
    r.numeric = klu_z_factor(nl.Ap, nl.Ai, r.Mx, r.symbolic, &r.common);
    if (!r.numeric || r.common.status != KLU_OK)
        die("klu_z_factor failed (singular?)", NULL);
    solve_input(&r);
    double complex a = nl.out_node >= 0 ? r.x[nl.out_node] : 0;
    double *t = xrealloc(NULL, (size_t)passes, sizeof(double));
    double *tz = xrealloc(NULL, (size_t)passes, sizeof(double));
    double *tc = xrealloc(NULL, (size_t)passes, sizeof(double));
    for (int k = 0; k < passes; k++) {
        double unused = 0;
        t[k] = pass(&r, 0, &tc[k]);
        tz[k] = more ? pass(&r, 1, &unused) : 0;
    }
    printf("unknowns %d\nnnz %d\nlu_nnz %d\npoints %zu\n", nl.n, nl.nnz, r.numeric->lnz + r.numeric->unz - nl.n,
           r.points);
    printf("floor_s %.9g\nfloor_cpu_s %.9g\nrepivots_per_pass %.3g\n", median(t, passes), median(tc, passes),
           (double)r.repivots / (double)(more ? 2 * passes : passes));
    if (more) {
        double factor_s = 0, refactor_s = 0;
        factor_times(&r, &factor_s, &refactor_s);
        printf("floor_ftz_s %.9g\nfactor_s %.9g\nrefactor_s %.9g\n", median(tz, passes), factor_s, refactor_s);
    }
    printf("a_re %.17g\na_im %.17g\n", creal(a), cimag(a));
    klu_z_free_numeric(&r.numeric, &r.common);
    klu_free_symbolic(&r.symbolic, &r.common);
    free(t);
    free(tz);
    free(tc);
    free(r.Mx);
    free(r.x);
    free(freqs);
    netlist_free(&nl);
    return 0;
}
