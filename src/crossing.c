/* src/crossing.c: bracketing root finder (Brent) and a bracketed minimizer (Brent: golden section and parabolas) */
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

/* Brent's local minimizer ("localmin": golden section with parabolic steps through the
 * three best points; R. P. Brent, Algorithms for Minimization without Derivatives,
 * Prentice-Hall 1973, ch. 5). On a smooth minimum it converges superlinearly, where golden
 * section alone gains a factor 0.618 per evaluation. */
tb_status tb_line_min(tb_scalar_fn fn, void *ctx, double a, double b, double xtol, int maxit,
                      double *xmin, double *ymin)
{
    const double c = 0.38196601125010515180; /* (3 - sqrt 5) / 2 */
    double x = a + c * (b - a), w = x, v = x, fx = 0, d = 0, e = 0;
    tb_status st = fn(ctx, x, &fx);
    if (st)
        return st;
    double fw = fx, fv = fx;
    for (int it = 1; it < maxit; it++) {
        double m = 0.5 * (a + b);
        double tol = 1.5e-8 * fabs(x) + 0.5 * xtol, t2 = 2.0 * tol; /* sqrt(eps) |x|: Brent's own */
        if (fabs(x - m) <= t2 - 0.5 * (b - a))
            break;
        bool golden = true;
        if (fabs(e) > tol) { /* a parabola through x, w, v */
            double r = (x - w) * (fx - fv), q = (x - v) * (fx - fw), p = (x - v) * q - (x - w) * r;
            q = 2.0 * (q - r);
            if (q > 0)
                p = -p;
            else
                q = -q;
            r = e;
            e = d;
            if (fabs(p) < fabs(0.5 * q * r) && p > q * (a - x) && p < q * (b - x)) {
                d = p / q;
                double u = x + d;
                if (u - a < t2 || b - u < t2)
                    d = x < m ? tol : -tol;
                golden = false;
            }
        }
        if (golden) {
            e = (x < m ? b : a) - x;
            d = c * e;
        }
        double u = x + (fabs(d) >= tol ? d : d > 0 ? tol : -tol), fu = 0;
        if ((st = fn(ctx, u, &fu)))
            return st;
        if (fu <= fx) {
            if (u < x)
                b = x;
            else
                a = x;
            v = w;
            fv = fw;
            w = x;
            fw = fx;
            x = u;
            fx = fu;
        } else {
            if (u < x)
                a = u;
            else
                b = u;
            if (fu <= fw || w == x) {
                v = w;
                fv = fw;
                w = u;
                fw = fu;
            } else if (fu <= fv || v == x || v == w) {
                v = u;
                fv = fu;
            }
        }
    }
    *xmin = x;
    *ymin = fx;
    return TB_OK;
}
