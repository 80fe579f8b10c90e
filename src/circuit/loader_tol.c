/* loader_tol.c: a part's `tol:` key. A plain fraction is the part's own tol key
 * (resistor, capacitor, inductor, crystal: the value's tolerance) or, on a source,
 * the tolerance of its level; a mapping gives tolerances per numeric key of the
 * part's type or law (`tol: {beta: 30%, is: 50%}`), the keys as the descriptor
 * lists them (src/parts/desc.h), so every key PART.KEY knows may take one.
 *
 * Invariants: a key named in the mapping is checked against the part's variant at
 * its own place; the ranges are checked with every other value in circuit.c. */
#include "circuit/loader_impl.h"

#include "base/suggest.h"

#include <stdio.h>
#include <string.h>

/* "value, tol" or "is, n, beta, vsat, temp": the numeric keys of part's variant. */
static void key_names(const ru_part *part, const char **names, size_t *n, char *buf,
                      size_t size)
{
    const ru_variant *v = ru_part_variant(part);
    size_t len = 0;
    *n = 0;
    buf[0] = '\0';
    for (const ru_keyrec *k = v ? v->keys : NULL; k && k->key; k++) {
        if (strcmp(k->key, "tol") == 0)
            continue;
        if (*n < RU_LD_KEYS_MAX)
            names[(*n)++] = k->key;
        if (len < size)
            len += (size_t)snprintf(buf + len, size - len, "%s%s", len ? ", " : "", k->key);
    }
}

static ru_status add_key_tol(ld_ctx *x, const ru_ynode *at, const char *who, ru_part *part,
                             const char *key, double tol)
{
    if (part->nkey_tols >= RU_KEY_TOLS)
        return ru_ld_fail(x->d, at, x->err, "%s: at most %d keys may have a tolerance", who,
                          RU_KEY_TOLS);
    ru_key_tol *t = &part->key_tol[part->nkey_tols++];
    snprintf(t->key, sizeof t->key, "%s", key);
    t->tol = tol;
    return RU_OK;
}

/* tol: {KEY: FRACTION, ...} */
static ru_status read_map(ld_ctx *x, const ru_ynode *map, const char *who, ru_part *part)
{
    const char *names[RU_LD_KEYS_MAX];
    char list[256];
    size_t n;
    key_names(part, names, &n, list, sizeof list);
    const char *own = ru_part_key_ptr(part, "tol", NULL) ? ru_part_value_key(part) : NULL;
    char tw[RU_NAME_MAX + 16];
    snprintf(tw, sizeof tw, "%s: tol", who);
    for (size_t i = 0; i < map->n; i++) {
        const ru_ypair *q = &map->pairs[i];
        const char *key = ru_ld_key(q);
        if (!q->key || q->key->type != RU_YAML_SCALAR)
            return ru_ld_fail(x->d, q->key ? q->key : map, x->err,
                              "%s: keys must be plain names", tw);
        if (strcmp(key, "tol") == 0 || !ru_part_key_ptr(part, key, NULL)) {
            char dym[RU_NAME_MAX + 24];
            return ru_ld_fail(x->d, q->key, x->err, "%s: %s is not a value of the part "
                              "(values: %s)%s", tw, key, n ? list : "none",
                              ru_suggest_text(key, names, n, dym, sizeof dym));
        }
        double t;
        ru_status s = ru_ld_value(x->d, q, tw, "%", x->err, &t);
        if (s != RU_OK)
            return s;
        if (own && strcmp(key, own) == 0)
            part->tol = t;
        else if ((s = add_key_tol(x, q->key, tw, part, key, t)) != RU_OK)
            return s;
    }
    return RU_OK;
}

ru_status ru_ld_read_tol(ld_ctx *x, const ru_ynode *map, const char *who, ru_part *part)
{
    const ru_ypair *p = ru_ld_find(map, "tol");
    if (!p)
        return RU_OK;
    const ru_ynode *v = ru_ld_val(p);
    if (v && v->type == RU_YAML_MAPPING)
        return read_map(x, v, who, part);
    if (ru_part_key_ptr(part, "tol", NULL))
        return RU_OK; /* the part's own key, read with the others */
    const char *level = ru_part_level_key(part);
    if (!level) {
        const ru_variant *var = ru_part_variant(part);
        const char *first = var && var->keys[0].key ? var->keys[0].key : "KEY";
        return ru_ld_fail(x->d, v ? v : p->key, x->err,
                          "%s: tol on this part needs the keys it applies to, e.g. "
                          "tol: {%s: 10%%}", who, first);
    }
    double t;
    ru_status s = ru_ld_value(x->d, p, who, "%", x->err, &t);
    return s == RU_OK ? add_key_tol(x, p->key, who, part, level, t) : s;
}
