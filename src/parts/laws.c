/* laws.c: the amplifier laws and the diode and thermal-resistor laws (see laws.h
 * for the sign convention, circuit.h for the formulas and their sources).
 *
 * follower-tanh: E = center + gain*swing*tanh((vc - center)/swing) behind rout,
 *   i_out = (E - vo)/rout, no input current.
 * exp-stage: ic = is*(limexp(vc/(n vt)) - 1)*tanh(vo/vsat) sinks into out,
 *   so i_out = -ic; the base current ic/beta sinks into in, i_in = -ic/beta.
 * diff-pair-tanh: i_out = sign*itail*tanh(vc/(2 n vt)) - vo/rout (rout 0: none).
 * opamp: state vint; dvint/dt = slew*tanh(wt vc/slew) - wp vint - K(vint),
 *   i_out = (rail(vint) - vo)/rout.
 * table: i_out = (f(vc) - vo)/rout, f the monotone cubic through the points.
 * Every derivative is analytic; tests/test_laws.c checks each against central
 * differences. */
#include "parts/laws.h"

#include <math.h>
#include <string.h>

double ru_law_thermal_voltage(double temp_c)
{
    return RU_K_BOLTZMANN * (temp_c + 273.15) / RU_Q_ELECTRON;
}

double ru_law_limexp(double u, double *deriv)
{
    if (u > RU_LAW_U_MAX) {
        double e = exp(RU_LAW_U_MAX);
        *deriv = e;
        return e * (1.0 + u - RU_LAW_U_MAX);
    }
    /* Large negative u underflows gracefully to 0 (value and derivative). */
    double e = exp(u);
    *deriv = e;
    return e;
}

/* Clears e so a law only fills what it uses. */
static void law_zero(ru_law_eval *e) { memset(e, 0, sizeof *e); }

static void law_follower_tanh(const ru_amp *a, double vc, double vo, double xs,
                              ru_law_eval *e)
{
    (void)xs;
    double th = tanh((vc - a->center_v) / a->swing_v);
    double emf = a->center_v + a->gain * a->swing_v * th;
    double g = 1.0 / a->rout_ohm;
    law_zero(e);
    e->i_out = (emf - vo) * g;
    e->di_out_dvc = a->gain * (1.0 - th * th) * g;
    e->di_out_dvo = -g;
    e->i_in = 0.0;
    e->di_in_dvc = 0.0;
    e->di_in_dvo = 0.0;
}

static void law_exp_stage(const ru_amp *a, double vc, double vo, double xs,
                          ru_law_eval *e)
{
    (void)xs;
    double nvt = a->n * ru_law_thermal_voltage(a->temp_c);
    double dex;
    double ex = ru_law_limexp(vc / nvt, &dex);
    double sat = tanh(vo / a->vsat_v);
    double ie = a->is_a * (ex - 1.0);            /* junction law, before saturation */
    double ic = ie * sat;
    double dic_dvc = a->is_a * dex / nvt * sat;
    double dic_dvo = ie * (1.0 - sat * sat) / a->vsat_v;
    law_zero(e);
    e->i_out = -ic;
    e->di_out_dvc = -dic_dvc;
    e->di_out_dvo = -dic_dvo;
    /* The input draws the junction current over beta, not reduced by the
     * saturation factor: in saturation a real base-emitter junction keeps
     * conducting and clamps the input, which the saturated collector current
     * alone would not do (the operating point could then fail to exist). */
    e->i_in = -ie / a->beta;
    e->di_in_dvc = -a->is_a * dex / nvt / a->beta;
    e->di_in_dvo = 0.0;
}

static void law_diff_pair(const ru_amp *a, double vc, double vo, double xs,
                          ru_law_eval *e)
{
    (void)xs;
    double two_nvt = 2.0 * a->n * ru_law_thermal_voltage(a->temp_c);
    double th = tanh(vc / two_nvt);
    double g = a->rout_ohm > 0 ? 1.0 / a->rout_ohm : 0.0;
    law_zero(e);
    e->i_out = a->sign * a->itail_a * th - vo * g;
    e->di_out_dvc = a->sign * a->itail_a * (1.0 - th * th) / two_nvt;
    e->di_out_dvo = -g;
}

