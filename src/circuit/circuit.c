/* circuit.c: the in-memory circuit and its builder.
 *
 * Invariants kept here: node 0 is ground and is named "gnd"; every part accepted by
 * ru_circuit_add_part has finite values in range and node indices that exist; part
 * names are unique and found by hash (nameindex.c), so building n parts costs
 * O(n); at most RU_PARTS_MAX parts and RU_NODES_MAX nodes. Loader and tests both
 * build through these calls, so the value checks live in one place (check_values,
 * which asks each part's descriptor, src/parts/). */
#include "ringup/circuit.h"

#include "base/suggest.h"
#include "circuit/nameindex.h"

#include "parts/desc.h"

#include <math.h>
#include <stddef.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

typedef struct node_rec {
    char name[RU_NAME_MAX];
    int line, col;  /* first mention */
    double stray_f; /* this node's stray capacitance (F); < 0: the circuit's */
} node_rec;

struct ru_circuit {
    char title[256];
    char file[RU_ERROR_FILE];
    double stray_f;        /* capacitance from every free node to ground (F) */
    double temp_c;         /* temperature (deg C) the parts are at */
    node_rec *nodes;       /* [0] is ground */
    size_t nnodes, cap_nodes;
    ru_part *parts;
    size_t nparts, cap_parts;
    char **warnings;
    size_t nwarn;
    ru_name_index node_ix, part_ix; /* names to indices (nameindex.h) */
    ru_run_opts run;
    ru_measure_opts measure;
    int ncorners;          /* the file's corners: factors */
    ru_corner_factor corners[RU_CORNER_FACTORS];
};

int ru_circuit_corner_count(const ru_circuit *c) { return c->ncorners; }

const ru_corner_factor *ru_circuit_corner(const ru_circuit *c, int i)
{
    return i >= 0 && i < c->ncorners ? &c->corners[i] : NULL;
}

ru_status ru_circuit_add_corner(ru_circuit *c, const ru_corner_factor *f)
{
    if (c->ncorners >= RU_CORNER_FACTORS || f->nlevels < 1 || f->nlevels > RU_CORNER_LEVELS)
        return RU_ERANGE;
    c->corners[c->ncorners++] = *f;
    return RU_OK;
}

int ru_run_opts_noise(const ru_run_opts *ro)
{
    return ro->kick == RU_KICK_NOISE || (ro->kick == RU_KICK_POWER_ON && ro->noise);
}

ru_status ru_circuit_create(const char *title, ru_circuit **out)
{
    *out = NULL;
    ru_circuit *c = calloc(1, sizeof *c);
    if (!c)
        return RU_ENOMEM;
    snprintf(c->title, sizeof c->title, "%s", title ? title : "");
    c->stray_f = 1e-12;
    c->temp_c = RU_TEMP_REF_C;
    c->run.stop_s = 10e-3;
    c->run.stop_auto = 1;
    c->run.noise = 1;
    c->run.kick = RU_KICK_POWER_ON;
    c->run.accuracy = RU_ACCURACY_NORMAL;
    c->run.seed = 1;
    c->measure.startup_level = 0.9;
    c->measure.growth_lo = 0.01;
    c->measure.growth_hi = 0.10;
    c->measure.probe_pos = -1;
    if (ru_circuit_node(c, "gnd", 0, 0) != 0) {
        ru_circuit_destroy(c);
        return RU_ENOMEM;
    }
    *out = c;
    return RU_OK;
}

void ru_circuit_destroy(ru_circuit *c)
{
    if (!c)
        return;
    for (size_t i = 0; i < c->nwarn; i++)
        free(c->warnings[i]);
    free(c->warnings);
    free(c->nodes);
    free(c->parts);
    ru_name_index_free(&c->node_ix);
    ru_name_index_free(&c->part_ix);
    free(c);
}

#define PART_NAMES(c) ((const char *)(c)->parts + offsetof(ru_part, name)), sizeof(ru_part)

static void *dup_array(const void *src, size_t n, size_t size)
{
    void *p = malloc(n ? n * size : 1);
    if (p && n)
        memcpy(p, src, n * size);
    return p;
}

