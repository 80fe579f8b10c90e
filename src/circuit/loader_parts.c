/* loader_parts.c: reads the `parts:` section of a circuit file, and presets
 * (models/NAME.yaml) of amplifiers, diodes and thermal resistors, into ru_part
 * records.
 *
 * Invariants: a part's keys are checked against its type (and wave, law or kind)
 * before any value is read, so a misplaced key is named, not ignored; amplifier,
 * diode and thermal-resistor values are layered defaults < preset < the part's own
 * keys; every part is added through ru_circuit_add_part with line/col at its
 * name, so the builder's value checks carry the place. Nodes are created in order
 * of first mention. A preset's `law` is an amplifier law, `diode` or
 * `thermal-resistor`, and only fits a part of that type. Keys, units, defaults
 * and variants come from the part descriptors (src/parts/), the one list of
 * them that PART.KEY (params.c) reads too. */
#include "circuit/loader_impl.h"

#include "parts/desc.h"

#include <stddef.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define MAX_KEYS 20

/* A value key read into a double of ru_part (parts/desc.h). */
typedef ru_keyrec key_rec;

/* Preset kinds: the amplifier laws 0..RU_LAW_COUNT-1, then these two. */
enum { PK_DIODE = RU_LAW_COUNT, PK_THERMAL, PK_COUNT };

static const char *pk_name(int pk)
{
    return pk == PK_DIODE ? "diode" : pk == PK_THERMAL ? "thermal-resistor"
                                                       : ru_law_name((ru_law)pk);
}

/* The part type a preset kind fits. */
static ru_part_type pk_type(int pk)
{
    return pk == PK_DIODE ? RU_PART_DIODE : pk == PK_THERMAL ? RU_PART_THERMAL
                                                             : RU_PART_AMPLIFIER;
}

/* The variant a preset kind's values are of (thermal: by its kind). */
static const ru_variant *pk_variant(int pk, ru_thermal_kind tk)
{
    const ru_part_desc *d = ru_part_desc_get(pk_type(pk));
    return d->variant(pk == PK_THERMAL ? (int)tk : pk == PK_DIODE ? 0 : pk);
}

/* Whether key is one a part may carry under some type, variant or law. */
static int any_part_key(const char *key)
{
    if (strcmp(key, "type") == 0 || strcmp(key, "model") == 0)
        return 1;
    for (int t = 0; t < RU_PART_TYPE_COUNT; t++) {
        const ru_part_desc *d = ru_part_desc_get((ru_part_type)t);
        if (!d)
            continue;
        for (const ru_term *m = d->terms; m->key; m++)
            if (strcmp(m->key, key) == 0)
                return 1;
        if (d->selector && strcmp(d->selector, key) == 0)
            return 1;
        for (int v = 0; v < d->nvariants; v++) {
            const ru_variant *var = d->variant(v);
            for (const ru_keyrec *k = var ? var->keys : NULL; k && k->key; k++)
                if (strcmp(k->key, key) == 0)
                    return 1;
            for (const ru_listrec *l = var ? var->lists : NULL; l && l->key; l++)
                if (strcmp(l->key, key) == 0)
                    return 1;
        }
    }
    return 0;
}

/* "a, b or c" / "a, b, c": the names of d's variants joined, for messages. */
static void variant_names(const ru_part_desc *d, char *buf, size_t size)
{
    size_t len = 0;
    buf[0] = '\0';
    for (int i = 0; i < d->nvariants && len < size; i++)
        len += (size_t)snprintf(buf + len, size - len, "%s%s", i ? ", " : "",
                                d->variant(i)->name);
}

/* Appends the keys and list keys of v to list (NULL-terminated, at most MAX_KEYS). */
static void add_keys(const char **list, const ru_variant *v)
{
    size_t n = 0;
    while (list[n])
        n++;
    for (size_t i = 0; v->keys[i].key && n + 1 < MAX_KEYS; i++)
        list[n++] = v->keys[i].key;
    for (size_t i = 0; v->lists && v->lists[i].key && n + 1 < MAX_KEYS; i++)
        list[n++] = v->lists[i].key;
    list[n] = NULL;
}

