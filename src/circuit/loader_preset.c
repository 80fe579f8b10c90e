/* loader_preset.c: presets (models/NAME.yaml): reading a preset document into a
 * part, loading a named preset onto a part (`model: NAME`, batch model swaps), and
 * the listing of its values (ru_models_list).
 *
 * A preset's `law` names its kind: an amplifier law, or the type of another part
 * that takes presets (`diode`, `thermal-resistor`; that type's selector key, such
 * as `kind`, may follow). Which types take presets and how they name them is the
 * part descriptors' business (presets, preset_by_variant); this file knows no part
 * type. Values are layered: the kind's defaults < the preset. */
#include "circuit/loader_impl.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* One kind of preset: a type and, when presets name variants, the variant. */
typedef struct preset_kind {
    const ru_part_desc *d; /* the type it fits */
    int variant;           /* its variant (by selector when presets name the type) */
} preset_kind;

static const char *kind_name(const preset_kind *k)
{
    return k->d->preset_by_variant ? k->d->variant(k->variant)->name : k->d->name;
}

/* The preset kind spelled text; 0 when there is none. */
static int find_kind(const char *text, preset_kind *out)
{
    for (int t = 0; t < RU_PART_TYPE_COUNT; t++) {
        const ru_part_desc *d = ru_part_desc_get((ru_part_type)t);
        if (!d || !d->presets)
            continue;
        int v = d->preset_by_variant ? ru_part_variant_find(d, text)
                : strcmp(d->name, text) == 0 ? 0 : -1;
        if (v >= 0) {
            *out = (preset_kind){d, v};
            return 1;
        }
    }
    return 0;
}

/* "follower-tanh, ..., table, diode, thermal-resistor": every preset kind. */
static void kind_names(char *buf, size_t size)
{
    size_t len = 0;
    buf[0] = '\0';
    for (int t = 0; t < RU_PART_TYPE_COUNT && len < size; t++) {
        const ru_part_desc *d = ru_part_desc_get((ru_part_type)t);
        for (int v = 0; d && d->presets && v < (d->preset_by_variant ? d->nvariants : 1) &&
                        len < size;
             v++)
            len += (size_t)snprintf(buf + len, size - len, "%s%s", len ? ", " : "",
                                    d->preset_by_variant ? d->variant(v)->name : d->name);
    }
}

/* The selector key (e.g. `kind`) of a preset that names its type. */
static ru_status read_selector(const ld_doc *pd, const char *who, preset_kind *k,
                               ru_error *err)
{
    const ru_ypair *p = k->d->selector && !k->d->preset_by_variant
                            ? ru_ld_find(pd->root, k->d->selector)
                            : NULL;
    if (!p)
        return RU_OK;
    const char *text;
    ru_status s = ru_ld_scalar(pd, p, who, err, &text);
    if (s != RU_OK)
        return s;
    int v = ru_part_variant_find(k->d, text);
    if (v >= 0) {
        k->variant = v;
        return RU_OK;
    }
    char names[256];
    ru_ld_variant_names(k->d, names, sizeof names);
    return ru_ld_fail(pd, ru_ld_val(p), err, "%s: key %s: '%s' is not one of %s", who,
                      k->d->selector, text, names);
}

/* The kind's defaults into part's record of that kind; part keeps its type. */
static void kind_defaults(ru_part *part, const preset_kind *k)
{
    ru_part_type own = part->type;
    part->type = k->d->type;
    ru_part_reset(part, k->variant);
    part->type = own;
}

/* The parameter list of a preset for ru_models_list: every key of its kind with
 * the value in force (the preset's or the default); a list gives its length. */
