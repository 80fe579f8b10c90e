/* margin_hb.c: Re Z of the rest against the part's current (ringup/margin.h,
 * ru_margin_amplitude).
 *
 * The rest is driven at the part's terminals by i(t) = I_dc + I cos(w t) (I_dc
 * the part's DC current, so the bias stays) and every state is taken as
 * x(t) = x0 + Xc cos(w t) + Xs sin(w t). Balancing M x' = r(x) + b i at DC and at
 * the fundamental over HB_POINTS points of the cycle (the actual laws, as the
 * describing function of descfn.c does for the whole circuit):
 *   (1/N) sum r_k + b I_dc                  = 0
 *   (2/N) sum r_k cos_k + b I - w M Xs      = 0
 *   (2/N) sum r_k sin_k       + w M Xc      = 0
 * solved by damped Newton with the analytic Jacobian (sums of dr/dx at the points),
 * continued from the linear solution up the amplitude grid. The port voltage's
 * phasor is V = (Xc_a - Xc_b) - j (Xs_a - Xs_b), Z = V / I. At each amplitude the
 * frequency is moved (secant) until X_part + Im Z = 0. */
#include "base/cplx.h"
#include "engines/margin_impl.h"

#include <complex.h>
#include <lapacke.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define PI 3.14159265358979323846
#define HB_POINTS 64      /* points per cycle */
#define HB_NEWTON 60      /* Newton iterations per solve */
#define HB_TOL 1e-11      /* step size (relative to the unknowns' scale) at convergence */
#define AMP_STEP 1.2589254117941673 /* 10^(1/10): the amplitude grid */
#define FREQ_ITER 12      /* secant steps on the frequency */
#define BISECT_STEPS 30   /* on the settled current, in log I */

typedef struct hb {
    const ru_margin *m;
    size_t n;
    double *u;     /* 3n unknowns: x0, Xc, Xs */
    double *F;     /* 3n residuals */
    double *Jm;    /* 3n x 3n Jacobian */
    double *xk, *rk, *Dk; /* a point's state, residual and dr/dx */
    lapack_int *piv;
} hb;

static ru_status hb_alloc(hb *h, const ru_margin *m, ru_error *err)
{
    memset(h, 0, sizeof *h);
    h->m = m;
    h->n = m->n;
    size_t n3 = 3 * h->n;
    h->u = calloc(n3, sizeof *h->u);
    h->F = calloc(n3, sizeof *h->F);
    h->Jm = calloc(n3 * n3, sizeof *h->Jm);
    h->xk = calloc(h->n, sizeof *h->xk);
    h->rk = calloc(h->n, sizeof *h->rk);
    h->Dk = calloc(h->n * h->n, sizeof *h->Dk);
    h->piv = calloc(n3, sizeof *h->piv);
    if (h->u && h->F && h->Jm && h->xk && h->rk && h->Dk && h->piv)
        return RU_OK;
    return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "margin: out of memory");
}

static void hb_free(hb *h)
{
    free(h->u);
    free(h->F);
    free(h->Jm);
    free(h->xk);
    free(h->rk);
    free(h->Dk);
    free(h->piv);
}

/* Residuals and Jacobian at h->u for current amplitude cur and frequency w. */
static ru_status hb_eval(hb *h, double cur, double w)
{
    size_t n = h->n, n3 = 3 * n;
    const double *x0 = h->u, *xc = h->u + n, *xs = h->u + 2 * n;
    memset(h->F, 0, n3 * sizeof *h->F);
    memset(h->Jm, 0, n3 * n3 * sizeof *h->Jm);
    ru_eval_point ep = {.t_s = 0, .dc = 1, .source_scale = 1.0};
    for (int k = 0; k < HB_POINTS; k++) {
        double th = 2 * PI * k / HB_POINTS, c = cos(th), s = sin(th);
        for (size_t i = 0; i < n; i++)
            h->xk[i] = x0[i] + xc[i] * c + xs[i] * s;
        ru_status st = ru_system_residual(h->m->rest, &ep, h->xk, h->rk, h->Dk);
        if (st != RU_OK)
            return st;
        double wt[3] = {1.0 / HB_POINTS, 2.0 * c / HB_POINTS, 2.0 * s / HB_POINTS};
        double bs[3] = {1.0, c, s};
        for (int e = 0; e < 3; e++)
            for (size_t i = 0; i < n; i++) {
                h->F[e * n + i] += wt[e] * h->rk[i];
                double *row = h->Jm + (e * n + i) * n3;
                for (int v = 0; v < 3; v++)
                    for (size_t j = 0; j < n; j++)
                        row[v * n + j] += wt[e] * bs[v] * h->Dk[i * n + j];
            }
    }
    const ru_margin *m = h->m;
    double inj[2] = {m->idc_a, cur}; /* DC and cosine parts of the port current */
    for (int e = 0; e < 2; e++) {
        if (m->ka >= 0)
            h->F[e * n + (size_t)m->ka] += inj[e];
        if (m->kb >= 0)
            h->F[e * n + (size_t)m->kb] -= inj[e];
    }
    for (size_t i = 0; i < n; i++)
        for (size_t j = 0; j < n; j++) {
            double wm = w * m->M[i * n + j];
            h->F[n + i] -= wm * xs[j];
            h->F[2 * n + i] += wm * xc[j];
            h->Jm[(n + i) * n3 + 2 * n + j] -= wm;
            h->Jm[(2 * n + i) * n3 + n + j] += wm;
        }
    return RU_OK;
}