/* Softplus ln(1 + e^z) and its derivative, the logistic function, without
 * overflow for any z. */
static double softplus(double z, double *deriv)
{
    if (z > 0) {
        double t = exp(-z);
        *deriv = 1.0 / (1.0 + t);
        return z + log1p(t);
    }
    double t = exp(z);
    *deriv = t / (1.0 + t);
    return log1p(t);
}

double ru_law_rail(const ru_amp *a, double u, double *deriv)
{
    double k = a->knee_v, dlo, dhi;
    double lo = softplus((u - a->vmin_v) / k, &dlo);
    double hi = softplus((u - a->vmax_v) / k, &dhi);
    *deriv = dlo - dhi;
    return a->vmin_v + k * (lo - hi);
}

/* The opamp's anti-windup force K(v) = slew*(sp((v - hi)/knee) - sp((lo - v)/knee))
 * with the band hi = vmax + RU_OPAMP_BAND knee, lo = vmin - RU_OPAMP_BAND knee;
 * *dk = dK/dv. */
static double opamp_clamp(const ru_amp *a, double v, double *dk)
{
    double k = a->knee_v, band = RU_OPAMP_BAND * k, dhi, dlo;
    double hi = softplus((v - a->vmax_v - band) / k, &dhi);
    double lo = softplus((a->vmin_v - band - v) / k, &dlo);
    *dk = a->slew_v_per_s / k * (dhi + dlo);
    return a->slew_v_per_s * (hi - lo);
}

static void law_opamp(const ru_amp *a, double vc, double vo, double xs, ru_law_eval *e)
{
    double wp = 2.0 * RU_PI_LAW * a->gbw_hz / a->gain; /* open-loop pole (rad/s) */
    double wt = 2.0 * RU_PI_LAW * a->gbw_hz;             /* unity-gain (rad/s) */
    double th = tanh(wt * vc / a->slew_v_per_s), dk, drail;
    double k = opamp_clamp(a, xs, &dk);
    double emf = ru_law_rail(a, xs, &drail);
    double g = 1.0 / a->rout_ohm;
    law_zero(e);
    e->i_out = (emf - vo) * g;
    e->di_out_dvo = -g;
    e->di_out_dxs = drail * g;
    e->dxs = a->slew_v_per_s * th - wp * xs - k;
    e->ddxs_dvc = wt * (1.0 - th * th);
    e->ddxs_dxs = -wp - dk;
}

/* Slope of the monotone cubic at point j (scipy PchipInterpolator's rule). */
static int sgn(double v) { return (v > 0) - (v < 0); }

static double pchip_edge(double h0, double h1, double m0, double m1)
{
    double d = ((2.0 * h0 + h1) * m0 - h0 * m1) / (h0 + h1);
    if (sgn(d) != sgn(m0))
        return 0.0;
    if (sgn(m0) != sgn(m1) && fabs(d) > 3.0 * fabs(m0))
        return 3.0 * m0;
    return d;
}

static double pchip_slope(const ru_amp *a, int j)
{
    const double *x = a->pt_vin, *y = a->pt_vout;
    int n = a->npoints;
#define H(k) (x[(k) + 1] - x[(k)])
#define D(k) ((y[(k) + 1] - y[(k)]) / H(k))
    if (n == 2)
        return D(0);
    if (j == 0)
        return pchip_edge(H(0), H(1), D(0), D(1));
    if (j == n - 1)
        return pchip_edge(H(n - 2), H(n - 3), D(n - 2), D(n - 3));
    double dl = D(j - 1), dr = D(j), hl = H(j - 1), hr = H(j);
    if (sgn(dl) != sgn(dr) || dl == 0.0 || dr == 0.0)
        return 0.0;
    double w1 = 2.0 * hr + hl, w2 = hr + 2.0 * hl;
    return (w1 + w2) / (w1 / dl + w2 / dr);
#undef H
#undef D
}

