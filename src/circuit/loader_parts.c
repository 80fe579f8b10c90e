/* loader_parts.c: reads the `parts:` section of a circuit file into ru_part
 * records, one generic reader for every type: its descriptor (src/parts/desc.h)
 * says which terminal keys, selector (`wave`, `law`, `kind`), presets, numeric keys
 * and list keys it has. Keys, units, defaults and variants are the descriptors',
 * the one list of them that PART.KEY (params.c) reads too.
 *
 * Invariants: a part's keys are checked against its type and variant before any
 * value is read, so a misplaced key is named, not ignored (loader_keys.c); values
 * are layered defaults < preset (loader_preset.c) < the part's own keys; every
 * part is added through ru_circuit_add_part with line/col at its name, so the
 * builder's value checks carry the place. Nodes are created in order of first
 * mention. */
#include "circuit/loader_impl.h"

#include "base/suggest.h"

#include <stdio.h>
#include <string.h>

/* A node name from a scalar, added to the circuit at its place. */
static ru_status node_of(ld_ctx *x, const ru_ynode *v, const ru_ynode *place,
                         const char *who, const char *key, int *node)
{
    if (!v || v->type != RU_YAML_SCALAR)
        return ru_ld_fail(x->d, v ? v : place, x->err, "%s: key %s needs a node name", who,
                          key);
    const char *name = v->text;
    if (!name || !ru_ld_valid_name(name))
        return ru_ld_fail(x->d, v, x->err,
                          "%s: key %s: '%s' is not a node name (letters, digits, _ and ., "
                          "up to %d characters)",
                          who, key, name ? name : "", RU_NAME_MAX - 1);
    int line, col;
    ru_ld_place(x->d, v, &line, &col);
    if (ru_circuit_find_node(x->c, name) < 0 && ru_circuit_node_count(x->c) > RU_NODES_MAX)
        return ru_ld_fail(x->d, v, x->err,
                          "%s: key %s: node %s would be node %d; a circuit holds at most %d "
                          "nodes besides ground",
                          who, key, name, RU_NODES_MAX + 1, RU_NODES_MAX);
    *node = ru_circuit_node(x->c, name, line, col);
    if (*node < 0)
        return ru_error_set(x->err, RU_ENOMEM, x->d->file, line, col,
                            "%s: out of memory adding node %s", who, name);
    return RU_OK;
}

/* model: NAME on part `who`: loads the preset, or says why it cannot. */
static ru_status read_model(ld_ctx *x, const ru_ypair *p, const char *who,
                            ru_part *part)
{
    const char *name;
    ru_status s = ru_ld_scalar(x->d, p, who, x->err, &name);
    if (s != RU_OK)
        return s;
    const ru_ynode *v = ru_ld_val(p);
    if (!ru_ld_valid_preset_name(name))
        return ru_ld_fail(x->d, v, x->err,
                          "%s: key model: '%s' is not a preset name (letters, digits, -, "
                          "_ and .)",
                          who, name);
    int missing;
    char why[RU_ERROR_TEXT];
    s = ru_ld_preset_into(x->models_dir, name, part, &missing, why, sizeof why, x->err);
    if (missing == 1)
        return ru_ld_fail(x->d, v, x->err, "%s: key model: no preset %s (%s)", who, name, why);
    if (missing == 2)
        return ru_ld_fail(x->d, v, x->err, "%s: key model: %s", who, why);
    return s;
}

/* Exactly one of model and the selector (an amplifier's law). */
static ru_status model_or_selector(ld_ctx *x, const ru_part_desc *d, const ru_ypair *pm,
                                   const ru_ypair *pl, const ru_ynode *place, const char *who)
{
    if (pm && pl) {
        int l1, c1, l2, c2; /* point at whichever of the two comes second */
        ru_ld_place(x->d, pm->key, &l1, &c1);
        ru_ld_place(x->d, pl->key, &l2, &c2);
        int law_later = l2 > l1 || (l2 == l1 && c2 > c1);
        return ru_ld_fail(x->d, (law_later ? pl : pm)->key, x->err,
                          "%s: give either model or %s, not both", who, d->selector);
    }
    if (!pm && !pl)
        return ru_ld_fail(x->d, place, x->err,
                          "%s: missing required key model or %s (an %s needs one)", who,
                          d->selector, d->name);
    return RU_OK;
}