static double fnorm(const hb *h)
{
    double s = 0;
    for (size_t i = 0; i < 3 * h->n; i++)
        s = fmax(s, fabs(h->F[i]));
    return s;
}

/* Newton from the present h->u; RU_ENOCONVERGE when it does not settle. */
static ru_status hb_solve(hb *h, double cur, double w)
{
    size_t n3 = 3 * h->n;
    double *du = malloc(n3 * sizeof *du), *u0 = malloc(n3 * sizeof *u0);
    ru_status st = (du && u0) ? RU_OK : RU_ENOMEM;
    for (int it = 0; it < HB_NEWTON && st == RU_OK; it++) {
        if ((st = hb_eval(h, cur, w)) != RU_OK)
            break;
        double f0 = fnorm(h);
        for (size_t i = 0; i < n3; i++)
            du[i] = -h->F[i];
        if (LAPACKE_dgesv(LAPACK_ROW_MAJOR, (lapack_int)n3, 1, h->Jm, (lapack_int)n3,
                          h->piv, du, 1)) {
            st = RU_ENUMERIC;
            break;
        }
        /* converged when the full step is at round-off: the phasors to HB_TOL of
         * their own size (a small swing on a large bias stays exact), the DC to
         * HB_TOL of the bias and the swing */
        double s_dc = 0, s_ac = 0, d_dc = 0, d_ac = 0;
        for (size_t i = 0; i < n3; i++) {
            if (i < h->n) {
                s_dc = fmax(s_dc, fabs(h->u[i]));
                d_dc = fmax(d_dc, fabs(du[i]));
            } else {
                s_ac = fmax(s_ac, fabs(h->u[i]));
                d_ac = fmax(d_ac, fabs(du[i]));
            }
        }
        if (d_ac <= HB_TOL * s_ac && d_dc <= HB_TOL * (s_dc + s_ac)) {
            for (size_t i = 0; i < n3; i++)
                h->u[i] += du[i];
            free(du);
            free(u0);
            return RU_OK;
        }
        memcpy(u0, h->u, n3 * sizeof *u0);
        double lam = 1.0;
        for (int d = 0; d < 20; d++) { /* damping: accept a step that does not grow F */
            for (size_t i = 0; i < n3; i++)
                h->u[i] = u0[i] + lam * du[i];
            if ((st = hb_eval(h, cur, w)) != RU_OK || fnorm(h) <= f0 || d == 19)
                break;
            lam *= 0.5;
        }
    }
    free(du);
    free(u0);
    return st == RU_OK ? RU_ENOCONVERGE : st;
}

/* Z = V / cur from the solution. */
static double complex hb_z(const hb *h, double cur)
{
    size_t n = h->n;
    const ru_margin *m = h->m;
    double vc = 0, vs = 0;
    if (m->ka >= 0) {
        vc += h->u[n + (size_t)m->ka];
        vs += h->u[2 * n + (size_t)m->ka];
    }
    if (m->kb >= 0) {
        vc -= h->u[n + (size_t)m->kb];
        vs -= h->u[2 * n + (size_t)m->kb];
    }
    return RU_CMPLX(vc / cur, -vs / cur);
}

/* The linear solution at amplitude cur and w as the first guess. */
static ru_status hb_linear_guess(hb *h, double cur, double w)
{
    size_t n = h->n;
    const ru_margin *m = h->m;
    lapack_complex_double *K = malloc(n * n * sizeof *K), *v = malloc(n * sizeof *v);
    lapack_int *piv = malloc(n * sizeof *piv);
    ru_status st = (K && v && piv) ? RU_OK : RU_ENOMEM;
    if (st == RU_OK) {
        for (size_t i = 0; i < n * n; i++)
            K[i] = RU_CMPLX(-m->A[i], w * m->M[i]);
        for (size_t i = 0; i < n; i++)
            v[i] = 0;
        if (m->ka >= 0)
            v[m->ka] += cur;
        if (m->kb >= 0)
            v[m->kb] -= cur;
        if (LAPACKE_zgesv(LAPACK_ROW_MAJOR, (lapack_int)n, 1, K, (lapack_int)n, piv, v, 1))
            st = RU_ENUMERIC;
    }
    for (size_t i = 0; st == RU_OK && i < n; i++) {
        h->u[i] = m->x[i];
        h->u[n + i] = creal(v[i]);
        h->u[2 * n + i] = -cimag(v[i]);
    }
    free(K);
    free(v);
    free(piv);
    return st;
}

