/* src/crossing.c: bracketing root finder (Brent) and a bracketed minimizer (golden section) */
#include "crossing.h"

#include <float.h>
#include <math.h>

/* Brent's zeroin (R. P. Brent, Algorithms for Minimization without Derivatives,
 * Prentice-Hall, 1973, ch. 4), written out from the method's description. */
tb_status tb_brent_root(tb_scalar_fn fn, void *ctx, double a, double b, double fa, double fb,
                        double xtol, int maxit, double *root)
{
    if (fa == 0) {
        *root = a;
        return TB_OK;
    }
    if (fb == 0) {
        *root = b;
        return TB_OK;
    }
    if ((fa > 0) == (fb > 0))
        return TB_ERR_USAGE;
    double c = a, fc = fa, d = b - a, e = d;
    for (int it = 0; it < maxit; it++) {
        if ((fb > 0) == (fc > 0)) {
            c = a;
            fc = fa;
            d = e = b - a;
        }
        if (fabs(fc) < fabs(fb)) {
            a = b;
            b = c;
            c = a;
            fa = fb;
            fb = fc;
            fc = fa;
        }
        double tol = 2.0 * DBL_EPSILON * fabs(b) + 0.5 * xtol;
        double m = 0.5 * (c - b);
        if (fabs(m) <= tol || fb == 0)
            break;
        if (fabs(e) >= tol && fabs(fa) > fabs(fb)) {
            double s = fb / fa, p, q;
            if (a == c) {
                p = 2.0 * m * s;
                q = 1.0 - s;
            } else {
                double r = fb / fc, t = fa / fc;
                p = s * (2.0 * m * t * (t - r) - (b - a) * (r - 1.0));
                q = (t - 1.0) * (r - 1.0) * (s - 1.0);
            }
            if (p > 0)
                q = -q;
            else
                p = -p;
            if (2.0 * p < fmin(3.0 * m * q - fabs(tol * q), fabs(e * q))) {
                e = d;
                d = p / q;
            } else {
                d = e = m;
            }
        } else {
            d = e = m;
        }
        a = b;
        fa = fb;
        b += fabs(d) > tol ? d : (m > 0 ? tol : -tol);
        tb_status st = fn(ctx, b, &fb);
        if (st)
            return st;
    }
    *root = b;
    return TB_OK;
}

tb_status tb_golden_min(tb_scalar_fn fn, void *ctx, double a, double b, double xtol, int maxit,
                        double *xmin, double *ymin)
{
    const double g = 0.61803398874989484820;
    double x1 = b - g * (b - a), x2 = a + g * (b - a), f1, f2;
    tb_status st = fn(ctx, x1, &f1);
    if (st || (st = fn(ctx, x2, &f2)))
        return st;
    for (int it = 0; it < maxit && fabs(b - a) > xtol; it++) {
        if (f1 <= f2) {
            b = x2;
            x2 = x1;
            f2 = f1;
            x1 = b - g * (b - a);
            st = fn(ctx, x1, &f1);
        } else {
            a = x1;
            x1 = x2;
            f1 = f2;
            x2 = a + g * (b - a);
            st = fn(ctx, x2, &f2);
        }
        if (st)
            return st;
    }
    *xmin = f1 <= f2 ? x1 : x2;
    *ymin = fmin(f1, f2);
    return TB_OK;
}
