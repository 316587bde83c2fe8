/* src/solve.c: the only file that includes klu.h: analyse once, refactor per point, solve */
#include "solve.h"

#include <klu.h>
#include <limits.h>
#include <math.h>
#include <stdint.h>
#include <string.h>

#include "alloc.h"
#include "units.h"

#if defined(__x86_64__) || defined(__SSE2__)
#include <xmmintrin.h>
#define TB_HAVE_MXCSR 1
#else
#define TB_HAVE_MXCSR 0
#endif

/* One numeric factorization and the min/max |U_ii| it had when it was pivoted. */
typedef struct {
    klu_numeric *numeric; /* NULL: none */
    double rcond;
} factorization;

struct tb_solver {
    const tb_mna *mna;
    klu_common common;
    klu_symbolic *symbolic;
    klu_numeric *real_numeric; /* a real matrix factored beside M (tb_solver_factor_real) */
    double real_rcond;    /* min/max |U_ii| of real_numeric when it was last pivoted */
    bool owns_symbolic;   /* false for a tb_solver_new_sharing solver */
    factorization reference; /* pivoted by tb_solver_factor */
    factorization repivot;   /* pivoted by tb_solver_refactor where the reference's order degraded */
    bool q_odd;           /* the column permutation of the symbolic analysis is odd */
    unsigned char *mark;  /* n: workspace of permutation parities */
    tb_solver_counts counts;
};

/* Subnormal numbers (below 2.2e-308) appear where a response decays along a long
 * RC line, and x86 arithmetic on them is slow. Inside KLU's calls, results that
 * would be subnormal are flushed to zero (FTZ) and subnormal operands read as
 * zero (DAZ): they lie 300 orders of magnitude below the entries of M and of any
 * excitation, so no figure moves. MXCSR is the calling thread's own register;
 * it is restored after each call, so the caller's floating-point mode is left
 * as it was. Other processors run the calls unchanged. */
#if TB_HAVE_MXCSR
enum { MXCSR_DAZ = 0x0040, MXCSR_FTZ = 0x8000 };

static unsigned flush_begin(void)
{
    unsigned old = _mm_getcsr();
    _mm_setcsr(old | MXCSR_DAZ | MXCSR_FTZ);
    return old;
}

static void flush_end(unsigned old)
{
    _mm_setcsr(old);
}
#else
static unsigned flush_begin(void)
{
    return 0;
}

static void flush_end(unsigned old)
{
    (void)old;
}
#endif

/* true when perm (a permutation of 0..n-1) is odd: n minus its cycle count. */
static bool perm_odd(const int *perm, size_t n, unsigned char *mark)
{
    memset(mark, 0, n);
    size_t cycles = 0;
    for (size_t i = 0; i < n; i++) {
        if (mark[i])
            continue;
        cycles++;
        for (size_t j = i; !mark[j]; j = (size_t)perm[j])
            mark[j] = 1;
    }
    return (n - cycles) % 2 == 1;
}

static tb_solver *solver_alloc(const tb_mna *mna)
{
    tb_solver *s = tb_calloc(1, sizeof(*s));
    if (!s)
        return NULL;
    s->mna = mna;
    s->mark = tb_malloc(mna->n ? mna->n : 1, 1);
    if (!s->mark) {
        tb_free(s);
        return NULL;
    }
    klu_defaults(&s->common);
    s->common.halt_if_singular = 1;
    return s;
}

tb_status tb_solver_new(const tb_mna *mna, tb_solver **out)
{
    tb_solver *s = solver_alloc(mna);
    if (!s)
        return TB_ERR_NOMEM;
    s->owns_symbolic = true;
    s->symbolic = klu_analyze((int)mna->n, mna->Ap, mna->Ai, &s->common);
    if (!s->symbolic) {
        tb_status st = s->common.status == KLU_OUT_OF_MEMORY ? TB_ERR_NOMEM : TB_ERR_NUMERIC;
        tb_solver_free(s);
        return st;
    }
    s->q_odd = perm_odd(s->symbolic->Q, mna->n, s->mark);
    *out = s;
    return TB_OK;
}

