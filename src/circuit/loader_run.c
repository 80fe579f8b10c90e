/* loader_run.c: the `run:` and `measure:` sections of a circuit file (see README
 * "Circuit file"). Both are read after the parts, so every node and part they
 * name is checked against the circuit; each error carries the place of the
 * offending key or value. */
#include "circuit/loader_impl.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* One of names (NULL-terminated) for the scalar value of p, as an index. */
static ru_status pick(ld_doc *d, const ru_ypair *p, const char *who,
                      const char *const *names, const char *choices, ru_error *err,
                      int *index)
{
    const char *text;
    ru_status s = ru_ld_scalar(d, p, who, err, &text);
    if (s != RU_OK)
        return s;
    for (int i = 0; names[i]; i++)
        if (strcmp(text, names[i]) == 0) {
            *index = i;
            return RU_OK;
        }
    return ru_ld_fail(d, ru_ld_val(p), err, "%s%skey %s: '%s' is not one of %s",
                      who, ru_ld_sep(who), ru_ld_key(p), text, choices);
}

/* The supply that holds node k (through a chain of supplies from ground), or NULL
 * when the node is free: the same rule the system applies, so a preset on a held
 * node is refused here, at the preset's own place. */
static const ru_part *holding_supply(const ru_circuit *c, int k)
{
    size_t np = ru_circuit_part_count(c), nn = ru_circuit_node_count(c);
    const ru_part **by = calloc(nn ? nn : 1, sizeof *by);
    if (!by)
        return NULL;
    for (int progress = 1; progress;) {
        progress = 0;
        for (size_t i = 0; i < np; i++) {
            const ru_part *p = ru_circuit_part(c, i);
            const ru_part_desc *d = ru_part_desc_get(p->type);
            if (!d || d->source != RU_SOURCE_VOLTAGE) /* only supplies hold nodes */
                continue;
            int a = p->node[0], b = p->node[1];
            int fa = a == 0 || by[a], fb = b == 0 || by[b];
            if (fa != fb) {
                by[fa ? b : a] = p;
                progress = 1;
            }
        }
    }
    const ru_part *p = by[k];
    free(by);
    return p;
}

/* kick: {power-on: {noise: on|off}} */
static ru_status read_power_on_kick(ld_doc *d, ru_circuit *c, const ru_ypair *pp,
                                    ru_error *err)
{
    static const char *const keys[] = {"noise", NULL};
    static const char *const onoff[] = {"off", "on", NULL};
    const ru_ynode *opts;
    ru_status s = ru_ld_need_mapping(d, pp, "run: kick", err, &opts);
    if (s == RU_OK)
        s = ru_ld_only_keys(d, opts, "run: kick power-on", keys, err);
    const ru_ypair *np = s == RU_OK ? ru_ld_find(opts, "noise") : NULL;
    int on = 1;
    if (s == RU_OK && np)
        s = pick(d, np, "run: kick power-on", onoff, "on or off", err, &on);
    if (s == RU_OK) {
        ru_circuit_run_opts(c)->kick = RU_KICK_POWER_ON;
        ru_circuit_run_opts(c)->noise = on;
    }
    return s;
}

/* kick: {preset: {node: voltage, ...}} or {power-on: {noise: ...}} */
static ru_status read_preset_kick(ld_doc *d, ru_circuit *c, const ru_ynode *kmap,
                                  ru_error *err)
{
    static const char *const keys[] = {"preset", "power-on", NULL};
    const ru_ynode *nodes;
    ru_status s = ru_ld_only_keys(d, kmap, "run: kick", keys, err);
    const ru_ypair *pp = ru_ld_find(kmap, "preset"), *po = ru_ld_find(kmap, "power-on");
    if (s == RU_OK && pp && po)
        s = ru_ld_fail(d, kmap, err, "run: kick takes one of power-on and preset");
    if (s == RU_OK && po)
        return read_power_on_kick(d, c, po, err);
    if (s == RU_OK && !pp)
        s = ru_ld_fail(d, kmap, err, "run: kick needs power-on, noise, {power-on: "
                                     "{noise: off}} or {preset: {...}}");
    if (s == RU_OK)
        s = ru_ld_need_mapping(d, pp, "run: kick", err, &nodes);
    if (s != RU_OK)
        return s;
    ru_run_opts *run = ru_circuit_run_opts(c);
    run->npreset = 0;
    for (size_t i = 0; i < nodes->n; i++) {
        const ru_ypair *p = &nodes->pairs[i];
        const char *name = ru_ld_key(p);
        int k = ru_circuit_find_node(c, name);
        char dym[RU_NAME_MAX + 24];
        if (k < 0)
            return ru_ld_fail(d, p->key, err, "run: kick preset: node %s does not exist%s",
                              name, ru_circuit_suggest_node(c, name, dym, sizeof dym));
        if (k == 0)
            return ru_ld_fail(d, p->key, err,
                              "run: kick preset: ground cannot be preset");
        const ru_part *held = holding_supply(c, k);
        if (held)
            return ru_ld_fail(d, p->key, err,
                              "run: kick preset: node %s is held by supply %s; only free "
                              "nodes can be preset",
                              name, held->name);
        if (run->npreset == RU_PRESET_MAX)
            return ru_ld_fail(d, p->key, err,
                              "run: kick preset: at most %d nodes", RU_PRESET_MAX);
        double v;
        s = ru_ld_value(d, p, "run: kick preset", "V", err, &v);
        if (s != RU_OK)
            return s;
        run->preset_node[run->npreset] = k;
        run->preset_v[run->npreset++] = v;
    }
    if (run->npreset == 0)
        return ru_ld_fail(d, nodes, err, "run: kick preset names no node");
    run->kick = RU_KICK_PRESET;
    return RU_OK;
}

