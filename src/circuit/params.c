/* params.c: PART.KEY values of a circuit and the LO:HI:N sweep specification (see
 * ringup/params.h).
 *
 * Invariants: key names, units and places in ru_part come from the part
 * descriptors' key tables (src/parts/, the loader's too), so a key means here
 * exactly what it means in a file; a value is stored only through
 * ru_circuit_replace_part, whose checks are the loader's, so a circuit never
 * holds a value a file could not. */
#include "ringup/params.h"

#include "ringup/loader.h"
#include "parts/desc.h"

#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define KEY_MAX 16

/* A resolved PART.KEY. */
typedef struct param_ref {
    int part;                /* index of the part */
    const ru_keyrec *rec;    /* the descriptor's record of the key */
    const char *unit;        /* unit as written in a file ("" plain) */
} param_ref;

/* Splits "PART.KEY" at its last '.'. */
static ru_status split_name(const char *pk, char *part, char *key, ru_error *err)
{
    const char *dot = pk ? strrchr(pk, '.') : NULL;
    size_t plen = dot ? (size_t)(dot - pk) : 0;
    if (!dot || plen == 0 || plen >= RU_NAME_MAX || !dot[1] || strlen(dot + 1) >= KEY_MAX)
        return ru_error_set(err, RU_EINPUT, NULL, 0, 0,
                            "'%s' is not PART.KEY (a part name, a dot, a key such as "
                            "R1.value or A1.gain)",
                            pk ? pk : "");
    memcpy(part, pk, plen);
    part[plen] = '\0';
    snprintf(key, KEY_MAX, "%s", dot + 1);
    return RU_OK;
}

/* "law follower-tanh", "wave sine", "kind ntc" or "type resistor", for messages. */
static void part_what(const ru_part *p, char *buf, size_t size)
{
    const ru_part_desc *d = ru_part_desc_get(p->type);
    const ru_variant *v = ru_part_variant(p);
    if (d && d->selector && v)
        snprintf(buf, size, "%s %s", d->selector, v->name);
    else
        snprintf(buf, size, "type %s", ru_part_type_name(p->type));
}

static const ru_keyrec no_keys[] = {{NULL, NULL, 0, 0, 0.0}};

/* The "no such key" error, listing the keys the part has. */
static ru_status no_key(const ru_circuit *c, const ru_part *p, const char *key,
                        const ru_keyrec *recs, ru_error *err)
{
    char list[256] = "", what[48];
    size_t len = 0;
    for (size_t i = 0; recs[i].key && len < sizeof list; i++)
        len += (size_t)snprintf(list + len, sizeof list - len, "%s%s", len ? ", " : "",
                                recs[i].key);
    part_what(p, what, sizeof what);
    return ru_error_set(err, RU_EINPUT, ru_circuit_file(c), p->line, p->col,
                        "part %s: %s is not a value of %s (values: %s)", p->name, key,
                        what, len ? list : "none; lists such as coeffs cannot be varied");
}

static ru_status resolve(const ru_circuit *c, const char *pk, param_ref *ref, ru_error *err)
{
    char part[RU_NAME_MAX], key[KEY_MAX];
    ru_status s = split_name(pk, part, key, err);
    if (s != RU_OK)
        return s;
    ref->part = ru_circuit_find_part(c, part);
    if (ref->part < 0)
        return ru_error_set(err, RU_EINPUT, NULL, 0, 0, "%s: no part %s in the circuit", pk,
                            part);
    const ru_part *p = ru_circuit_part(c, (size_t)ref->part);
    const ru_part_desc *d = ru_part_desc_get(p->type);
    const ru_variant *v = ru_part_variant(p);
    const ru_keyrec *recs = d && v ? v->keys : no_keys;
    for (size_t i = 0; recs[i].key; i++)
        if (strcmp(recs[i].key, key) == 0) {
            ref->rec = &recs[i];
            ref->unit = ru_key_unit(d, &recs[i]);
            return RU_OK;
        }
    return no_key(c, p, key, recs, err);
}

static double *slot(ru_part *p, const param_ref *ref)
{
    return ru_key_slot(p, ref->rec);
}

ru_status ru_circuit_set_param(ru_circuit *c, const char *part_dot_key, double value,
                               ru_error *err)
{
    param_ref ref;
    ru_status s = resolve(c, part_dot_key, &ref, err);
    if (s != RU_OK)
        return s;
    ru_part p = *ru_circuit_part(c, (size_t)ref.part);
    if (!isfinite(value))
        return ru_error_set(err, RU_EINPUT, ru_circuit_file(c), p.line, p.col,
                            "part %s: %s must be finite", p.name, ref.rec->key);
    *slot(&p, &ref) = value;
    if (!strcmp(ref.rec->key, "temp") || !strcmp(ref.rec->key, "tamb"))
        p.temp_given = 1; /* the part's own, as in a file: the circuit's temp leaves it */
    return ru_circuit_replace_part(c, (size_t)ref.part, &p, err);
}

