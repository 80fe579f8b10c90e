/* hb_tone.c: the harmonic balance used (ringup/hb.h): K raised one at a time from
 * the describing function's balance until the amplitude stops moving, the settled
 * tone's figures on the probe, and sigma_K(A) with the start-up integral.
 *
 * Convergence in K: the fundamental must move by less than RU_HB_AMP_REL and the
 * frequency by less than RU_HB_FREQ_REL at each of the last two steps of K (two, so
 * that a circuit with odd harmonics only, whose even steps move nothing, is not
 * stopped early). */
#include "engines/hb_impl.h"

#include "engines/envtime.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define RU_HB_AMP_REL 1e-3
#define RU_HB_FREQ_REL 1e-4
#define RU_HB_STEP 1.25        /* largest continuation factor in amplitude */
/* Start-up integral's relative tolerance. Each integrand value is a harmonic-balance
 * Newton solve (about 2M instructions on a tank), and this integral was 83 % of a
 * run's instructions at 1e-7 (162 solves; vdp-tank --stop 0.2m, callgrind): 1e-5 takes
 * that run from 418M to 215M instructions and moves the examples' predicted
 * start-up times by at most 1.7e-7 relative, far inside what a start-up time
 * means (the measured ones differ from the prediction by percent). */
#define RU_HB_QUAD_REL 1e-5

void ru_hb_start(ru_hb *h, const double *x0, const double *x_re, const double *x_im,
                 double w_rad_per_s)
{
    size_t n = h->n;
    h->k = 1;
    h->settled_k = 0;
    h->ncache = 0;
    memcpy(h->u, x0, n * sizeof *x0);
    memcpy(h->u + ru_hb_re(n, 1, 0), x_re, n * sizeof *x_re);
    memcpy(h->u + ru_hb_re(n, 1, 0) + n, x_im, n * sizeof *x_im);
    h->u[ru_hb_size(n, 1) - 2] = 0;
    h->u[ru_hb_size(n, 1) - 1] = w_rad_per_s;
}

/* Relays the unknowns for knew harmonics (new ones start at 0). */
static void set_k(ru_hb *h, int knew)
{
    size_t n = h->n, mo = ru_hb_size(n, h->k), mn = ru_hb_size(n, knew);
    double sg = h->u[mo - 2], w = h->u[mo - 1];
    if (knew > h->k)
        memset(h->u + mo - 2, 0, (mn - mo + 2) * sizeof *h->u);
    h->u[mn - 2] = sg;
    h->u[mn - 1] = w;
    h->k = knew;
}

static double fundamental(const ru_hb *h)
{
    double re, im;
    ru_hb_probe(h, h->u, 1, &re, &im);
    return hypot(re, im);
}

/* Half the peak-to-peak of the probe's series (2048 phases, a parabola through
 * the three around each extreme). */
static double half_peak_to_peak(const ru_hb *h)
{
    enum { P = 2048 };
    double pre[RU_HB_MAX_HARMONICS + 1], pim[RU_HB_MAX_HARMONICS + 1];
    for (int k = 0; k <= h->k; k++)
        ru_hb_probe(h, h->u, k, &pre[k], &pim[k]);
    double v[P];
    int imax = 0, imin = 0;
    for (int j = 0; j < P; j++) {
        double th = 2 * M_PI * j / P, acc = pre[0];
        for (int k = 1; k <= h->k; k++)
            acc += pre[k] * cos(k * th) - pim[k] * sin(k * th);
        v[j] = acc;
        if (v[j] > v[imax])
            imax = j;
        if (v[j] < v[imin])
            imin = j;
    }
    double ext[2];
    for (int e = 0; e < 2; e++) {
        int i = e ? imin : imax;
        double a = v[(i + P - 1) % P], b = v[i], c = v[(i + 1) % P], d = a - 2 * b + c;
        ext[e] = d != 0 ? b - (c - a) * (c - a) / (8 * d) : b;
    }
    return 0.5 * (ext[0] - ext[1]);
}