static int in_list(const char *const *list, const char *s)
{
    for (size_t i = 0; list[i]; i++)
        if (strcmp(list[i], s) == 0)
            return 1;
    return 0;
}

/* Every key of map must be in allowed; a key of another type/wave/law "does not
 * apply to `what`", anything else is unknown. */
static ru_status check_keys(ld_doc *d, const ru_ynode *map, const char *who,
                            const char *const *allowed, const char *what, ru_error *err)
{
    for (size_t i = 0; i < map->n; i++) {
        const ru_ypair *p = &map->pairs[i];
        const ru_ynode *k = p->key;
        const char *key = ru_ld_key(p);
        if (!k || k->type != RU_YAML_SCALAR)
            return ru_ld_fail(d, k, err, "%s: keys must be plain names", who);
        if (in_list(allowed, key))
            continue;
        if (any_part_key(key) || strcmp(key, "description") == 0)
            return ru_ld_fail(d, k, err, "%s: key %s does not apply to %s", who, key,
                              what);
        return ru_ld_fail(d, k, err, "%s: unknown key %s", who, key);
    }
    return RU_OK;
}

/* Reads the keys of recs present in map into part. */
static ru_status read_keys(ld_doc *d, const ru_ynode *map, const ru_ynode *place,
                           const char *who, const key_rec *recs, const char *sig,
                           ru_part *part, ru_error *err)
{
    for (size_t i = 0; recs[i].key; i++) {
        const ru_ypair *p = ru_ld_find(map, recs[i].key);
        if (!p) {
            if (recs[i].required)
                return ru_ld_fail(d, place, err, "%s: missing required key %s", who,
                                  recs[i].key);
            continue;
        }
        const char *unit = recs[i].unit;
        if (unit && strcmp(unit, "sig") == 0)
            unit = sig;
        double *dst = ru_key_slot(part, &recs[i]);
        ru_status s = ru_ld_value(d, p, who, unit, err, dst);
        if (s != RU_OK)
            return s;
    }
    return RU_OK;
}

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
    *node = ru_circuit_node(x->c, name, line, col);
    if (*node < 0)
        return ru_error_set(x->err, RU_ENOMEM, x->d->file, line, col,
                            "%s: out of memory adding node %s", who, name);
    return RU_OK;
}

/* nodes: [a, b] of a two-terminal part. */
static ru_status read_nodes(ld_ctx *x, const ru_ynode *map, const ru_ynode *place,
                            const char *who, ru_part *part)
{
    const ru_ypair *p = ru_ld_find(map, "nodes");
    if (!p)
        return ru_ld_fail(x->d, place, x->err, "%s: missing required key nodes", who);
    const ru_ynode *v = ru_ld_val(p);
    if (!v || v->type != RU_YAML_SEQUENCE)
        return ru_ld_fail(x->d, v ? v : p->key, x->err,
                          "%s: key nodes needs a list of 2 nodes, e.g. [a, gnd]", who);
    int n = (int)v->n;
    if (n != 2)
        return ru_ld_fail(x->d, v, x->err, "%s: key nodes needs 2 nodes, got %d", who, n);
    ru_status s = RU_OK;
    for (int i = 0; i < 2 && s == RU_OK; i++)
        s = node_of(x, v->items[i], v, who, "nodes",
                    &part->node[i]);
    return s;
}

static ru_status read_rlc(ld_ctx *x, const ru_ynode *map, const ru_ynode *place,
                          const char *who, ru_part *part)
{
    const ru_variant *v = ru_part_variant(part);
    const char *allowed[MAX_KEYS] = {"type", "nodes", NULL};
    add_keys(allowed, v);
    char what[48];
    snprintf(what, sizeof what, "type %s", ru_part_type_name(part->type));
    ru_status s = check_keys(x->d, map, who, allowed, what, x->err);
    if (s == RU_OK)
        s = read_nodes(x, map, place, who, part);
    if (s == RU_OK) /* value (required), tol (% or fraction), series (inductor) */
        s = read_keys(x->d, map, place, who, v->keys, NULL, part, x->err);
    return s;
}