static ru_status read_kick(ld_doc *d, ru_circuit *c, const ru_ypair *p,
                           ru_error *err)
{
    static const char *const names[] = {"power-on", "noise", NULL};
    const ru_ynode *v = ru_ld_val(p);
    if (v && v->type == RU_YAML_MAPPING)
        return read_preset_kick(d, c, v, err);
    int k = 0;
    ru_status s = pick(d, p, "run", names, "power-on, noise or {preset: {...}}", err, &k);
    if (s == RU_OK)
        ru_circuit_run_opts(c)->kick = k == 0 ? RU_KICK_POWER_ON : RU_KICK_NOISE;
    return s;
}

static ru_status read_seed(ld_doc *d, const ru_ypair *p, ru_error *err,
                           unsigned long *seed)
{
    const char *text;
    ru_status s = ru_ld_scalar(d, p, "run", err, &text);
    if (s != RU_OK)
        return s;
    int ok = text[0] != '\0' && strlen(text) < 20;
    for (const char *q = text; ok && *q; q++)
        ok = *q >= '0' && *q <= '9';
    if (!ok)
        return ru_ld_fail(d, ru_ld_val(p), err,
                          "run: key seed: '%s' is not a whole number from 0 up", text);
    *seed = strtoul(text, NULL, 10);
    return RU_OK;
}

/* A positive time for key p of `run`. */
static ru_status positive_time(ld_doc *d, const ru_ypair *p, ru_error *err,
                               double *out)
{
    ru_status s = ru_ld_value(d, p, "run", "s", err, out);
    if (s == RU_OK && !(*out > 0))
        s = ru_ld_fail(d, ru_ld_val(p), err, "run: key %s must be positive",
                       ru_ld_key(p));
    return s;
}

ru_status ru_ld_run(ld_doc *d, ru_circuit *c, const ru_ypair *rp,
                          ru_error *err)
{
    static const char *const keys[] = {"stop", "sample", "kick", "accuracy", "seed", NULL};
    static const char *const acc[] = {"draft", "normal", "precise", NULL};
    const ru_ynode *map;
    ru_status s = ru_ld_need_mapping(d, rp, "", err, &map);
    if (s == RU_OK)
        s = ru_ld_only_keys(d, map, "run", keys, err);
    ru_run_opts *run = ru_circuit_run_opts(c);
    const ru_ypair *p;
    if (s == RU_OK && (p = ru_ld_find(map, "stop")) != NULL) {
        const char *text;
        s = ru_ld_scalar(d, p, "run", err, &text);
        if (s == RU_OK && strcmp(text, "auto") == 0)
            run->stop_auto = 1;
        else if (s == RU_OK && (s = positive_time(d, p, err, &run->stop_s)) == RU_OK)
            run->stop_auto = 0;
    }
    if (s == RU_OK && (p = ru_ld_find(map, "sample")) != NULL) {
        const char *text;
        s = ru_ld_scalar(d, p, "run", err, &text);
        if (s == RU_OK && strcmp(text, "auto") == 0)
            run->sample_s = 0;
        else if (s == RU_OK)
            s = positive_time(d, p, err, &run->sample_s);
    }
    if (s == RU_OK && (p = ru_ld_find(map, "kick")) != NULL)
        s = read_kick(d, c, p, err);
    int a = 0;
    if (s == RU_OK && (p = ru_ld_find(map, "accuracy")) != NULL &&
        (s = pick(d, p, "run", acc, "draft, normal, precise", err, &a)) == RU_OK)
        run->accuracy = (ru_accuracy)a;
    if (s == RU_OK && (p = ru_ld_find(map, "seed")) != NULL)
        s = read_seed(d, p, err, &run->seed);
    return s;
}

