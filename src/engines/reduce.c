/* reduce.c: the small-signal linearisation shared by the engines (dr/dx and M at
 * the operating point, state labels), and its reduction to the differential
 * variables for a DAE (see smallsig_impl.h), for poles and modes.
 *
 * Linear form: M x' = A x, A = dr/dx at the operating point, M singular. With
 * x = S y (a capacitor group's members as differences from its reference, as the
 * DAE integrator does, dae.c) and T the row operation that adds every member's
 * row to its reference's row, T M S = blockdiag(M_dd, 0) over (differential,
 * algebraic) variables and G = T A S splits as
 *   M_dd y_d' = G_dd y_d + G_da y_a,   0 = G_ad y_d + G_aa y_a,
 * so y_a = K y_d with K = -G_aa^{-1} G_ad and y_d' = M_dd^{-1} (G_dd + G_da K) y_d.
 * Its eigenvalues are exactly the finite poles of the pencil (A, M): no infinite
 * eigenvalue has to be told from a large finite one by a threshold, which a
 * generalized eigensolver (QZ) would need. G_aa is nonsingular for an index-1
 * network (the system refuses the structural failures; a singular G_aa at the
 * operating point is reported with the state's name). */
#include "engines/smallsig_impl.h"

#include <lapacke.h>
#include <stdlib.h>
#include <string.h>

ru_status ru_ss_linearize(const ru_system *s, const double *x, double *dr, double *M,
                          ru_error *err)
{
    ru_eval_point ep = {.t_s = 0.0, .dc = 1, .source_scale = 1.0};
    if (dr) {
        ru_status st = ru_system_residual(s, &ep, x, NULL, dr);
        if (st != RU_OK)
            return ru_error_set(err, st, "", 0, 0,
                                "small-signal: the system could not be linearised at "
                                "the operating point");
    }
    if (M)
        ru_system_mass(s, M);
    return RU_OK;
}

const char *ru_ss_state_label(const ru_system *s, int k)
{
    if (k < 0 || (size_t)k >= ru_system_size(s))
        return "?";
    const char *name = ru_system_state_name(s, (size_t)k);
    return name ? name : "?";
}

void ru_ss_reduced_free(ru_reduced *r)
{
    if (!r)
        return;
    free(r->dvar);
    free(r->J);
    free(r->K);
    free(r->G);
    memset(r, 0, sizeof *r);
}

/* G = T A S in place (A row-major n*n): columns of members into their reference's
 * column, then rows likewise. */
static void transform(const ru_system *s, double *A, size_t n)
{
    for (size_t i = 0; i < n; i++) {
        int g = ru_system_state_group(s, i);
        if (g < 0 || (size_t)g == i)
            continue;
        for (size_t row = 0; row < n; row++)
            A[row * n + (size_t)g] += A[row * n + i];
    }
    for (size_t i = 0; i < n; i++) {
        int g = ru_system_state_group(s, i);
        if (g < 0 || (size_t)g == i)
            continue;
        for (size_t col = 0; col < n; col++)
            A[(size_t)g * n + col] += A[i * n + col];
    }
}