double ru_circuit_temp_c(const ru_circuit *c) { return c->temp_c; }

/* The factor tempco applies at t (deg C). */
static double tempco_factor(const ru_part *p, double t)
{
    return 1.0 + p->tempco * (t - RU_TEMP_REF_C);
}

ru_status ru_circuit_set_temp(ru_circuit *c, double temp_c, ru_error *err)
{
    if (!isfinite(temp_c) || temp_c <= -273.15)
        return ru_error_set(err, RU_EINPUT, c->file, 0, 0,
                            "temp %g C is not above absolute zero (-273.15 C)", temp_c);
    for (size_t i = 0; i < c->nparts; i++) {
        const ru_part *p = &c->parts[i];
        if (p->tempco != 0 && !(tempco_factor(p, temp_c) > 0))
            return ru_error_set(err, RU_EINPUT, c->file, p->line, p->col,
                                "part %s: tempco %g ppm/K at %g C would take its value to "
                                "0 or below", p->name, 1e6 * p->tempco, temp_c);
    }
    for (size_t i = 0; i < c->nparts; i++) {
        ru_part q = c->parts[i];
        int changed = 0;
        if (q.tempco != 0) {
            q.value *= tempco_factor(&q, temp_c) / tempco_factor(&q, c->temp_c);
            changed = 1;
        }
        double *t = q.temp_given ? NULL : ru_part_key_ptr(&q, "temp", NULL);
        if (!t && !q.temp_given)
            t = ru_part_key_ptr(&q, "tamb", NULL);
        if (t) {
            *t = temp_c;
            changed = 1;
        }
        ru_status s = changed ? ru_circuit_replace_part(c, i, &q, err) : RU_OK;
        if (s != RU_OK)
            return s;
    }
    c->temp_c = temp_c;
    return RU_OK;
}

ru_status ru_circuit_clone(const ru_circuit *c, ru_circuit **out)
{
    *out = NULL;
    ru_circuit *d = calloc(1, sizeof *d);
    if (!d)
        return RU_ENOMEM;
    *d = *c;
    d->nodes = dup_array(c->nodes, c->nnodes, sizeof *c->nodes);
    d->parts = dup_array(c->parts, c->nparts, sizeof *c->parts);
    d->cap_nodes = c->nnodes;
    d->cap_parts = c->nparts;
    d->warnings = NULL;
    d->nwarn = 0;
    memset(&d->node_ix, 0, sizeof d->node_ix);
    memset(&d->part_ix, 0, sizeof d->part_ix);
    if (!d->nodes || !d->parts ||
        ru_name_index_rebuild(&d->node_ix, d->nodes, sizeof *d->nodes, d->nnodes) != RU_OK ||
        ru_name_index_rebuild(&d->part_ix, PART_NAMES(d), d->nparts) != RU_OK) {
        ru_circuit_destroy(d);
        return RU_ENOMEM;
    }
    for (size_t i = 0; i < c->nwarn; i++) {
        if (ru_circuit_add_warning(d, c->warnings[i]) != RU_OK) {
            ru_circuit_destroy(d);
            return RU_ENOMEM;
        }
    }
    *out = d;
    return RU_OK;
}

int ru_circuit_find_node(const ru_circuit *c, const char *name)
{
    if (!name)
        return -1;
    if (strcmp(name, "gnd") == 0 || strcmp(name, "0") == 0)
        return 0;
    long k = ru_name_index_find(&c->node_ix, c->nodes, sizeof *c->nodes, name);
    return k > 0 ? (int)k : -1;
}

