/* descfn_curve.c: the describing-function handle (ringup/descfn.h): the balance
 * of descfn.c continued in amplitude from the linear limit, the sigma(A) curve and
 * its zero, sigma at any amplitude, and the start-up time as the integral of the
 * envelope equation dA/dt = sigma(A) A.
 *
 * Every solved amplitude is kept (amplitude and unknowns, ascending), so a query
 * at any amplitude starts from the nearest solution and continues geometrically
 * (at most RU_DF_STEP per step, halved in log on a failed solve). The zero of
 * sigma is refined by regula falsi (Illinois) inside the bracket the sweep found. */
#include "engines/descfn_impl.h"

#include "engines/envtime.h"
#include "engines/modes.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define RU_DF_POINTS_MAX 400   /* sweep steps before giving up */
#define RU_DF_CACHE_MAX 4096   /* solutions kept */
#define RU_DF_START_REL 1e-6   /* smallest amplitude, relative to the voltage scale */
#define RU_DF_STEP 1.1659      /* largest continuation factor: (1e8)^(1/120) */
#define RU_DF_QUAD_REL 1e-7    /* start-up integral: relative tolerance */

struct ru_df {
    ru_df_hb h;            /* workspace; h.amp_v is the amplitude of u */
    double *u, *u_prev;    /* current solution and a saved one (m each) */
    double vscale;         /* voltage scale of convergence (V) */
    double dc0;            /* probe DC level in the linear limit */
    double a_min;          /* smallest amplitude solved (the linear limit) */
    size_t ncache;
    double *camp;          /* kept amplitudes, ascending */
    double *cu;            /* kept solutions, m each */
    int have_zero;         /* 1: u_zero holds the settled balance */
    double *u_zero;        /* solution where sigma = 0 */
    double a_zero;
};

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

/* Keeps the solution u at amplitude a (sorted insert; full cache keeps nothing). */
static void cache_put(ru_df *d, double a, const double *u)
{
    size_t m = d->h.m, k = d->ncache;
    if (k >= RU_DF_CACHE_MAX)
        return;
    while (k > 0 && d->camp[k - 1] > a)
        k--;
    if (k > 0 && d->camp[k - 1] == a)
        return;
    memmove(d->camp + k + 1, d->camp + k, (d->ncache - k) * sizeof *d->camp);
    memmove(d->cu + (k + 1) * m, d->cu + k * m, (d->ncache - k) * m * sizeof *d->cu);
    d->camp[k] = a;
    memcpy(d->cu + k * m, u, m * sizeof *u);
    d->ncache++;
}

/* Loads the kept solution nearest to a (in log amplitude) into d->u. */
static void cache_nearest(ru_df *d, double a)
{
    size_t best = 0;
    for (size_t k = 1; k < d->ncache; k++)
        if (fabs(log(d->camp[k] / a)) < fabs(log(d->camp[best] / a)))
            best = k;
    memcpy(d->u, d->cu + best * d->h.m, d->h.m * sizeof *d->u);
    d->h.amp_v = d->camp[best];
}