/* A terminal key of count nodes in a list, e.g. nodes: [a, b]. */
static ru_status read_node_list(ld_ctx *x, const ru_ypair *p, const char *who,
                                const ru_term *t, ru_part *part)
{
    const ru_ynode *v = ru_ld_val(p);
    if (!v || v->type != RU_YAML_SEQUENCE)
        return ru_ld_fail(x->d, v ? v : p->key, x->err,
                          "%s: key %s needs a list of %d nodes, e.g. [a, gnd]", who, t->key,
                          t->count);
    int n = (int)v->n;
    if (n != t->count)
        return ru_ld_fail(x->d, v, x->err, "%s: key %s needs %d nodes, got %d", who, t->key,
                          t->count, n);
    ru_status s = RU_OK;
    for (int i = 0; i < n && s == RU_OK; i++)
        s = node_of(x, v->items[i], v, who, t->key, &part->node[t->first + i]);
    return s;
}

/* The terminal keys of part's type, in its descriptor's order. */
static ru_status read_terms(ld_ctx *x, const ru_part_desc *d, const ru_ynode *map,
                            const ru_ynode *place, const char *who, ru_part *part)
{
    for (const ru_term *t = d->terms; t->key; t++) {
        const ru_ypair *p = ru_ld_find(map, t->key);
        for (int k = 0; !p && k < t->count; k++) /* absent: its default */
            part->node[t->first + k] =
                t->absent == RU_TERM_SAME || t->absent == RU_TERM_NONE ? -1 : 0;
        if (!p && t->absent == RU_TERM_REQUIRED)
            return ru_ld_fail(x->d, place, x->err, "%s: missing required key %s", who,
                              t->key);
        ru_status s = !p           ? RU_OK
                      : t->count > 1 ? read_node_list(x, p, who, t, part)
                                   : node_of(x, ru_ld_val(p), p->key, who, t->key,
                                             &part->node[t->first]);
        if (s != RU_OK)
            return s;
    }
    return RU_OK;
}

/* A key naming count parts (the descriptor's refs), e.g. inductors: [L1, L2]: the
 * names are kept; ru_ld_parts checks them once every part is read. */
static ru_status read_refs(ld_ctx *x, const ru_refterm *r, const ru_ynode *map,
                           const ru_ynode *place, const char *who, ru_part *part)
{
    const ru_ypair *p = ru_ld_find(map, r->key);
    if (!p)
        return ru_ld_fail(x->d, place, x->err, "%s: missing required key %s", who, r->key);
    const ru_ynode *v = ru_ld_val(p);
    if (!v || v->type != RU_YAML_SEQUENCE || (int)v->n != r->count)
        return ru_ld_fail(x->d, v ? v : p->key, x->err,
                          "%s: key %s needs a list of %d part names, e.g. [L1, L2]", who,
                          r->key, r->count);
    char(*names)[RU_NAME_MAX] = (char(*)[RU_NAME_MAX])((char *)part + r->offset);
    for (int i = 0; i < r->count; i++) {
        const ru_ynode *it = v->items[i];
        if (!it || it->type != RU_YAML_SCALAR || !it->text || !ru_ld_valid_name(it->text))
            return ru_ld_fail(x->d, it ? it : v, x->err,
                              "%s: key %s: each entry must be a part name", who, r->key);
        snprintf(names[i], RU_NAME_MAX, "%s", it->text);
    }
    return RU_OK;
}

