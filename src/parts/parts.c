/* parts.c: the table of part descriptors (one entry per type, each defined in its
 * family's file), variants and defaults through it, and the public calls of
 * ringup/part.h that answer by asking the table (type names, ru_part_init, the
 * records' defaults, terminals, the `check` text). Shared helpers of the family
 * files are in part_util.c. */
#include "parts/desc.h"

#include <stdio.h>
#include <string.h>

/* Indexed by ru_part_type: one line per type. */
static const ru_part_desc *const part_table[RU_PART_TYPE_COUNT] = {
    [RU_PART_RESISTOR] = &ru_part_resistor,
    [RU_PART_CAPACITOR] = &ru_part_capacitor,
    [RU_PART_INDUCTOR] = &ru_part_inductor,
    [RU_PART_SUPPLY] = &ru_part_supply,
    [RU_PART_CURRENT] = &ru_part_current,
    [RU_PART_POLY] = &ru_part_poly,
    [RU_PART_AMPLIFIER] = &ru_part_amplifier,
    [RU_PART_DIODE] = &ru_part_diode,
    [RU_PART_THERMAL] = &ru_part_thermal,
    [RU_PART_TRANSCONDUCTOR] = &ru_part_transconductor,
    [RU_PART_CRYSTAL] = &ru_part_crystal,
    [RU_PART_COUPLING] = &ru_part_coupling,
};

const ru_part_desc *ru_part_desc_get(ru_part_type type)
{
    if ((int)type < 0 || type >= RU_PART_TYPE_COUNT)
        return NULL;
    const ru_part_desc *d = part_table[type];
    return d && d->type == type ? d : NULL;
}

const ru_part_desc *ru_part_desc_find(const char *name)
{
    for (int t = 0; name && t < RU_PART_TYPE_COUNT; t++) {
        const ru_part_desc *d = ru_part_desc_get((ru_part_type)t);
        if (d && strcmp(d->name, name) == 0)
            return d;
    }
    return NULL;
}

const char *ru_part_type_name(ru_part_type t)
{
    const ru_part_desc *d = ru_part_desc_get(t);
    return d ? d->name : "?";
}

const ru_variant *ru_part_variant(const ru_part *p)
{
    const ru_part_desc *d = ru_part_desc_get(p->type);
    if (!d)
        return NULL;
    int i = d->variant_of(p);
    return i >= 0 && i < d->nvariants ? d->variant(i) : NULL;
}

int ru_part_variant_find(const ru_part_desc *d, const char *name)
{
    for (int i = 0; name && i < d->nvariants; i++)
        if (strcmp(d->variant(i)->name, name) == 0)
            return i;
    return -1;
}

static void apply_defaults(ru_part *p, const ru_keyrec *k)
{
    for (; k && k->key; k++)
        if (!k->required)
            *ru_key_slot(p, k) = k->dflt;
}

/* The record of descriptor d in p: zeros, then every variant's defaults, then
 * variant i's, and the variant set. */
static void reset_record(const ru_part_desc *d, ru_part *p, int i)
{
    if (d->record_size)
        memset((char *)p + d->record, 0, d->record_size);
    for (int k = 0; k < d->nvariants; k++)
        apply_defaults(p, d->variant(k)->keys);
    if (i >= 0 && i < d->nvariants)
        apply_defaults(p, d->variant(i)->keys);
    d->set_variant(p, i);
}

void ru_part_reset(ru_part *p, int i)
{
    const ru_part_desc *d = ru_part_desc_get(p->type);
    if (d)
        reset_record(d, p, i);
}