static void fill_info(const ru_part *part, const preset_kind *k, const char *desc,
                      ru_model_info *info)
{
    const ru_variant *v = k->d->variant(k->variant);
    snprintf(info->law, sizeof info->law, "%s", kind_name(k));
    snprintf(info->kind, sizeof info->kind, "%s",
             !k->d->preset_by_variant && k->d->selector ? v->name : "");
    snprintf(info->description, sizeof info->description, "%s", desc);
    info->nparams = 0;
    for (size_t i = 0; v->keys[i].key && info->nparams < RU_MODEL_PARAMS_MAX; i++) {
        ru_model_param *mp = &info->params[info->nparams++];
        snprintf(mp->name, sizeof mp->name, "%s", v->keys[i].key);
        mp->value = *ru_key_slot((ru_part *)part, &v->keys[i]);
        snprintf(mp->unit, sizeof mp->unit, "%s", v->keys[i].unit ? v->keys[i].unit : "");
    }
    for (size_t i = 0; v->lists && v->lists[i].key && info->nparams < RU_MODEL_PARAMS_MAX;
         i++) {
        ru_model_param *mp = &info->params[info->nparams++];
        snprintf(mp->name, sizeof mp->name, "%s", v->lists[i].key);
        mp->value = (double)*(const int *)((const char *)part + v->lists[i].count_offset);
        snprintf(mp->unit, sizeof mp->unit, "%s", "points");
    }
}

ru_status ru_ld_preset_values(ld_doc *pd, const char *who, ru_part *part,
                              ru_part_type *type, const char **kind, ru_model_info *info,
                              ru_error *err)
{
    const ru_ypair *p = ru_ld_find(pd->root, "law");
    if (!p)
        return ru_ld_fail(pd, pd->root, err, "%s: missing required key law", who);
    const char *text;
    ru_status s = ru_ld_scalar(pd, p, who, err, &text);
    if (s != RU_OK)
        return s;
    preset_kind k;
    if (!find_kind(text, &k)) {
        char names[320];
        kind_names(names, sizeof names);
        return ru_ld_fail(pd, ru_ld_val(p), err, "%s: key law: '%s' is not one of %s", who,
                          text, names);
    }
    *type = k.d->type;
    *kind = kind_name(&k);
    s = read_selector(pd, who, &k, err);
    const char *allowed[RU_LD_KEYS_MAX] = {"law", "description", NULL};
    if (!k.d->preset_by_variant)
        ru_ld_add_key(allowed, k.d->selector);
    const ru_variant *v = k.d->variant(k.variant);
    ru_ld_add_keys(allowed, v);
    char what[64];
    if (k.d->preset_by_variant)
        snprintf(what, sizeof what, "%s %s", k.d->selector, v->name);
    else
        snprintf(what, sizeof what, "a %s preset", k.d->name);
    if (s == RU_OK)
        s = ru_ld_check_keys(pd, pd->root, who, allowed, what, err);
    const char *desc = "";
    if (s == RU_OK && (p = ru_ld_find(pd->root, "description")) != NULL)
        s = ru_ld_scalar(pd, p, who, err, &desc);
    kind_defaults(part, &k);
    if (s == RU_OK)
        s = ru_ld_read_keys(pd, pd->root, pd->root, who, v->keys, k.d->sig_unit, part, err);
    if (s == RU_OK)
        s = ru_ld_read_lists(pd, pd->root, pd->root, who, v->lists, part, err);
    if (s == RU_OK && info)
        fill_info(part, &k, desc, info);
    return s;
}

int ru_ld_valid_preset_name(const char *name)
{
    int ok = name[0] && name[0] != '.' && strlen(name) < RU_NAME_MAX;
    for (const char *q = name; ok && *q; q++)
        ok = ru_ld_valid_name((char[]){*q, '\0'}) || *q == '-';
    return ok;
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
    ru_part_type type = part->type;
    const char *kind = "";
    if (s == RU_OK)
        s = ru_ld_preset_values(&pd, who, &tmp, &type, &kind, NULL, err);
    if (s == RU_OK && type != part->type) {
        *missing = 2; /* a preset for another part type */
        snprintf(why, whylen, "preset %s (law %s) does not fit a part of type %s", name,
                 kind, ru_part_type_name(part->type));
        s = RU_EINPUT;
    }
    const ru_part_desc *d = ru_part_desc_get(part->type);
    if (s == RU_OK && d && d->presets) {
        *part = tmp;
        snprintf((char *)part + d->model, RU_NAME_MAX, "%s", name);
    }
    ru_ld_close(&pd);
    free(text);
    return s;
}