ru_status ru_df_create(const ru_system *s, const double *x_op, int probe_pos,
                       int probe_neg, ru_df **out, ru_error *err)
{
    *out = NULL;
    int kp = ru_system_node_state(s, probe_pos), kn = ru_system_node_state(s, probe_neg);
    if (kp < 0 && kn < 0)
        return ru_error_set(err, RU_EINPUT, NULL, 0, 0,
                            "the probe is not a free node: no amplitude to balance");
    ru_df *d = calloc(1, sizeof *d);
    if (!d)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "out of memory");
    ru_status st = ru_df_hb_init(&d->h, s, kp, kn);
    size_t m = d->h.m, n = d->h.n;
    d->u = malloc(m * sizeof *d->u);
    d->u_prev = malloc(m * sizeof *d->u_prev);
    d->u_zero = malloc(m * sizeof *d->u_zero);
    d->camp = malloc(RU_DF_CACHE_MAX * sizeof *d->camp);
    d->cu = malloc(RU_DF_CACHE_MAX * m * sizeof *d->cu);
    ru_pole *poles = malloc(n * sizeof *poles);
    if (st != RU_OK || !d->u || !d->u_prev || !d->u_zero || !d->camp || !d->cu || !poles) {
        st = ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "out of memory");
        goto fail;
    }
    d->vscale = voltage_scale(s);
    if ((st = ru_poles_compute(s, x_op, poles, err)) != RU_OK)
        goto fail;
    int k = ru_poles_dominant(poles, ru_poles_count(s));
    if (k < 0) {
        st = ru_error_set(err, RU_ERANGE, NULL, 0, 0,
                          "no complex pole pair: nothing oscillates");
        goto fail;
    }
    d->h.amp_v = RU_DF_START_REL * d->vscale;
    if ((st = ru_df_hb_guess(&d->h, x_op, poles[k], d->u)) != RU_OK ||
        (st = ru_df_hb_solve(&d->h, d->u, d->vscale)) != RU_OK) {
        st = ru_error_set(err, st == RU_EINPUT ? RU_EINPUT : RU_ENOCONVERGE, NULL, 0, 0,
                          "describing function: no balance even at the small-signal "
                          "limit (the probe may not see the dominant mode)");
        goto fail;
    }
    d->a_min = d->h.amp_v;
    d->dc0 = ru_df_hb_probe(&d->h, d->u);
    cache_put(d, d->h.amp_v, d->u);
    free(poles);
    *out = d;
    return RU_OK;
fail:
    free(poles);
    ru_df_destroy(d);
    return st;
}

void ru_df_destroy(ru_df *d)
{
    if (!d)
        return;
    ru_df_hb_free(&d->h);
    free(d->u);
    free(d->u_prev);
    free(d->u_zero);
    free(d->camp);
    free(d->cu);
    free(d);
}

double ru_df_min_amplitude(const ru_df *d)
{
    return d->a_min;
}

static ru_df_point point_of(const ru_df *d)
{
    size_t n = d->h.n;
    ru_df_point p = {d->h.amp_v, d->u[3 * n], d->u[3 * n + 1] / (2 * M_PI),
                     ru_df_hb_probe(&d->h, d->u) - d->dc0};
    return p;
}

/* One continuation step of d->u to amplitude a; on failure d->u is unchanged. */
static ru_status step_to(ru_df *d, double a)
{
    memcpy(d->u_prev, d->u, d->h.m * sizeof *d->u);
    double a_from = d->h.amp_v;
    ru_df_hb_rescale(&d->h, d->u, a);
    ru_status st = ru_df_hb_solve(&d->h, d->u, d->vscale);
    if (st != RU_OK) {
        memcpy(d->u, d->u_prev, d->h.m * sizeof *d->u);
        d->h.amp_v = a_from;
        return st;
    }
    cache_put(d, a, d->u);
    return RU_OK;
}

ru_status ru_df_at(ru_df *d, double amp_v, ru_df_point *p, ru_error *err)
{
    if (!(amp_v > 0) || !isfinite(amp_v))
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0,
                            "describing function: amplitude must be positive (got %g)",
                            amp_v);
    cache_nearest(d, amp_v);
    double lstep = log(RU_DF_STEP);
    while (d->h.amp_v != amp_v) {
        double l = log(amp_v / d->h.amp_v);
        double a = fabs(l) <= lstep ? amp_v : d->h.amp_v * exp(copysign(lstep, l));
        if (step_to(d, a) == RU_OK) {
            lstep = fmin(lstep * 2, log(RU_DF_STEP));
            continue;
        }
        lstep *= 0.5;
        if (lstep < 5e-4)
            return ru_error_set(err, RU_ENOCONVERGE, NULL, 0, 0,
                                "the one-harmonic balance has no solution near %.3g V "
                                "(hard limiting or strong harmonics)",
                                d->h.amp_v);
    }
    if (p)
        *p = point_of(d);
    return RU_OK;
}

