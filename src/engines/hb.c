/* hb.c: the harmonic balance's equations (ringup/hb.h, layout in hb_impl.h): the
 * residual from the laws at N phases, its analytic Jacobian and the damped Newton
 * solve. Constructor and destructor live here too.
 *
 * Jacobian. With D(theta) = dr/dx at each phase and its Fourier coefficients
 * D^_m = mean D e^{-j m theta} (D^_{-m} = conj D^_m), a change dx(theta) = dX0 +
 * Re sum_q dX_q e^{j q theta} moves the balance by
 *   dR_0 = D^_0 dX0 + sum_q Re(conj(D^_q) dX_q),
 *   dR_k = 2 D^_k dX0 + sum_q (D^_{k-q} dX_q + D^_{k+q} conj(dX_q)),
 * written in real blocks (P dX + Q conj dX = (P + Q) a + j (P - Q) b for
 * dX = a + j b). N = max(64, 8K) phases resolve D^_m up to m = 2K without
 * aliasing. */
#include "engines/hb_impl.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#define NEWTON_MAX 50
#define HB_M_MAX 2000 /* largest system Newton solves densely */

static int phases(int k) { return k * 8 > 64 ? k * 8 : 64; }

static double voltage_scale(const ru_system *s)
{
    size_t n = ru_system_size(s);
    double *sc = malloc(n * sizeof *sc), v = 1.0;
    if (!sc)
        return v;
    ru_system_state_scale(s, sc);
    for (size_t i = 0; i < ru_system_free_nodes(s); i++)
        v = fmax(v, sc[i]);
    free(sc);
    return v;
}

ru_status ru_hb_create(const ru_system *s, int probe_pos, int probe_neg, int kmax,
                       ru_hb **out, ru_error *err)
{
    *out = NULL;
    size_t n = ru_system_size(s);
    int kp = ru_system_node_state(s, probe_pos), kn = ru_system_node_state(s, probe_neg);
    if (kp < 0 && kn < 0)
        return ru_error_set(err, RU_EINPUT, NULL, 0, 0,
                            "harmonic balance: the probe is not a free node");
    if (kmax < 1 || kmax > RU_HB_MAX_HARMONICS)
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0,
                            "harmonic balance: 1 to %d harmonics (got %d)",
                            RU_HB_MAX_HARMONICS, kmax);
    while (kmax > 1 && ru_hb_size(n, kmax) > HB_M_MAX)
        kmax--;
    if (ru_hb_size(n, kmax) > HB_M_MAX)
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0,
                            "harmonic balance: %zu states are too many for a dense "
                            "balance", n);
    ru_hb *h = calloc(1, sizeof *h);
    if (!h)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "out of memory");
    size_t m = ru_hb_size(n, kmax), nd = (size_t)(2 * kmax + 1) * n * n;
    h->s = s;
    h->n = n;
    h->kmax = kmax;
    h->k = 1;
    h->kp = kp;
    h->kn = kn;
    h->vscale = voltage_scale(s);
    h->M = malloc(n * n * sizeof *h->M);
    h->u = calloc(m, sizeof *h->u);
    h->x = malloc(n * sizeof *h->x);
    h->r = malloc(n * sizeof *h->r);
    h->D = malloc(n * n * sizeof *h->D);
    h->Dr = malloc(nd * sizeof *h->Dr);
    h->Di = malloc(nd * sizeof *h->Di);
    h->F = malloc(m * sizeof *h->F);
    h->J = malloc(m * m * sizeof *h->J);
    h->rowscale = malloc(m * sizeof *h->rowscale);
    h->du = malloc(m * sizeof *h->du);
    h->ut = malloc(m * sizeof *h->ut);
    h->usave = malloc(m * sizeof *h->usave);
    h->piv = malloc(m * sizeof *h->piv);
    h->camp = malloc(RU_HB_CACHE * sizeof *h->camp);
    h->cu = malloc(RU_HB_CACHE * m * sizeof *h->cu);
    if (!h->M || !h->u || !h->x || !h->r || !h->D || !h->Dr || !h->Di || !h->F || !h->J ||
        !h->rowscale || !h->du || !h->ut || !h->usave || !h->piv || !h->camp || !h->cu) {
        ru_hb_destroy(h);
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "out of memory");
    }
    ru_system_mass(s, h->M);
    *out = h;
    return RU_OK;
}