static ru_status read_poly(ld_ctx *x, const ru_ynode *map, const ru_ynode *place,
                           const char *who, ru_part *part)
{
    static const char *const allowed[] = {"type", "nodes", "coeffs", NULL};
    ru_status s = check_keys(x->d, map, who, allowed, "type poly-conductance", x->err);
    if (s == RU_OK)
        s = read_nodes(x, map, place, who, part);
    if (s != RU_OK)
        return s;
    const ru_ypair *p = ru_ld_find(map, "coeffs");
    if (!p)
        return ru_ld_fail(x->d, place, x->err, "%s: missing required key coeffs", who);
    const ru_ynode *v = ru_ld_val(p);
    int n = v && v->type == RU_YAML_SEQUENCE ? (int)v->n : 0;
    if (n < 1 || n > RU_POLY_MAX)
        return ru_ld_fail(x->d, v ? v : p->key, x->err,
                          "%s: key coeffs needs a list of 1 to %d numbers (c0 first)", who,
                          RU_POLY_MAX);
    for (int i = 0; i < n; i++) {
        const ru_ynode *item = v->items[i];
        const char *text = item->type == RU_YAML_SCALAR
                               ? item->text : NULL;
        char why[160];
        if (!text || ru_value_parse(text, NULL, &part->coeffs[i], why, sizeof why) != RU_OK)
            return ru_ld_fail(x->d, item, x->err, "%s: key coeffs, item %d: %s", who, i + 1,
                              text ? why : "needs a number");
    }
    part->ncoeffs = n;
    return RU_OK;
}

/* supply or current: wave kind, its keys, nodes. */
static ru_status read_source(ld_ctx *x, const ru_ynode *map, const ru_ynode *place,
                             const char *who, ru_part *part)
{
    const ru_part_desc *dd = ru_part_desc_get(part->type);
    const ru_ypair *p = ru_ld_find(map, "wave");
    const char *text = "dc";
    ru_status s = p ? ru_ld_scalar(x->d, p, who, x->err, &text) : RU_OK;
    if (s != RU_OK)
        return s;
    int kind = ru_part_variant_find(dd, text);
    if (kind < 0) {
        char names[128];
        variant_names(dd, names, sizeof names);
        return ru_ld_fail(x->d, ru_ld_val(p), x->err, "%s: key wave: '%s' is not one of %s",
                          who, text, names);
    }
    const ru_variant *v = dd->variant(kind);
    const char *allowed[MAX_KEYS] = {"type", "nodes", "wave", NULL};
    add_keys(allowed, v);
    char what[32];
    snprintf(what, sizeof what, "wave %s", v->name);
    s = check_keys(x->d, map, who, allowed, what, x->err);
    if (s == RU_OK)
        s = read_nodes(x, map, place, who, part);
    dd->set_variant(part, kind);
    if (s == RU_OK)
        s = read_keys(x->d, map, place, who, v->keys, dd->sig_unit, part, x->err);
    return s;
}

/* One of the preset kinds for the scalar value of p; amplifier laws only when
 * amp_only is set (a part's `law:` key). */
static ru_status read_kind(ld_doc *d, const ru_ypair *p, const char *who,
                          int amp_only, ru_error *err, int *pk)
{
    const char *text;
    ru_status s = ru_ld_scalar(d, p, who, err, &text);
    if (s != RU_OK)
        return s;
    int n = amp_only ? RU_LAW_COUNT : PK_COUNT;
    for (int i = 0; i < n; i++)
        if (strcmp(text, pk_name(i)) == 0) {
            *pk = i;
            return RU_OK;
        }
    char names[256];
    variant_names(ru_part_desc_get(RU_PART_AMPLIFIER), names, sizeof names);
    return ru_ld_fail(d, ru_ld_val(p), err, "%s: key law: '%s' is not one of %s%s", who, text,
                      names, amp_only ? "" : ", diode, thermal-resistor");
}

