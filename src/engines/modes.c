/* modes.c: eigenvectors of the dominant mode (see modes.h). */
#include "engines/modes.h"

#include "engines/smallsig_impl.h"

#include <lapacke.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

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

/* The reduced linearisation's matrix into J (nd*nd) for a DAE, else J = M^{-1} dr. */
static ru_status mode_matrix(const ru_system *s, const double *x, double *J,
                             ru_reduced *red)
{
    if (ru_system_algebraic_count(s) == 0)
        return dc_jacobian(s, x, J);
    ru_status st = ru_ss_reduce(s, x, red, NULL);
    if (st == RU_OK)
        memcpy(J, red->J, red->nd * red->nd * sizeof *J);
    return st;
}

/* The chosen eigenvectors (columns best, best+1 of nd*nd arrays) as state vectors. */
static void pick_vectors(const ru_system *s, const ru_reduced *red, size_t nd, size_t best,
                         const double *vr, const double *vl, double *scratch,
                         double *v_re, double *v_im, double *u_re, double *u_im)
{
    double *out[4] = {v_re, v_im, u_re, u_im};
    const double *src[4] = {vr, vr, vl, vl};
    for (int q = 0; q < 4; q++) {
        if (!out[q])
            continue;
        double *dst = red ? scratch : out[q];
        for (size_t i = 0; i < nd; i++)
            dst[i] = src[q][i * nd + best + (q & 1)];
        if (red && q < 2)
            ru_ss_expand(s, red, scratch, out[q]);
        else if (red)
            ru_ss_left(s, red, scratch, out[q]);
    }
}

ru_status ru_mode_near(const ru_system *s, const double *x_op, ru_pole near,
                       ru_pole *lambda, double *v_re, double *v_im, double *u_re,
                       double *u_im)
{
    size_t n = ru_system_size(s), nd = n - ru_system_algebraic_count(s);
    ru_status st = RU_ENOMEM;
    ru_reduced red;
    memset(&red, 0, sizeof red);
    double *J = malloc(n * n * sizeof *J), *vl = malloc(n * n * sizeof *vl);
    double *vr = malloc(n * n * sizeof *vr), *wr = malloc(n * sizeof *wr);
    double *wi = malloc(n * sizeof *wi);
    if (!J || !vl || !vr || !wr || !wi || nd == 0)
        goto done;
    if ((st = mode_matrix(s, x_op, J, &red)) != RU_OK)
        goto done;
    n = nd;
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
    lambda->re_per_s = wr[best];
    lambda->im_rad_per_s = wi[best];
    /* LAPACK stores the pair's vectors as columns j (real) and j+1 (imaginary);
     * wr is free now and serves as scratch */
    pick_vectors(s, ru_system_algebraic_count(s) ? &red : NULL, nd, best, vr, vl, wr,
                 v_re, v_im, u_re, u_im);
    st = RU_OK;
done:
    ru_ss_reduced_free(&red);
    free(J);
    free(vl);
    free(vr);
    free(wr);
    free(wi);
    return st;
}

ru_status ru_mode_input(const ru_system *s, const double *x_op, const double *u_re,
                        const double *u_im, double *w_re, double *w_im)
{
    size_t n = ru_system_size(s);
    ru_status st = RU_ENOMEM;
    double *M = malloc((n * n + 2 * n + 1) * sizeof *M), *rhs = M ? M + n * n : NULL;
    lapack_int *piv = malloc((n + 1) * sizeof *piv);
    ru_reduced red;
    memset(&red, 0, sizeof red);
    if (!M || !piv)
        goto done;
    if (ru_system_algebraic_count(s) > 0) {
        if ((st = ru_ss_reduce(s, x_op, &red, NULL)) != RU_OK)
            goto done;
        for (size_t i = 0; i < red.nd; i++) { /* u_d: u on the differential variables */
            rhs[i] = u_re[red.dvar[i]];
            rhs[n + i] = u_im[red.dvar[i]];
        }
        st = ru_ss_input(s, &red, rhs, rhs + n, w_re, w_im);
        goto done;
    }
    ru_system_mass(s, M);
    for (size_t i = 0; i < n; i++) { /* column-major: column 0 u_re, column 1 u_im */
        rhs[i] = u_re[i];
        rhs[n + i] = u_im[i];
    }
    st = RU_ENUMERIC;
    if (LAPACKE_dgesv(LAPACK_COL_MAJOR, (lapack_int)n, 2, M, (lapack_int)n, piv, rhs,
                      (lapack_int)n) != 0) /* row-major M read as column-major is M^T */
        goto done;
    for (size_t i = 0; i < n; i++) {
        w_re[i] = rhs[i];
        w_im[i] = rhs[n + i];
    }
    st = RU_OK;
done:
    ru_ss_reduced_free(&red);
    free(M);
    free(piv);
    return st;
}
