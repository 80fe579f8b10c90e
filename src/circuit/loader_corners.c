/* loader_corners.c: the `corners:` section, the factors `ringup corners` combines:
 *
 *   corners:
 *     temp: [-40C, 85C]        # the circuit's temperature
 *     supply: [-10%, +10%]     # every supply's level together
 *     R1: [low, high]          # R1's value at the ends of its tol
 *     Q1.beta: [low, nom, high]
 *     C1.value: [-5%, 5%]      # explicit deviations
 *
 * Invariants: every name is resolved here, at its place (the part exists, the key
 * is one of its numeric keys as the descriptors list them, low and high only where
 * the quantity has a tolerance); levels are stored resolved (deg C, or fractions). */
#include "circuit/loader_impl.h"

#include <math.h>
#include <stdio.h>
#include <string.h>

/* The tolerance of part p's key (its own tol for the value key, else a key tol). */
static double tol_of(const ru_part *p, const char *key)
{
    const char *vk = ru_part_value_key(p);
    if (vk && !strcmp(vk, key) && ru_part_key_cptr(p, "tol", NULL))
        return p->tol;
    for (int k = 0; k < p->nkey_tols; k++)
        if (!strcmp(p->key_tol[k].key, key))
            return p->key_tol[k].tol;
    return 0;
}

/* PART or PART.KEY into f (part index and key), or a message at the name. */
static ru_status quantity(const ld_doc *d, const ru_circuit *c, const ru_ypair *pr,
                          ru_corner_factor *f, ru_error *err)
{
    const char *name = ru_ld_key(pr);
    const char *dot = strrchr(name, '.');
    char part[RU_NAME_MAX];
    size_t plen = dot ? (size_t)(dot - name) : strlen(name);
    if (plen == 0 || plen >= sizeof part)
        return ru_ld_fail(d, pr->key, err, "corners: '%s' is not temp, supply, a part or "
                          "PART.KEY", name);
    memcpy(part, name, plen);
    part[plen] = '\0';
    f->part = ru_circuit_find_part(c, part);
    if (f->part < 0)
        return ru_ld_fail(d, pr->key, err, "corners: %s: no part %s in the circuit (the "
                          "factors are temp, supply, a part or PART.KEY)", name, part);
    const ru_part *p = ru_circuit_part(c, (size_t)f->part);
    const char *key = dot ? dot + 1 : ru_part_value_key(p);
    if (!key || strlen(key) >= sizeof f->key || !ru_part_key_cptr(p, key, NULL) ||
        !strcmp(key, "tol"))
        return ru_ld_fail(d, pr->key, err, "corners: %s: %s", name,
                          key ? "not a numeric key of the part"
                              : "the part has no value: name its key (PART.KEY)");
    snprintf(f->key, sizeof f->key, "%s", key);
    return RU_OK;
}

/* One level of factor f from scalar item. */
static ru_status level(const ld_doc *d, const ru_circuit *c, const ru_ynode *item,
                       ru_corner_factor *f, ru_error *err)
{
    if (item->type != RU_YAML_SCALAR)
        return ru_ld_fail(d, item, err, "corners: %s: each level is one value", f->name);
    const char *t = item->text;
    double *out = &f->level[f->nlevels];
    char why[160];
    if (f->kind == RU_CORNER_QUANTITY &&
        (!strcmp(t, "low") || !strcmp(t, "high") || !strcmp(t, "nom"))) {
        double tol = tol_of(ru_circuit_part(c, (size_t)f->part), f->key);
        if (!(tol > 0) && strcmp(t, "nom"))
            return ru_ld_fail(d, item, err, "corners: %s: %s needs a tolerance on %s (give "
                              "it a tol, or levels such as [-5%%, 5%%])", f->name, t, f->key);
        *out = !strcmp(t, "low") ? -tol : !strcmp(t, "high") ? tol : 0.0;
    } else if (ru_value_parse(t, f->kind == RU_CORNER_TEMP ? "C" : "%", out, why,
                              sizeof why) != RU_OK) {
        return ru_ld_fail(d, item, err, "corners: %s: '%s': %s%s", f->name, t, why,
                          f->kind == RU_CORNER_QUANTITY ? " (or low, nom, high)" : "");
    } else if (f->kind == RU_CORNER_TEMP ? !(*out > -273.15) : !(*out > -1.0)) {
        return ru_ld_fail(d, item, err, f->kind == RU_CORNER_TEMP
                                            ? "corners: %s: '%s' is not above absolute zero"
                                            : "corners: %s: '%s' would take it to 0 or below",
                          f->name, t);
    }
    f->nlevels++;
    return RU_OK;
}

ru_status ru_ld_corners(ld_doc *d, ru_circuit *c, const ru_ypair *p, ru_error *err)
{
    const ru_ynode *map;
    ru_status s = ru_ld_need_mapping(d, p, "corners", err, &map);
    for (size_t i = 0; s == RU_OK && i < map->n; i++) {
        const ru_ypair *pr = &map->pairs[i];
        const char *name = ru_ld_key(pr);
        const ru_ynode *v = ru_ld_val(pr);
        ru_corner_factor f;
        memset(&f, 0, sizeof f);
        snprintf(f.name, sizeof f.name, "%s", name);
        ru_ld_place(d, pr->key, &f.line, &f.col);
        f.part = -1;
        if (!strcmp(name, "temp"))
            f.kind = RU_CORNER_TEMP;
        else if (!strcmp(name, "supply"))
            f.kind = RU_CORNER_SUPPLY;
        else if ((s = quantity(d, c, pr, &f, err)) != RU_OK)
            return s;
        else
            f.kind = RU_CORNER_QUANTITY;
        if (!v || v->type != RU_YAML_SEQUENCE || v->n < 1 || v->n > RU_CORNER_LEVELS)
            return ru_ld_fail(d, v ? v : pr->key, err, "corners: %s needs a list of 1 to %d "
                              "levels, e.g. [%s]", name, RU_CORNER_LEVELS,
                              f.kind == RU_CORNER_TEMP ? "-40C, 85C"
                              : f.kind == RU_CORNER_SUPPLY ? "-10%, 10%" : "low, high");
        for (size_t k = 0; s == RU_OK && k < v->n; k++)
            s = level(d, c, v->items[k], &f, err);
        if (s == RU_OK && ru_circuit_add_corner(c, &f) != RU_OK)
            return ru_ld_fail(d, pr->key, err, "corners: at most %d factors", RU_CORNER_FACTORS);
    }
    return s;
}