/* Every name of a refs key (read_refs) names a part of the right type. */
static ru_status check_refs(ld_ctx *x, const ru_ypair *pair)
{
    const ru_ynode *map = ru_ld_val(pair);
    int k = ru_circuit_find_part(x->c, ru_ld_key(pair));
    if (k < 0)
        return RU_OK;
    const ru_part *part = ru_circuit_part(x->c, (size_t)k);
    const ru_refterm *r = ru_part_desc_get(part->type)->refs;
    if (!r)
        return RU_OK;
    const ru_ynode *v = ru_ld_val(ru_ld_find(map, r->key));
    for (int i = 0; i < r->count; i++) {
        const char *name = v->items[i]->text;
        int q = ru_circuit_find_part(x->c, name);
        char dym[RU_NAME_MAX + 24];
        if (q < 0)
            return ru_ld_fail(x->d, v->items[i], x->err, "part %s: key %s: no part %s%s",
                              part->name, r->key, name,
                              ru_circuit_suggest_part(x->c, name, dym, sizeof dym));
        const ru_part *o = ru_circuit_part(x->c, (size_t)q);
        if (o->type != r->type)
            return ru_ld_fail(x->d, v->items[i], x->err,
                              "part %s: key %s: %s is a %s, not a%s %s", part->name, r->key,
                              name, ru_part_type_name(o->type),
                              strchr("aeiou", ru_part_type_name(r->type)[0]) ? "n" : "",
                              ru_part_type_name(r->type));
    }
    return RU_OK;
}

/* The variant part is of: a preset (`model`) and/or the selector key, then the
 * variant's defaults unless a preset gave the values. */
static ru_status read_variant(ld_ctx *x, const ru_ynode *map, const ru_ynode *place,
                              const char *who, ru_part *part)
{
    const ru_part_desc *d = ru_part_desc_get(part->type);
    const ru_ypair *pm = d->presets ? ru_ld_find(map, "model") : NULL;
    const ru_ypair *pv = d->selector ? ru_ld_find(map, d->selector) : NULL;
    ru_status s = d->selector_or_model ? model_or_selector(x, d, pm, pv, place, who) : RU_OK;
    if (s == RU_OK && pm)
        s = read_model(x, pm, who, part);
    int variant = pm ? d->variant_of(part) : 0;
    const char *text;
    if (s == RU_OK && pv && (s = ru_ld_scalar(x->d, pv, who, x->err, &text)) == RU_OK &&
        (variant = ru_part_variant_find(d, text)) < 0) {
        char names[256];
        ru_ld_variant_names(d, names, sizeof names);
        return ru_ld_fail(x->d, ru_ld_val(pv), x->err, "%s: key %s: '%s' is not one of %s",
                          who, d->selector, text, names);
    }
    if (s != RU_OK)
        return s;
    if (!pm)
        ru_part_reset(part, variant);
    else
        d->set_variant(part, variant);
    return RU_OK;
}

/* The keys allowed on part as it stands, its terminals, numeric keys and lists. */
static ru_status read_body(ld_ctx *x, const ru_ynode *map, const ru_ynode *place,
                           const char *who, ru_part *part)
{
    const ru_part_desc *d = ru_part_desc_get(part->type);
    const ru_variant *v = ru_part_variant(part);
    const char *allowed[RU_LD_KEYS_MAX] = {"type", NULL};
    for (const ru_term *t = d->terms; t->key; t++)
        ru_ld_add_key(allowed, t->key);
    if (d->presets)
        ru_ld_add_key(allowed, "model");
    ru_ld_add_key(allowed, d->selector);
    if (d->refs)
        ru_ld_add_key(allowed, d->refs->key);
    ru_ld_add_keys(allowed, v);
    if (!ru_part_key_ptr(part, "tol", NULL))
        ru_ld_add_key(allowed, "tol"); /* every part may take per-key tolerances */
    char what[64];
    if (d->selector)
        snprintf(what, sizeof what, "%s %s", d->selector, v->name);
    else
        snprintf(what, sizeof what, "type %s", d->name);
    ru_status s = ru_ld_check_keys(x->d, map, who, allowed, what, x->err);
    if (s == RU_OK)
        s = read_terms(x, d, map, place, who, part);
    if (s == RU_OK && d->refs)
        s = read_refs(x, d->refs, map, place, who, part);
    if (s == RU_OK)
        s = ru_ld_read_tol(x, map, who, part);
    if (s == RU_OK)
        s = ru_ld_read_keys(x->d, map, place, who, v->keys, d->sig_unit, part, x->err);
    if (s == RU_OK)
        s = ru_ld_read_lists(x->d, map, place, who, v->lists, part, x->err);
    part->temp_given = ru_ld_find(map, "temp") || ru_ld_find(map, "tamb");
    return s;
}