/* points: [[vin, vout], ...] (2..RU_TABLE_MAX pairs, vin strictly increasing). */
static ru_status read_points(ld_doc *d, const ru_ynode *map, const ru_ynode *place,
                             const char *who, int required, ru_amp *amp, ru_error *err)
{
    const ru_ypair *p = ru_ld_find(map, "points");
    if (!p)
        return required ? ru_ld_fail(d, place, err, "%s: missing required key points",
                                     who)
                        : RU_OK;
    const ru_ynode *v = ru_ld_val(p);
    int n = v && v->type == RU_YAML_SEQUENCE ? (int)v->n : 0;
    if (n < 2 || n > RU_TABLE_MAX)
        return ru_ld_fail(d, v ? v : p->key, err,
                          "%s: key points needs a list of 2 to %d pairs [vin, vout]", who,
                          RU_TABLE_MAX);
    for (int i = 0; i < n; i++) {
        const ru_ynode *item = v->items[i];
        if (item->type != RU_YAML_SEQUENCE || (int)item->n != 2)
            return ru_ld_fail(d, item, err, "%s: key points, item %d: needs a pair [vin, vout]",
                              who, i + 1);
        double xy[2];
        for (int k = 0; k < 2; k++) {
            const ru_ynode *e = item->items[k];
            const char *text = e->type == RU_YAML_SCALAR ? e->text
                                                                  : NULL;
            char why[160];
            if (!text || ru_value_parse(text, "V", &xy[k], why, sizeof why) != RU_OK)
                return ru_ld_fail(d, e, err, "%s: key points, item %d: %s", who, i + 1,
                                  text ? why : "needs a voltage");
        }
        if (i > 0 && !(xy[0] > amp->pt_vin[i - 1]))
            return ru_ld_fail(d, item, err,
                              "%s: key points, item %d: vin %g does not increase (after %g)",
                              who, i + 1, xy[0], amp->pt_vin[i - 1]);
        amp->pt_vin[i] = xy[0];
        amp->pt_vout[i] = xy[1];
    }
    amp->npoints = n;
    return RU_OK;
}

/* The thermal kind (lamp | ntc) of pair p. */
static ru_status read_thermal_kind(ld_doc *d, const ru_ypair *p, const char *who,
                                   ru_error *err, ru_thermal_kind *kind)
{
    const char *text;
    const ru_part_desc *dd = ru_part_desc_get(RU_PART_THERMAL);
    ru_status s = ru_ld_scalar(d, p, who, err, &text);
    int i = s == RU_OK ? ru_part_variant_find(dd, text) : -1;
    if (i >= 0) {
        *kind = (ru_thermal_kind)i;
        return RU_OK;
    }
    char names[64];
    variant_names(dd, names, sizeof names);
    return s != RU_OK ? s : ru_ld_fail(d, ru_ld_val(p), err,
                                       "%s: key kind: '%s' is not one of %s", who, text,
                                       names);
}

/* The defaults of preset kind pk into part's record of that kind (thermal: of
 * kind tk); part keeps its own type. */
static void pk_defaults(ru_part *part, int pk, ru_thermal_kind tk)
{
    ru_part tmp = *part;
    tmp.type = pk_type(pk);
    ru_part_reset(&tmp, pk == PK_THERMAL ? (int)tk : pk == PK_DIODE ? 0 : pk);
    tmp.type = part->type;
    *part = tmp;
}

/* The parameter list of a preset for ru_models_list: every key of its kind with
 * the value in force (the preset's or the default). */
