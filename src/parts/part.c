/* part.c: the file spellings of part types and amplifier laws, the defaults of
 * the records a part carries (ringup/part.h), and ru_part_init. */
#include "ringup/part.h"

#include <stdio.h>
#include <string.h>

static const char *const part_type_names[RU_PART_TYPE_COUNT] = {
    "resistor", "capacitor", "inductor", "supply", "current", "poly-conductance",
    "amplifier", "diode", "thermal-resistor"};

static const char *const law_names[RU_LAW_COUNT] = {"follower-tanh", "exp-stage",
                                                    "diff-pair-tanh", "opamp", "table"};

const char *ru_part_type_name(ru_part_type t)
{
    return ((int)t >= 0 && t < RU_PART_TYPE_COUNT) ? part_type_names[t] : "?";
}

const char *ru_law_name(ru_law law)
{
    return ((int)law >= 0 && law < RU_LAW_COUNT) ? law_names[law] : "?";
}

void ru_amp_defaults(ru_amp *a, ru_law law)
{
    memset(a, 0, sizeof *a);
    a->law = law;
    a->gain = 0.98;
    a->swing_v = 1.0;
    a->center_v = 0.0;
    a->rout_ohm = 50.0;
    a->is_a = 1e-14;
    a->n = 1.0;
    a->beta = 100.0;
    a->vsat_v = 0.2;
    a->temp_c = 27.0;
    a->itail_a = 1e-3;
    a->sign = 1.0;
    a->gbw_hz = 1e6;
    a->vmax_v = 12.0;
    a->vmin_v = -12.0;
    a->knee_v = 0.1;
    a->slew_v_per_s = 1e6;
    if (law == RU_LAW_DIFF_PAIR_TANH)
        a->rout_ohm = 0.0; /* none */
    if (law == RU_LAW_OPAMP)
        a->gain = 1e5;
}

void ru_diode_defaults(ru_diode *d)
{
    memset(d, 0, sizeof *d);
    d->is_a = 1e-14;
    d->n = 1.0;
    d->rs_ohm = 0.0;
    d->temp_c = 27.0;
}

void ru_thermal_defaults(ru_thermal *t, ru_thermal_kind kind)
{
    memset(t, 0, sizeof *t);
    t->kind = kind;
    t->r0_ohm = kind == RU_THERMAL_NTC ? 10e3 : 50.0;
    t->alpha_per_k = 4.5e-3;
    t->beta_k = 3500.0;
    t->t0_c = 25.0;
    t->tamb_c = 25.0;
    t->rth_k_per_w = kind == RU_THERMAL_NTC ? 5e3 : 20e3;
    t->cth_j_per_k = kind == RU_THERMAL_NTC ? 200e-6 : 5e-6;
}

int ru_part_inv_node(const ru_part *p)
{
    return p->node[3] >= 0 ? p->node[3] : p->node[2];
}

void ru_part_init(ru_part *p, ru_part_type type, const char *name)
{
    memset(p, 0, sizeof *p);
    snprintf(p->name, sizeof p->name, "%s", name ? name : "");
    p->type = type;
    p->wave.kind = RU_WAVE_DC;
    ru_amp_defaults(&p->amp, RU_LAW_FOLLOWER_TANH);
    ru_diode_defaults(&p->diode);
    ru_thermal_defaults(&p->thermal, RU_THERMAL_LAMP);
    p->node[3] = -1;
}
