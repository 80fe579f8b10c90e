/* diode.c: the junction diode, i(anode -> cathode) = is*(exp(vj/(n vt)) - 1)
 * with vj = vd - rs i (Shockley's law with series resistance; ringup/part.h),
 * exponents above RU_LAW_U_MAX continued linearly. Takes presets (model:). */
#include "parts/laws.h"

#include <math.h>
#include <stdio.h>
#include <string.h>

#define DI(f) offsetof(ru_part, diode.f)
static const ru_keyrec keys[] = {{"is", "A", DI(is_a), 0, 1e-14},
                                 {"n", NULL, DI(n), 0, 1.0},
                                 {"rs", "ohm", DI(rs_ohm), 0, 0.0},
                                 {"temp", "C", DI(temp_c), 0, 27.0},
                                 {NULL, NULL, 0, 0, 0.0}};
#undef DI
static const ru_variant only = {"diode", keys, NULL};
static const ru_variant *variant(int i) { return i == 0 ? &only : NULL; }

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


static ru_status check(const ru_part *p, const ru_part_env *env, ru_error *err)
{
    ru_status s = ru_part_check_two(p, env, err);
    if (s != RU_OK)
        return s;
    const ru_diode *d = &p->diode;
    double all[] = {d->is_a, d->n, d->rs_ohm, d->temp_c};
    if (!ru_part_finite(all, 4))
        return ru_part_fail(env, p, err, "diode values must be finite");
    if (d->is_a <= 0)
        return ru_part_bad(env, p, err, "is must be positive", d->is_a);
    if (d->n <= 0)
        return ru_part_bad(env, p, err, "n must be positive", d->n);
    if (d->rs_ohm < 0)
        return ru_part_bad(env, p, err, "rs must not be negative", d->rs_ohm);
    if (d->temp_c <= -273.15)
        return ru_part_bad(env, p, err, "temp must be above absolute zero", d->temp_c);
    return RU_OK;
}

static void stamp(const ru_part *p, ru_stamp *st, int index, int state0)
{
    (void)index;
    (void)state0;
    double g;
    double i = ru_diode_current(&p->diode, st->v[p->node[0]] - st->v[p->node[1]], &g);
    ru_stamp_branch(st, p->node[0], p->node[1], i, g);
}

static void describe(const ru_part *p, char *buf, size_t size)
{
    snprintf(buf, size, "is %g A, n %g%s%s", p->diode.is_a, p->diode.n,
             p->diode.model[0] ? " / " : "", p->diode.model);
}

const ru_part_desc ru_part_diode = {
    .type = RU_PART_DIODE,
    .name = "diode",
    .terms = ru_terms_two,
    .nvariants = 1,
    .variant = variant,
    .variant_of = ru_part_variant_zero,
    .set_variant = ru_part_set_variant_none,
    .record = offsetof(ru_part, diode),
    .record_size = sizeof(ru_diode),
    .presets = 1,
    .model = offsetof(ru_part, diode.model),
    .check = check,
    .dc_links = ru_part_links_two,
    .stamp = stamp,
    .describe = describe,
};
