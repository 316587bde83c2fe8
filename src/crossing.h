/* src/crossing.h: bracketing root finder (Brent) and a bracketed minimizer (Brent: golden section and parabolas) */
#ifndef TB_CROSSING_H
#define TB_CROSSING_H

#include "tbeta.h"

/* y = f(x); a non-OK status stops the search and is passed on. */
typedef tb_status (*tb_scalar_fn)(void *ctx, double x, double *y);

/* A root of fn in [a, b], where fa = fn(a) and fb = fn(b) differ in sign (or
 * one is 0), by Brent's method (inverse quadratic interpolation, secant and
 * bisection), to |dx| <= xtol + 4 eps |x|, in at most maxit evaluations.
 * Errors: TB_ERR_USAGE (no sign change), those of fn. */
tb_status tb_brent_root(tb_scalar_fn fn, void *ctx, double a, double b, double fa, double fb,
                        double xtol, int maxit, double *root);

/* A local minimum of fn in [a, b] by Brent's method (golden section and parabolic
 * steps) to about xtol (at most maxit evaluations); *xmin and *ymin the best point seen. */
tb_status tb_line_min(tb_scalar_fn fn, void *ctx, double a, double b, double xtol, int maxit,
                      double *xmin, double *ymin);

#endif