void ru_hb_destroy(ru_hb *h)
{
    if (!h)
        return;
    free(h->M);
    free(h->u);
    free(h->x);
    free(h->r);
    free(h->D);
    free(h->Dr);
    free(h->Di);
    free(h->F);
    free(h->J);
    free(h->rowscale);
    free(h->du);
    free(h->ut);
    free(h->usave);
    free(h->piv);
    free(h->camp);
    free(h->cu);
    free(h);
}

void ru_hb_probe(const ru_hb *h, const double *u, int k, double *re, double *im)
{
    size_t n = h->n;
    const double *xr = k == 0 ? u : u + ru_hb_re(n, k, 0), *xi = k == 0 ? NULL : xr + n;
    *re = (h->kp >= 0 ? xr[h->kp] : 0) - (h->kn >= 0 ? xr[h->kn] : 0);
    *im = !xi ? 0 : (h->kp >= 0 ? xi[h->kp] : 0) - (h->kn >= 0 ? xi[h->kn] : 0);
}

/* Coefficient m of D(theta) (any sign of m) into (*re, *im) pointers. */
static void dhat(const ru_hb *h, int m, const double **re, const double **im, int *neg)
{
    size_t nn = h->n * h->n, a = (size_t)(m < 0 ? -m : m);
    *re = h->Dr + a * nn;
    *im = h->Di + a * nn;
    *neg = m < 0; /* D^_{-m} = conj D^_m */
}

/* Residual F(u) and, with jac, the Fourier coefficients of dr/dx. */
static ru_status residual(ru_hb *h, const double *u, int jac)
{
    size_t n = h->n, nn = n * n, m = ru_hb_size(n, h->k);
    int K = h->k, N = phases(K), md = 2 * K;
    double sigma = u[m - 2], w = u[m - 1];
    ru_eval_point ep = {.t_s = 0, .dc = 1, .source_scale = 1};
    memset(h->F, 0, m * sizeof *h->F);
    if (jac) {
        memset(h->Dr, 0, (size_t)(md + 1) * nn * sizeof *h->Dr);
        memset(h->Di, 0, (size_t)(md + 1) * nn * sizeof *h->Di);
    }
    for (int j = 0; j < N; j++) {
        double th = 2.0 * M_PI * j / N;
        memcpy(h->x, u, n * sizeof *h->x);
        for (int k = 1; k <= K; k++) {
            const double *xr = u + ru_hb_re(n, k, 0), *xi = xr + n;
            double c = cos(k * th), sn = sin(k * th);
            for (size_t i = 0; i < n; i++)
                h->x[i] += xr[i] * c - xi[i] * sn;
        }
        ru_status st = ru_system_residual(h->s, &ep, h->x, h->r, jac ? h->D : NULL);
        if (st != RU_OK)
            return st;
        for (size_t i = 0; i < n; i++)
            h->F[i] += h->r[i] / N;
        for (int k = 1; k <= K; k++) {
            double c = cos(k * th), sn = sin(k * th);
            double *fr = h->F + ru_hb_re(n, k, 0), *fi = fr + n;
            for (size_t i = 0; i < n; i++) {
                fr[i] += 2.0 * h->r[i] * c / N;
                fi[i] -= 2.0 * h->r[i] * sn / N;
            }
        }
        for (int q = 0; jac && q <= md; q++) {
            double c = cos(q * th) / N, sn = sin(q * th) / N;
            double *dr = h->Dr + (size_t)q * nn, *di = h->Di + (size_t)q * nn;
            for (size_t e = 0; e < nn; e++) {
                dr[e] += h->D[e] * c;
                di[e] -= h->D[e] * sn;
            }
        }
    }
    for (int k = 1; k <= K; k++) { /* E_k = R_k - (sigma + j k w) M X_k */
        const double *xr = u + ru_hb_re(n, k, 0), *xi = xr + n;
        double *fr = h->F + ru_hb_re(n, k, 0), *fi = fr + n;
        for (size_t i = 0; i < n; i++) {
            double mr = 0, mi = 0;
            for (size_t c = 0; c < n; c++) {
                mr += h->M[i * n + c] * xr[c];
                mi += h->M[i * n + c] * xi[c];
            }
            fr[i] -= sigma * mr - k * w * mi;
            fi[i] -= sigma * mi + k * w * mr;
        }
    }
    double pr, pi;
    ru_hb_probe(h, u, 1, &pr, &pi);
    h->F[m - 2] = h->periodic ? sigma : pr - h->amp_v;
    h->F[m - 1] = pi;
    return RU_OK;
}

