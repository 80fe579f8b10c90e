/* corners.c: the corner plan (see ringup/corners.h): its factors, the levels of
 * each unit in mixed radix, and a unit's circuit.
 *
 * Invariants: the plan is read-only after creation (threads share it); a unit's
 * circuit depends only on the circuit, the plan and the unit index; every value is
 * stored through ru_circuit_replace_part or ru_circuit_set_temp, whose checks are
 * the loader's. */
#include "ringup/corners.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

struct ru_corners {
    size_t nf;
    ru_corner_factor f[RU_CORNER_FACTORS];
    size_t units; /* 1 + the product of the level counts */
};

/* A default factor: a toleranced quantity at -tol and +tol. */
static int add_default(ru_corners *k, const ru_part *p, int part, const char *key,
                       double tol, int value)
{
    if (k->nf >= RU_CORNER_FACTORS)
        return 0;
    ru_corner_factor *f = &k->f[k->nf++];
    memset(f, 0, sizeof *f);
    f->kind = RU_CORNER_QUANTITY;
    f->part = part;
    snprintf(f->key, sizeof f->key, "%s", key);
    if (value)
        snprintf(f->name, sizeof f->name, "%s", p->name);
    else
        snprintf(f->name, sizeof f->name, "%s.%s", p->name, key);
    f->nlevels = 2;
    f->level[0] = -tol;
    f->level[1] = tol;
    return 1;
}

/* Every quantity Monte Carlo draws; 0 when there are more than the factors allowed. */
static int default_factors(const ru_circuit *c, ru_corners *k)
{
    for (size_t i = 0; i < ru_circuit_part_count(c); i++) {
        const ru_part *p = ru_circuit_part(c, i);
        const char *vk = ru_part_value_key(p);
        if (p->tol > 0 && vk && ru_part_key_cptr(p, "tol", NULL) &&
            !add_default(k, p, (int)i, vk, p->tol, 1))
            return 0;
        for (int t = 0; t < p->nkey_tols; t++)
            if (p->key_tol[t].tol > 0 &&
                !add_default(k, p, (int)i, p->key_tol[t].key, p->key_tol[t].tol, 0))
                return 0;
    }
    return 1;
}

ru_status ru_corners_create(const ru_circuit *c, ru_corners **out, ru_error *err)
{
    *out = NULL;
    ru_corners *k = calloc(1, sizeof *k);
    if (!k)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "corners: out of memory");
    int given = ru_circuit_corner_count(c);
    for (int i = 0; i < given; i++)
        k->f[k->nf++] = *ru_circuit_corner(c, i);
    if (!given && !default_factors(c, k)) {
        ru_corners_destroy(k);
        return ru_error_set(err, RU_EINPUT, ru_circuit_file(c), 0, 0,
                            "corners: more than %d toleranced values: name the factors in a "
                            "corners: section (e.g. corners: {temp: [-40C, 85C], R1: [low, "
                            "high]})", RU_CORNER_FACTORS);
    }
    if (k->nf == 0) {
        ru_corners_destroy(k);
        return ru_error_set(err, RU_EINPUT, ru_circuit_file(c), 0, 0,
                            "corners: nothing to vary: give parts a tol (e.g. tol: 5%%) or "
                            "the file a corners: section (e.g. corners: {temp: [-40C, 85C], "
                            "supply: [-10%%, 10%%]})");
    }
    double n = 1;
    for (size_t f = 0; f < k->nf; f++)
        n *= k->f[f].nlevels;
    if (n > RU_CORNERS_MAX) {
        size_t nf = k->nf;
        ru_corners_destroy(k);
        return ru_error_set(err, RU_EINPUT, ru_circuit_file(c), 0, 0,
                            "corners: %zu factors make %.0f corners, more than the %d allowed "
                            "(name fewer factors or levels in the corners: section)",
                            nf, n, RU_CORNERS_MAX);
    }
    k->units = 1 + (size_t)n;
    *out = k;
    return RU_OK;
}

void ru_corners_destroy(ru_corners *k) { free(k); }

size_t ru_corners_factor_count(const ru_corners *k) { return k->nf; }

const ru_corner_factor *ru_corners_factor(const ru_corners *k, size_t f)
{
    return f < k->nf ? &k->f[f] : NULL;
}

size_t ru_corners_unit_count(const ru_corners *k) { return k->units; }

int ru_corners_level(const ru_corners *k, size_t u, size_t f)
{
    if (u == 0 || u >= k->units || f >= k->nf)
        return -1;
    size_t stride = 1;
    for (size_t g = f + 1; g < k->nf; g++)
        stride *= (size_t)k->f[g].nlevels;
    return (int)((u - 1) / stride % (size_t)k->f[f].nlevels);
}

double ru_corners_level_value(const ru_corners *k, size_t u, size_t f)
{
    int l = ru_corners_level(k, u, f);
    return l < 0 ? NAN : k->f[f].level[l];
}

void ru_corners_level_text(const ru_corners *k, size_t u, size_t f, char *buf, size_t size)
{
    double v = ru_corners_level_value(k, u, f);
    if (!isfinite(v))
        snprintf(buf, size, "nominal");
    else if (k->f[f].kind == RU_CORNER_TEMP)
        snprintf(buf, size, "%g C", v);
    else
        snprintf(buf, size, "%+.4g %%", 100.0 * v);
}

void ru_corners_describe(const ru_corners *k, size_t u, char *buf, size_t size)
{
    size_t len = 0;
    if (size)
        buf[0] = '\0';
    if (u == 0) {
        snprintf(buf, size, "nominal");
        return;
    }
    for (size_t f = 0; f < k->nf && len < size; f++) {
        char t[32];
        ru_corners_level_text(k, u, f, t, sizeof t);
        len += (size_t)snprintf(buf + len, size - len, "%s%s %s", f ? ", " : "", k->f[f].name,
                                t);
    }
}

/* Moves one factor of v to its level. */
static ru_status apply(ru_circuit *v, const ru_corner_factor *f, double x, ru_error *err)
{
    if (f->kind == RU_CORNER_TEMP)
        return ru_circuit_set_temp(v, x, err);
    for (size_t i = 0; i < ru_circuit_part_count(v); i++) {
        ru_part q = *ru_circuit_part(v, i);
        if (f->kind == RU_CORNER_SUPPLY) {
            if (q.type != RU_PART_SUPPLY)
                continue;
            ru_part_scale_level(&q, 1.0 + x);
        } else {
            double *slot = (int)i == f->part ? ru_part_key_ptr(&q, f->key, NULL) : NULL;
            if (!slot)
                continue;
            *slot *= 1.0 + x;
        }
        ru_status s = ru_circuit_replace_part(v, i, &q, err);
        if (s != RU_OK)
            return s;
    }
    return RU_OK;
}

ru_status ru_corners_circuit(const ru_circuit *c, const ru_corners *k, size_t u,
                             ru_circuit **out, ru_error *err)
{
    *out = NULL;
    if (u >= k->units)
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0, "corners: unit %zu of %zu", u,
                            k->units);
    ru_circuit *v = NULL;
    if (ru_circuit_clone(c, &v) != RU_OK)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "out of memory cloning the circuit");
    ru_status s = RU_OK;
    for (size_t f = 0; u > 0 && s == RU_OK && f < k->nf; f++)
        s = apply(v, &k->f[f], ru_corners_level_value(k, u, f), err);
    if (s != RU_OK) {
        ru_circuit_destroy(v);
        return s;
    }
    *out = v;
    return RU_OK;
}
