/* loader_keys.c: reading what a part descriptor lists (src/parts/desc.h) from a
 * YAML mapping: the allowed keys of a part or preset, numeric keys into ru_part,
 * list keys (numbers or pairs), and the names of a type's variants for messages.
 * Shared by the part reader (loader_parts.c) and the preset reader
 * (loader_preset.c); knows no part type.
 *
 * Invariants: a key of another type, variant or law "does not apply to" the part
 * (it is named, never ignored); every other unknown key is "unknown"; values are
 * stored only after they parsed. */
#include "circuit/loader_impl.h"

#include "base/suggest.h"

#include <stdio.h>
#include <string.h>

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

void ru_ld_variant_names(const ru_part_desc *d, char *buf, size_t size)
{
    size_t len = 0;
    buf[0] = '\0';
    for (int i = 0; i < d->nvariants && len < size; i++)
        len += (size_t)snprintf(buf + len, size - len, "%s%s", i ? ", " : "",
                                d->variant(i)->name);
}

void ru_ld_add_key(const char **list, const char *key)
{
    size_t n = 0;
    while (list[n])
        n++;
    if (key && n + 1 < RU_LD_KEYS_MAX) {
        list[n] = key;
        list[n + 1] = NULL;
    }
}

void ru_ld_add_keys(const char **list, const ru_variant *v)
{
    for (size_t i = 0; v->keys[i].key; i++)
        ru_ld_add_key(list, v->keys[i].key);
    for (size_t i = 0; v->lists && v->lists[i].key; i++)
        ru_ld_add_key(list, v->lists[i].key);
}

static int in_list(const char *const *list, const char *s)
{
    for (size_t i = 0; list[i]; i++)
        if (strcmp(list[i], s) == 0)
            return 1;
    return 0;
}

ru_status ru_ld_check_keys(const ld_doc *d, const ru_ynode *map, const char *who,
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
        if (!key[0])
            return ru_ld_fail(d, k, err, "%s: an empty key ('') names nothing", who);
        if (any_part_key(key) || strcmp(key, "description") == 0)
            return ru_ld_fail(d, k, err, "%s: key %s does not apply to %s", who, key,
                              what);
        size_t n = 0;
        while (allowed[n])
            n++;
        char dym[RU_NAME_MAX + 24];
        return ru_ld_fail(d, k, err, "%s: unknown key %s%s", who, key,
                          ru_suggest_text(key, (const char *const *)allowed, n, dym,
                                          sizeof dym));
    }
    return RU_OK;
}

ru_status ru_ld_read_keys(const ld_doc *d, const ru_ynode *map, const ru_ynode *place,
                          const char *who, const ru_keyrec *recs, const char *sig,
                          ru_part *part, ru_error *err)
{
    for (size_t i = 0; recs[i].key; i++) {
        const ru_ypair *p = ru_ld_find(map, recs[i].key);
        if (p && strcmp(recs[i].key, "tol") == 0 && ru_ld_val(p) &&
            ru_ld_val(p)->type == RU_YAML_MAPPING)
            continue; /* per-key tolerances: ru_ld_read_tol */
        if (!p) {
            if (recs[i].required)
                return ru_ld_fail(d, place, err, "%s: missing required key %s", who,
                                  recs[i].key);
            continue;
        }
        const char *unit = recs[i].unit;
        if (unit && strcmp(unit, "sig") == 0)
            unit = sig;
        ru_status s = ru_ld_value(d, p, who, unit, err, ru_key_slot(part, &recs[i]));
        if (s != RU_OK)
            return s;
    }
    return RU_OK;
}

/* One number of list l at item i from scalar e into *out. */
static ru_status list_number(const ld_doc *d, const ru_ynode *e, const char *who,
                             const ru_listrec *l, int i, double *out, ru_error *err)
{
    const char *text = e->type == RU_YAML_SCALAR ? e->text : NULL;
    char why[160];
    if (!text || ru_value_parse(text, l->unit, out, why, sizeof why) != RU_OK)
        return ru_ld_fail(d, e, err, "%s: key %s, item %d: %s%s", who, l->key, i + 1,
                          text ? "" : "needs ", text ? why : l->item);
    return RU_OK;
}

/* Entry i of a list of mappings l (l->fields) into part: the fields' keys only,
 * each with its unit, a required one present, the others at their defaults. */