/* Refines sigma(A) = 0 inside the bracket [a_pos (sigma > 0), a_neg (sigma < 0)]
 * by regula falsi with the Illinois modification (superlinear, never leaves the
 * bracket), starting from the solution at a_neg held in d->u. */
static void refine_zero(ru_df *d, double a_pos, double s_pos, double a_neg, double s_neg,
                        ru_df_result *res)
{
    size_t n = d->h.n;
    int side = 0; /* which end moved last: halve the other's value (Illinois) */
    for (int it = 0; it < 60 && fabs(a_neg - a_pos) > 1e-12 * a_neg; it++) {
        double a = (a_pos * s_neg - a_neg * s_pos) / (s_neg - s_pos);
        if (step_to(d, a) != RU_OK)
            break;
        double sg = d->u[3 * n];
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
        if (fabs(sg) < 1e-12 * fabs(d->u[3 * n + 1]))
            break;
    }
    res->found = 1;
    res->settled_amplitude_v = d->h.amp_v;
    res->frequency_hz = d->u[3 * n + 1] / (2 * M_PI);
    res->dc_level_v = ru_df_hb_probe(&d->h, d->u);
    d->have_zero = 1;
    d->a_zero = d->h.amp_v;
    memcpy(d->u_zero, d->u, d->h.m * sizeof *d->u);
}

ru_status ru_df_find(ru_df *d, double amp_max_v, ru_df_point *curve, size_t max_pts,
                     size_t *npts, ru_df_result *res, ru_error *err)
{
    (void)err;
    memset(res, 0, sizeof *res);
    res->settled_amplitude_v = res->frequency_hz = res->dc_level_v = NAN;
    *npts = 0;
    size_t n = d->h.n;
    if (!(amp_max_v > 0))
        amp_max_v = 100.0 * d->vscale;
    cache_nearest(d, d->a_min);
    double factor = pow(amp_max_v / d->h.amp_v, 1.0 / 120.0);
    double a_prev = d->h.amp_v, s_prev = d->u[3 * n];
    for (int step = 0; step < RU_DF_POINTS_MAX; step++) {
        if (curve && *npts < max_pts)
            curve[(*npts)++] = point_of(d);
        if (s_prev < 0 && step == 0)
            snprintf(res->note, sizeof res->note,
                     "the poles are left of the jw axis: it does not start from a small "
                     "kick");
        double a_next = a_prev * factor;
        if (a_next > amp_max_v)
            break;
        if (step_to(d, a_next) != RU_OK) {
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
        double s_now = d->u[3 * n];
        if (s_prev > 0 && s_now <= 0) {
            if (curve && *npts < max_pts)
                curve[(*npts)++] = point_of(d);
            refine_zero(d, a_prev, s_prev, a_next, s_now, res);
            return RU_OK;
        }
        a_prev = a_next;
        s_prev = s_now;
    }
    if (!res->note[0])
        snprintf(res->note, sizeof res->note,
                 "the growth rate stays positive up to %.3g V: no amplitude limit found",
                 a_prev);
    return RU_OK;
}

ru_status ru_df_zero_state(const ru_df *d, double *x0, double *x_re, double *x_im,
                           double *w_rad_per_s)
{
    if (!d->have_zero)
        return RU_EINPUT;
    size_t n = d->h.n;
    memcpy(x0, d->u_zero, n * sizeof *x0);
    memcpy(x_re, d->u_zero + n, n * sizeof *x_re);
    memcpy(x_im, d->u_zero + 2 * n, n * sizeof *x_im);
    *w_rad_per_s = d->u_zero[3 * n + 1];
    return RU_OK;
}

/* ---- start-up time: t = integral of d(ln A) / sigma(A) ---- */

enum { QUAD_FAILED = 1, QUAD_NONPOSITIVE = 2 };

/* 1 / sigma at amplitude e^u (engines/envtime.h). */
static double inv_sigma(void *user, double u, int *fail)
{
    ru_df_point p;
    ru_error e;
    if (ru_df_at(user, exp(u), &p, &e) != RU_OK) {
        *fail = QUAD_FAILED;
        return 0;
    }
    if (!(p.growth_rate_per_s > 0)) {
        *fail = QUAD_NONPOSITIVE;
        return 0;
    }
    return 1.0 / p.growth_rate_per_s;
}

ru_status ru_df_startup_time(ru_df *d, double a_from_v, double a_to_v, double *t_s,
                             ru_error *err)
{
    *t_s = NAN;
    if (!(a_from_v > 0) || !(a_to_v > a_from_v) || !isfinite(a_to_v))
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0,
                            "start-up integral: need 0 < start level < end level (got "
                            "%g, %g V)",
                            a_from_v, a_to_v);
    double t = 0, lo = a_from_v, part = 0;
    int fail = 0;
    if (lo < d->a_min) { /* below the first balance sigma is the poles' (linear limit) */
        double f = inv_sigma(d, log(d->a_min), &fail);
        t += log(fmin(d->a_min, a_to_v) / lo) * f;
        lo = d->a_min;
    }
    if (!fail && a_to_v > lo) {
        fail = ru_envtime_integrate(inv_sigma, d, log(lo), log(a_to_v), RU_DF_QUAD_REL,
                                    &part);
        t += part;
    }
    if (fail == QUAD_NONPOSITIVE)
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0,
                            "the growth rate is not positive everywhere between the "
                            "start level and the end level");
    if (fail)
        return ru_error_set(err, RU_ENOCONVERGE, NULL, 0, 0,
                            "the one-harmonic balance failed inside the start-up range");
    *t_s = t;
    return RU_OK;
}