int ru_circuit_node(ru_circuit *c, const char *name, int line, int col)
{
    if (!name || !name[0] || strlen(name) >= RU_NAME_MAX)
        return -1;
    if (c->nnodes > 0) {
        int k = ru_circuit_find_node(c, name);
        if (k >= 0)
            return k;
    }
    if (c->nnodes > RU_NODES_MAX) /* ground and RU_NODES_MAX others */
        return -1;
    if (c->nnodes == c->cap_nodes) {
        size_t cap = c->cap_nodes ? 2 * c->cap_nodes : 16;
        node_rec *n = realloc(c->nodes, cap * sizeof *n);
        if (!n)
            return -1;
        c->nodes = n;
        c->cap_nodes = cap;
    }
    node_rec *r = &c->nodes[c->nnodes];
    snprintf(r->name, sizeof r->name, "%s", name);
    r->line = line;
    r->col = col;
    r->stray_f = -1.0;
    if (ru_name_index_add(&c->node_ix, c->nodes, sizeof *c->nodes, c->nnodes) != RU_OK)
        return -1;
    return (int)c->nnodes++;
}

size_t ru_circuit_node_count(const ru_circuit *c) { return c->nnodes; }

const char *ru_circuit_node_name(const ru_circuit *c, int node)
{
    if (node < 0 || (size_t)node >= c->nnodes)
        return "?";
    return c->nodes[node].name;
}

void ru_circuit_node_place(const ru_circuit *c, int node, int *line, int *col)
{
    int l = 0, k = 0;
    if (node >= 0 && (size_t)node < c->nnodes) {
        l = c->nodes[node].line;
        k = c->nodes[node].col;
    }
    if (line)
        *line = l;
    if (col)
        *col = k;
}

static const char *env_node_name(const void *user, int node)
{
    return ru_circuit_node_name(user, node);
}

/* Values and terminals of part p against circuit c (the name is checked apart):
 * what every part shares here, then its descriptor's own checks. */
static ru_status check_values(const ru_circuit *c, const ru_part *p, ru_error *err)
{
    const ru_part_desc *d = ru_part_desc_get(p->type);
    if (!d)
        return ru_error_set(err, RU_EINPUT, c->file, p->line, p->col,
                            "part %s: unknown part type", p->name);
    for (const ru_term *t = d->terms; t->key; t++)
        for (int k = t->first; k < t->first + t->count; k++) {
            if (t->absent == RU_TERM_SAME || t->absent == RU_TERM_NONE) {
                /* -1: the same as another terminal, or not connected */
                if (p->node[k] >= (int)c->nnodes)
                    return ru_error_set(err, RU_EINPUT, c->file, p->line, p->col,
                                        "part %s: %s names no node", p->name, t->key);
            } else if (p->node[k] < 0 || (size_t)p->node[k] >= c->nnodes) {
                return ru_error_set(err, RU_EINPUT, c->file, p->line, p->col,
                                    "part %s: terminal %d names no node", p->name, k + 1);
            }
        }
    if (!isfinite(p->value) || !isfinite(p->series_ohm) || !isfinite(p->tol) ||
        !isfinite(p->tempco))
        return ru_error_set(err, RU_EINPUT, c->file, p->line, p->col,
                            "part %s: values must be finite", p->name);
    if (p->tol < 0 || p->tol >= 1)
        return ru_error_set(err, RU_EINPUT, c->file, p->line, p->col,
                            "part %s: tol must be from 0 up to (not including) 100%% (got %g)",
                            p->name, p->tol);
    ru_part_env env = {c->file, c->nnodes, env_node_name, c};
    ru_status s = ru_part_check_key_tols(p, &env, err);
    if (s != RU_OK)
        return s;
    return d->check ? d->check(p, &env, err) : RU_OK;
}

static ru_status check_part(const ru_circuit *c, const ru_part *p, ru_error *err)
{
    if (!p->name[0])
        return ru_error_set(err, RU_EINPUT, c->file, p->line, p->col,
                            "a part needs a name");
    if (ru_circuit_find_part(c, p->name) >= 0)
        return ru_error_set(err, RU_EINPUT, c->file, p->line, p->col,
                            "part %s is defined twice", p->name);
    return check_values(c, p, err);
}

