/* descfn.c: describing-function amplitude prediction by one-harmonic balance (see
 * ringup/descfn.h for the equations).
 *
 * Unknowns u = [x0 (n), Xr (n), Xi (n), sigma, w]: 3n + 2 reals. Equations:
 * DC balance (n), fundamental balance real and imaginary (2n), probe phasor = A
 * (real, 2). The cycle is sampled at RU_DF_SAMPLES angles (harmonics up to 31 are
 * resolved without aliasing into the DC and the fundamental); the Jacobian is
 * analytic, built from dr/dx at every angle. Newton is damped on a row-equilibrated
 * residual norm. The amplitude is continued geometrically from the linear limit
 * (the dominant eigenvector) until sigma changes sign, then the zero is refined by
 * the secant method. */
#include "ringup/descfn.h"

#include "parts/laws.h"
#include "engines/modes.h"
#include "engines/smallsig_impl.h"

#include <lapacke.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define RU_DF_SAMPLES 64      /* angles per cycle */
#define RU_DF_NEWTON_MAX 40   /* Newton iterations per amplitude */
#define RU_DF_POINTS_MAX 400  /* continuation steps before giving up */

typedef struct hb {
    const ru_system *s;
    size_t n, m;          /* states, unknowns (3n + 2) */
    int kp, kn;           /* probe states (-1: ground or driven) */
    double amp_v;         /* the probe amplitude being balanced */
    double *M;            /* mass matrix n*n */
    double *x, *r, *D;    /* scratch: state, residual, dr/dx at one angle */
    double *S[6];         /* sums of D weighted by 1, c, s, cc, cs, ss */
    double *F, *Jac;      /* balance residual m, its Jacobian m*m */
    double *rowscale;     /* 1 / largest |Jac| entry of each row */
    lapack_int *piv;
} hb;

static void hb_free(hb *h)
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
}

static ru_status hb_init(hb *h, const ru_system *s, int kp, int kn)
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
    int ok = h->M && h->x && h->r && h->D && h->F && h->Jac && h->rowscale && h->piv;
    for (int k = 0; k < 6; k++)
        ok = ok && h->S[k];
    if (!ok)
        return RU_ENOMEM;
    ru_system_mass(s, h->M);
    return RU_OK;
}

static double probe_of(const hb *h, const double *v)
{
    return (h->kp >= 0 ? v[h->kp] : 0.0) - (h->kn >= 0 ? v[h->kn] : 0.0);
}

/* F(u) and, when jac is set, its Jacobian into h->Jac. */
static ru_status hb_eval(hb *h, const double *u, int jac)
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
    h->F[3 * n] = probe_of(h, xr) - h->amp_v;
    h->F[3 * n + 1] = probe_of(h, xi);
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
static void set_rowscale(hb *h)
{
    for (size_t i = 0; i < h->m; i++) {
        double mx = 0;
        for (size_t j = 0; j < h->m; j++)
            mx = fmax(mx, fabs(h->Jac[i * h->m + j]));
        h->rowscale[i] = mx > 0 ? 1.0 / mx : 1.0;
    }
}

static double merit(const hb *h)
{
    double s = 0;
    for (size_t i = 0; i < h->m; i++) {
        double f = h->F[i] * h->rowscale[i];
        s += f * f;
    }
    return sqrt(s);
}

/* Damped Newton for amplitude h->amp_v from the guess u (overwritten). */
static ru_status hb_solve(hb *h, double *u, double vscale)
{
    size_t m = h->m, n = h->n;
    double *du = malloc(m * sizeof *du), *ut = malloc(m * sizeof *ut);
    ru_status st = (du && ut) ? RU_ENOCONVERGE : RU_ENOMEM;
    if (st == RU_ENOMEM || hb_eval(h, u, 1) != RU_OK)
        goto done;
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
    free(du);
    free(ut);
    return st;
}

