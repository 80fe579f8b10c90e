/* descfn.c: the one-harmonic balance of the describing-function method (see
 * ringup/descfn.h for the equations): residual, analytic Jacobian and damped Newton
 * (descfn_impl.h), and the scalar describing functions of a law.
 *
 * Equations: DC balance (n), fundamental balance real and imaginary (2n), probe
 * phasor = A (real, 2). The cycle is sampled at RU_DF_SAMPLES angles (harmonics up
 * to 31 are resolved without aliasing into the DC and the fundamental); the
 * Jacobian is analytic, built from dr/dx at every angle. Newton is damped on a
 * row-equilibrated residual norm. The continuation in amplitude lives in
 * descfn_curve.c. */
#include "engines/descfn_impl.h"

#include "parts/laws.h"
#include "engines/modes.h"

#include <lapacke.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>


void ru_df_hb_free(ru_df_hb *h)
{
    free(h->M);
    free(h->x);
    free(h->r);
    free(h->D);
    for (int k = 0; k < 6; k++)
        free(h->S[k]);
    free(h->F);
    free(h->Jac);
    free(h->rowscale);
    free(h->piv);
    free(h->du);
    free(h->ut);
}

ru_status ru_df_hb_init(ru_df_hb *h, const ru_system *s, int kp, int kn)
{
    memset(h, 0, sizeof *h);
    h->s = s;
    h->n = ru_system_size(s);
    h->m = 3 * h->n + 2;
    h->kp = kp;
    h->kn = kn;
    size_t n = h->n, m = h->m;
    h->M = malloc(n * n * sizeof *h->M);
    h->x = malloc(n * sizeof *h->x);
    h->r = malloc(n * sizeof *h->r);
    h->D = malloc(n * n * sizeof *h->D);
    for (int k = 0; k < 6; k++)
        h->S[k] = malloc(n * n * sizeof *h->S[k]);
    h->F = malloc(m * sizeof *h->F);
    h->Jac = malloc(m * m * sizeof *h->Jac);
    h->rowscale = malloc(m * sizeof *h->rowscale);
    h->piv = malloc(m * sizeof *h->piv);
    h->du = malloc(m * sizeof *h->du);
    h->ut = malloc(m * sizeof *h->ut);
    int ok = h->M && h->x && h->r && h->D && h->F && h->Jac && h->rowscale && h->piv &&
             h->du && h->ut;
    for (int k = 0; k < 6; k++)
        ok = ok && h->S[k];
    if (!ok)
        return RU_ENOMEM;
    ru_system_mass(s, h->M);
    return RU_OK;
}

double ru_df_hb_probe(const ru_df_hb *h, const double *v)
{
    return (h->kp >= 0 ? v[h->kp] : 0.0) - (h->kn >= 0 ? v[h->kn] : 0.0);
}