static void tone_of(const ru_hb *h, ru_hb_tone *t)
{
    size_t m = ru_hb_size(h->n, h->k);
    double re, im, p2 = 0;
    t->harmonics = h->k;
    t->fundamental_v = fundamental(h);
    t->frequency_hz = h->u[m - 1] / (2 * M_PI);
    ru_hb_probe(h, h->u, 0, &t->dc_level_v, &im);
    t->amplitude_v = half_peak_to_peak(h);
    for (int k = 2; k <= RU_HB_REPORT; k++) {
        t->harmonics_dbc[k - 2] = NAN;
        if (k > h->k)
            continue;
        ru_hb_probe(h, h->u, k, &re, &im);
        double a = hypot(re, im);
        p2 += a * a;
        t->harmonics_dbc[k - 2] = a > 0 ? 20 * log10(a / t->fundamental_v) : -INFINITY;
    }
    t->thd_percent = 100 * sqrt(p2) / t->fundamental_v;
}

ru_status ru_hb_settle(ru_hb *h, ru_hb_tone *tone, ru_error *err)
{
    memset(tone, 0, sizeof *tone);
    tone->fundamental_v = tone->amplitude_v = tone->frequency_hz = NAN;
    tone->dc_level_v = tone->thd_percent = tone->moved = NAN;
    h->periodic = 1;
    double a_start = fundamental(h), a_prev = NAN, w_prev = NAN, da_prev = INFINITY,
           dw_prev = INFINITY;
    int ok = 0;
    for (int k = 1; k <= h->kmax; k++) {
        if (k > 1)
            set_k(h, k);
        memcpy(h->usave, h->u, ru_hb_size(h->n, k) * sizeof *h->u);
        if (ru_hb_newton(h) != RU_OK || !(fundamental(h) > 0.05 * a_start)) {
            memcpy(h->u, h->usave, ru_hb_size(h->n, k) * sizeof *h->u);
            if (k == 1)
                return ru_error_set(err, RU_ENOCONVERGE, NULL, 0, 0,
                                    "harmonic balance: no periodic balance even with one "
                                    "harmonic");
            set_k(h, k - 1);
            snprintf(tone->note, sizeof tone->note,
                     "the harmonic balance did not converge with %d harmonics (Newton "
                     "failed); the answer with %d is given",
                     k, k - 1);
            break;
        }
        ok = 1;
        double a = fundamental(h), w = h->u[ru_hb_size(h->n, k) - 1];
        double da = k > 1 ? fabs(a / a_prev - 1) : INFINITY;
        double dw = k > 1 ? fabs(w / w_prev - 1) : INFINITY;
        tone->moved = da;
        if (da < RU_HB_AMP_REL && da_prev < RU_HB_AMP_REL && dw < RU_HB_FREQ_REL &&
            dw_prev < RU_HB_FREQ_REL) {
            tone->converged = 1;
            break;
        }
        if (k == h->kmax)
            snprintf(tone->note, sizeof tone->note,
                     "the harmonic balance still moves by %.2g %% at %d harmonics (hard "
                     "limiting): not converged",
                     100 * da, k);
        a_prev = a;
        w_prev = w;
        da_prev = da;
        dw_prev = dw;
    }
    if (!ok)
        return ru_error_set(err, RU_ENOCONVERGE, NULL, 0, 0, "harmonic balance failed");
    tone_of(h, tone);
    h->settled_k = h->k;
    h->ncache = 0;
    h->amp_v = tone->fundamental_v;
    memcpy(h->camp, &h->amp_v, sizeof h->amp_v);
    memcpy(h->cu, h->u, ru_hb_size(h->n, h->k) * sizeof *h->u);
    h->ncache = 1;
    return RU_OK;
}

/* ---- sigma_K(A) ---- */

static void cache_put(ru_hb *h, double a)
{
    size_t m = ru_hb_size(h->n, h->k), k = h->ncache;
    if (k >= RU_HB_CACHE)
        return;
    while (k > 0 && h->camp[k - 1] > a)
        k--;
    if (k > 0 && h->camp[k - 1] == a)
        return;
    memmove(h->camp + k + 1, h->camp + k, (h->ncache - k) * sizeof *h->camp);
    memmove(h->cu + (k + 1) * m, h->cu + k * m, (h->ncache - k) * m * sizeof *h->cu);
    h->camp[k] = a;
    memcpy(h->cu + k * m, h->u, m * sizeof *h->u);
    h->ncache++;
}