/* One probe node name: an existing node, ground only as one side of a difference. */
static ru_status probe_node(ld_doc *d, ru_circuit *c, const ru_ynode *v,
                            const char *name, int allow_gnd, ru_error *err, int *node)
{
    *node = ru_circuit_find_node(c, name);
    char dym[RU_NAME_MAX + 24];
    if (*node < 0)
        return ru_ld_fail(d, v, err, "measure: key probe: node %s does not exist%s",
                          name[0] ? name : "(empty)",
                          ru_circuit_suggest_node(c, name, dym, sizeof dym));
    if (*node == 0 && !allow_gnd)
        return ru_ld_fail(d, v, err, "measure: key probe: ground is always 0 V; probe "
                                     "another node");
    return RU_OK;
}

static ru_status read_probe(ld_doc *d, ru_circuit *c, const ru_ypair *p,
                            ru_error *err)
{
    const char *text;
    ru_status s = ru_ld_scalar(d, p, "measure", err, &text);
    if (s != RU_OK)
        return s;
    char pos[RU_NAME_MAX * 2 + 2];
    snprintf(pos, sizeof pos, "%s", text);
    char *minus = strchr(pos, '-');
    if (minus)
        *minus = '\0';
    const ru_ynode *v = ru_ld_val(p);
    ru_measure_opts *m = ru_circuit_measure_opts(c);
    s = probe_node(d, c, v, pos, minus != NULL, err, &m->probe_pos); /* gnd-a: -v(a) */
    m->probe_neg = 0;
    if (s == RU_OK && minus)
        s = probe_node(d, c, v, minus + 1, 1, err, &m->probe_neg);
    if (s == RU_OK && m->probe_pos == m->probe_neg)
        s = ru_ld_fail(d, v, err, "measure: key probe: the two nodes are the same");
    return s;
}

static ru_status read_loop(ld_doc *d, ru_circuit *c, const ru_ypair *p,
                           ru_error *err)
{
    const char *text;
    ru_status s = ru_ld_scalar(d, p, "measure", err, &text);
    if (s != RU_OK)
        return s;
    int k = ru_circuit_find_part(c, text);
    char dym[RU_NAME_MAX + 24];
    if (k < 0)
        return ru_ld_fail(d, ru_ld_val(p), err, "measure: key loop: there is no part %s%s",
                          text, ru_circuit_suggest_part(c, text, dym, sizeof dym));
    const ru_part_desc *pd = ru_part_desc_get(ru_circuit_part(c, (size_t)k)->type);
    if (!pd || !pd->loop) /* the parts whose loop the system can break */
        return ru_ld_fail(d, ru_ld_val(p), err,
                          "measure: key loop: part %s is not an amplifier", text);
    snprintf(ru_circuit_measure_opts(c)->loop, RU_NAME_MAX, "%s", text);
    return RU_OK;
}

static ru_status read_loop_node(ld_doc *d, ru_circuit *c, const ru_ypair *p,
                                ru_error *err)
{
    const char *text;
    ru_status s = ru_ld_scalar(d, p, "measure", err, &text);
    if (s != RU_OK)
        return s;
    int k = ru_circuit_find_node(c, text);
    char dym[RU_NAME_MAX + 24];
    if (k < 0)
        return ru_ld_fail(d, ru_ld_val(p), err,
                          "measure: key loop-node: node %s does not exist%s", text,
                          ru_circuit_suggest_node(c, text, dym, sizeof dym));
    if (k == 0)
        return ru_ld_fail(d, ru_ld_val(p), err,
                          "measure: key loop-node: ground cannot be broken");
    snprintf(ru_circuit_measure_opts(c)->loop_node, RU_NAME_MAX, "%s", text);
    return RU_OK;
}