static void fill_info(const ru_part *part, int pk, const char *desc, ru_model_info *info)
{
    ru_thermal_kind tk = part->thermal.kind;
    snprintf(info->law, sizeof info->law, "%s", pk_name(pk));
    const ru_variant *v = pk_variant(pk, tk);
    snprintf(info->kind, sizeof info->kind, "%s", pk == PK_THERMAL ? v->name : "");
    snprintf(info->description, sizeof info->description, "%s", desc);
    info->nparams = 0;
    for (size_t i = 0; v->keys[i].key && info->nparams < RU_MODEL_PARAMS_MAX; i++) {
        ru_model_param *mp = &info->params[info->nparams++];
        snprintf(mp->name, sizeof mp->name, "%s", v->keys[i].key);
        mp->value = *ru_key_slot((ru_part *)part, &v->keys[i]);
        snprintf(mp->unit, sizeof mp->unit, "%s", v->keys[i].unit ? v->keys[i].unit : "");
    }
    for (size_t i = 0; v->lists && v->lists[i].key && info->nparams < RU_MODEL_PARAMS_MAX;
         i++) { /* a list: how many entries */
        ru_model_param *mp = &info->params[info->nparams++];
        snprintf(mp->name, sizeof mp->name, "%s", v->lists[i].key);
        mp->value = (double)*(const int *)((const char *)part + v->lists[i].count_offset);
        snprintf(mp->unit, sizeof mp->unit, "%s", "points");
    }
}

ru_status ru_ld_preset_values(ld_doc *pd, const char *who, ru_part *part, int *kind,
                              ru_model_info *info, ru_error *err)
{
    const ru_ypair *p = ru_ld_find(pd->root, "law");
    if (!p)
        return ru_ld_fail(pd, pd->root, err, "%s: missing required key law", who);
    int pk;
    ru_status s = read_kind(pd, p, who, 0, err, &pk);
    if (s != RU_OK)
        return s;
    *kind = pk;
    ru_thermal_kind tk = RU_THERMAL_LAMP;
    const ru_ypair *pkind = ru_ld_find(pd->root, "kind");
    if (pk == PK_THERMAL && pkind)
        s = read_thermal_kind(pd, pkind, who, err, &tk);
    const char *allowed[MAX_KEYS] = {"law", "description", pk == PK_THERMAL ? "kind" : NULL,
                                     NULL};
    add_keys(allowed, pk_variant(pk, tk));
    char what[48];
    snprintf(what, sizeof what, pk < RU_LAW_COUNT ? "law %s" : "a %s preset", pk_name(pk));
    if (s == RU_OK)
        s = check_keys(pd, pd->root, who, allowed, what, err);
    const char *desc = "";
    if (s == RU_OK && (p = ru_ld_find(pd->root, "description")) != NULL)
        s = ru_ld_scalar(pd, p, who, err, &desc);
    pk_defaults(part, pk, tk);
    if (s == RU_OK)
        s = read_keys(pd, pd->root, pd->root, who, pk_variant(pk, tk)->keys, NULL, part, err);
    if (s == RU_OK && pk == RU_LAW_TABLE)
        s = read_points(pd, pd->root, pd->root, who, 1, &part->amp, err);
    if (s == RU_OK && info)
        fill_info(part, pk, desc, info);
    return s;
}

int ru_ld_valid_preset_name(const char *name)
{
    int ok = name[0] && name[0] != '.' && strlen(name) < RU_NAME_MAX;
    for (const char *q = name; ok && *q; q++)
        ok = ru_ld_valid_name((char[]){*q, '\0'}) || *q == '-';
    return ok;
}

/* The model name into the part's sub-struct of its type. */
static void set_model_name(ru_part *part, const char *name)
{
    char *dst = part->type == RU_PART_DIODE     ? part->diode.model
                : part->type == RU_PART_THERMAL ? part->thermal.model
                                                : part->amp.model;
    snprintf(dst, RU_NAME_MAX, "%s", name);
}