/* One continuation step to amplitude a (the oscillating part scaled first). */
static ru_status step_to(ru_hb *h, double a)
{
    size_t n = h->n, m = ru_hb_size(n, h->k);
    memcpy(h->usave, h->u, m * sizeof *h->u);
    double f = a / h->amp_v;
    for (int k = 1; k <= h->k; k++) /* harmonic k of a weak nonlinearity goes as A^k */
        for (size_t i = 0; i < 2 * n; i++)
            h->u[ru_hb_re(n, k, 0) + i] *= pow(f, k);
    double a_old = h->amp_v;
    h->amp_v = a;
    if (ru_hb_newton(h) != RU_OK) {
        memcpy(h->u, h->usave, m * sizeof *h->u);
        h->amp_v = a_old;
        return RU_ENOCONVERGE;
    }
    cache_put(h, a);
    return RU_OK;
}

ru_status ru_hb_sigma_at(ru_hb *h, double amp_v, double *sigma_per_s,
                         double *w_rad_per_s, ru_error *err)
{
    if (!h->settled_k || h->ncache == 0)
        return ru_error_set(err, RU_EINPUT, NULL, 0, 0,
                            "harmonic balance: no settled balance to continue from");
    if (!(amp_v > 0) || !isfinite(amp_v))
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0,
                            "harmonic balance: amplitude must be positive");
    size_t m = ru_hb_size(h->n, h->k), best = 0;
    for (size_t k = 1; k < h->ncache; k++)
        if (fabs(log(h->camp[k] / amp_v)) < fabs(log(h->camp[best] / amp_v)))
            best = k;
    memcpy(h->u, h->cu + best * m, m * sizeof *h->u);
    h->amp_v = h->camp[best];
    h->periodic = 0;
    double lstep = log(RU_HB_STEP);
    while (h->amp_v != amp_v) {
        double l = log(amp_v / h->amp_v);
        double a = fabs(l) <= lstep ? amp_v : h->amp_v * exp(copysign(lstep, l));
        if (step_to(h, a) == RU_OK) {
            lstep = fmin(2 * lstep, log(RU_HB_STEP));
            continue;
        }
        lstep *= 0.5;
        if (lstep < 5e-4)
            return ru_error_set(err, RU_ENOCONVERGE, NULL, 0, 0,
                                "harmonic balance: no balance near %.3g V", h->amp_v);
    }
    *sigma_per_s = h->u[m - 2];
    if (w_rad_per_s)
        *w_rad_per_s = h->u[m - 1];
    return RU_OK;
}

enum { QUAD_FAILED = 1, QUAD_NONPOSITIVE = 2 };

static double inv_sigma(void *user, double u, int *fail)
{
    double sg;
    ru_error e;
    if (ru_hb_sigma_at(user, exp(u), &sg, NULL, &e) != RU_OK) {
        *fail = QUAD_FAILED;
        return 0;
    }
    if (!(sg > 0)) {
        *fail = QUAD_NONPOSITIVE;
        return 0;
    }
    return 1.0 / sg;
}

ru_status ru_hb_startup_time(ru_hb *h, double a_from_v, double a_to_v, double *t_s,
                             ru_error *err)
{
    *t_s = NAN;
    if (!(a_from_v > 0) || !(a_to_v > a_from_v))
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0,
                            "start-up integral: need 0 < start level < end level");
    double t;
    int fail = ru_envtime_integrate(inv_sigma, h, log(a_from_v), log(a_to_v),
                                    RU_HB_QUAD_REL, &t);
    if (fail == QUAD_NONPOSITIVE)
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0,
                            "the harmonic balance's growth rate is not positive over "
                            "the start-up range");
    if (fail)
        return ru_error_set(err, RU_ENOCONVERGE, NULL, 0, 0,
                            "the harmonic balance failed inside the start-up range");
    *t_s = t;
    return RU_OK;
}