/* K = -G_aa^{-1} G_ad, then J = M_dd^{-1} (G_dd + G_da K). */
static ru_status eliminate(const ru_system *s, ru_reduced *r, const double *G,
                           const double *M, ru_error *err)
{
    size_t n = r->n, nd = r->nd, na = r->na;
    int *avar = r->dvar + nd;
    double *Gaa = malloc((na * na + nd * nd + 1) * sizeof *Gaa);
    double *Mdd = Gaa + na * na;
    lapack_int *piv = malloc((n + 1) * sizeof *piv);
    ru_status st = RU_OK;
    if (!Gaa || !piv) {
        st = ru_error_set(err, RU_ENOMEM, "", 0, 0, "small-signal: out of memory");
        goto done;
    }
    for (size_t i = 0; i < na; i++) {
        for (size_t j = 0; j < na; j++)
            Gaa[i * na + j] = G[(size_t)avar[i] * n + (size_t)avar[j]];
        for (size_t j = 0; j < nd; j++)
            r->K[i * nd + j] = -G[(size_t)avar[i] * n + (size_t)r->dvar[j]];
    }
    lapack_int info = na ? LAPACKE_dgesv(LAPACK_ROW_MAJOR, (lapack_int)na, (lapack_int)nd,
                                         Gaa, (lapack_int)na, piv, r->K, (lapack_int)nd)
                         : 0;
    if (info != 0) {
        st = ru_error_set(err, RU_ENUMERIC, "", 0, 0,
                          "small-signal: KCL at the nodes without capacitance is singular "
                          "at the operating point (state %s): no conductance fixes them",
                          ru_ss_state_label(s, avar[info > 0 ? info - 1 : 0]));
        goto done;
    }
    for (size_t i = 0; i < nd; i++)
        for (size_t j = 0; j < nd; j++) {
            double acc = G[(size_t)r->dvar[i] * n + (size_t)r->dvar[j]];
            for (size_t q = 0; q < na; q++)
                acc += G[(size_t)r->dvar[i] * n + (size_t)avar[q]] * r->K[q * nd + j];
            r->J[i * nd + j] = acc;
            Mdd[i * nd + j] = M[(size_t)r->dvar[i] * n + (size_t)r->dvar[j]];
        }
    info = nd ? LAPACKE_dgesv(LAPACK_ROW_MAJOR, (lapack_int)nd, (lapack_int)nd, Mdd,
                              (lapack_int)nd, piv, r->J, (lapack_int)nd)
              : 0;
    if (info != 0)
        st = ru_error_set(err, RU_ENUMERIC, "", 0, 0,
                          "poles: the mass matrix is singular (state %s)",
                          ru_ss_state_label(s, r->dvar[info > 0 ? info - 1 : 0]));
done:
    free(Gaa);
    free(piv);
    return st;
}

ru_status ru_ss_reduce(const ru_system *s, const double *x, ru_reduced *r, ru_error *err)
{
    memset(r, 0, sizeof *r);
    size_t n = ru_system_size(s);
    r->n = n;
    r->na = ru_system_algebraic_count(s);
    r->nd = n - r->na;
    double *A = malloc((2 * n * n + 1) * sizeof *A), *M = A ? A + n * n : NULL;
    r->G = A; /* kept: G = T A S and M, for ru_ss_input */
    r->M = M;
    r->dvar = malloc((n + 1) * sizeof *r->dvar);
    r->J = malloc((r->nd * r->nd + 1) * sizeof *r->J);
    r->K = malloc((r->na * r->nd + 1) * sizeof *r->K);
    ru_status st = RU_OK;
    if (!A || !r->dvar || !r->J || !r->K) {
        st = ru_error_set(err, RU_ENOMEM, "", 0, 0, "small-signal: out of memory");
        goto done;
    }
    size_t kd = 0, ka = r->nd; /* differential first, then algebraic */
    for (size_t i = 0; i < n; i++)
        r->dvar[ru_system_state_kind(s, i) == RU_STATE_DIFFERENTIAL ? kd++ : ka++] = (int)i;
    if ((st = ru_ss_linearize(s, x, A, M, err)) != RU_OK)
        goto done;
    transform(s, A, n);
    st = eliminate(s, r, A, M, err);
done:
    if (!r->G)
        free(A);
    if (st != RU_OK)
        ru_ss_reduced_free(r);
    return st;
}