double ru_law_table_curve(const ru_amp *a, double v, double *deriv)
{
    const double *x = a->pt_vin, *y = a->pt_vout;
    int n = a->npoints;
    if (n < 2) {
        *deriv = 0.0;
        return n == 1 ? y[0] : 0.0;
    }
    if (v <= x[0] || v >= x[n - 1]) { /* linear beyond the ends */
        int j = v <= x[0] ? 0 : n - 1;
        *deriv = pchip_slope(a, j);
        return y[j] + *deriv * (v - x[j]);
    }
    int lo = 0, hi = n - 1; /* x[lo] <= v < x[hi] */
    while (hi - lo > 1) {
        int mid = (lo + hi) / 2;
        if (x[mid] <= v)
            lo = mid;
        else
            hi = mid;
    }
    double h = x[hi] - x[lo], t = (v - x[lo]) / h;
    double m0 = pchip_slope(a, lo), m1 = pchip_slope(a, hi);
    double t2 = t * t, t3 = t2 * t;
    *deriv = ((6 * t2 - 6 * t) * (y[lo] - y[hi])) / h + (3 * t2 - 4 * t + 1) * m0 +
             (3 * t2 - 2 * t) * m1;
    return (2 * t3 - 3 * t2 + 1) * y[lo] + (t3 - 2 * t2 + t) * h * m0 +
           (-2 * t3 + 3 * t2) * y[hi] + (t3 - t2) * h * m1;
}

static void law_tab(const ru_amp *a, double vc, double vo, double xs, ru_law_eval *e)
{
    (void)xs;
    double df;
    double f = ru_law_table_curve(a, vc, &df);
    double g = 1.0 / a->rout_ohm;
    law_zero(e);
    e->i_out = (f - vo) * g;
    e->di_out_dvc = df * g;
    e->di_out_dvo = -g;
}

/* Indexed by ru_law; keep in the enum's order. */
static const ru_law_desc law_table[RU_LAW_COUNT] = {
    {RU_LAW_FOLLOWER_TANH, law_follower_tanh, 0, NULL},
    {RU_LAW_EXP_STAGE, law_exp_stage, 0, NULL},
    {RU_LAW_DIFF_PAIR_TANH, law_diff_pair, 0, NULL},
    {RU_LAW_OPAMP, law_opamp, 1, "vint"},
    {RU_LAW_TABLE, law_tab, 0, NULL},
};

const ru_law_desc *ru_law_get(ru_law law)
{
    if ((int)law < 0 || law >= RU_LAW_COUNT || law_table[law].law != law)
        return NULL;
    return &law_table[law];
}

