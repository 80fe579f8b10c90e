/* poles.c: poles of a system at its operating point.
 *
 * J = M^{-1} dr/dx with dr/dx from the DC evaluation (ep.dc = 1, scale 1) and M the
 * mass matrix; M J = dr is solved by LU (LAPACKE_dgesv); for a DAE J is the
 * reduction to the differential variables (reduce.c); the eigenvalues come from
 * LAPACKE_dgeev (which overwrites its input and returns them unsorted). Output is
 * sorted by real part, largest first; ties (conjugate pairs) put the larger |im|
 * first, then the positive imaginary part first. */
#include "engines/smallsig_impl.h"

#include <lapacke.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

static int pole_cmp(const void *pa, const void *pb)
{
    const ru_pole *a = pa, *b = pb;
    if (a->re_per_s != b->re_per_s)
        return a->re_per_s > b->re_per_s ? -1 : 1;
    double ma = fabs(a->im_rad_per_s), mb = fabs(b->im_rad_per_s);
    if (ma != mb)
        return ma > mb ? -1 : 1;
    if (a->im_rad_per_s != b->im_rad_per_s)
        return a->im_rad_per_s > b->im_rad_per_s ? -1 : 1;
    return 0;
}

size_t ru_poles_count(const ru_system *s)
{
    return ru_system_size(s) - ru_system_algebraic_count(s);
}

/* J = M^{-1} dr at x into J (n*n; for a DAE the reduced nd*nd); M is destroyed. */
static ru_status state_matrix(const ru_system *s, const double *x, size_t n, double *J,
                              double *M, lapack_int *ipiv, ru_error *err)
{
    if (ru_system_algebraic_count(s) > 0) {
        ru_reduced red;
        ru_status st = ru_ss_reduce(s, x, &red, err);
        if (st == RU_OK)
            memcpy(J, red.J, red.nd * red.nd * sizeof *J);
        ru_ss_reduced_free(&red);
        return st;
    }
    ru_status st = ru_ss_linearize(s, x, J, M, err);
    if (st != RU_OK)
        return st;
    lapack_int info = LAPACKE_dgesv(LAPACK_ROW_MAJOR, (lapack_int)n, (lapack_int)n, M,
                                    (lapack_int)n, ipiv, J, (lapack_int)n);
    if (info != 0)
        return ru_error_set(err, RU_ENUMERIC, "", 0, 0,
                            "poles: the mass matrix is singular (state %s)",
                            ru_ss_state_label(s, info > 0 ? (int)info - 1 : 0));
    return RU_OK;
}

ru_status ru_poles_compute(const ru_system *s, const double *x, ru_pole *poles,
                           ru_error *err)
{
    size_t n = ru_system_size(s), np = ru_poles_count(s);
    if (np == 0)
        return RU_OK;
    ru_status st = RU_OK;
    double *J = malloc(n * n * sizeof *J);
    double *M = malloc(n * n * sizeof *M);
    double *wr = malloc(n * sizeof *wr);
    double *wi = malloc(n * sizeof *wi);
    lapack_int *ipiv = malloc(n * sizeof *ipiv);
    if (!J || !M || !wr || !wi || !ipiv) {
        st = ru_error_set(err, RU_ENOMEM, "", 0, 0, "poles: out of memory");
        goto done;
    }
    st = state_matrix(s, x, n, J, M, ipiv, err);
    if (st != RU_OK)
        goto done;
    lapack_int info = LAPACKE_dgeev(LAPACK_ROW_MAJOR, 'N', 'N', (lapack_int)np, J,
                                    (lapack_int)np, wr, wi, NULL, 1, NULL, 1);
    if (info != 0) {
        st = ru_error_set(err, RU_ENUMERIC, "", 0, 0,
                          "poles: the eigenvalue solver failed (code %d)", (int)info);
        goto done;
    }
    for (size_t i = 0; i < np; i++) {
        poles[i].re_per_s = wr[i];
        poles[i].im_rad_per_s = wi[i];
    }
    qsort(poles, np, sizeof *poles, pole_cmp);
done:
    free(J);
    free(M);
    free(wr);
    free(wi);
    free(ipiv);
    return st;
}

int ru_poles_dominant(const ru_pole *poles, size_t n)
{
    int best = -1;
    for (size_t i = 0; i < n; i++) {
        if (!(poles[i].im_rad_per_s > 0))
            continue;
        if (best < 0 || poles[i].re_per_s > poles[best].re_per_s)
            best = (int)i;
    }
    return best;
}