ru_status ru_ld_preset_into(const char *models_dir, const char *name, ru_part *part,
                            int *missing, char *why, size_t whylen, ru_error *err)
{
    char path[RU_ERROR_FILE];
    snprintf(path, sizeof path, "%s/%s.yaml", models_dir, name);
    char *text = NULL;
    size_t len = 0;
    ru_error io;
    *missing = 0;
    ru_status s = ru_ld_read_file(path, &text, &len, &io);
    if (s == RU_EIO) {
        *missing = 1;
        snprintf(why, whylen, "%s: %s", path, io.msg);
        return s;
    }
    if (s != RU_OK)
        return ru_error_set(err, s, path, 0, 0, "%s", io.msg);
    ld_doc pd;
    memset(&pd, 0, sizeof pd);
    s = ru_ld_open(&pd, text, len, path, err);
    char who[RU_NAME_MAX * 2 + 40];
    snprintf(who, sizeof who, "preset %s (used by part %s)", name, part->name);
    ru_part tmp = *part;
    int pk = 0;
    if (s == RU_OK)
        s = ru_ld_preset_values(&pd, who, &tmp, &pk, NULL, err);
    if (s == RU_OK && pk_type(pk) != part->type) {
        *missing = 2; /* a preset for another part type */
        snprintf(why, whylen, "preset %s (law %s) does not fit a part of type %s",
                 name, pk_name(pk), ru_part_type_name(part->type));
        s = RU_EINPUT;
    }
    if (s == RU_OK) {
        *part = tmp;
        set_model_name(part, name);
    }
    ru_ld_close(&pd);
    free(text);
    return s;
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

/* in, out, ref (default gnd) and inv (default: ref) of an amplifier. */
static ru_status read_amp_nodes(ld_ctx *x, const ru_ynode *map, const ru_ynode *place,
                                const char *who, ru_part *part)
{
    static const char *const keys[] = {"in", "out", "ref", "inv"};
    part->node[2] = 0;
    part->node[3] = -1;
    for (int i = 0; i < 4; i++) {
        const ru_ypair *p = ru_ld_find(map, keys[i]);
        if (!p && i < 2)
            return ru_ld_fail(x->d, place, x->err, "%s: missing required key %s", who,
                              keys[i]);
        ru_status s = p ? node_of(x, ru_ld_val(p), p->key, who, keys[i],
                                  &part->node[i])
                        : RU_OK;
        if (s != RU_OK)
            return s;
    }
    return RU_OK;
}

/* Exactly one of model and law on an amplifier. */
static ru_status model_or_law(ld_ctx *x, const ru_ypair *pm, const ru_ypair *pl,
                              const ru_ynode *place, const char *who)
{
    if (pm && pl) {
        int l1, c1, l2, c2; /* point at whichever of the two comes second */
        ru_ld_place(x->d, pm->key, &l1, &c1);
        ru_ld_place(x->d, pl->key, &l2, &c2);
        int law_later = l2 > l1 || (l2 == l1 && c2 > c1);
        return ru_ld_fail(x->d, (law_later ? pl : pm)->key, x->err,
                          "%s: give either model or law, not both", who);
    }
    if (!pm && !pl)
        return ru_ld_fail(x->d, place, x->err,
                          "%s: missing required key model or law (an amplifier needs one)",
                          who);
    return RU_OK;
}

static ru_status read_amp(ld_ctx *x, const ru_ynode *map, const ru_ynode *place,
                          const char *who, ru_part *part)
{
    const ru_ypair *pm = ru_ld_find(map, "model"), *pl = ru_ld_find(map, "law");
    ru_status s = model_or_law(x, pm, pl, place, who);
    int pk = RU_LAW_FOLLOWER_TANH;
    if (s == RU_OK && pl)
        s = read_kind(x->d, pl, who, 1, x->err, &pk);
    if (s == RU_OK && pl)
        ru_part_reset(part, pk);
    if (s == RU_OK && pm)
        s = read_model(x, pm, who, part);
    if (s != RU_OK)
        return s;
    ru_law law = part->amp.law;
    const ru_variant *v = ru_part_variant(part);
    const char *allowed[MAX_KEYS] = {"type", "in", "out", "ref", "inv", "model", "law", NULL};
    add_keys(allowed, v);
    char what[32];
    snprintf(what, sizeof what, "law %s", ru_law_name(law));
    s = check_keys(x->d, map, who, allowed, what, x->err);
    if (s == RU_OK)
        s = read_amp_nodes(x, map, place, who, part);
    if (s == RU_OK)
        s = read_keys(x->d, map, place, who, v->keys, NULL, part, x->err);
    if (s == RU_OK && law == RU_LAW_TABLE)
        s = read_points(x->d, map, place, who, part->amp.npoints < 2, &part->amp, x->err);
    return s;
}

static ru_status read_diode(ld_ctx *x, const ru_ynode *map, const ru_ynode *place,
                            const char *who, ru_part *part)
{
    const ru_ypair *pm = ru_ld_find(map, "model");
    ru_status s = pm ? read_model(x, pm, who, part) : RU_OK;
    const ru_variant *v = ru_part_variant(part);
    const char *allowed[MAX_KEYS] = {"type", "nodes", "model", NULL};
    add_keys(allowed, v);
    if (s == RU_OK)
        s = check_keys(x->d, map, who, allowed, "type diode", x->err);
    if (s == RU_OK)
        s = read_nodes(x, map, place, who, part);
    if (s == RU_OK)
        s = read_keys(x->d, map, place, who, v->keys, NULL, part, x->err);
    return s;
}

static ru_status read_thermal(ld_ctx *x, const ru_ynode *map, const ru_ynode *place,
                              const char *who, ru_part *part)
{
    const ru_ypair *pm = ru_ld_find(map, "model"), *pk = ru_ld_find(map, "kind");
    ru_status s = pm ? read_model(x, pm, who, part) : RU_OK;
    ru_thermal_kind kind = part->thermal.kind;
    if (s == RU_OK && pk)
        s = read_thermal_kind(x->d, pk, who, x->err, &kind);
    if (s != RU_OK)
        return s;
    if (!pm) /* the kind's defaults; with a preset its values stay */
        ru_part_reset(part, (int)kind);
    part->thermal.kind = kind;
    const ru_variant *v = ru_part_variant(part);
    const char *allowed[MAX_KEYS] = {"type", "nodes", "model", "kind", NULL};
    add_keys(allowed, v);
    char what[32];
    snprintf(what, sizeof what, "kind %s", v->name);
    s = check_keys(x->d, map, who, allowed, what, x->err);
    if (s == RU_OK)
        s = read_nodes(x, map, place, who, part);
    if (s == RU_OK)
        s = read_keys(x->d, map, place, who, v->keys, NULL, part, x->err);
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
    char names[320];
    size_t len = 0;
    names[0] = '\0';
    for (int t = 0, k = 0; t < RU_PART_TYPE_COUNT && len < sizeof names; t++) {
        const char *name = ru_part_type_name((ru_part_type)t);
        const char *sep = !k++ ? "" : t == RU_PART_TYPE_COUNT - 1 ? " or " : ", ";
        len += (size_t)snprintf(names + len, sizeof names - len, "%s%s", sep, name);
    }
    return ru_ld_fail(x->d, ru_ld_val(p), x->err, "%s: unknown type '%s' (%s)", who, text,
                      names);
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
    if (type <= RU_PART_INDUCTOR)
        s = read_rlc(x, map, key, who, &part);
    else if (type == RU_PART_SUPPLY || type == RU_PART_CURRENT)
        s = read_source(x, map, key, who, &part);
    else if (type == RU_PART_POLY)
        s = read_poly(x, map, key, who, &part);
    else if (type == RU_PART_DIODE)
        s = read_diode(x, map, key, who, &part);
    else if (type == RU_PART_THERMAL)
        s = read_thermal(x, map, key, who, &part);
    else
        s = read_amp(x, map, key, who, &part);
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
    return s;
}
