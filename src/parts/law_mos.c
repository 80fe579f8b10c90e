/* law_mos.c: the mos-ekv law, an MOS transistor by the charge-based EKV model
 * (Enz, Krummenacher & Vittoz 1995), one expression from weak through moderate to
 * strong inversion: in (gate), out (drain), ref (source and bulk tied), n- or
 * p-channel; the gate draws no current (its constant capacitances cgs, cgd go
 * into the mass matrix). The EKV drain current itself (ru_ekv_current) is shared
 * with the cmos-inverter law (law_inverter.c). Formulas and sources in
 * ringup/part.h. */
#include "parts/laws.h"

#include <math.h>
#include <string.h>

#define A(f) offsetof(ru_part, amp.f)
static const ru_keyrec keys[] = {{"polarity", NULL, A(polarity), 0, 1.0},
                                 {"vth", "V", A(vth_v), 0, 0.5},
                                 {"k", "A/V2", A(kmos_a_per_v2), 0, 1e-3},
                                 {"n", NULL, A(n), 0, 1.3},
                                 {"temp", "C", A(temp_c), 0, 27.0},
                                 {"va", "V", A(va_v), 0, 0.0},
                                 {"cgs", "F", A(cgs_f), 0, 0.0},
                                 {"cgd", "F", A(cgd_f), 0, 0.0},
                                 RU_LAW_NOISE_KEYS,
                                 {NULL, NULL, 0, 0, 0.0}};
#undef A

/* F(u) = ln^2(1 + e^(u/2)), EKV's interpolation of the normalized charge-sheet
 * current; *df = dF/du = sp(u/2) * logistic(u/2). */
static double ekv_f(double u, double *df)
{
    double lg, sp = ru_law_softplus(0.5 * u, &lg);
    *df = sp * lg;
    return sp * sp;
}

double ru_ekv_current(double vth_v, double beta, double n, double ut_v, double va_v,
                      double vg_v, double vd_v, double *gg, double *gd)
{
    double vp = (vg_v - vth_v) / n;          /* pinch-off voltage */
    double is = 2.0 * n * beta * ut_v * ut_v; /* specific current */
    double dff, dfr;
    double ff = ekv_f(vp / ut_v, &dff), fr = ekv_f((vp - vd_v) / ut_v, &dfr);
    double id0 = is * (ff - fr);
    double g0 = is * (dff - dfr) / (n * ut_v), d0 = is * dfr / ut_v;
    double m = 1.0, dm = 0.0;
    if (va_v > 0) { /* channel-length modulation, (1 + |vds|/va) */
        m = 1.0 + fabs(vd_v) / va_v;
        dm = (vd_v > 0 ? 1.0 : vd_v < 0 ? -1.0 : 0.0) / va_v;
    }
    *gg = g0 * m;
    *gd = d0 * m + id0 * dm;
    return id0 * m;
}

/* Checks shared with the inverter: n >= 1, temp above absolute zero, va >= 0. */
ru_status ru_law_check_mos(const ru_part *p, const ru_part_env *env, ru_error *err)
{
    const ru_amp *a = &p->amp;
    if (a->n < 1.0)
        return ru_part_bad(env, p, err,
                           "n (the EKV slope factor 1 + Cdep/Cox) must be at least 1", a->n);
    if (a->temp_c <= -273.15)
        return ru_part_bad(env, p, err, "temp must be above absolute zero", a->temp_c);
    if (a->va_v < 0)
        return ru_part_bad(env, p, err, "va must not be negative (0: none)", a->va_v);
    return RU_OK;
}

static ru_status check(const ru_part *p, const ru_part_env *env, ru_error *err)
{
    const ru_amp *a = &p->amp;
    if (a->polarity != 1.0 && a->polarity != -1.0)
        return ru_part_bad(env, p, err, "polarity must be 1 (n-channel) or -1 (p-channel)",
                           a->polarity);
    if (a->kmos_a_per_v2 <= 0)
        return ru_part_bad(env, p, err, "k must be positive", a->kmos_a_per_v2);
    if (a->cgs_f < 0)
        return ru_part_bad(env, p, err, "cgs must not be negative", a->cgs_f);
    if (a->cgd_f < 0)
        return ru_part_bad(env, p, err, "cgd must not be negative", a->cgd_f);
    return ru_law_check_mos(p, env, err);
}

/* i_out = -p id(p vc, p vo): an n-channel drain sinks id, a p-channel one sources
 * it (all its voltages mirrored). */
static void eval(const ru_amp *a, double vc, double vo, double xs, ru_law_eval *e)
{
    (void)xs;
    double pol = a->polarity, gg, gd;
    double id = ru_ekv_current(a->vth_v, a->kmos_a_per_v2, a->n,
                               ru_law_thermal_voltage(a->temp_c), a->va_v, pol * vc,
                               pol * vo, &gg, &gd);
    memset(e, 0, sizeof *e);
    e->i_out = -pol * id;
    e->di_out_dvc = -gg;
    e->di_out_dvo = -gd;
}

static double df_out(const ru_amp *a, const ru_law_at *at)
{
    ru_law_eval e;
    eval(a, at->vc, at->vo, 0.0, &e);
    return e.i_out;
}

static int caps(const ru_amp *a, ru_law_cap out[RU_PART_CAPS_MAX])
{
    out[0] = (ru_law_cap){RU_AMP_IN, RU_AMP_INV, a->cgs_f};
    out[1] = (ru_law_cap){RU_AMP_IN, RU_AMP_OUT, a->cgd_f};
    return 2;
}

const ru_law_desc ru_law_mos = {
    .law = RU_LAW_MOS_EKV,
    .v = {"mos-ekv", keys, NULL},
    .check = check,
    .eval = eval,
    .df_out = df_out,
    .caps = caps,
};
