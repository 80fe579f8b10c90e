/* modes.c: eigenvectors of the dominant mode (see modes.h). */
#include "engines/modes.h"

#include "engines/smallsig_impl.h"

#include <lapacke.h>
#include <math.h>
#include <stdlib.h>

/* J = M^{-1} dr/dx at the DC operating point x (row-major n*n). */
static ru_status dc_jacobian(const ru_system *s, const double *x, double *J)
{
    size_t n = ru_system_size(s);
    double *M = malloc(n * n * sizeof *M);
    lapack_int *piv = malloc(n * sizeof *piv);
    ru_status st = (M && piv) ? ru_ss_linearize(s, x, J, M, NULL) : RU_ENOMEM;
    if (st == RU_OK && LAPACKE_dgesv(LAPACK_ROW_MAJOR, (lapack_int)n, (lapack_int)n, M,
                                     (lapack_int)n, piv, J, (lapack_int)n) != 0)
        st = RU_ENUMERIC;
    free(M);
    free(piv);
    return st;
}

ru_status ru_mode_near(const ru_system *s, const double *x_op, ru_pole near,
                       ru_pole *lambda, double *v_re, double *v_im, double *u_re,
                       double *u_im)
{
    size_t n = ru_system_size(s);
    ru_status st = RU_ENOMEM;
    double *J = malloc(n * n * sizeof *J), *vl = malloc(n * n * sizeof *vl);
    double *vr = malloc(n * n * sizeof *vr), *wr = malloc(n * sizeof *wr);
    double *wi = malloc(n * sizeof *wi);
    if (!J || !vl || !vr || !wr || !wi || n == 0)
        goto done;
    if ((st = dc_jacobian(s, x_op, J)) != RU_OK)
        goto done;
    st = RU_ENUMERIC;
    if (LAPACKE_dgeev(LAPACK_ROW_MAJOR, 'V', 'V', (lapack_int)n, J, (lapack_int)n, wr, wi,
                      vl, (lapack_int)n, vr, (lapack_int)n) != 0)
        goto done;
    size_t best = n;
    double bestd = INFINITY;
    for (size_t j = 0; j + 1 < n; j++) {
        if (wi[j] <= 0)
            continue;
        double d = hypot(wr[j] - near.re_per_s, wi[j] - near.im_rad_per_s);
        if (d < bestd) {
            bestd = d;
            best = j;
        }
    }
    if (best == n)
        goto done;
    /* LAPACK stores the pair's vectors as columns j (real) and j+1 (imaginary). */
    for (size_t i = 0; i < n; i++) {
        v_re[i] = vr[i * n + best];
        v_im[i] = vr[i * n + best + 1];
        if (u_re)
            u_re[i] = vl[i * n + best];
        if (u_im)
            u_im[i] = vl[i * n + best + 1];
    }
    lambda->re_per_s = wr[best];
    lambda->im_rad_per_s = wi[best];
    st = RU_OK;
done:
    free(J);
    free(vl);
    free(vr);
    free(wr);
    free(wi);
    return st;
}