double ru_law_rest_state(const ru_amp *a)
{
    if (a->law != RU_LAW_OPAMP)
        return 0.0;
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

int ru_law_eval_state(const ru_amp *a, double vc_v, double vo_v, double xs,
                      ru_law_eval *e)
{
    const ru_law_desc *d = ru_law_get(a->law);
    if (!d) {
        memset(e, 0, sizeof *e);
        return 0;
    }
    d->eval(a, vc_v, vo_v, xs, e);
    return 1;
}

int ru_law_eval_amp(const ru_amp *a, double vc_v, double vo_v, ru_law_eval *e)
{
    return ru_law_eval_state(a, vc_v, vo_v, ru_law_rest_state(a), e);
}

/* ---- diode ------------------------------------------------------------------ */

/* Junction current and conductance at junction voltage vj. */
static double junction(const ru_diode *d, double nvt, double vj, double *gj)
{
    double dex;
    double ex = ru_law_limexp(vj / nvt, &dex);
    *gj = d->is_a * dex / nvt;
    return d->is_a * (ex - 1.0);
}

/* A starting vj at or above the root of h(vj) = vj + rs i(vj) - vd. */
static double diode_start(const ru_diode *d, double nvt, double vd)
{
    double vj = vd + d->rs_ohm * d->is_a; /* h = rs is exp(...) >= 0 here */
    if (vd > 0) { /* where the whole of vd/rs would flow: usually much closer */
        double guess = nvt * log1p(vd / (d->rs_ohm * d->is_a)), gj;
        double h = guess + d->rs_ohm * junction(d, nvt, guess, &gj) - vd;
        if (h >= 0 && guess < vj)
            vj = guess;
    }
    return vj;
}

#define DIODE_ITER_MAX 200

double ru_diode_current(const ru_diode *d, double vd_v, double *g)
{
    double nvt = d->n * ru_law_thermal_voltage(d->temp_c), gj;
    if (d->rs_ohm <= 0) {
        double i = junction(d, nvt, vd_v, &gj);
        *g = gj;
        return i;
    }
    double rs = d->rs_ohm, vj = diode_start(d, nvt, vd_v);
    double i = junction(d, nvt, vj, &gj);
    for (int k = 0; k < DIODE_ITER_MAX; k++) {
        double h = vj + rs * i - vd_v;
        double step = h / (1.0 + rs * gj);
        if (!(step > 4e-16 * (fabs(vj) + nvt)))
            break; /* at the root to rounding (h <= 0 only by rounding) */
        vj -= step;
        i = junction(d, nvt, vj, &gj);
    }
    *g = gj / (1.0 + rs * gj);
    return i;
}

/* ---- thermal resistor --------------------------------------------------------- */

#define LAMP_FLOOR 0.01  /* relative resistance below which the lamp law bends */
#define NTC_T_FLOOR 20.0 /* kelvin below which 1/T continues linearly */
#define EXP_ARG_MIN (-600.0)

static double lamp_resistance(const ru_thermal *t, double rise, double *dr)
{
    double lin = 1.0 + t->alpha_per_k * (t->tamb_c + rise - t->t0_c);
    if (lin >= LAMP_FLOOR) {
        *dr = t->r0_ohm * t->alpha_per_k;
        return t->r0_ohm * lin;
    }
    double z = (lin - LAMP_FLOOR) / LAMP_FLOOR; /* C1 exponential continuation */
    if (z < EXP_ARG_MIN) {
        *dr = 0.0;
        return t->r0_ohm * LAMP_FLOOR * exp(EXP_ARG_MIN);
    }
    double r = t->r0_ohm * LAMP_FLOOR * exp(z);
    *dr = r / LAMP_FLOOR * t->alpha_per_k;
    return r;
}

static double ntc_resistance(const ru_thermal *t, double rise, double *dr)
{
    double T = t->tamb_c + rise + 273.15, T0 = t->t0_c + 273.15;
    double inv = 1.0 / T, dinv = -1.0 / (T * T);
    if (T < NTC_T_FLOOR) {
        inv = 1.0 / NTC_T_FLOOR - (T - NTC_T_FLOOR) / (NTC_T_FLOOR * NTC_T_FLOOR);
        dinv = -1.0 / (NTC_T_FLOOR * NTC_T_FLOOR);
    }
    double dex;
    double ex = ru_law_limexp(t->beta_k * (inv - 1.0 / T0), &dex);
    *dr = t->r0_ohm * dex * t->beta_k * dinv;
    return t->r0_ohm * ex;
}

double ru_thermal_resistance(const ru_thermal *t, double rise_k, double *dr_dx)
{
    return t->kind == RU_THERMAL_NTC ? ntc_resistance(t, rise_k, dr_dx)
                                     : lamp_resistance(t, rise_k, dr_dx);
}

void ru_thermal_eval_at(const ru_thermal *t, double v, double rise_k, ru_thermal_eval *e)
{
    double dr;
    double r = ru_thermal_resistance(t, rise_k, &dr);
    double c = t->cth_j_per_k;
    e->r_ohm = r;
    e->i = v / r;
    e->di_dv = 1.0 / r;
    e->di_dx = -v * dr / (r * r);
    e->dx = (v * v / r - rise_k / t->rth_k_per_w) / c;
    e->ddx_dv = 2.0 * v / (r * c);
    e->ddx_dx = (-v * v * dr / (r * r) - 1.0 / t->rth_k_per_w) / c;
}
