/* resistor.c: the resistor, i = v / R from a to b, and its Johnson-Nyquist noise
 * (a current of one-sided density 4kT/R across it, in time-domain runs). */
#include "parts/desc.h"

#include "ringup/format.h"

#include <math.h>

#define P(f) offsetof(ru_part, f)
static const ru_keyrec keys[] = {{"value", "ohm", P(value), 1, 0.0},
                                 {"tol", "%", P(tol), 0, 0.0},
                                 {"tempco", "%", P(tempco), 0, 0.0},
                                 {NULL, NULL, 0, 0, 0.0}};
#undef P
static const ru_variant only = {"resistor", keys, NULL};
static const ru_variant *variant(int i) { return i == 0 ? &only : NULL; }

static void stamp(const ru_part *p, ru_stamp *st, int index, int state0)
{
    (void)state0;
    int a = p->node[0], b = p->node[1];
    ru_stamp_branch(st, a, b, (st->v[a] - st->v[b]) / p->value, 1.0 / p->value);
    if (st->noise_on && !st->dc) /* Johnson-Nyquist current, 4kT/R one-sided */
        ru_stamp_branch(st, a, b,
                        sqrt(2.0 * st->noise_kt_j / (p->value * st->noise_dt_s)) *
                            ru_stamp_noise(st, (uint64_t)index),
                        0.0);
}

static void describe(const ru_part *p, char *buf, size_t size)
{
    ru_format_si(p->value, "ohm", 4, buf, size);
}

/* Its impedance at any frequency: R. */
static int impedance(const ru_part *p, double w, double *re_ohm, double *im_ohm)
{
    (void)w;
    *re_ohm = p->value;
    *im_ohm = 0.0;
    return 1;
}

const ru_part_desc ru_part_resistor = {
    .type = RU_PART_RESISTOR,
    .name = "resistor",
    .terms = ru_terms_two,
    .nvariants = 1,
    .variant = variant,
    .variant_of = ru_part_variant_zero,
    .set_variant = ru_part_set_variant_none,
    .check = ru_part_check_rlc,
    .dc_links = ru_part_links_two,
    .stamp = stamp,
    .impedance = impedance,
    .describe = describe,
};
