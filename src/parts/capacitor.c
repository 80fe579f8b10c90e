/* capacitor.c: the capacitor. Its charge enters the mass matrix (caps); its only
 * residual terms couple a free node to a driven node's slope, C dv/dt. */
#include "parts/desc.h"

#include "ringup/format.h"

#define P(f) offsetof(ru_part, f)
static const ru_keyrec keys[] = {{"value", "F", P(value), 1, 0.0},
                                 {"tol", "%", P(tol), 0, 0.0},
                                 {"tempco", "%", P(tempco), 0, 0.0},
                                 {NULL, NULL, 0, 0, 0.0}};
#undef P
static const ru_variant only = {"capacitor", keys, NULL};
static const ru_variant *variant(int i) { return i == 0 ? &only : NULL; }

static int caps(const ru_part *p, ru_cap out[RU_PART_CAPS_MAX])
{
    out[0] = (ru_cap){p->node[0], p->node[1], p->value};
    return 1;
}

/* Only the coupling to driven nodes (dv is 0 at free nodes). */
static void stamp(const ru_part *p, ru_stamp *st, int index, int state0)
{
    (void)index;
    (void)state0;
    int a = p->node[0], b = p->node[1];
    ru_stamp_add(st, a, p->value * st->dv[b]);
    ru_stamp_add(st, b, p->value * st->dv[a]);
}

static void describe(const ru_part *p, char *buf, size_t size)
{
    ru_format_si(p->value, "F", 4, buf, size);
}

/* Its impedance at w: 1 / (j w C). */
static int impedance(const ru_part *p, double w, double *re_ohm, double *im_ohm)
{
    *re_ohm = 0.0;
    *im_ohm = -1.0 / (w * p->value);
    return 1;
}

const ru_part_desc ru_part_capacitor = {
    .type = RU_PART_CAPACITOR,
    .name = "capacitor",
    .terms = ru_terms_two,
    .nvariants = 1,
    .variant = variant,
    .variant_of = ru_part_variant_zero,
    .set_variant = ru_part_set_variant_none,
    .check = ru_part_check_rlc,
    .caps = caps,
    .stamp = stamp,
    .impedance = impedance,
    .describe = describe,
};
