/* floquet.c: Floquet multipliers (LAPACK dgeev of the balanced monodromy matrix),
 * the amplitude-recovery time and the phase multiplier's left eigenvector (see
 * floquet.h). */
#include "engines/floquet.h"

#include <lapacke.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

/* D^-1 phi D into b (n*n). */
static void balance(const double *phi, const double *scale, size_t n, double *b)
{
    for (size_t i = 0; i < n; i++)
        for (size_t j = 0; j < n; j++)
            b[i * n + j] = phi[i * n + j] * scale[j] / scale[i];
}

static double dist1(ru_multiplier m)
{
    return hypot(m.re - 1.0, m.im);
}

static int by_modulus(const void *a, const void *b)
{
    const ru_multiplier *x = a, *y = b;
    double mx = hypot(x->re, x->im), my = hypot(y->re, y->im);
    if (mx != my)
        return mx > my ? -1 : 1;
    return x->im > y->im ? -1 : x->im < y->im; /* conjugates: im > 0 first */
}

ru_status ru_floquet_multipliers(const double *phi, const double *scale, size_t n,
                                 ru_multiplier *mult)
{
    double *b = malloc((n * n + 2 * n) * sizeof *b);
    if (!b)
        return RU_ENOMEM;
    double *wr = b + n * n, *wi = wr + n;
    balance(phi, scale, n, b);
    lapack_int info = LAPACKE_dgeev(LAPACK_ROW_MAJOR, 'N', 'N', (lapack_int)n, b,
                                    (lapack_int)n, wr, wi, NULL, 1, NULL, 1);
    if (info == 0) {
        size_t best = 0;
        for (size_t i = 0; i < n; i++) {
            mult[i] = (ru_multiplier){wr[i], wi[i]};
            if (dist1(mult[i]) < dist1(mult[best]))
                best = i;
        }
        ru_multiplier one = mult[best];
        mult[best] = mult[0];
        mult[0] = one;
        if (n > 1)
            qsort(mult + 1, n - 1, sizeof *mult, by_modulus);
    }
    free(b);
    return info == 0 ? RU_OK : RU_ENUMERIC;
}

void ru_floquet_recovery(const ru_multiplier *mult, size_t n, double period_s,
                         double *tau_s, int *rings, double *ring_hz)
{
    *rings = 0;
    *ring_hz = 0.0;
    if (n < 2) {
        *tau_s = NAN;
        return;
    }
    double m = hypot(mult[1].re, mult[1].im);
    if (m >= 1.0)
        *tau_s = INFINITY;
    else if (m <= 0.0)
        *tau_s = 0.0;
    else
        *tau_s = -period_s / log(m);
    if (fabs(mult[1].im) > 1e-12 * fmax(m, 1e-300)) {
        *rings = 1;
        *ring_hz = fabs(atan2(mult[1].im, mult[1].re)) / (2.0 * M_PI * period_s);
    }
}

ru_status ru_floquet_phase_vector(const double *phi, const double *scale, size_t n,
                                  const double *f0, double *v)
{
    size_t m = n + 1;
    double *a = malloc((m * m + m + n) * sizeof *a);
    lapack_int *piv = malloc(m * sizeof *piv);
    if (!a || !piv) {
        free(a);
        free(piv);
        return RU_ENOMEM;
    }
    double *rhs = a + m * m, *ft = rhs + m, fn = 0.0;
    for (size_t i = 0; i < n; i++) { /* balanced flow D^-1 f0, to unit length */
        ft[i] = f0[i] / scale[i];
        fn += ft[i] * ft[i];
    }
    fn = sqrt(fn);
    ru_status st = RU_ENUMERIC;
    if (fn > 0 && isfinite(fn)) {
        for (size_t i = 0; i < n; i++)
            ft[i] /= fn;
        memset(a, 0, m * m * sizeof *a);
        for (size_t i = 0; i < n; i++) { /* row i: (phi~^T - I) v~ + f~ m */
            for (size_t j = 0; j < n; j++)
                a[i * m + j] = phi[j * n + i] * scale[i] / scale[j] - (i == j);
            a[i * m + n] = ft[i];
            a[n * m + i] = ft[i];
            rhs[i] = 0.0;
        }
        rhs[n] = 1.0;
        if (LAPACKE_dgesv(LAPACK_ROW_MAJOR, (lapack_int)m, 1, a, (lapack_int)m, piv, rhs,
                          1) == 0) {
            for (size_t i = 0; i < n; i++) /* v = D^-1 v~ / |D^-1 f0| */
                v[i] = rhs[i] / (scale[i] * fn);
            st = RU_OK;
        }
    }
    free(a);
    free(piv);
    return st;
}
