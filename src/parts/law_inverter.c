/* law_inverter.c: the cmos-inverter law, an n-channel and a p-channel EKV device
 * (ru_ekv_current, law_mos.c) between the rails: gates on in, drains on out, the
 * n device's source on ref (the lower rail) and the p device's on vdd (the upper
 * rail, a terminal). The n device sinks in(vc, vo) from out to ref, the p device
 * sources ip(vs - vc, vs - vo) from vdd into out, so i_out = ip - in and i_sup =
 * -ip (vs = v(vdd) - v(ref)); the gates draw no current (constant capacitances
 * cin, cgd, cout go into the mass matrix). Formulas and sources in ringup/part.h. */
#include "parts/laws.h"

#include <math.h>
#include <string.h>

#define A(f) offsetof(ru_part, amp.f)
static const ru_keyrec keys[] = {{"vthn", "V", A(vthn_v), 0, 0.5},
                                 {"vthp", "V", A(vthp_v), 0, 0.5},
                                 {"kn", "A/V2", A(kn_a_per_v2), 0, 1e-3},
                                 {"kp", "A/V2", A(kp_a_per_v2), 0, 1e-3},
                                 {"n", NULL, A(n), 0, 1.3},
                                 {"temp", "C", A(temp_c), 0, 27.0},
                                 {"va", "V", A(va_v), 0, 0.0},
                                 {"cin", "F", A(cin_f), 0, 0.0},
                                 {"cgd", "F", A(cgd_f), 0, 0.0},
                                 {"cout", "F", A(cout_f), 0, 0.0},
                                 RU_LAW_NOISE_KEYS,
                                 {NULL, NULL, 0, 0, 0.0}};
#undef A

static ru_status check(const ru_part *p, const ru_part_env *env, ru_error *err)
{
    const ru_amp *a = &p->amp;
    if (a->kn_a_per_v2 <= 0)
        return ru_part_bad(env, p, err, "kn must be positive", a->kn_a_per_v2);
    if (a->kp_a_per_v2 <= 0)
        return ru_part_bad(env, p, err, "kp must be positive", a->kp_a_per_v2);
    const double c[3] = {a->cin_f, a->cgd_f, a->cout_f};
    const char *what[3] = {"cin must not be negative", "cgd must not be negative",
                           "cout must not be negative"};
    for (int k = 0; k < 3; k++)
        if (c[k] < 0)
            return ru_part_bad(env, p, err, what[k], c[k]);
    return ru_law_check_mos(p, env, err);
}

static void eval_at(const ru_amp *a, const ru_law_at *at, ru_law_eval *e)
{
    double ut = ru_law_thermal_voltage(a->temp_c), gng, gnd, gpg, gpd;
    double in = ru_ekv_current(a->vthn_v, a->kn_a_per_v2, a->n, ut, a->va_v, at->vc, at->vo,
                               &gng, &gnd);
    double ip = ru_ekv_current(a->vthp_v, a->kp_a_per_v2, a->n, ut, a->va_v, at->vs - at->vc,
                               at->vs - at->vo, &gpg, &gpd);
    memset(e, 0, sizeof *e);
    e->i_out = ip - in;
    e->di_out_dvc = -gpg - gng;
    e->di_out_dvo = -gpd - gnd;
    e->di_out_dvs = gpg + gpd;
    e->i_sup = -ip;
    e->di_sup_dvc = gpg;
    e->di_sup_dvo = gpd;
    e->di_sup_dvs = -(gpg + gpd);
}

static double df_out(const ru_amp *a, const ru_law_at *at)
{
    ru_law_eval e;
    eval_at(a, at, &e);
    return e.i_out;
}

static int caps(const ru_amp *a, ru_law_cap out[RU_PART_CAPS_MAX])
{
    out[0] = (ru_law_cap){RU_AMP_IN, RU_AMP_REF, a->cin_f};
    out[1] = (ru_law_cap){RU_AMP_IN, RU_AMP_OUT, a->cgd_f};
    out[2] = (ru_law_cap){RU_AMP_OUT, RU_AMP_REF, a->cout_f};
    return 3;
}

const ru_law_desc ru_law_inverter = {
    .law = RU_LAW_CMOS_INVERTER,
    .v = {"cmos-inverter", keys, NULL},
    .check = check,
    .df_out = df_out,
    .terms = RU_LAW_TERM_VDD,
    .eval_at = eval_at,
    .caps = caps,
};