tb_status tb_solver_new_sharing(const tb_solver *base, tb_solver **out)
{
    tb_solver *s = solver_alloc(base->mna);
    if (!s)
        return TB_ERR_NOMEM;
    s->common = base->common;
    s->symbolic = base->symbolic;
    s->q_odd = base->q_odd;
    *out = s;
    return TB_OK;
}

static void drop(tb_solver *s, factorization *f)
{
    if (f->numeric)
        klu_z_free_numeric(&f->numeric, &s->common);
}

/* The factorization solves use: the re-pivoted one when there is one. */
static const factorization *current(const tb_solver *s)
{
    return s->repivot.numeric ? &s->repivot : &s->reference;
}

void tb_solver_free(tb_solver *solver)
{
    if (!solver)
        return;
    tb_solver_release(solver);
    if (solver->real_numeric)
        klu_free_numeric(&solver->real_numeric, &solver->common);
    if (solver->symbolic && solver->owns_symbolic)
        klu_free_symbolic(&solver->symbolic, &solver->common);
    tb_free(solver->mark);
    tb_free(solver);
}

void tb_solver_release(tb_solver *solver)
{
    drop(solver, &solver->repivot);
    drop(solver, &solver->reference);
}

void tb_solver_restart(tb_solver *solver)
{
    drop(solver, &solver->repivot);
}

static tb_status singular(tb_solver *s, size_t *culprit)
{
    int col = s->common.singular_col;
    *culprit = col >= 0 && (size_t)col < s->mna->n ? (size_t)col : 0;
    return TB_ERR_SINGULAR;
}

/* min/max |U_ii| over n pivots stored `parts` doubles each (2: complex, 1: real), the
 * quantity klu_z_rcond computes, with a complex magnitude taken as max(|Re|, |Im|) (within
 * sqrt 2 of it): no square root per pivot, which made klu_z_rcond cost about a tenth of a
 * refactor. 0 when a pivot is zero or not a number. */
static double udiag_ratio(const double *U, size_t n, size_t parts)
{
    double lo = INFINITY, hi = 0;
    for (size_t i = 0; i < n; i++) {
        double m = fabs(U[parts * i]);
        if (parts == 2 && fabs(U[2 * i + 1]) > m)
            m = fabs(U[2 * i + 1]);
        if (!(m <= INFINITY && fabs(U[parts * i + parts - 1]) <= INFINITY))
            return 0; /* NaN, which the comparisons below would pass over */
        lo = m < lo ? m : lo;
        hi = m > hi ? m : hi;
    }
    double r = lo / hi;
    return r >= 0 && r <= 1 ? r : 0; /* n = 0, a zero pivot, or NaN */
}

/* min/max |U_ii| of a complex factorization. */
static double pivot_ratio(const tb_solver *s, const klu_numeric *numeric)
{
    return udiag_ratio(numeric->Udiag, s->mna->n, 2);
}

/* klu_z_factor into f and its pivot-size baseline, subnormals flushed. */
static bool klu_factor_flushed(tb_solver *s, factorization *f, double *Ax)
{
    unsigned mode = flush_begin();
    f->numeric = klu_z_factor(s->mna->Ap, s->mna->Ai, Ax, s->symbolic, &s->common);
    bool ok = f->numeric && s->common.status != KLU_SINGULAR;
    flush_end(mode);
    f->rcond = ok ? pivot_ratio(s, f->numeric) : 0;
    if (ok && f->rcond == 0)
        s->common.status = KLU_SINGULAR; /* as klu_z_rcond says of a zero or NaN pivot */
    return ok && f->rcond > 0;
}

/* A pivoted factorization of Mx into f (whatever f held is dropped first). */
static tb_status pivot_into(tb_solver *s, factorization *f, const double *Mx, size_t *culprit)
{
    drop(s, f);
    /* KLU's API takes non-const arrays but does not modify A */
    double *Ax = (double *)(uintptr_t)Mx;
    s->counts.numeric++;
    if (!klu_factor_flushed(s, f, Ax)) {
        int status = s->common.status;
        drop(s, f);
        if (status == KLU_OUT_OF_MEMORY)
            return TB_ERR_NOMEM;
        return status == KLU_SINGULAR ? singular(s, culprit) : TB_ERR_NUMERIC;
    }
    s->counts.pivoted++;
    return TB_OK;
}

