/* law_opamp.c: the opamp law, a dominant-pole operational amplifier with one
 * internal state, the integrator voltage vint:
 *   dvint/dt = slew*tanh(wt vc/slew) - wp vint - K(vint),  i_out = (rail(vint) - vo)/rout
 * (wt = 2 pi gbw, wp = wt/gain; rail and the anti-windup force K in ringup/part.h).
 * Its output follows vc only through vint, so it has no memoryless describing
 * function (df_out NULL); the inputs draw nothing. */
#include "parts/laws.h"

#include <math.h>
#include <string.h>

#define A(f) offsetof(ru_part, amp.f)
static const ru_keyrec keys[] = {{"gain", NULL, A(gain), 0, 1e5},
                                 {"gbw", "Hz", A(gbw_hz), 0, 1e6},
                                 {"vmax", "V", A(vmax_v), 0, 12.0},
                                 {"vmin", "V", A(vmin_v), 0, -12.0},
                                 {"knee", "V", A(knee_v), 0, 0.1},
                                 {"slew", "V/s", A(slew_v_per_s), 0, 1e6},
                                 {"rout", "ohm", A(rout_ohm), 0, 50.0},
                                 RU_LAW_NOISE_KEYS,
                                 {NULL, NULL, 0, 0, 0.0}};
#undef A

static ru_status check(const ru_part *p, const ru_part_env *env, ru_error *err)
{
    const ru_amp *a = &p->amp;
    if (a->gain <= 0)
        return ru_part_bad(env, p, err, "gain must be positive", a->gain);
    if (a->gbw_hz <= 0)
        return ru_part_bad(env, p, err, "gbw must be positive", a->gbw_hz);
    if (a->vmax_v <= a->vmin_v)
        return ru_part_bad(env, p, err, "vmax must be above vmin", a->vmax_v);
    if (a->knee_v <= 0)
        return ru_part_bad(env, p, err, "knee must be positive", a->knee_v);
    if (a->slew_v_per_s <= 0)
        return ru_part_bad(env, p, err, "slew must be positive", a->slew_v_per_s);
    if (a->rout_ohm <= 0)
        return ru_part_bad(env, p, err, "rout must be positive", a->rout_ohm);
    return RU_OK;
}

double ru_law_rail(const ru_amp *a, double u, double *deriv)
{
    double k = a->knee_v, dlo, dhi;
    double lo = ru_law_softplus((u - a->vmin_v) / k, &dlo);
    double hi = ru_law_softplus((u - a->vmax_v) / k, &dhi);
    *deriv = dlo - dhi;
    return a->vmin_v + k * (lo - hi);
}

/* The opamp's anti-windup force K(v) = slew*(sp((v - hi)/knee) - sp((lo - v)/knee))
 * with the band hi = vmax + RU_OPAMP_BAND knee, lo = vmin - RU_OPAMP_BAND knee;
 * *dk = dK/dv. */
static double opamp_clamp(const ru_amp *a, double v, double *dk)
{
    double k = a->knee_v, band = RU_OPAMP_BAND * k, dhi, dlo;
    double hi = ru_law_softplus((v - a->vmax_v - band) / k, &dhi);
    double lo = ru_law_softplus((a->vmin_v - band - v) / k, &dlo);
    *dk = a->slew_v_per_s / k * (dhi + dlo);
    return a->slew_v_per_s * (hi - lo);
}

static void eval(const ru_amp *a, double vc, double vo, double xs, ru_law_eval *e)
{
    double wp = 2.0 * RU_PI_LAW * a->gbw_hz / a->gain; /* open-loop pole (rad/s) */
    double wt = 2.0 * RU_PI_LAW * a->gbw_hz;             /* unity-gain (rad/s) */
    double th = tanh(wt * vc / a->slew_v_per_s), dk, drail;
    double k = opamp_clamp(a, xs, &dk);
    double emf = ru_law_rail(a, xs, &drail);
    double g = 1.0 / a->rout_ohm;
    memset(e, 0, sizeof *e);
    e->i_out = (emf - vo) * g;
    e->di_out_dvo = -g;
    e->di_out_dxs = drail * g;
    e->dxs = a->slew_v_per_s * th - wp * xs - k;
    e->ddxs_dvc = wt * (1.0 - th * th);
    e->ddxs_dxs = -wp - dk;
}

/* wp v + K(v) = 0 (see laws.h, ru_law_rest_state). */
static double rest(const ru_amp *a)
{
    /* wp v + K(v) = 0: increasing in v, so Newton from 0 with a bracket. */
    double wp = 2.0 * RU_PI_LAW * a->gbw_hz / a->gain, v = 0.0, dk;
    double lo = a->vmin_v - (RU_OPAMP_BAND + 40.0) * a->knee_v;
    double hi = a->vmax_v + (RU_OPAMP_BAND + 40.0) * a->knee_v;
    lo = fmin(lo, 0.0);
    hi = fmax(hi, 0.0);
    for (int it = 0; it < 200; it++) {
        double f = wp * v + opamp_clamp(a, v, &dk);
        if (f > 0)
            hi = v;
        else
            lo = v;
        double nv = v - f / (wp + dk);
        if (!(nv > lo && nv < hi))
            nv = 0.5 * (lo + hi);
        if (fabs(nv - v) <= 1e-15 * (fabs(v) + a->knee_v))
            return nv;
        v = nv;
    }
    return v;
}

/* vint's tolerance scale: the node-voltage scale or the rails' size, if larger. */
static double state_scale(const ru_amp *a, double v_scale)
{
    return fmax(v_scale, fmax(fabs(a->vmax_v), fabs(a->vmin_v)));
}

const ru_law_desc ru_law_opamp = {
    .law = RU_LAW_OPAMP,
    .v = {"opamp", keys, NULL},
    .check = check,
    .eval = eval,
    .nstates = 1,
    .state = "vint",
    .rest = rest,
    .state_scale = state_scale,
};