/* F(u) and, when jac is set, its Jacobian into h->Jac. */
static ru_status hb_eval(ru_df_hb *h, const double *u, int jac)
{
    size_t n = h->n, m = h->m, N = RU_DF_SAMPLES;
    const double *x0 = u, *xr = u + n, *xi = u + 2 * n;
    double sigma = u[3 * n], w = u[3 * n + 1];
    ru_eval_point ep = {.t_s = 0, .dc = 1, .source_scale = 1};
    double *R0 = h->F, *E1r = h->F + n, *E1i = h->F + 2 * n;
    memset(h->F, 0, m * sizeof *h->F);
    if (jac)
        for (int k = 0; k < 6; k++)
            memset(h->S[k], 0, n * n * sizeof *h->S[k]);
    for (size_t k = 0; k < N; k++) {
        double th = 2.0 * M_PI * (double)k / (double)N, c = cos(th), sn = sin(th);
        for (size_t i = 0; i < n; i++)
            h->x[i] = x0[i] + xr[i] * c - xi[i] * sn;
        ru_status st = ru_system_residual(h->s, &ep, h->x, h->r, jac ? h->D : NULL);
        if (st != RU_OK)
            return st;
        for (size_t i = 0; i < n; i++) {
            if (!isfinite(h->r[i]))
                return RU_ENUMERIC;
            R0[i] += h->r[i] / (double)N;
            E1r[i] += 2.0 * h->r[i] * c / (double)N;
            E1i[i] -= 2.0 * h->r[i] * sn / (double)N;
        }
        if (!jac)
            continue;
        const double wgt[6] = {1.0, c, sn, c * c, c * sn, sn * sn};
        for (int q = 0; q < 6; q++)
            for (size_t e = 0; e < n * n; e++)
                h->S[q][e] += wgt[q] * h->D[e] / (double)N;
    }
    /* E1 = R1 - (sigma + j w) M X */
    for (size_t i = 0; i < n; i++) {
        double mr = 0, mi = 0;
        for (size_t j = 0; j < n; j++) {
            mr += h->M[i * n + j] * xr[j];
            mi += h->M[i * n + j] * xi[j];
        }
        E1r[i] -= sigma * mr - w * mi;
        E1i[i] -= sigma * mi + w * mr;
    }
    h->F[3 * n] = ru_df_hb_probe(h, xr) - h->amp_v;
    h->F[3 * n + 1] = ru_df_hb_probe(h, xi);
    if (!jac)
        return RU_OK;
    double *J = h->Jac;
    memset(J, 0, m * m * sizeof *J);
    /* blocks: rows (R0, E1r, E1i) x columns (x0, Xr, Xi); S = {1, c, s, cc, cs, ss} */
    const int blk[3][3] = {{0, 1, 2}, {1, 3, 4}, {2, 4, 5}};
    const double fac[3][3] = {{1, 1, -1}, {2, 2, -2}, {-2, -2, 2}};
    for (int R = 0; R < 3; R++)
        for (int C = 0; C < 3; C++)
            for (size_t i = 0; i < n; i++)
                for (size_t j = 0; j < n; j++)
                    J[(R * n + i) * m + C * n + j] = fac[R][C] * h->S[blk[R][C]][i * n + j];
    for (size_t i = 0; i < n; i++) {
        double mr = 0, mi = 0;
        for (size_t j = 0; j < n; j++) {
            double Mij = h->M[i * n + j];
            J[(n + i) * m + n + j] -= sigma * Mij;     /* dE1r/dXr */
            J[(n + i) * m + 2 * n + j] += w * Mij;     /* dE1r/dXi */
            J[(2 * n + i) * m + 2 * n + j] -= sigma * Mij; /* dE1i/dXi */
            J[(2 * n + i) * m + n + j] -= w * Mij;     /* dE1i/dXr */
            mr += Mij * xr[j];
            mi += Mij * xi[j];
        }
        J[(n + i) * m + 3 * n] = -mr;      /* dE1r/dsigma */
        J[(n + i) * m + 3 * n + 1] = mi;   /* dE1r/dw */
        J[(2 * n + i) * m + 3 * n] = -mi;  /* dE1i/dsigma */
        J[(2 * n + i) * m + 3 * n + 1] = -mr;
    }
    if (h->kp >= 0) {
        J[(3 * n) * m + n + h->kp] += 1.0;
        J[(3 * n + 1) * m + 2 * n + h->kp] += 1.0;
    }
    if (h->kn >= 0) {
        J[(3 * n) * m + n + h->kn] -= 1.0;
        J[(3 * n + 1) * m + 2 * n + h->kn] -= 1.0;
    }
    return RU_OK;
}

/* Row scales from the Jacobian, fixed for one Newton solve (equilibration). */
static void set_rowscale(ru_df_hb *h)
{
    for (size_t i = 0; i < h->m; i++) {
        double mx = 0;
        for (size_t j = 0; j < h->m; j++)
            mx = fmax(mx, fabs(h->Jac[i * h->m + j]));
        h->rowscale[i] = mx > 0 ? 1.0 / mx : 1.0;
    }
}

static double merit(const ru_df_hb *h)
{
    double s = 0;
    for (size_t i = 0; i < h->m; i++) {
        double f = h->F[i] * h->rowscale[i];
        s += f * f;
    }
    return sqrt(s);
}