tb_status tb_solver_factor(tb_solver *s, const double *Mx, size_t *culprit)
{
    drop(s, &s->repivot);
    return pivot_into(s, &s->reference, Mx, culprit);
}

tb_status tb_solver_refactor(tb_solver *s, const double *Mx, double rcond_drop, size_t *culprit)
{
    if (!s->reference.numeric)
        return tb_solver_factor(s, Mx, culprit);
    factorization *f = s->repivot.numeric ? &s->repivot : &s->reference;
    double *Ax = (double *)(uintptr_t)Mx;
    s->counts.numeric++;
    unsigned mode = flush_begin();
    int ok = klu_z_refactor(s->mna->Ap, s->mna->Ai, Ax, s->symbolic, f->numeric, &s->common);
    flush_end(mode);
    /* A reused pivot that has become small shows as a collapse of min/max |U_ii|.
     * That ratio is O(n); klu_z_rgrowth would cost about half a refactor. */
    ok = ok && s->common.status == KLU_OK && pivot_ratio(s, f->numeric) >= rcond_drop * f->rcond;
    if (ok)
        return TB_OK;
    if (s->common.status == KLU_OUT_OF_MEMORY)
        return TB_ERR_NOMEM;
    return pivot_into(s, &s->repivot, Mx, culprit);
}

tb_status tb_solver_solve(tb_solver *s, double complex *B, size_t nrhs)
{
    if (nrhs == 0)
        return TB_OK;
    if (nrhs > (size_t)INT_MAX || s->mna->n > (size_t)INT_MAX / 2)
        return TB_ERR_NUMERIC;
    /* double complex has the layout of KLU's interleaved (re, im) pairs (C11 6.2.5) */
    double *Bx = (double *)B;
    s->counts.solves++;
    s->counts.columns += nrhs;
    unsigned mode = flush_begin();
    int ok = klu_z_solve(s->symbolic, current(s)->numeric, (int)s->mna->n, (int)nrhs, Bx, &s->common);
    flush_end(mode);
    return ok ? TB_OK : TB_ERR_NUMERIC;
}

/* Scales re + j im by a power of 2 when its larger part lies outside [lo, hi];
 * returns the exponent taken out. */
static long rescale(double *re, double *im, double lo, double hi)
{
    double m = fmax(fabs(*re), fabs(*im));
    if (m >= lo && m <= hi)
        return 0;
    int k = 0;
    frexp(m, &k);
    *re = ldexp(*re, -k);
    *im = ldexp(*im, -k);
    return k;
}

tb_status tb_solver_log_det(tb_solver *s, double *log_abs, double *arg)
{
    const klu_numeric *numeric = current(s)->numeric;
    if (!numeric)
        return TB_ERR_NOT_FOUND;
    size_t n = s->mna->n;
    const double *U = numeric->Udiag; /* n complex values, (re, im) interleaved */
    const double *Rs = numeric->Rs;   /* NULL without scaling */
    /* The product of the pivots (times the row scale factors), kept as z 2^e with
     * |z| within 2^-400 .. 2^400: one complex product a pivot instead of a log and
     * an atan2 (both were a fifth of the argument principle's time). */
    double zr = 1, zi = 0;
    long e = 0;
    for (size_t i = 0; i < n; i++) {
        double r = Rs ? Rs[i] : 1.0;
        double re = U[2 * i] * r, im = U[2 * i + 1] * r;
        if (re == 0 && im == 0)
            return TB_ERR_SINGULAR;
        e += rescale(&re, &im, 0x1p-500, 0x1p500);
        double pr = zr * re - zi * im;
        zi = zr * im + zi * re;
        zr = pr;
        e += rescale(&zr, &zi, 0x1p-400, 0x1p400);
    }
    double mag = log(hypot(zr, zi)) + (double)e * 0.69314718055994530941723212145817657;
    double phase = atan2(zi, zr);
    bool odd = s->q_odd != perm_odd(numeric->Pnum, n, s->mark);
    double pi = TB_TWO_PI / 2;
    phase = remainder(phase + (odd ? pi : 0), TB_TWO_PI);
    *log_abs = mag;
    *arg = phase <= -pi ? phase + TB_TWO_PI : phase;
    return TB_OK;
}