void ru_part_init(ru_part *p, ru_part_type type, const char *name)
{
    memset(p, 0, sizeof *p);
    snprintf(p->name, sizeof p->name, "%s", name ? name : "");
    for (int t = 0; t < RU_PART_TYPE_COUNT; t++) { /* every record at its defaults */
        const ru_part_desc *d = ru_part_desc_get((ru_part_type)t);
        if (d && d->record_size)
            reset_record(d, p, 0);
    }
    p->type = type;
    const ru_part_desc *d = ru_part_desc_get(type);
    for (const ru_term *t = d ? d->terms : NULL; t && t->key; t++)
        if (t->absent == RU_TERM_SAME || t->absent == RU_TERM_NONE)
            for (int k = 0; k < t->count; k++)
                p->node[t->first + k] = -1;
}

void ru_part_describe(const ru_part *p, char *buf, size_t size)
{
    const ru_part_desc *d = ru_part_desc_get(p->type);
    if (size)
        buf[0] = '\0';
    if (d && d->describe)
        d->describe(p, buf, size);
}

int ru_part_terminals(const ru_part *p, ru_terminal *out, int max)
{
    const ru_part_desc *d = ru_part_desc_get(p->type);
    int n = 0;
    for (const ru_term *t = d ? d->terms : NULL; t && t->key; t++)
        for (int k = 0; k < t->count; k++) {
            int node = p->node[t->first + k];
            if (t->absent == RU_TERM_SAME) { /* listed only when it differs */
                int other = p->node[t->same_as];
                if (node < 0 || node == other)
                    continue;
            }
            if (t->absent == RU_TERM_NONE && node < 0) /* listed only when given */
                continue;
            if (n < max)
                out[n] = (ru_terminal){t->key, node, t->first + k};
            n++;
        }
    return n;
}


void ru_amp_defaults(ru_amp *a, ru_law law)
{
    ru_part p;
    ru_part_init(&p, RU_PART_AMPLIFIER, "");
    ru_part_reset(&p, (int)law);
    *a = p.amp;
}

void ru_diode_defaults(ru_diode *d)
{
    ru_part p;
    ru_part_init(&p, RU_PART_DIODE, "");
    *d = p.diode;
}

void ru_thermal_defaults(ru_thermal *t, ru_thermal_kind kind)
{
    ru_part p;
    ru_part_init(&p, RU_PART_THERMAL, "");
    ru_part_reset(&p, (int)kind);
    *t = p.thermal;
}

/* ---- what the engines ask of a part ---- */

int ru_part_is_source(const ru_part *p)
{
    const ru_part_desc *d = ru_part_desc_get(p->type);
    return d && d->source != RU_SOURCE_NONE;
}

int ru_part_breaks_loop(const ru_part *p)
{
    const ru_part_desc *d = ru_part_desc_get(p->type);
    return d && d->loop;
}

int ru_part_caps(const ru_part *p, ru_cap out[RU_PART_CAPS_MAX])
{
    const ru_part_desc *d = ru_part_desc_get(p->type);
    return d && d->caps ? d->caps(p, out) : 0;
}

int ru_part_stores(const ru_part *p, ru_store out[RU_PART_STORES_MAX])
{
    const ru_part_desc *d = ru_part_desc_get(p->type);
    return d && d->stores ? d->stores(p, out) : 0;
}

int ru_part_currents(const ru_part *p)
{
    const ru_part_desc *d = ru_part_desc_get(p->type);
    return d && d->currents ? d->currents(p) : 0;
}

int ru_part_impedance(const ru_part *p, double w, double *re_ohm, double *im_ohm)
{
    const ru_part_desc *d = ru_part_desc_get(p->type);
    return d && d->impedance ? d->impedance(p, w, re_ohm, im_ohm) : 0;
}

int ru_part_output_node(const ru_part *p)
{
    const ru_part_desc *d = ru_part_desc_get(p->type);
    return d && d->output_term > 0 ? p->node[d->output_term - 1] : -1;
}

int ru_part_margin_rest(const ru_part *p, ru_part *out)
{
    const ru_part_desc *d = ru_part_desc_get(p->type);
    return d && d->margin_rest ? d->margin_rest(p, out) : 0;
}