void ru_ss_expand(const ru_system *s, const ru_reduced *r, const double *vd, double *vx)
{
    size_t nd = r->nd;
    for (size_t i = 0; i < nd; i++)
        vx[r->dvar[i]] = vd[i];
    for (size_t q = 0; q < r->na; q++) {
        double acc = 0;
        for (size_t j = 0; j < nd; j++)
            acc += r->K[q * nd + j] * vd[j];
        vx[r->dvar[nd + q]] = acc;
    }
    for (size_t i = 0; i < r->n; i++) { /* x = S y: members carry their reference */
        int g = ru_system_state_group(s, i);
        if (g >= 0 && (size_t)g != i)
            vx[i] += vx[g];
    }
}

void ru_ss_left(const ru_system *s, const ru_reduced *r, const double *ud, double *ux)
{
    memset(ux, 0, r->n * sizeof *ux);
    for (size_t i = 0; i < r->nd; i++) {
        int k = r->dvar[i], g = ru_system_state_group(s, (size_t)k);
        ux[k] += ud[i];
        if (g >= 0 && g != k) /* y_k = x_k - x_ref */
            ux[g] -= ud[i];
    }
}

/* Solves the transposed row-major block X^T of the n x n row-major matrix Q taken at
 * rows `rows` and columns `cols` (k each): Q[rows, cols]^T y = b in place. */
static int solve_block_t(const double *Q, size_t n, const int *rows, const int *cols,
                         size_t k, double *b, size_t nrhs)
{
    if (k == 0)
        return 0;
    double *B = malloc(k * k * sizeof *B);
    lapack_int *piv = malloc(k * sizeof *piv);
    int info = -1;
    if (B && piv) {
        for (size_t i = 0; i < k; i++) /* B = block^T, row-major */
            for (size_t j = 0; j < k; j++)
                B[i * k + j] = Q[(size_t)rows[j] * n + (size_t)cols[i]];
        info = (int)LAPACKE_dgesv(LAPACK_ROW_MAJOR, (lapack_int)k, (lapack_int)nrhs, B,
                                  (lapack_int)k, piv, b, (lapack_int)nrhs);
    }
    free(B);
    free(piv);
    return info;
}

ru_status ru_ss_input(const ru_system *s, const ru_reduced *r, const double *ud_re,
                      const double *ud_im, double *w_re, double *w_im)
{
    size_t n = r->n, nd = r->nd, na = r->na;
    const int *dv = r->dvar, *av = r->dvar + nd;
    double *z = malloc((2 * nd + 2 * na + 1) * sizeof *z), *p = z ? z + 2 * nd : NULL;
    ru_status st = RU_ENOMEM;
    if (!z)
        goto done;
    for (size_t i = 0; i < nd; i++) { /* two right-hand sides, row-major: re, im */
        z[2 * i] = ud_re[i];
        z[2 * i + 1] = ud_im[i];
    }
    st = RU_ENUMERIC;
    if (solve_block_t(r->M, n, dv, dv, nd, z, 2) != 0) /* z = M_dd^{-T} ud */
        goto done;
    for (size_t q = 0; q < na; q++) /* p = G_da^T z, then G_aa^{-T} p */
        for (int c = 0; c < 2; c++) {
            double acc = 0;
            for (size_t i = 0; i < nd; i++)
                acc += r->G[(size_t)dv[i] * n + (size_t)av[q]] * z[2 * i + c];
            p[2 * q + c] = acc;
        }
    if (solve_block_t(r->G, n, av, av, na, p, 2) != 0)
        goto done;
    for (size_t i = 0; i < nd; i++) { /* q on the rows of T b */
        w_re[dv[i]] = z[2 * i];
        w_im[dv[i]] = z[2 * i + 1];
    }
    for (size_t q = 0; q < na; q++) {
        w_re[av[q]] = -p[2 * q];
        w_im[av[q]] = -p[2 * q + 1];
    }
    for (size_t i = 0; i < n; i++) { /* T^T: a member's row also feeds its reference's */
        int g = ru_system_state_group(s, i);
        if (g >= 0 && (size_t)g != i) {
            w_re[i] += w_re[g];
            w_im[i] += w_im[g];
        }
    }
    st = RU_OK;
done:
    free(z);
    return st;
}