/* The part type named by key `type`. */
static ru_status read_type(ld_ctx *x, const ru_ynode *map, const ru_ynode *place,
                           const char *who, ru_part_type *type)
{
    const ru_ypair *p = ru_ld_find(map, "type");
    if (!p)
        return ru_ld_fail(x->d, place, x->err, "%s: missing required key type", who);
    const char *text;
    ru_status s = ru_ld_scalar(x->d, p, who, x->err, &text);
    if (s != RU_OK)
        return s;
    const ru_part_desc *d = ru_part_desc_find(text);
    if (d) {
        *type = d->type;
        return RU_OK;
    }
    char names[320], dym[RU_NAME_MAX + 24];
    const char *all[RU_PART_TYPE_COUNT];
    for (int t = 0; t < RU_PART_TYPE_COUNT; t++)
        all[t] = ru_part_type_name((ru_part_type)t);
    const char *close = ru_suggest(text, all, RU_PART_TYPE_COUNT);
    if (close)
        snprintf(dym, sizeof dym, "did you mean %s? ", close);
    else
        dym[0] = '\0';
    size_t len = 0;
    names[0] = '\0';
    for (int t = 0, k = 0; t < RU_PART_TYPE_COUNT && len < sizeof names; t++) {
        const char *name = ru_part_type_name((ru_part_type)t);
        const char *sep = !k++ ? "" : t == RU_PART_TYPE_COUNT - 1 ? " or " : ", ";
        len += (size_t)snprintf(names + len, sizeof names - len, "%s%s", sep, name);
    }
    return ru_ld_fail(x->d, ru_ld_val(p), x->err, "%s: unknown type '%s' (%s%s)", who, text,
                      dym, names);
}

static ru_status read_part(ld_ctx *x, const ru_ypair *pair)
{
    const ru_ynode *key = pair->key, *map = ru_ld_val(pair);
    const char *name = ru_ld_key(pair);
    if (!ru_ld_valid_name(name))
        return ru_ld_fail(x->d, key, x->err,
                          "part name '%s' is not valid (letters, digits, _ and ., up to %d "
                          "characters)",
                          name, RU_NAME_MAX - 1);
    char who[RU_NAME_MAX + 8];
    snprintf(who, sizeof who, "part %s", name);
    if (!map || map->type != RU_YAML_MAPPING)
        return ru_ld_fail(x->d, map ? map : key, x->err,
                          "%s needs a mapping such as {type: resistor, nodes: [a, b], "
                          "value: 1k}",
                          who);
    ru_part part;
    ru_part_type type = RU_PART_RESISTOR;
    ru_status s = read_type(x, map, key, who, &type);
    if (s != RU_OK)
        return s;
    ru_part_init(&part, type, name);
    ru_ld_place(x->d, key, &part.line, &part.col);
    s = read_variant(x, map, key, who, &part);
    if (s == RU_OK)
        s = read_body(x, map, key, who, &part);
    if (s == RU_OK)
        s = ru_circuit_add_part(x->c, &part, x->err);
    return s;
}

ru_status ru_ld_parts(ld_ctx *x, const ru_ypair *parts)
{
    const ru_ynode *map = ru_ld_val(parts);
    if (!map || map->type != RU_YAML_MAPPING || map->n < 1)
        return ru_ld_fail(x->d, map ? map : parts->key, x->err,
                          "key parts needs a mapping of part names to parts");
    ru_status s = RU_OK;
    for (size_t i = 0; s == RU_OK && i < map->n; i++) {
        const ru_ypair *p = &map->pairs[i];
        if (!p->key || p->key->type != RU_YAML_SCALAR)
            s = ru_ld_fail(x->d, p->key, x->err, "part names must be plain names");
        else
            s = read_part(x, p);
    }
    for (size_t i = 0; s == RU_OK && i < map->n; i++) /* names of other parts */
        s = check_refs(x, &map->pairs[i]);
    return s;
}