ru_status ru_df_analyse(const ru_system *s, const double *x_op, int probe_pos,
                        int probe_neg, double amp_max_v, ru_df_point *curve,
                        size_t max_pts, size_t *npts, ru_df_result *res, ru_error *err)
{
    memset(res, 0, sizeof *res);
    res->settled_amplitude_v = res->frequency_hz = res->dc_level_v = NAN;
    *npts = 0;
    ru_df *d = NULL;
    ru_error e;
    ru_error_clear(&e);
    ru_status st = ru_df_create(s, x_op, probe_pos, probe_neg, &d, &e);
    if (st == RU_ERANGE) { /* no complex pair: a result, not a failure */
        snprintf(res->note, sizeof res->note, "no complex pole pair: nothing oscillates");
        return RU_OK;
    }
    if (st != RU_OK) {
        if (err)
            *err = e;
        return st;
    }
    st = ru_df_find(d, amp_max_v, curve, max_pts, npts, res, err);
    ru_df_destroy(d);
    return st;
}

ru_status ru_df_settled_state(const ru_system *s, const double *x_op, int probe_pos,
                              int probe_neg, double *x_dc, double *x_re, double *x_im,
                              ru_df_result *res, ru_error *err)
{
    memset(res, 0, sizeof *res);
    res->settled_amplitude_v = res->frequency_hz = res->dc_level_v = NAN;
    ru_df *d = NULL;
    size_t npts = 0;
    double w;
    ru_error e;
    ru_error_clear(&e);
    ru_status st = ru_df_create(s, x_op, probe_pos, probe_neg, &d, &e);
    if (st == RU_ERANGE) {
        snprintf(res->note, sizeof res->note, "no complex pole pair: nothing oscillates");
        return RU_OK;
    }
    if (st != RU_OK) {
        if (err)
            *err = e;
        return st;
    }
    st = ru_df_find(d, 0, NULL, 0, &npts, res, err);
    if (st == RU_OK && res->found)
        ru_df_zero_state(d, x_dc, x_re, x_im, &w);
    ru_df_destroy(d);
    return st;
}
