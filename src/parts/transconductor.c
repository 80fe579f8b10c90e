/* transconductor.c: the ideal transconductor, a linear voltage-controlled current
 * source: a current gm*(v(cp) - v(cn)) flows from node p through the part to node
 * n (out of p's node, into n's). A designer's gain element for hand-analysis
 * cross-checks: with a load resistor R from p to ground and n on ground, v(p) =
 * -gm R (v(cp) - v(cn)). Neither side conducts at DC and the control draws
 * nothing; gm may have either sign. */
#include "parts/desc.h"

#include "ringup/format.h"

#define P(f) offsetof(ru_part, f)
static const ru_keyrec keys[] = {{"gm", "S", P(value), 1, 0.0}, {NULL, NULL, 0, 0, 0.0}};
#undef P
static const ru_variant only = {"transconductor", keys, NULL};
static const ru_variant *variant(int i) { return i == 0 ? &only : NULL; }

/* nodes: [p, n] into node[0..1], control: [cp, cn] into node[2..3]. */
static const ru_term terms[] = {{"nodes", 2, 0, RU_TERM_REQUIRED, 0},
                                {"control", 2, 2, RU_TERM_REQUIRED, 0},
                                {NULL, 0, 0, 0, 0}};

static ru_status check(const ru_part *p, const ru_part_env *env, ru_error *err)
{
    ru_status s = ru_part_check_two(p, env, err);
    if (s == RU_OK && p->node[2] == p->node[3])
        s = ru_part_fail(env, p, err, "both control terminals are on node %s",
                         env->node_name(env->user, p->node[2]));
    return s;
}

static void stamp(const ru_part *p, ru_stamp *st, int index, int state0)
{
    (void)index;
    (void)state0;
    int a = p->node[0], b = p->node[1], cp = p->node[2], cn = p->node[3];
    double gm = p->value, i = gm * (st->v[cp] - st->v[cn]);
    ru_stamp_add(st, a, -i);
    ru_stamp_add(st, b, i);
    if (!st->dr)
        return;
    int ra = st->row[a], rb = st->row[b];
    ru_stamp_dn(st, ra, cp, -gm);
    ru_stamp_dn(st, ra, cn, gm);
    ru_stamp_dn(st, rb, cp, gm);
    ru_stamp_dn(st, rb, cn, -gm);
}

static void describe(const ru_part *p, char *buf, size_t size)
{
    ru_format_si(p->value, "S", 4, buf, size);
}

const ru_part_desc ru_part_transconductor = {
    .type = RU_PART_TRANSCONDUCTOR,
    .name = "transconductor",
    .terms = terms,
    .nvariants = 1,
    .variant = variant,
    .variant_of = ru_part_variant_zero,
    .set_variant = ru_part_set_variant_none,
    .check = check,
    .stamp = stamp,
    .describe = describe,
};
