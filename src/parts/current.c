/* current.c: the ideal current source: wave(t) amperes flow from a to b inside
 * it (out of a's node, into b's). It does not conduct at DC. */
#include "parts/desc.h"
#include "parts/wave.h"

static void stamp(const ru_part *p, ru_stamp *st, int index, int state0)
{
    (void)index;
    (void)state0;
    double w, dw;
    ru_wave_eval(&p->wave, st->t_s, st->dc, st->scale, &w, &dw);
    ru_stamp_branch(st, p->node[0], p->node[1], w, 0.0);
}

static void describe(const ru_part *p, char *buf, size_t size)
{
    ru_wave_describe(p, "A", buf, size);
}

const ru_part_desc ru_part_current = {
    .type = RU_PART_CURRENT,
    .name = "current",
    .terms = ru_terms_two,
    .selector = "wave",
    .nvariants = RU_WAVE_KINDS,
    .variant = ru_wave_variant,
    .variant_of = ru_wave_variant_of,
    .set_variant = ru_wave_set_variant,
    .record = offsetof(ru_part, wave),
    .record_size = sizeof(ru_wave),
    .sig_unit = "A",
    .check = ru_wave_check,
    .source = RU_SOURCE_CURRENT,
    .stamp = stamp,
    .describe = describe,
};
