/* part_keys.c: a part's numeric keys by name, as its descriptor lists them (the
 * calls of ringup/part.h that PART.KEY-like users outside the loader need: Monte
 * Carlo and corners reach `Q1.beta` here), and the check of per-key tolerances. */
#include "parts/desc.h"

#include <math.h>
#include <string.h>

static const ru_keyrec *find_key(const ru_part *p, const char *key)
{
    const ru_variant *v = ru_part_variant(p);
    for (const ru_keyrec *k = v && key ? v->keys : NULL; k && k->key; k++)
        if (strcmp(k->key, key) == 0)
            return k;
    return NULL;
}

const double *ru_part_key_cptr(const ru_part *p, const char *key, const char **unit)
{
    const ru_keyrec *k = find_key(p, key);
    if (unit)
        *unit = k ? ru_key_unit(ru_part_desc_get(p->type), k) : "";
    return k ? (const double *)((const char *)p + k->offset) : NULL;
}

double *ru_part_key_ptr(ru_part *p, const char *key, const char **unit)
{
    return (double *)ru_part_key_cptr(p, key, unit);
}

const char *ru_part_value_key(const ru_part *p)
{
    const ru_variant *v = ru_part_variant(p);
    for (const ru_keyrec *k = v ? v->keys : NULL; k && k->key; k++)
        if (k->offset == offsetof(ru_part, value))
            return k->key;
    return NULL;
}

const char *ru_part_level_key(const ru_part *p)
{
    const ru_variant *v = ru_part_variant(p);
    if (find_key(p, "tol"))
        return NULL;
    const char *value = ru_part_value_key(p); /* a transconductor's gm */
    if (value)
        return value;
    for (const ru_keyrec *k = v ? v->keys : NULL; k && k->key; k++)
        if (k->required && k->unit && strcmp(k->unit, "sig") == 0)
            return k->key;
    return NULL;
}

void ru_part_scale_level(ru_part *p, double f)
{
    const ru_variant *v = ru_part_variant(p);
    for (const ru_keyrec *k = v ? v->keys : NULL; k && k->key; k++)
        if (k->unit && strcmp(k->unit, "sig") == 0)
            *ru_key_slot(p, k) *= f;
}

ru_status ru_part_check_key_tols(const ru_part *p, const ru_part_env *env, ru_error *err)
{
    if (p->nkey_tols < 0 || p->nkey_tols > RU_KEY_TOLS)
        return ru_part_fail(env, p, err, "at most %d keys may have a tolerance",
                            RU_KEY_TOLS);
    for (int i = 0; i < p->nkey_tols; i++) {
        const ru_key_tol *t = &p->key_tol[i];
        if (!memchr(t->key, '\0', sizeof t->key) || !find_key(p, t->key) ||
            strcmp(t->key, "tol") == 0)
            return ru_part_fail(env, p, err, "tol: %.*s is not a value of the part",
                                (int)sizeof t->key, t->key);
        for (int j = 0; j < i; j++)
            if (strcmp(p->key_tol[j].key, t->key) == 0)
                return ru_part_fail(env, p, err, "tol: %s is given twice", t->key);
        if (!isfinite(t->tol) || t->tol < 0 || t->tol >= 1)
            return ru_part_fail(env, p, err,
                                "tol of %s must be from 0 up to (not including) 100%% "
                                "(got %g)", t->key, t->tol);
    }
    return RU_OK;
}
