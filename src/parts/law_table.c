/* law_table.c: the table law, a measured static transfer vout = f(vc) through
 * 2..RU_TABLE_MAX points, interpolated by the monotone piecewise cubic of Fritsch
 * and Carlson (slopes as scipy's PchipInterpolator; ringup/part.h) and continued
 * linearly beyond the ends, behind rout: i_out = (f(vc) - vo)/rout. */
#include "parts/laws.h"

#include <math.h>
#include <string.h>

#define A(f) offsetof(ru_part, amp.f)
static const ru_keyrec keys[] = {{"rout", "ohm", A(rout_ohm), 0, 50.0},
                                 RU_LAW_NOISE_KEYS,
                                 {NULL, NULL, 0, 0, 0.0}};
static const ru_listrec lists[] = {
    {"points", "V", 2, 2, RU_TABLE_MAX, {A(pt_vin), A(pt_vout)}, A(npoints), 1,
     "pairs [vin, vout]", "a voltage", "a pair [vin, vout]",
     "vin", NULL},
    {NULL, NULL, 0, 0, 0, {0, 0}, 0, 0, NULL, NULL, NULL, NULL, NULL}};
#undef A

static ru_status check(const ru_part *p, const ru_part_env *env, ru_error *err)
{
    const ru_amp *a = &p->amp;
    if (a->npoints < 2 || a->npoints > RU_TABLE_MAX)
        return ru_part_fail(env, p, err, "points needs 2 to %d points", RU_TABLE_MAX);
    if (!ru_part_finite(a->pt_vin, a->npoints) || !ru_part_finite(a->pt_vout, a->npoints))
        return ru_part_fail(env, p, err, "points must be finite");
    for (int i = 1; i < a->npoints; i++)
        if (!(a->pt_vin[i] > a->pt_vin[i - 1]))
            return ru_part_fail(env, p, err,
                                "points: vin must increase strictly (point %d: %g after %g)",
                                i + 1, a->pt_vin[i], a->pt_vin[i - 1]);
    if (a->rout_ohm <= 0)
        return ru_part_bad(env, p, err, "rout must be positive", a->rout_ohm);
    return RU_OK;
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

static void eval(const ru_amp *a, double vc, double vo, double xs, ru_law_eval *e)
{
    (void)xs;
    double df;
    double f = ru_law_table_curve(a, vc, &df);
    double g = 1.0 / a->rout_ohm;
    memset(e, 0, sizeof *e);
    e->i_out = (f - vo) * g;
    e->di_out_dvc = df * g;
    e->di_out_dvo = -g;
}

/* The describing-function contribution: the output current, memoryless. */
static double df_out(const ru_amp *a, const ru_law_at *at)
{
    ru_law_eval e;
    eval(a, at->vc, at->vo, 0.0, &e);
    return e.i_out;
}

const ru_law_desc ru_law_tab = {
    .law = RU_LAW_TABLE,
    .v = {"table", keys, lists},
    .check = check,
    .eval = eval,
    .df_out = df_out,
};