ru_status ru_circuit_replace_part(ru_circuit *c, size_t i, const ru_part *p,
                                  ru_error *err)
{
    if (i >= c->nparts)
        return ru_error_set(err, RU_EINPUT, c->file, p->line, p->col,
                            "part %s: no part %zu to replace", p->name, i);
    int other = ru_circuit_find_part(c, p->name);
    if (!p->name[0] || (other >= 0 && (size_t)other != i))
        return ru_error_set(err, RU_EINPUT, c->file, p->line, p->col,
                            "part %s: the name is empty or taken", p->name);
    ru_status s = check_values(c, p, err);
    int renamed = s == RU_OK && strcmp(c->parts[i].name, p->name) != 0;
    if (s == RU_OK)
        c->parts[i] = *p;
    if (renamed && ru_name_index_rebuild(&c->part_ix, PART_NAMES(c), c->nparts) != RU_OK)
        s = ru_error_set(err, RU_ENOMEM, c->file, p->line, p->col,
                         "out of memory renaming part %s", p->name);
    return s;
}

ru_status ru_circuit_add_part(ru_circuit *c, const ru_part *p, ru_error *err)
{
    ru_status s = check_part(c, p, err);
    if (s != RU_OK)
        return s;
    if (c->nparts >= RU_PARTS_MAX)
        return ru_error_set(err, RU_EINPUT, c->file, p->line, p->col,
                            "part %s: a circuit holds at most %d parts", p->name,
                            RU_PARTS_MAX);
    if (c->nparts == c->cap_parts) {
        size_t cap = c->cap_parts ? 2 * c->cap_parts : 16;
        ru_part *q = realloc(c->parts, cap * sizeof *q);
        if (!q)
            return ru_error_set(err, RU_ENOMEM, c->file, p->line, p->col,
                                "out of memory adding part %s", p->name);
        c->parts = q;
        c->cap_parts = cap;
    }
    c->parts[c->nparts] = *p;
    if (ru_name_index_add(&c->part_ix, PART_NAMES(c), c->nparts) != RU_OK)
        return ru_error_set(err, RU_ENOMEM, c->file, p->line, p->col,
                            "out of memory adding part %s", p->name);
    c->nparts++;
    return RU_OK;
}

size_t ru_circuit_part_count(const ru_circuit *c) { return c->nparts; }

const ru_part *ru_circuit_part(const ru_circuit *c, size_t i)
{
    return i < c->nparts ? &c->parts[i] : NULL;
}

ru_part *ru_circuit_part_mut(ru_circuit *c, size_t i)
{
    return i < c->nparts ? &c->parts[i] : NULL;
}

int ru_circuit_find_part(const ru_circuit *c, const char *name)
{
    if (!c->parts)
        return -1; /* no part yet (and no pointer to offset from) */
    return (int)ru_name_index_find(&c->part_ix, PART_NAMES(c), name);
}

ru_status ru_circuit_loop_part(const ru_circuit *c, const char *name, int *part,
                               ru_error *err)
{
    *part = ru_circuit_find_part(c, name);
    if (*part < 0 || !ru_part_breaks_loop(ru_circuit_part(c, (size_t)*part)))
        return ru_error_set(err, RU_EINPUT, ru_circuit_file(c), 0, 0,
                            "loop part %s is not an amplifier of this circuit", name);
    return RU_OK;
}

const char *ru_circuit_title(const ru_circuit *c) { return c->title; }
const char *ru_circuit_file(const ru_circuit *c) { return c->file; }

void ru_circuit_set_file(ru_circuit *c, const char *path)
{
    snprintf(c->file, sizeof c->file, "%s", path ? path : "");
}

double ru_circuit_stray_f(const ru_circuit *c) { return c->stray_f; }

ru_status ru_circuit_set_stray_f(ru_circuit *c, double stray_f)
{
    if (!isfinite(stray_f) || stray_f < 0)
        return RU_ERANGE;
    c->stray_f = stray_f;
    return RU_OK;
}

double ru_circuit_node_stray_f(const ru_circuit *c, int node)
{
    if (node <= 0 || (size_t)node >= c->nnodes)
        return 0.0;
    return c->nodes[node].stray_f >= 0 ? c->nodes[node].stray_f : c->stray_f;
}

