/* thermal.c: the thermal resistor (a lamp filament or an NTC thermistor): a
 * resistor whose resistance follows its own temperature T = tamb + rise, with the
 * rise an internal state obeying cth d(rise)/dt = v^2/R(T) - rise/rth (laws in
 * ringup/part.h). The kind (lamp, ntc) is chosen by `kind`; takes presets. */
#include "parts/laws.h"

#include "ringup/format.h"

#include <math.h>
#include <stdio.h>

#define TH(f) offsetof(ru_part, thermal.f)
static const ru_keyrec lamp_keys[] = {
    {"r0", "ohm", TH(r0_ohm), 0, 50.0},       {"alpha", NULL, TH(alpha_per_k), 0, 4.5e-3},
    {"t0", "C", TH(t0_c), 0, 25.0},           {"tamb", "C", TH(tamb_c), 0, 25.0},
    {"rth", "K/W", TH(rth_k_per_w), 0, 20e3}, {"cth", "J/K", TH(cth_j_per_k), 0, 5e-6},
    {NULL, NULL, 0, 0, 0.0}};
static const ru_keyrec ntc_keys[] = {
    {"r0", "ohm", TH(r0_ohm), 0, 10e3},      {"bth", "K", TH(beta_k), 0, 3500.0},
    {"t0", "C", TH(t0_c), 0, 25.0},          {"tamb", "C", TH(tamb_c), 0, 25.0},
    {"rth", "K/W", TH(rth_k_per_w), 0, 5e3}, {"cth", "J/K", TH(cth_j_per_k), 0, 200e-6},
    {NULL, NULL, 0, 0, 0.0}};
#undef TH
static const ru_variant kinds[2] = {{"lamp", lamp_keys, NULL}, {"ntc", ntc_keys, NULL}};
static const ru_variant *variant(int i) { return i == 0 || i == 1 ? &kinds[i] : NULL; }
static int variant_of(const ru_part *p) { return (int)p->thermal.kind; }
static void set_variant(ru_part *p, int i) { p->thermal.kind = (ru_thermal_kind)i; }

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

static ru_status check(const ru_part *p, const ru_part_env *env, ru_error *err)
{
    ru_status s = ru_part_check_two(p, env, err);
    if (s != RU_OK)
        return s;
    const ru_thermal *t = &p->thermal;
    double all[] = {t->r0_ohm, t->alpha_per_k, t->beta_k, t->t0_c,
                    t->tamb_c, t->rth_k_per_w, t->cth_j_per_k};
    if (!ru_part_finite(all, 7))
        return ru_part_fail(env, p, err, "thermal-resistor values must be finite");
    if (t->kind != RU_THERMAL_LAMP && t->kind != RU_THERMAL_NTC)
        return ru_part_fail(env, p, err, "unknown thermal-resistor kind");
    if (t->r0_ohm <= 0)
        return ru_part_bad(env, p, err, "r0 must be positive", t->r0_ohm);
    if (t->kind == RU_THERMAL_NTC && t->beta_k <= 0)
        return ru_part_bad(env, p, err, "bth must be positive", t->beta_k);
    if (t->t0_c <= -273.15 || t->tamb_c <= -273.15)
        return ru_part_bad(env, p, err, "temperatures must be above absolute zero",
                           fmin(t->t0_c, t->tamb_c));
    if (t->kind == RU_THERMAL_LAMP && 1.0 + t->alpha_per_k * (t->tamb_c - t->t0_c) <= 0)
        return ru_part_bad(env, p, err, "the lamp's resistance at tamb must be positive "
                                        "(1 + alpha (tamb - t0))",
                           1.0 + t->alpha_per_k * (t->tamb_c - t->t0_c));
    if (t->rth_k_per_w <= 0)
        return ru_part_bad(env, p, err, "rth must be positive", t->rth_k_per_w);
    if (t->cth_j_per_k <= 0)
        return ru_part_bad(env, p, err, "cth must be positive", t->cth_j_per_k);
    return RU_OK;
}

static int nstates(const ru_part *p)
{
    (void)p;
    return 1;
}

static void state_name(const ru_part *p, int k, char *buf, size_t size)
{
    (void)k;
    snprintf(buf, size, "%s.rise", p->name);
}

/* The steady rise P rth that the voltage scale across r0 would give, within
 * 1 K .. 1000 K. */
static double state_scale(const ru_part *p, int k, const ru_scale_env *e)
{
    (void)k;
    double v = e->v_scale;
    return fmax(1.0, fmin(1e3, v * v / p->thermal.r0_ohm * p->thermal.rth_k_per_w));
}

/* Current v/R(rise) a -> b, and the heat balance row. */
static void stamp(const ru_part *p, ru_stamp *st, int index, int s)
{
    (void)index;
    int a = p->node[0], b = p->node[1];
    ru_thermal_eval e;
    ru_thermal_eval_at(&p->thermal, st->v[a] - st->v[b], st->x[s], &e);
    ru_stamp_branch(st, a, b, e.i, e.di_dv);
    st->r[s] = e.dx;
    if (!st->dr)
        return;
    ru_stamp_ds(st, st->row[a], s, -e.di_dx);
    ru_stamp_ds(st, st->row[b], s, e.di_dx);
    ru_stamp_dn(st, s, a, e.ddx_dv);
    ru_stamp_dn(st, s, b, -e.ddx_dv);
    ru_stamp_ds(st, s, s, e.ddx_dx);
}

static void describe(const ru_part *p, char *buf, size_t size)
{
    char v[32];
    snprintf(buf, size, "%s, %s cold%s%s", p->thermal.kind == RU_THERMAL_LAMP ? "lamp" : "ntc",
             ru_format_si(p->thermal.r0_ohm, "ohm", 3, v, sizeof v),
             p->thermal.model[0] ? " / " : "", p->thermal.model);
}

const ru_part_desc ru_part_thermal = {
    .type = RU_PART_THERMAL,
    .name = "thermal-resistor",
    .terms = ru_terms_two,
    .selector = "kind",
    .nvariants = 2,
    .variant = variant,
    .variant_of = variant_of,
    .set_variant = set_variant,
    .record = offsetof(ru_part, thermal),
    .record_size = sizeof(ru_thermal),
    .presets = 1,
    .model = offsetof(ru_part, thermal.model),
    .check = check,
    .dc_links = ru_part_links_two,
    .state_group = RU_STATES_INTERNAL,
    .nstates = nstates,
    .state_name = state_name,
    .state_scale = state_scale,
    .stamp = stamp,
    .describe = describe,
};