/* Solves at amplitude cur, moving w until X_part + Im Z = 0; *z gets Z there. */
static ru_status solve_at(hb *h, double cur, double *w, double complex *z, ru_error *err)
{
    double w0 = *w, w1 = *w * (1 + 1e-7), g0 = NAN, g1;
    ru_status st = RU_OK;
    for (int it = 0; it < FREQ_ITER; it++) {
        double wc = it == 0 ? w0 : w1, pr, pi;
        if ((st = hb_solve(h, cur, wc)) != RU_OK)
            break;
        *z = hb_z(h, cur);
        if ((st = ru_margin_part_z(h->m, wc / (2 * PI), &pr, &pi, err)) != RU_OK)
            return st;
        double g = pi + cimag(*z);
        if (it == 0) {
            g0 = g;
            continue;
        }
        g1 = g;
        if (fabs(w1 - w0) <= 1e-13 * w1 || g1 == g0) {
            *w = w1;
            return RU_OK;
        }
        double wn = w1 - g1 * (w1 - w0) / (g1 - g0);
        if (!(wn > 0.5 * w1 && wn < 2 * w1))
            wn = w1 * (g1 > 0 ? 0.999 : 1.001);
        w0 = w1;
        g0 = g1;
        w1 = wn;
    }
    if (st == RU_OK) {
        *w = w1;
        return RU_OK;
    }
    return ru_error_set(err, st == RU_ENOMEM ? RU_ENOMEM : RU_ENOCONVERGE, NULL, 0, 0,
                        "margin: the balance at %.4g A did not converge", cur);
}

static double esr_at(const ru_margin *m, double w)
{
    double pr = NAN, pi;
    if (ru_margin_part_z(m, w / (2 * PI), &pr, &pi, NULL) != RU_OK)
        return NAN;
    return pr;
}

ru_status ru_margin_amplitude(const ru_margin *m, double f_lin_hz, ru_margin_point *curve,
                              size_t max_pts, size_t *npts, ru_margin_amp *res,
                              ru_error *err)
{
    memset(res, 0, sizeof *res);
    res->current_a = res->frequency_hz = res->drive_power_w = NAN;
    *npts = 0;
    hb h;
    ru_status st = hb_alloc(&h, m, err);
    double w = 2 * PI * f_lin_hz, zr, zi;
    if (st == RU_OK)
        st = ru_margin_rest_z(m, f_lin_hz, &zr, &zi, err);
    if (st != RU_OK) {
        hb_free(&h);
        return st;
    }
    /* start where the port swings 10 uV: linear to many digits */
    double cur = 1e-5 / fmax(hypot(zr, zi), 1e-300), Ip = NAN, wp = w, dp = NAN;
    double *up = malloc(3 * m->n * sizeof *up);
    if (!up || (st = hb_linear_guess(&h, cur, w)) != RU_OK) {
        free(up);
        hb_free(&h);
        return up ? ru_error_set(err, st, NULL, 0, 0, "margin: linear solve failed")
                  : ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "margin: out of memory");
    }
    size_t limit = max_pts ? max_pts : 200;
    for (size_t k = 0; k < limit; k++) {
        double complex z;
        ru_error e;
        ru_error_clear(&e);
        if ((st = solve_at(&h, cur, &w, &z, &e)) != RU_OK) {
            snprintf(res->note, sizeof res->note, "%.200s", e.msg);
            st = RU_OK;
            break;
        }
        double d = -creal(z) - esr_at(m, w); /* drive left over */
        if (curve && k < max_pts) {
            curve[k] = (ru_margin_point){cur, creal(z), cimag(z), w / (2 * PI)};
            *npts = k + 1;
        }
        if (isfinite(dp) && dp > 0 && d <= 0) { /* bracketed: bisect in log I */
            double lo = Ip, hi = cur, wl = wp;
            for (int b = 0; b < BISECT_STEPS; b++) {
                double mid = sqrt(lo * hi), wm = wl;
                memcpy(h.u, up, 3 * m->n * sizeof *up);
                if (solve_at(&h, mid, &wm, &z, &e) != RU_OK)
                    break;
                if (-creal(z) - esr_at(m, wm) > 0) {
                    lo = mid;
                    wl = wm;
                    memcpy(up, h.u, 3 * m->n * sizeof *up);
                } else {
                    hi = mid;
                }
            }
            res->found = 1;
            res->current_a = sqrt(lo * hi);
            res->frequency_hz = wl / (2 * PI);
            res->drive_power_w = 0.5 * esr_at(m, wl) * res->current_a * res->current_a;
            break;
        }
        if (k == 0 && !(d > 0)) {
            snprintf(res->note, sizeof res->note,
                     "-Re Z does not exceed the ESR even at small current: no settled "
                     "current");
            break;
        }
        memcpy(up, h.u, 3 * m->n * sizeof *up);
        Ip = cur;
        wp = w;
        dp = d;
        /* predictor: the oscillating part scales with the current */
        for (size_t i = m->n; i < 3 * m->n; i++)
            h.u[i] *= AMP_STEP;
        cur *= AMP_STEP;
    }
    if (!res->found && !res->note[0])
        snprintf(res->note, sizeof res->note,
                 "-Re Z still exceeds the ESR at %.4g A: no settled current found", cur);
    free(up);
    hb_free(&h);
    return st;
}