ru_status ru_circuit_set_node_stray_f(ru_circuit *c, int node, double stray_f)
{
    if (node <= 0 || (size_t)node >= c->nnodes || !isfinite(stray_f) || stray_f < 0)
        return RU_ERANGE;
    c->nodes[node].stray_f = stray_f;
    return RU_OK;
}

int ru_circuit_node_stray_set(const ru_circuit *c, int node)
{
    return node > 0 && (size_t)node < c->nnodes && c->nodes[node].stray_f >= 0;
}

ru_run_opts *ru_circuit_run_opts(ru_circuit *c) { return &c->run; }
const ru_run_opts *ru_circuit_run_opts_const(const ru_circuit *c) { return &c->run; }
ru_measure_opts *ru_circuit_measure_opts(ru_circuit *c) { return &c->measure; }
const ru_measure_opts *ru_circuit_measure_opts_const(const ru_circuit *c)
{
    return &c->measure;
}

/* Union-find over nodes joined by parts that conduct at DC. */
static int uf_find(int *parent, int i)
{
    while (parent[i] != i) {
        parent[i] = parent[parent[i]];
        i = parent[i];
    }
    return i;
}

static void uf_join(int *parent, int a, int b)
{
    a = uf_find(parent, a);
    b = uf_find(parent, b);
    if (a != b)
        parent[a > b ? a : b] = a < b ? a : b; /* keep the smaller: ground wins */
}

int ru_circuit_find_floating_node(const ru_circuit *c, int *node)
{
    int *parent = malloc(c->nnodes * sizeof *parent);
    if (!parent)
        return 0;
    for (size_t i = 0; i < c->nnodes; i++)
        parent[i] = (int)i;
    for (size_t i = 0; i < c->nparts; i++) {
        const ru_part *p = &c->parts[i];
        const ru_part_desc *d = ru_part_desc_get(p->type);
        int links[RU_PART_LINKS_MAX][2];
        int n = d && d->dc_links ? d->dc_links(p, links) : 0;
        for (int k = 0; k < n; k++)
            uf_join(parent, links[k][0], links[k][1]);
    }
    int found = 0;
    for (size_t i = 1; i < c->nnodes && !found; i++) {
        if (uf_find(parent, (int)i) != 0) {
            if (node)
                *node = (int)i;
            found = 1;
        }
    }
    free(parent);
    return found;
}

ru_status ru_circuit_add_warning(ru_circuit *c, const char *text)
{
    char **w = realloc(c->warnings, (c->nwarn + 1) * sizeof *w);
    if (!w)
        return RU_ENOMEM;
    c->warnings = w;
    size_t n = strlen(text) + 1;
    w[c->nwarn] = malloc(n);
    if (!w[c->nwarn])
        return RU_ENOMEM;
    memcpy(w[c->nwarn], text, n);
    c->nwarn++;
    return RU_OK;
}

size_t ru_circuit_warning_count(const ru_circuit *c) { return c->nwarn; }

const char *ru_circuit_warning(const ru_circuit *c, size_t i)
{
    return i < c->nwarn ? c->warnings[i] : "";
}

/* Names as an array for ru_suggest (malloc'd; NULL when out of memory). */
static const char **name_list(const ru_circuit *c, int parts, size_t *n)
{
    *n = parts ? c->nparts : c->nnodes;
    const char **v = malloc((*n ? *n : 1) * sizeof *v);
    for (size_t i = 0; v && i < *n; i++)
        v[i] = parts ? c->parts[i].name : ru_circuit_node_name(c, (int)i);
    return v;
}

static const char *suggest(const ru_circuit *c, int parts, const char *name, char *buf,
                           size_t size)
{
    size_t n;
    const char **v = name_list(c, parts, &n);
    if (size)
        buf[0] = '\0';
    if (v)
        ru_suggest_text(name, v, n, buf, size);
    free(v);
    return buf;
}

const char *ru_circuit_suggest_node(const ru_circuit *c, const char *name, char *buf,
                                    size_t size)
{
    return suggest(c, 0, name, buf, size);
}

const char *ru_circuit_suggest_part(const ru_circuit *c, const char *name, char *buf,
                                    size_t size)
{
    return suggest(c, 1, name, buf, size);
}