static ru_status list_record(const ld_doc *d, const ru_ynode *item, const char *who,
                             const ru_listrec *l, int i, ru_part *part, ru_error *err)
{
    char whoi[RU_NAME_MAX + 48];
    snprintf(whoi, sizeof whoi, "%s: key %s, item %d", who, l->key, i + 1);
    if (item->type != RU_YAML_MAPPING)
        return ru_ld_fail(d, item, err, "%s: needs %s", whoi, l->entry);
    const char *allowed[RU_LD_KEYS_MAX] = {NULL};
    for (const ru_keyrec *f = l->fields; f->key; f++)
        ru_ld_add_key(allowed, f->key);
    ru_status s = ru_ld_only_keys(d, item, whoi, allowed, err);
    for (const ru_keyrec *f = l->fields; s == RU_OK && f->key; f++) {
        double *slot = (double *)((char *)part + f->offset) + i;
        const ru_ypair *p = ru_ld_find(item, f->key);
        if (!p && f->required)
            return ru_ld_fail(d, item, err, "%s: missing required key %s", whoi, f->key);
        if (!p)
            *slot = f->dflt;
        else
            s = ru_ld_value(d, p, whoi, f->unit, err, slot);
    }
    return s;
}

/* Entry i of list l (a number, or a pair for width 2) into xy. */
static ru_status list_entry(const ld_doc *d, const ru_ynode *item, const char *who,
                            const ru_listrec *l, int i, double *xy, ru_error *err)
{
    if (l->width == 1)
        return list_number(d, item, who, l, i, &xy[0], err);
    if (item->type != RU_YAML_SEQUENCE || item->n != (size_t)l->width)
        return ru_ld_fail(d, item, err, "%s: key %s, item %d: needs %s", who, l->key, i + 1,
                          l->entry);
    for (int k = 0; k < l->width; k++) {
        ru_status s = list_number(d, item->items[k], who, l, i, &xy[k], err);
        if (s != RU_OK)
            return s;
    }
    return RU_OK;
}

/* List l from map into part: required when part holds fewer than l->min entries
 * (nothing given yet, e.g. by a preset). */
static ru_status read_list(const ld_doc *d, const ru_ynode *map, const ru_ynode *place,
                           const char *who, const ru_listrec *l, ru_part *part,
                           ru_error *err)
{
    int *count = (int *)((char *)part + l->count_offset);
    double *col[2] = {(double *)((char *)part + l->offset[0]),
                      (double *)((char *)part + l->offset[1])};
    const ru_ypair *p = ru_ld_find(map, l->key);
    if (!p)
        return *count < l->min ? ru_ld_fail(d, place, err, "%s: missing required key %s",
                                            who, l->key)
                               : RU_OK;
    const ru_ynode *v = ru_ld_val(p);
    int n = v && v->type == RU_YAML_SEQUENCE ? (int)v->n : 0;
    if (n < l->min || n > l->max)
        return ru_ld_fail(d, v ? v : p->key, err, "%s: key %s needs a list of %d to %d %s",
                          who, l->key, l->min, l->max, l->what);
    for (int i = 0; i < n && l->fields; i++) {
        ru_status s = list_record(d, v->items[i], who, l, i, part, err);
        if (s != RU_OK)
            return s;
    }
    for (int i = 0; i < n && !l->fields; i++) {
        double xy[2] = {0.0, 0.0};
        ru_status s = list_entry(d, v->items[i], who, l, i, xy, err);
        if (s != RU_OK)
            return s;
        if (l->increasing && i > 0 && !(xy[0] > col[0][i - 1]))
            return ru_ld_fail(d, v->items[i], err,
                              "%s: key %s, item %d: %s %g does not increase (after %g)", who,
                              l->key, i + 1, l->col0, xy[0], col[0][i - 1]);
        for (int k = 0; k < l->width; k++)
            col[k][i] = xy[k];
    }
    *count = n;
    return RU_OK;
}

ru_status ru_ld_read_lists(const ld_doc *d, const ru_ynode *map, const ru_ynode *place,
                           const char *who, const ru_listrec *lists, ru_part *part,
                           ru_error *err)
{
    ru_status s = RU_OK;
    for (size_t i = 0; lists && lists[i].key && s == RU_OK; i++)
        s = read_list(d, map, place, who, &lists[i], part, err);
    return s;
}
