/* inductor.c: the inductor with its series resistance: one state, the branch
 * current i(a -> b), with L di/dt = v(a) - v(b) - series i, and the series
 * resistance's thermal noise (a voltage of density 4kTR in the branch). */
#include "parts/desc.h"

#include "ringup/format.h"

#include <math.h>
#include <stdio.h>
#include <string.h>

#define P(f) offsetof(ru_part, f)
static const ru_keyrec keys[] = {{"value", "H", P(value), 1, 0.0},
                                 {"tol", "%", P(tol), 0, 0.0},
                                 {"tempco", "%", P(tempco), 0, 0.0},
                                 {"series", "ohm", P(series_ohm), 0, 0.0},
                                 {NULL, NULL, 0, 0, 0.0}};
#undef P
static const ru_variant only = {"inductor", keys, NULL};
static const ru_variant *variant(int i) { return i == 0 ? &only : NULL; }

static int nstates(const ru_part *p)
{
    (void)p;
    return 1;
}

static void state_name(const ru_part *p, int k, char *buf, size_t size)
{
    (void)k;
    snprintf(buf, size, "i(%s)", p->name);
}

/* L i^2 / 2 in its current; the current is a wave-file column. */
static int stores(const ru_part *p, ru_store out[RU_PART_STORES_MAX])
{
    out[0] = (ru_store){0, p->value};
    return 1;
}

static int currents(const ru_part *p) { return nstates(p); }

/* The amplitude a tank of this inductor and the circuit's whole capacitance
 * would carry at the voltage scale, or the largest source current if larger. */
static double state_scale(const ru_part *p, int k, const ru_scale_env *e)
{
    (void)k;
    return fmax(e->v_scale * sqrt(e->c_total_f / p->value), e->i_source_a);
}

static void stamp(const ru_part *p, ru_stamp *st, int index, int s)
{
    int a = p->node[0], b = p->node[1];
    double i = st->x[s];
    ru_stamp_add(st, a, -i);
    ru_stamp_add(st, b, i);
    st->r[s] = (st->v[a] - st->v[b] - p->series_ohm * i) / p->value;
    if (st->dr) {
        int ra = st->row[a], rb = st->row[b];
        ru_stamp_ds(st, ra, s, -1.0);
        ru_stamp_ds(st, rb, s, 1.0);
        ru_stamp_dn(st, s, a, 1.0 / p->value);
        ru_stamp_dn(st, s, b, -1.0 / p->value);
        ru_stamp_ds(st, s, s, -(p->series_ohm / p->value));
    }
    if (st->noise_on && !st->dc && p->series_ohm > 0) /* 4kTR in the branch */
        st->r[s] += sqrt(2.0 * st->noise_kt_j * p->series_ohm / st->noise_dt_s) *
                    ru_stamp_noise(st, (uint64_t)index) / p->value;
}

/* At an instant the inductor is a current (its state), not a conductance. */
static int kcl_links(const ru_part *p, int links[RU_PART_LINKS_MAX][2])
{
    (void)p, (void)links;
    return 0;
}

static void describe(const ru_part *p, char *buf, size_t size)
{
    char v[32];
    ru_format_si(p->value, "H", 4, buf, size);
    if (p->series_ohm > 0) {
        size_t l = strlen(buf);
        snprintf(buf + l, size - l, " + %s", ru_format_si(p->series_ohm, "ohm", 3, v, sizeof v));
    }
}

/* Its impedance at w: series + j w L. */
static int impedance(const ru_part *p, double w, double *re_ohm, double *im_ohm)
{
    *re_ohm = p->series_ohm;
    *im_ohm = w * p->value;
    return 1;
}

const ru_part_desc ru_part_inductor = {
    .type = RU_PART_INDUCTOR,
    .name = "inductor",
    .terms = ru_terms_two,
    .nvariants = 1,
    .variant = variant,
    .variant_of = ru_part_variant_zero,
    .set_variant = ru_part_set_variant_none,
    .check = ru_part_check_rlc,
    .dc_links = ru_part_links_two,
    .kcl_links = kcl_links,
    .state_group = RU_STATES_BRANCH,
    .stores = stores,
    .currents = currents,
    .nstates = nstates,
    .state_name = state_name,
    .state_scale = state_scale,
    .stamp = stamp,
    .impedance = impedance,
    .describe = describe,
};
