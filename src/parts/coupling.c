/* coupling.c: the magnetic coupling of two inductors, {type: coupling, inductors:
 * [L1, L2], k: 0.98}: mutual inductance M = k sqrt(L1 L2) between the two
 * inductors' branches (dot convention in ringup/part.h: each inductor's first node
 * is its dotted end). It has no nodes, no current and no state of its own: it
 * adds M to the inductance matrix, which the system keeps in the mass matrix
 * (ru_mutual in desc.h). For transformer-coupled, Hartley and Armstrong
 * oscillators. */
#include "parts/desc.h"

#include "ringup/format.h"

#include <math.h>
#include <stdio.h>
#include <string.h>

#define P(f) offsetof(ru_part, f)
static const ru_keyrec keys[] = {{"k", NULL, P(coupling.k), 1, 0.0},
                                 {NULL, NULL, 0, 0, 0.0}};
static const ru_refterm refs = {"inductors", 2, RU_PART_INDUCTOR, P(coupling.inductor)};
#undef P
static const ru_variant only = {"coupling", keys, NULL};
static const ru_variant *variant(int i) { return i == 0 ? &only : NULL; }

static const ru_term no_terms[] = {{NULL, 0, 0, 0, 0}};

static ru_status check(const ru_part *p, const ru_part_env *env, ru_error *err)
{
    const ru_coupling *c = &p->coupling;
    if (!isfinite(c->k) || !(fabs(c->k) < 1))
        return ru_part_bad(env, p, err,
                           "k must be between -1 and 1, both excluded (|k| = 1 would be a "
                           "transformer without leakage, whose inductance matrix is "
                           "singular)",
                           c->k);
    if (!c->inductor[0][0] || !c->inductor[1][0])
        return ru_part_fail(env, p, err, "inductors needs two inductor names");
    if (strcmp(c->inductor[0], c->inductor[1]) == 0)
        return ru_part_fail(env, p, err, "couples inductor %s with itself",
                            c->inductor[0]);
    return RU_OK;
}

/* M = k sqrt(La Lb); the rows of a and b are di/dt = (v - R i)/L, so the mass
 * entries are M/La and M/Lb (desc.h). */
static void mutual(const ru_part *p, const ru_part *a, const ru_part *b, ru_mutual *out)
{
    double m = p->coupling.k * sqrt(a->value * b->value);
    *out = (ru_mutual){p->coupling.k, m, m / a->value, m / b->value};
}

/* At DC and at an instant a coupling conducts nothing. */
static int no_links(const ru_part *p, int links[RU_PART_LINKS_MAX][2])
{
    (void)p, (void)links;
    return 0;
}

static void describe(const ru_part *p, char *buf, size_t size)
{
    snprintf(buf, size, "k %.6g between %s and %s", p->coupling.k, p->coupling.inductor[0],
             p->coupling.inductor[1]);
}

const ru_part_desc ru_part_coupling = {
    .type = RU_PART_COUPLING,
    .name = "coupling",
    .terms = no_terms,
    .nvariants = 1,
    .variant = variant,
    .variant_of = ru_part_variant_zero,
    .set_variant = ru_part_set_variant_none,
    .record = offsetof(ru_part, coupling),
    .record_size = sizeof(ru_coupling),
    .check = check,
    .dc_links = no_links,
    .kcl_links = no_links,
    .refs = &refs,
    .mutual = mutual,
    .describe = describe,
};
