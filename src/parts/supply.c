/* supply.c: the ideal voltage source, v(a) - v(b) = wave(t). It adds no rows:
 * the system makes the node it holds a driven node (system.c resolves which). */
#include "parts/desc.h"
#include "parts/wave.h"

static ru_status check(const ru_part *p, const ru_part_env *env, ru_error *err)
{
    if (p->node[0] == p->node[1])
        return ru_part_fail(env, p, err, "a supply cannot have both terminals on node %s",
                            env->node_name(env->user, p->node[0]));
    return ru_wave_check(p, env, err);
}

static void describe(const ru_part *p, char *buf, size_t size)
{
    ru_wave_describe(p, "V", buf, size);
}

const ru_part_desc ru_part_supply = {
    .type = RU_PART_SUPPLY,
    .name = "supply",
    .terms = ru_terms_two,
    .selector = "wave",
    .nvariants = RU_WAVE_KINDS,
    .variant = ru_wave_variant,
    .variant_of = ru_wave_variant_of,
    .set_variant = ru_wave_set_variant,
    .record = offsetof(ru_part, wave),
    .record_size = sizeof(ru_wave),
    .sig_unit = "V",
    .check = check,
    .dc_links = ru_part_links_two,
    .source = RU_SOURCE_VOLTAGE,
    .describe = describe,
};