/* min/max |U_ii| of a real factorization. */
static double real_pivot_ratio(const tb_solver *s, const klu_numeric *numeric)
{
    return udiag_ratio(numeric->Udiag, s->mna->n, 1);
}

tb_status tb_solver_factor_real(tb_solver *s, const double *Ax, size_t *culprit)
{
    if (s->real_numeric)
        klu_free_numeric(&s->real_numeric, &s->common);
    double *A = (double *)(uintptr_t)Ax; /* not modified, as above */
    s->counts.numeric++;
    unsigned mode = flush_begin();
    s->real_numeric = klu_factor(s->mna->Ap, s->mna->Ai, A, s->symbolic, &s->common);
    flush_end(mode);
    if (!s->real_numeric) {
        if (s->common.status == KLU_OUT_OF_MEMORY)
            return TB_ERR_NOMEM;
        return s->common.status == KLU_SINGULAR ? singular(s, culprit) : TB_ERR_NUMERIC;
    }
    s->real_rcond = real_pivot_ratio(s, s->real_numeric);
    if (s->common.status == KLU_SINGULAR || s->real_rcond == 0) {
        klu_free_numeric(&s->real_numeric, &s->common);
        s->common.status = KLU_SINGULAR;
        return singular(s, culprit);
    }
    s->counts.pivoted++;
    return TB_OK;
}

tb_status tb_solver_refactor_real(tb_solver *s, const double *Ax, double rcond_drop, size_t *culprit)
{
    if (!s->real_numeric)
        return tb_solver_factor_real(s, Ax, culprit);
    double *A = (double *)(uintptr_t)Ax; /* not modified, as above */
    s->counts.numeric++;
    unsigned mode = flush_begin();
    int ok = klu_refactor(s->mna->Ap, s->mna->Ai, A, s->symbolic, s->real_numeric, &s->common);
    flush_end(mode);
    if (ok && s->common.status == KLU_OK && real_pivot_ratio(s, s->real_numeric) >= rcond_drop * s->real_rcond)
        return TB_OK;
    if (s->common.status == KLU_OUT_OF_MEMORY)
        return TB_ERR_NOMEM;
    return tb_solver_factor_real(s, Ax, culprit);
}

tb_status tb_solver_solve_real(tb_solver *s, double *B, size_t nrhs)
{
    if (nrhs == 0)
        return TB_OK;
    if (!s->real_numeric || nrhs > (size_t)INT_MAX || s->mna->n > (size_t)INT_MAX)
        return TB_ERR_NUMERIC;
    s->counts.solves++;
    s->counts.columns += nrhs;
    unsigned mode = flush_begin();
    int ok = klu_solve(s->symbolic, s->real_numeric, (int)s->mna->n, (int)nrhs, B, &s->common);
    flush_end(mode);
    return ok ? TB_OK : TB_ERR_NUMERIC;
}

size_t tb_solver_factor_count(const tb_solver *solver)
{
    return solver->counts.pivoted;
}

tb_solver_counts tb_solver_get_counts(const tb_solver *solver)
{
    return solver->counts;
}

tb_status tb_solver_solve_transposed(tb_solver *s, double complex *B, size_t nrhs)
{
    if (nrhs == 0)
        return TB_OK;
    if (nrhs > (size_t)INT_MAX || s->mna->n > (size_t)INT_MAX / 2)
        return TB_ERR_NUMERIC;
    double *Bx = (double *)B;
    s->counts.solves++;
    s->counts.columns += nrhs;
    if (!klu_z_tsolve(s->symbolic, current(s)->numeric, (int)s->mna->n, (int)nrhs, Bx, 0, &s->common))
        return TB_ERR_NUMERIC;
    return TB_OK;
}

tb_solver_counts tb_solver_counts_add(tb_solver_counts a, tb_solver_counts b)
{
    return (tb_solver_counts){a.numeric + b.numeric, a.pivoted + b.pivoted, a.solves + b.solves,
                              a.columns + b.columns};
}