/* loop-load: one part name or a list of them. */
static ru_status read_loop_load(ld_doc *d, ru_circuit *c, const ru_ypair *p,
                                ru_error *err)
{
    const ru_ynode *v = ru_ld_val(p);
    const ru_ynode *one[1] = {v};
    const ru_ynode *const *items = one;
    size_t n = 1;
    if (v && v->type == RU_YAML_SEQUENCE) {
        items = (const ru_ynode *const *)v->items;
        n = v->n;
    }
    if (!v || n == 0 || n > RU_LOOP_LOAD_MAX)
        return ru_ld_fail(d, v ? v : p->key, err,
                          "measure: key loop-load needs 1 to %d part names",
                          RU_LOOP_LOAD_MAX);
    ru_measure_opts *m = ru_circuit_measure_opts(c);
    for (size_t i = 0; i < n; i++) {
        const ru_ynode *it = items[i];
        char dym[RU_NAME_MAX + 24];
        if (!it || it->type != RU_YAML_SCALAR)
            return ru_ld_fail(d, it ? it : v, err,
                              "measure: key loop-load: each entry is one part name");
        if (ru_circuit_find_part(c, it->text) < 0)
            return ru_ld_fail(d, it, err, "measure: key loop-load: there is no part %s%s",
                              it->text,
                              ru_circuit_suggest_part(c, it->text, dym, sizeof dym));
        snprintf(m->loop_load[i], RU_NAME_MAX, "%s", it->text);
    }
    m->nloop_load = (int)n;
    return RU_OK;
}

/* A fraction in (0, 1) written as a percentage or a plain number. */
static ru_status fraction(ld_doc *d, const ru_ynode *v, const ru_ynode *place,
                          const char *what, ru_error *err, double *out)
{
    char why[160];
    const char *text = (v && v->type == RU_YAML_SCALAR) ? v->text
                                                                  : NULL;
    if (!text)
        return ru_ld_fail(d, v ? v : place, err, "measure: %s needs a single value", what);
    if (ru_value_parse(text, "%", out, why, sizeof why) != RU_OK)
        return ru_ld_fail(d, v, err, "measure: %s: %s", what, why);
    if (!(*out > 0 && *out < 1))
        return ru_ld_fail(d, v, err,
                          "measure: %s must lie between 0 and 100%% (0 and 1), got %s",
                          what, text);
    return RU_OK;
}

static ru_status read_window(ld_doc *d, ru_circuit *c, const ru_ypair *p,
                             ru_error *err)
{
    const ru_ynode *v = ru_ld_val(p);
    if (!v || v->type != RU_YAML_SEQUENCE || (int)v->n != 2)
        return ru_ld_fail(d, v ? v : p->key, err,
                          "measure: key growth-window needs a list of two levels [lo, hi]");
    double lo, hi;
    ru_status s = fraction(d, v->items[0], v,
                           "key growth-window", err, &lo);
    if (s == RU_OK)
        s = fraction(d, v->items[1], v, "key growth-window", err,
                     &hi);
    if (s == RU_OK && !(lo < hi))
        s = ru_ld_fail(d, v, err, "measure: key growth-window: lo must be below hi");
    if (s == RU_OK) {
        ru_circuit_measure_opts(c)->growth_lo = lo;
        ru_circuit_measure_opts(c)->growth_hi = hi;
    }
    return s;
}

ru_status ru_ld_measure(ld_doc *d, ru_circuit *c, const ru_ypair *mp,
                              ru_error *err)
{
    static const char *const keys[] = {"probe",         "loop",          "loop-node",
                                       "loop-load",     "startup-level", "growth-window",
                                       NULL};
    const ru_ynode *map;
    ru_status s = ru_ld_need_mapping(d, mp, "", err, &map);
    if (s == RU_OK)
        s = ru_ld_only_keys(d, map, "measure", keys, err);
    const ru_ypair *p;
    if (s == RU_OK && (p = ru_ld_find(map, "probe")) != NULL)
        s = read_probe(d, c, p, err);
    if (s == RU_OK && (p = ru_ld_find(map, "loop")) != NULL)
        s = read_loop(d, c, p, err);
    if (s == RU_OK && (p = ru_ld_find(map, "loop-node")) != NULL)
        s = read_loop_node(d, c, p, err);
    if (s == RU_OK && (p = ru_ld_find(map, "loop-load")) != NULL)
        s = read_loop_load(d, c, p, err);
    if (s == RU_OK && p && !ru_circuit_measure_opts(c)->loop_node[0])
        s = ru_ld_fail(d, p->key, err, "measure: key loop-load needs loop-node");
    if (s == RU_OK && (p = ru_ld_find(map, "loop-node")) != NULL &&
        ru_circuit_measure_opts(c)->loop[0])
        s = ru_ld_fail(d, p->key, err,
                       "measure: give loop (an amplifier) or loop-node (a node), not both");
    if (s == RU_OK && (p = ru_ld_find(map, "startup-level")) != NULL)
        s = fraction(d, ru_ld_val(p), p->key, "key startup-level", err,
                     &ru_circuit_measure_opts(c)->startup_level);
    if (s == RU_OK && (p = ru_ld_find(map, "growth-window")) != NULL)
        s = read_window(d, c, p, err);
    return s;
}

