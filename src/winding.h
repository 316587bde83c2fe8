/* src/winding.h: right-half-plane zeros of det M(s) and det M0(s), counted by the argument principle along the jw axis */
#ifndef TB_WINDING_H
#define TB_WINDING_H

#include "probe.h"

/* Base steps per decade of the walk along the jw axis (each step is halved
 * until the phases of det M and det M0 move by at most pi/4). */
#define TB_WINDING_STEPS 10
/* At most this many evaluations (fresh factorizations of M) for one count. */
#define TB_WINDING_MAX_EVALS 20000
/* The walk goes on by decades past each end of the range asked for until the
 * slope of ln|det| and the phase have settled, at most this many decades. */
#define TB_WINDING_MAX_DECADES 40
/* Where det is zero at s = 0, the slope at the low end counts the zeros at the
 * origin once it has settled at least this many decades below the range. */
#define TB_WINDING_ORIGIN_DECADES 12

/* The zeros of one determinant, a polynomial p(s) in s = jw (det(G + sC)). */
typedef struct {
    bool counted;       /* false: no count, why says why */
    const char *why;    /* static text when !counted, else NULL */
    size_t rhp;         /* zeros with Re s > 0 */
    size_t degree;      /* finite zeros in all: d ln|p(jw)| / d ln w at high frequency */
    size_t at_origin;   /* zeros at s = 0: the same slope at low frequency */
    size_t on_axis;     /* zeros on the jw axis away from 0, a conjugate pair counting 2 (not in rhp) */
    double half_turns;  /* the change of arg p(jw) over the walk, in units of pi */
} tb_winding_count;

/* Both counts for one loop. */
typedef struct {
    tb_winding_count closed; /* det M(s): the natural frequencies of the circuit as it is */
    tb_winding_count open;   /* det M0(s) = det M(s) / (1 + T(s)): the loop's source at gain zero */
    double f_low;            /* the walk's ends, Hz */
    double f_high;
    size_t evaluations;      /* fresh factorizations of M the walk took */
} tb_winding;

/* Counts the right-half-plane zeros of det M(s) and of det M0(s) for loop l
 * (l < the circuit's loop count), without eigenvalues, by the argument
 * principle: for a real polynomial p of degree d with m zeros at the origin and
 * none elsewhere on the axis, the number of zeros with Re s > 0 is
 *   Z = (d - m)/2 - (change of arg p(jw) for w from 0+ to infinity)/pi.
 * arg det M and ln|det M| come from KLU's factors (tb_solver_log_det) at each
 * frequency, through the probe; det M0 = det M / (1 + T) from the same
 * factorization (the return difference). The walk starts on [f_start, f_stop]
 * (Hz, 0 < f_start < f_stop: the sweep's range), TB_WINDING_STEPS steps a
 * decade, halving a step until, over each half, both phases move by at most
 * pi/2 and by at most pi/4 from what the phase's rate over the last step
 * predicts (above a crowd of zeros the phase drifts by whole turns per step),
 * and the slope of ln|det| changes by at most 1 between the halves (more zeros
 * than that within a step would turn the phase by whole turns no wrapped
 * difference shows). It goes on by decades past the top until the slope of
 * ln|det| is within 0.05 of a whole number d and the phase moves by at most 0.05
 * rad over the decade. Below the range it goes down by decades until det is
 * within 1 % and 0.01 rad of its value at s = 0 (one more factorization, at
 * f = 0: then m = 0); where det is zero at s = 0 (an integrator), until the
 * slope has settled to m >= 1 at least TB_WINDING_ORIGIN_DECADES below the
 * range. A zero on the axis (a phase jump that no halving resolves, down to
 * 1e-10 relative) is counted in on_axis and, like a zero at the origin, not in
 * rhp. A count that cannot be made (no settled slope, more than
 * TB_WINDING_MAX_EVALS evaluations, a total that is not a whole number) has
 * counted false and a reason. Limits: a zero beyond the settled top (above a
 * wide stretch where the slope stays whole), or one within
 * TB_WINDING_ORIGIN_DECADES of the origin's slope region when det(0) = 0, is
 * not seen (a left-half-plane one changes no count; a right-half-plane one is
 * missed); resonances closer together than about one part in 1e4 whose
 * damping is below about 1e-4 can be missed. Cost: about TB_WINDING_STEPS
 * evaluations a decade plus about two per zero of det M (a 10^4-section RC
 * line: 16 800 evaluations), so TB_WINDING_MAX_EVALS stops it near 10^4
 * reactive elements; where the degree found first (from the slope at the top of
 * the range) says the walk would need more than that, it gives up before walking.
 * Errors: TB_ERR_USAGE (bad l or range), TB_ERR_NOMEM, TB_ERR_NUMERIC; a
 * singular M at a frequency of the walk is stepped around, not an error. */
tb_status tb_winding_run(tb_probe *probe, size_t l, double f_start, double f_stop, tb_winding *out);

/* tb_winding_run with a budget of evaluations other than TB_WINDING_MAX_EVALS
 * (budget > 0; TB_ERR_USAGE otherwise). */
tb_status tb_winding_run_budget(tb_probe *probe, size_t l, double f_start, double f_stop, size_t budget,
                                tb_winding *out);

#endif
