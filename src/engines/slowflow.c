/* slowflow.c: the method of averaging's slow flow (ringup/descfn.h): the envelope
 * equation dA/dt = sigma(A) A integrated in time, for any growth-rate law given
 * as a callback, and for the describing function's sigma(A) on a handle. The
 * result is the predicted envelope against time, from the start level to past
 * the settled amplitude (where sigma = 0 the flow stops by itself).
 *
 * Integrated in u = ln A, du/dt = sigma(e^u), by classical fourth-order
 * Runge-Kutta; each step is at most RU_SF_STEP over the faster of the growth rate
 * and its slope in u (the linearised rate near the settled amplitude), so the
 * local error stays far below 1e-6 relative. No state outside the call. */
#include "engines/descfn_impl.h"

#include <math.h>
#include <stddef.h>

#define RU_SF_STEP 0.02 /* largest change of u = ln A per step, in units of 1/rate */
#define RU_SF_MAX_STEPS 200000 /* a rate that changes faster than this can follow
                                  (a hard limit's jump in sigma) is refused, not
                                  stepped through forever */

/* One RK4 step of du/dt = sigma(e^u) over h; *s0 is sigma at u (given). */
static ru_status rk4(ru_sigma_fn f, void *user, double *u, double h, double s0,
                     ru_error *err)
{
    double k2, k3, k4;
    ru_status st;
    if ((st = f(user, exp(*u + 0.5 * h * s0), &k2, err)) != RU_OK ||
        (st = f(user, exp(*u + 0.5 * h * k2), &k3, err)) != RU_OK ||
        (st = f(user, exp(*u + h * k3), &k4, err)) != RU_OK)
        return st;
    *u += h * (s0 + 2 * k2 + 2 * k3 + k4) / 6;
    return RU_OK;
}

ru_status ru_slowflow_run(ru_sigma_fn sigma, void *user, double a0_v, double t_stop_s,
                          size_t npts, double *t_s, double *amp_v, size_t *nout,
                          ru_error *err)
{
    if (nout)
        *nout = 0;
    if (!(a0_v > 0) || !isfinite(a0_v) || !(t_stop_s > 0) || !isfinite(t_stop_s) ||
        npts < 2)
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0,
                            "slow flow: need a start level > 0, a stop time > 0 and two "
                            "points or more (got %g V, %g s, %zu)",
                            a0_v, t_stop_s, npts);
    double u = log(a0_v), t = 0, s0, slope = 0;
    long steps = 0;
    ru_status st = sigma(user, a0_v, &s0, err);
    if (st != RU_OK)
        return st;
    t_s[0] = 0;
    amp_v[0] = a0_v;
    if (nout)
        *nout = 1;
    for (size_t k = 1; k < npts; k++) {
        double t_end = t_stop_s * (double)k / (double)(npts - 1);
        while (t < t_end) {
            double rate = fmax(fabs(s0), fabs(slope));
            double h = rate > 0 ? fmin(t_end - t, RU_SF_STEP / rate) : t_end - t;
            if (t + h > t_end || t_end - (t + h) < 1e-12 * t_end)
                h = t_end - t;
            if (++steps > RU_SF_MAX_STEPS)
                return ru_error_set(err, RU_ENUMERIC, NULL, 0, 0,
                                    "slow flow: the growth rate changes too fast to "
                                    "follow near %.4g V (more than %d steps)",
                                    exp(u), RU_SF_MAX_STEPS);
            double u_old = u, s_old = s0;
            if ((st = rk4(sigma, user, &u, h, s0, err)) != RU_OK ||
                (st = sigma(user, exp(u), &s0, err)) != RU_OK)
                return st; /* the points so far stay written */
            slope = u != u_old ? (s0 - s_old) / (u - u_old) : slope;
            t = h == t_end - t ? t_end : t + h;
        }
        t_s[k] = t_end;
        amp_v[k] = exp(u);
        if (nout)
            *nout = k + 1;
    }
    if (nout)
        *nout = npts;
    return RU_OK;
}

/* sigma of the describing function at a (the linear limit's below the first
 * balance). */
static ru_status df_sigma(void *user, double a, double *sg, ru_error *err)
{
    ru_df *d = user;
    ru_df_point p;
    ru_status st = ru_df_at(d, fmax(a, ru_df_min_amplitude(d)), &p, err);
    *sg = st == RU_OK ? p.growth_rate_per_s : NAN;
    return st;
}

ru_status ru_df_slow_flow(ru_df *d, double a0_v, double t_stop_s, size_t npts,
                          double *t_s, double *amp_v, size_t *nout, ru_error *err)
{
    return ru_slowflow_run(df_sigma, d, a0_v, t_stop_s, npts, t_s, amp_v, nout, err);
}