/* Damped Newton for amplitude h->amp_v from the guess u (overwritten). */
ru_status ru_df_hb_solve(ru_df_hb *h, double *u, double vscale)
{
    size_t m = h->m, n = h->n;
    double *du = h->du, *ut = h->ut;
    ru_status st = RU_ENOCONVERGE;
    if (hb_eval(h, u, 1) != RU_OK)
        return st;
    set_rowscale(h);
    double f0 = merit(h);
    for (int it = 0; it < RU_DF_NEWTON_MAX; it++) {
        for (size_t i = 0; i < m; i++)
            du[i] = -h->F[i];
        if (LAPACKE_dgesv(LAPACK_ROW_MAJOR, (lapack_int)m, 1, h->Jac, (lapack_int)m, h->piv,
                          du, 1) != 0)
            goto done;
        double lam = 1.0, f1 = INFINITY;
        for (int half = 0; half < 30; half++, lam *= 0.5) {
            for (size_t i = 0; i < m; i++)
                ut[i] = u[i] + lam * du[i];
            if (hb_eval(h, ut, 0) == RU_OK && (f1 = merit(h)) < (1 - 1e-4 * lam) * f0)
                break;
        }
        if (!(f1 < f0) && !(f1 <= 1e-14))
            goto done;
        memcpy(u, ut, m * sizeof *u);
        double dmax = 0, wscale = fabs(u[3 * n + 1]) + fabs(u[3 * n]);
        for (size_t i = 0; i < 3 * n; i++)
            dmax = fmax(dmax, fabs(lam * du[i]) / vscale);
        dmax = fmax(dmax, fabs(lam * du[3 * n]) / wscale);
        dmax = fmax(dmax, fabs(lam * du[3 * n + 1]) / wscale);
        if (hb_eval(h, u, 1) != RU_OK)
            goto done;
        f0 = merit(h);
        if (dmax < 1e-11) {
            st = RU_OK;
            goto done;
        }
    }
done:
    return st;
}

/* Linear-limit guess: x0 = x_op, X = A v / v_probe, (sigma, w) = the eigenvalue. */
ru_status ru_df_hb_guess(ru_df_hb *h, const double *x_op, ru_pole dom, double *u)
{
    size_t n = h->n;
    double *v = malloc(2 * n * sizeof *v);
    ru_pole lam;
    ru_status st = v ? ru_mode_near(h->s, x_op, dom, &lam, v, v + n, NULL, NULL) : RU_ENOMEM;
    if (st == RU_OK) {
        double pr = ru_df_hb_probe(h, v), pi = ru_df_hb_probe(h, v + n), d = pr * pr + pi * pi;
        if (!(d > 0)) {
            st = RU_EINPUT;
        } else {
            for (size_t i = 0; i < n; i++) { /* (vr + j vi) A / (pr + j pi) */
                u[i] = x_op[i];
                u[n + i] = h->amp_v * (v[i] * pr + v[n + i] * pi) / d;
                u[2 * n + i] = h->amp_v * (v[n + i] * pr - v[i] * pi) / d;
            }
            u[3 * n] = lam.re_per_s;
            u[3 * n + 1] = lam.im_rad_per_s;
        }
    }
    free(v);
    return st;
}

/* Scales the oscillating part of u by a new amplitude (continuation predictor). */
void ru_df_hb_rescale(ru_df_hb *h, double *u, double amp_new)
{
    double f = amp_new / h->amp_v;
    for (size_t i = h->n; i < 3 * h->n; i++)
        u[i] *= f;
    h->amp_v = amp_new;
}

double ru_df_gain(ru_df_law_fn f, void *user, double x0, double a, int samples)
{
    if (!(a > 0) || samples < 4)
        return NAN;
    double acc = 0;
    for (int k = 0; k < samples; k++) {
        double t = 2.0 * M_PI * (double)k / (double)samples, sn = sin(t);
        acc += f(user, x0 + a * sn) * sn;
    }
    return 2.0 * acc / ((double)samples * a); /* (1/(pi a)) * (2 pi / samples) * sum */
}

typedef struct amp_at {
    const ru_amp *amp;
    const ru_law_desc *law;
    ru_law_at at;
} amp_at;

static double amp_out(void *user, double vc)
{
    amp_at *p = user;
    p->at.vc = vc;
    return p->law->df_out(p->amp, &p->at);
}

double ru_df_amp_gain_rail(const ru_amp *amp, double vc0_v, double vo0_v, double vdd_v,
                           double a_v)
{
    const ru_law_desc *law = ru_law_get(amp->law);
    if (!law || !law->df_out) /* no memoryless describing function (opamp) */
        return NAN;
    amp_at p = {amp, law, {vc0_v, vo0_v, 0.0, vdd_v, 0.0, 0}};
    return ru_df_gain(amp_out, &p, vc0_v, a_v, 4096);
}

double ru_df_amp_gain(const ru_amp *amp, double vc0_v, double vo0_v, double a_v)
{
    return ru_df_amp_gain_rail(amp, vc0_v, vo0_v, 0.0, a_v);
}