/* J[row block][col block] += (P, Q) in real form, P and Q given by their parts
 * (sp, sq: +1, or -1 for the conjugate; NULL omits Q). */
static void add_pq(ru_hb *h, size_t row, size_t col, const double *pr, const double *pi,
                   int pconj, const double *qr, const double *qi, int qconj)
{
    size_t n = h->n, m = ru_hb_size(n, h->k);
    double *J = h->J;
    for (size_t i = 0; i < n; i++)
        for (size_t c = 0; c < n; c++) {
            size_t e = i * n + c;
            double Pr = pr[e], Pi = pconj ? -pi[e] : pi[e];
            double Qr = qr ? qr[e] : 0, Qi = qr ? (qconj ? -qi[e] : qi[e]) : 0;
            J[(row + i) * m + col + c] += Pr + Qr;           /* Re row, a */
            J[(row + i) * m + col + n + c] += -(Pi - Qi);    /* Re row, b */
            J[(row + n + i) * m + col + c] += Pi + Qi;       /* Im row, a */
            J[(row + n + i) * m + col + n + c] += Pr - Qr;   /* Im row, b */
        }
}

static void jacobian(ru_hb *h, const double *u)
{
    size_t n = h->n, m = ru_hb_size(n, h->k);
    int K = h->k, neg;
    double sigma = u[m - 2], w = u[m - 1], *J = h->J;
    const double *pr, *pi, *qr, *qi;
    memset(J, 0, m * m * sizeof *J);
    dhat(h, 0, &pr, &pi, &neg);
    for (size_t e = 0; e < n * n; e++) /* E0 on X0 */
        J[(e / n) * m + e % n] = pr[e];
    for (int q = 1; q <= K; q++) { /* E0 on X_q: Re(conj(D^_q)(a + jb)) = Dr a + Di b */
        dhat(h, q, &pr, &pi, &neg);
        size_t col = ru_hb_re(n, q, 0);
        for (size_t e = 0; e < n * n; e++) {
            J[(e / n) * m + col + e % n] += pr[e];
            J[(e / n) * m + col + n + e % n] += pi[e];
        }
    }
    for (int k = 1; k <= K; k++) {
        size_t row = ru_hb_re(n, k, 0);
        dhat(h, k, &pr, &pi, &neg); /* on X0: 2 D^_k */
        for (size_t e = 0; e < n * n; e++) {
            J[(row + e / n) * m + e % n] += 2 * pr[e];
            J[(row + n + e / n) * m + e % n] += 2 * pi[e];
        }
        for (int q = 1; q <= K; q++) {
            int np, nq;
            dhat(h, k - q, &pr, &pi, &np);
            if (k + q <= 2 * K) {
                dhat(h, k + q, &qr, &qi, &nq);
                add_pq(h, row, ru_hb_re(n, q, 0), pr, pi, np, qr, qi, nq);
            } else {
                add_pq(h, row, ru_hb_re(n, q, 0), pr, pi, np, NULL, NULL, 0);
            }
        }
        const double *xr = u + row, *xi = xr + n;
        for (size_t i = 0; i < n; i++) {
            double mr = 0, mi = 0;
            for (size_t c = 0; c < n; c++) {
                double Mic = h->M[i * n + c];
                J[(row + i) * m + row + c] -= sigma * Mic;
                J[(row + i) * m + row + n + c] += k * w * Mic;
                J[(row + n + i) * m + row + c] -= k * w * Mic;
                J[(row + n + i) * m + row + n + c] -= sigma * Mic;
                mr += Mic * xr[c];
                mi += Mic * xi[c];
            }
            J[(row + i) * m + m - 2] = -mr;
            J[(row + n + i) * m + m - 2] = -mi;
            J[(row + i) * m + m - 1] = k * mi;
            J[(row + n + i) * m + m - 1] = -k * mr;
        }
    }
    size_t c1 = ru_hb_re(n, 1, 0);
    if (h->periodic) {
        J[(m - 2) * m + m - 2] = 1;
    } else {
        if (h->kp >= 0)
            J[(m - 2) * m + c1 + h->kp] += 1;
        if (h->kn >= 0)
            J[(m - 2) * m + c1 + h->kn] -= 1;
    }
    if (h->kp >= 0)
        J[(m - 1) * m + c1 + n + h->kp] += 1;
    if (h->kn >= 0)
        J[(m - 1) * m + c1 + n + h->kn] -= 1;
}

