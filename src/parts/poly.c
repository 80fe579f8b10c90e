/* poly.c: the poly-conductance, i(a -> b) = sum_k c_k v^k with v = v(a) - v(b)
 * (c_0 first, up to RU_POLY_MAX coefficients): with an LC tank, a cubic one makes
 * the van der Pol oscillator. */
#include "parts/desc.h"

#include <stdio.h>

static const ru_keyrec no_keys[] = {{NULL, NULL, 0, 0, 0.0}};
static const ru_listrec lists[] = {
    {"coeffs", NULL, 1, 1, RU_POLY_MAX, {offsetof(ru_part, coeffs), 0},
     offsetof(ru_part, ncoeffs), 0, "numbers (c0 first)", "a number", NULL, NULL, NULL},
    {NULL, NULL, 0, 0, 0, {0, 0}, 0, 0, NULL, NULL, NULL, NULL, NULL}};
static const ru_variant only = {"poly-conductance", no_keys, lists};
static const ru_variant *variant(int i) { return i == 0 ? &only : NULL; }

static ru_status check(const ru_part *p, const ru_part_env *env, ru_error *err)
{
    if (p->ncoeffs < 1 || p->ncoeffs > RU_POLY_MAX)
        return ru_part_fail(env, p, err, "coeffs needs 1 to %d values", RU_POLY_MAX);
    if (!ru_part_finite(p->coeffs, p->ncoeffs))
        return ru_part_fail(env, p, err, "coeffs must be finite");
    return RU_OK;
}

static void stamp(const ru_part *p, ru_stamp *st, int index, int state0)
{
    (void)index;
    (void)state0;
    double v = st->v[p->node[0]] - st->v[p->node[1]];
    double i = 0.0, g = 0.0;
    for (int j = p->ncoeffs - 1; j >= 0; j--) { /* Horner for i and di/dv */
        g = g * v + i;
        i = i * v + p->coeffs[j];
    }
    ru_stamp_branch(st, p->node[0], p->node[1], i, g);
}

static void describe(const ru_part *p, char *buf, size_t size)
{
    snprintf(buf, size, "%d coefficients", p->ncoeffs);
}

const ru_part_desc ru_part_poly = {
    .type = RU_PART_POLY,
    .name = "poly-conductance",
    .terms = ru_terms_two,
    .nvariants = 1,
    .variant = variant,
    .variant_of = ru_part_variant_zero,
    .set_variant = ru_part_set_variant_none,
    .check = check,
    .dc_links = ru_part_links_two,
    .stamp = stamp,
    .describe = describe,
};