/* Linear-limit guess: x0 = x_op, X = A v / v_probe, (sigma, w) = the eigenvalue. */
static ru_status initial_guess(hb *h, const double *x_op, ru_pole dom, double *u)
{
    size_t n = h->n;
    double *v = malloc(2 * n * sizeof *v);
    ru_pole lam;
    ru_status st = v ? ru_mode_near(h->s, x_op, dom, &lam, v, v + n, NULL, NULL) : RU_ENOMEM;
    if (st == RU_OK) {
        double pr = probe_of(h, v), pi = probe_of(h, v + n), d = pr * pr + pi * pi;
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
static void rescale(hb *h, double *u, double amp_new)
{
    double f = amp_new / h->amp_v;
    for (size_t i = h->n; i < 3 * h->n; i++)
        u[i] *= f;
    h->amp_v = amp_new;
}

static ru_df_point point_of(const hb *h, const double *u, double dc0)
{
    ru_df_point p = {h->amp_v, u[3 * h->n], u[3 * h->n + 1] / (2 * M_PI),
                     probe_of(h, u) - dc0};
    return p;
}

typedef struct df_run {
    hb h;
    double *u, *u_prev;
    double vscale, dc0;
} df_run;

/* Refines sigma(A) = 0 inside the bracket [a_pos (sigma > 0), a_neg (sigma < 0)]
 * by regula falsi with the Illinois modification (superlinear, never leaves the
 * bracket), starting from the solution at a_neg held in r->u. */
static void refine_zero(df_run *r, double a_pos, double s_pos, double a_neg, double s_neg,
                        ru_df_result *res)
{
    int side = 0; /* which end moved last: halve the other's value (Illinois) */
    for (int it = 0; it < 60 && fabs(a_neg - a_pos) > 1e-12 * a_neg; it++) {
        double a = (a_pos * s_neg - a_neg * s_pos) / (s_neg - s_pos);
        memcpy(r->u_prev, r->u, r->h.m * sizeof *r->u);
        double a_from = r->h.amp_v;
        rescale(&r->h, r->u, a);
        if (hb_solve(&r->h, r->u, r->vscale) != RU_OK) {
            memcpy(r->u, r->u_prev, r->h.m * sizeof *r->u);
            r->h.amp_v = a_from;
            break;
        }
        double sg = r->u[3 * r->h.n];
        if (sg > 0) {
            a_pos = a;
            s_pos = sg;
            if (side == 1)
                s_neg *= 0.5;
            side = 1;
        } else {
            a_neg = a;
            s_neg = sg;
            if (side == -1)
                s_pos *= 0.5;
            side = -1;
        }
        if (fabs(sg) < 1e-12 * fabs(r->u[3 * r->h.n + 1]))
            break;
    }
    res->found = 1;
    res->settled_amplitude_v = r->h.amp_v;
    res->frequency_hz = r->u[3 * r->h.n + 1] / (2 * M_PI);
    res->dc_level_v = probe_of(&r->h, r->u);
}

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

/* ru_df_analyse; with u_out (3n entries) the balance at the settled amplitude
 * (x0, Xr, Xi of every state) when one is found. */
static ru_status df_analyse(const ru_system *s, const double *x_op, int probe_pos,
                            int probe_neg, double amp_max_v, ru_df_point *curve,
                            size_t max_pts, size_t *npts, ru_df_result *res,
                            double *u_out, ru_error *err)
{
    memset(res, 0, sizeof *res);
    res->settled_amplitude_v = res->frequency_hz = res->dc_level_v = NAN;
    *npts = 0;
    df_run r;
    memset(&r, 0, sizeof r);
    int kp = ru_system_node_state(s, probe_pos), kn = ru_system_node_state(s, probe_neg);
    if (kp < 0 && kn < 0)
        return ru_error_set(err, RU_EINPUT, NULL, 0, 0,
                            "the probe is not a free node: no amplitude to balance");
    ru_status st = hb_init(&r.h, s, kp, kn);
    r.u = malloc(r.h.m * sizeof *r.u);
    r.u_prev = malloc(r.h.m * sizeof *r.u_prev);
    ru_pole *poles = malloc(r.h.n * sizeof *poles);
    if (st != RU_OK || !r.u || !r.u_prev || !poles) {
        st = ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "out of memory");
        goto done;
    }
    r.vscale = voltage_scale(s);
    if (!(amp_max_v > 0))
        amp_max_v = 100.0 * r.vscale;
    if ((st = ru_poles_compute(s, x_op, poles, err)) != RU_OK)
        goto done;
    int d = ru_poles_dominant(poles, r.h.n);
    if (d < 0) {
        snprintf(res->note, sizeof res->note, "no complex pole pair: nothing oscillates");
        goto done;
    }
    r.h.amp_v = 1e-6 * r.vscale;
    if ((st = initial_guess(&r.h, x_op, poles[d], r.u)) != RU_OK ||
        (st = hb_solve(&r.h, r.u, r.vscale)) != RU_OK) {
        st = ru_error_set(err, st == RU_EINPUT ? RU_EINPUT : RU_ENOCONVERGE, NULL, 0, 0,
                          "describing function: no balance even at the small-signal "
                          "limit (the probe may not see the dominant mode)");
        goto done;
    }
    r.dc0 = probe_of(&r.h, r.u);
    double factor = pow(amp_max_v / r.h.amp_v, 1.0 / 120.0);
    double a_prev = r.h.amp_v, s_prev = r.u[3 * r.h.n];
    for (int step = 0; step < RU_DF_POINTS_MAX; step++) {
        if (curve && *npts < max_pts)
            curve[(*npts)++] = point_of(&r.h, r.u, r.dc0);
        if (s_prev < 0 && step == 0)
            snprintf(res->note, sizeof res->note,
                     "the poles are left of the jw axis: it does not start from a small "
                     "kick");
        double a_next = a_prev * factor;
        if (a_next > amp_max_v)
            break;
        memcpy(r.u_prev, r.u, r.h.m * sizeof *r.u);
        rescale(&r.h, r.u, a_next);
        if (hb_solve(&r.h, r.u, r.vscale) != RU_OK) {
            memcpy(r.u, r.u_prev, r.h.m * sizeof *r.u);
            r.h.amp_v = a_prev;
            factor = sqrt(factor);
            if (factor < 1.0005) {
                snprintf(res->note, sizeof res->note,
                         "the one-harmonic balance has no solution above %.3g V (hard "
                         "limiting or strong harmonics): the amplitude is not predicted",
                         a_prev);
                break;
            }
            continue;
        }
        double s_now = r.u[3 * r.h.n];
        if (s_prev > 0 && s_now <= 0) {
            if (curve && *npts < max_pts)
                curve[(*npts)++] = point_of(&r.h, r.u, r.dc0);
            refine_zero(&r, a_prev, s_prev, a_next, s_now, res);
            goto done;
        }
        a_prev = a_next;
        s_prev = s_now;
    }
    if (!res->note[0])
        snprintf(res->note, sizeof res->note,
                 "the growth rate stays positive up to %.3g V: no amplitude limit found",
                 a_prev);
    st = RU_OK;
done:
    if (st == RU_OK && res->found && u_out)
        memcpy(u_out, r.u, 3 * r.h.n * sizeof *u_out);
    free(poles);
    free(r.u);
    free(r.u_prev);
    hb_free(&r.h);
    return st;
}

ru_status ru_df_analyse(const ru_system *s, const double *x_op, int probe_pos,
                        int probe_neg, double amp_max_v, ru_df_point *curve,
                        size_t max_pts, size_t *npts, ru_df_result *res, ru_error *err)
{
    return df_analyse(s, x_op, probe_pos, probe_neg, amp_max_v, curve, max_pts, npts,
                      res, NULL, err);
}

ru_status ru_df_settled_state(const ru_system *s, const double *x_op, int probe_pos,
                              int probe_neg, double *x_dc, double *x_re, double *x_im,
                              ru_df_result *res, ru_error *err)
{
    size_t n = ru_system_size(s), npts = 0;
    double *u = malloc((3 * n + 2) * sizeof *u);
    if (!u)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "out of memory");
    ru_status st = df_analyse(s, x_op, probe_pos, probe_neg, 0, NULL, 0, &npts, res, u, err);
    if (st == RU_OK && res->found) {
        memcpy(x_dc, u, n * sizeof *u);
        memcpy(x_re, u + n, n * sizeof *u);
        memcpy(x_im, u + 2 * n, n * sizeof *u);
    }
    free(u);
    return st;
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
    double vo0_v;
} amp_at;

static double amp_out(void *user, double vc)
{
    const amp_at *p = user;
    ru_law_eval e;
    ru_law_eval_amp(p->amp, vc, p->vo0_v, &e);
    return e.i_out;
}

double ru_df_amp_gain(const ru_amp *amp, double vc0_v, double vo0_v, double a_v)
{
    amp_at p = {amp, vo0_v};
    return ru_df_gain(amp_out, &p, vc0_v, a_v, 4096);
}