static double merit(const ru_hb *h, size_t m)
{
    double s = 0;
    for (size_t i = 0; i < m; i++) {
        double f = h->F[i] * h->rowscale[i];
        s += f * f;
    }
    return sqrt(s);
}

ru_status ru_hb_newton(ru_hb *h)
{
    size_t n = h->n, m = ru_hb_size(n, h->k);
    double *u = h->u;
    if (residual(h, u, 1) != RU_OK)
        return RU_ENOCONVERGE;
    jacobian(h, u);
    for (size_t i = 0; i < m; i++) { /* row equilibration, fixed for this solve */
        double mx = 0;
        for (size_t j = 0; j < m; j++)
            mx = fmax(mx, fabs(h->J[i * m + j]));
        h->rowscale[i] = mx > 0 ? 1.0 / mx : 1.0;
    }
    double f0 = merit(h, m);
    for (int it = 0; it < NEWTON_MAX; it++) {
        for (size_t i = 0; i < m; i++)
            h->du[i] = -h->F[i];
        if (LAPACKE_dgesv(LAPACK_ROW_MAJOR, (lapack_int)m, 1, h->J, (lapack_int)m, h->piv,
                          h->du, 1) != 0)
            return RU_ENOCONVERGE;
        double lam = 1.0, f1 = INFINITY;
        for (int half = 0; half < 30; half++, lam *= 0.5) {
            for (size_t i = 0; i < m; i++)
                h->ut[i] = u[i] + lam * h->du[i];
            if (residual(h, h->ut, 0) == RU_OK && (f1 = merit(h, m)) < (1 - 1e-4 * lam) * f0)
                break;
        }
        if (!(f1 < f0) && !(f1 <= 1e-14))
            return RU_ENOCONVERGE;
        memcpy(u, h->ut, m * sizeof *u);
        double dmax = 0, wscale = fabs(u[m - 1]) + fabs(u[m - 2]);
        for (size_t i = 0; i < m - 2; i++)
            dmax = fmax(dmax, fabs(lam * h->du[i]) / h->vscale);
        dmax = fmax(dmax, fabs(lam * h->du[m - 2]) / wscale);
        dmax = fmax(dmax, fabs(lam * h->du[m - 1]) / wscale);
        if (residual(h, u, 1) != RU_OK)
            return RU_ENOCONVERGE;
        jacobian(h, u);
        f0 = merit(h, m);
        if (dmax < 1e-11)
            return RU_OK;
    }
    return RU_ENOCONVERGE;
}