ru_status ru_circuit_get_param(const ru_circuit *c, const char *part_dot_key,
                               double *value, ru_error *err)
{
    param_ref ref;
    ru_status s = resolve(c, part_dot_key, &ref, err);
    if (s == RU_OK) {
        ru_part p = *ru_circuit_part(c, (size_t)ref.part);
        *value = *slot(&p, &ref);
    }
    return s;
}

ru_status ru_circuit_param_unit(const ru_circuit *c, const char *part_dot_key,
                                const char **unit, ru_error *err)
{
    param_ref ref;
    ru_status s = resolve(c, part_dot_key, &ref, err);
    if (s == RU_OK)
        *unit = ref.unit;
    return s;
}

/* One of LO and HI: the key's unit, SI prefixes. */
static ru_status sweep_end(const char *text, const char *spec, const char *unit,
                           const char *which, double *out, ru_error *err)
{
    char why[160];
    if (ru_value_parse(text, unit[0] ? unit : NULL, out, why, sizeof why) != RU_OK)
        return ru_error_set(err, RU_EINPUT, NULL, 0, 0, "%s: %s '%s': %s", spec, which, text,
                            why);
    return RU_OK;
}

/* N: a whole number 1..RU_SWEEP_MAX. */
static ru_status sweep_count(const char *text, const char *spec, size_t *n, ru_error *err)
{
    char *end = NULL;
    errno = 0;
    unsigned long v = text[0] >= '0' && text[0] <= '9' ? strtoul(text, &end, 10) : 0;
    if (!end || *end || errno || v < 1 || v > RU_SWEEP_MAX)
        return ru_error_set(err, RU_EINPUT, NULL, 0, 0,
                            "%s: N '%s' must be a whole number from 1 to %d", spec, text,
                            RU_SWEEP_MAX);
    *n = (size_t)v;
    return RU_OK;
}

ru_status ru_sweep_parse(const ru_circuit *c, const char *text, int log,
                         ru_sweep_spec *out, ru_error *err)
{
    char buf[256], *f[3];
    memset(out, 0, sizeof *out);
    const char *eq = text ? strchr(text, '=') : NULL;
    if (!eq || strlen(text) >= sizeof buf || (size_t)(eq - text) >= RU_PARAM_NAME_MAX)
        return ru_error_set(err, RU_EINPUT, NULL, 0, 0,
                            "'%s' is not PART.KEY=LO:HI:N (e.g. R1.value=8k:12k:5)",
                            text ? text : "");
    memcpy(out->param, text, (size_t)(eq - text));
    out->param[eq - text] = '\0';
    ru_status s = ru_circuit_param_unit(c, out->param, &out->unit, err);
    if (s != RU_OK)
        return s;
    snprintf(buf, sizeof buf, "%s", eq + 1);
    int nf = 1;
    f[0] = buf;
    for (char *sep; nf < 3 && (sep = strchr(f[nf - 1], ':')) != NULL; nf++) {
        *sep = '\0';
        f[nf] = sep + 1;
    }
    if (nf != 3 || strchr(f[2], ':'))
        return ru_error_set(err, RU_EINPUT, NULL, 0, 0,
                            "%s: wants LO:HI:N after '=', e.g. %s=1:2:5", text, out->param);
    s = sweep_end(f[0], text, out->unit, "LO", &out->lo, err);
    if (s == RU_OK)
        s = sweep_end(f[1], text, out->unit, "HI", &out->hi, err);
    if (s == RU_OK)
        s = sweep_count(f[2], text, &out->n, err);
    if (s == RU_OK && log && !(out->lo * out->hi > 0))
        s = ru_error_set(err, RU_EINPUT, NULL, 0, 0,
                         "%s: --log needs LO and HI of one sign and not 0", text);
    out->log = log != 0;
    return s;
}

double ru_sweep_value(const ru_sweep_spec *s, size_t i)
{
    if (s->n < 2 || i == 0)
        return s->lo;
    if (i + 1 >= s->n)
        return s->hi;
    double f = (double)i / (double)(s->n - 1);
    return s->log ? s->lo * pow(s->hi / s->lo, f) : s->lo + (s->hi - s->lo) * f;
}

ru_status ru_sweep_variant(const ru_circuit *c, const ru_sweep_spec *s, size_t i,
                           ru_circuit **out, ru_error *err)
{
    *out = NULL;
    ru_circuit *v = NULL;
    if (ru_circuit_clone(c, &v) != RU_OK)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "out of memory cloning the circuit");
    ru_status st = ru_circuit_set_param(v, s->param, ru_sweep_value(s, i), err);
    if (st != RU_OK)
        ru_circuit_destroy(v);
    else
        *out = v;
    return st;
}
