/* envtime.c: adaptive Simpson for the envelope equation's time integral (see
 * engines/envtime.h). */
#include "engines/envtime.h"

#include <math.h>

typedef struct quad {
    ru_envtime_fn f;
    void *user;
    int fail;
} quad;

static double eval(quad *q, double u)
{
    if (q->fail)
        return 0;
    return q->f(q->user, u, &q->fail);
}

static double simpson(quad *q, double a, double b, double fa, double fm, double fb,
                      double whole, double tol, int depth)
{
    double m = 0.5 * (a + b), lm = 0.5 * (a + m), rm = 0.5 * (m + b);
    double flm = eval(q, lm), frm = eval(q, rm);
    double left = (m - a) / 6 * (fa + 4 * flm + fm), right = (b - m) / 6 * (fm + 4 * frm + fb);
    double diff = left + right - whole;
    if (q->fail || depth <= 0 || fabs(diff) <= 15 * tol)
        return left + right + diff / 15;
    return simpson(q, a, m, fa, flm, fm, left, 0.5 * tol, depth - 1) +
           simpson(q, m, b, fm, frm, fb, right, 0.5 * tol, depth - 1);
}

int ru_envtime_integrate(ru_envtime_fn f, void *user, double u_lo, double u_hi,
                         double rel, double *out)
{
    quad q = {f, user, 0};
    *out = 0;
    if (!(u_hi > u_lo))
        return 0;
    double m = 0.5 * (u_lo + u_hi);
    double fa = eval(&q, u_lo), fm = eval(&q, m), fb = eval(&q, u_hi);
    double whole = (u_hi - u_lo) / 6 * (fa + 4 * fm + fb);
    *out = simpson(&q, u_lo, u_hi, fa, fm, fb, whole, rel * fabs(whole), 40);
    return q.fail;
}
