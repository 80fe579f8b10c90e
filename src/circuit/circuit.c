/* circuit.c: the in-memory circuit and its builder.
 *
 * Invariants kept here: node 0 is ground and is named "gnd"; every part accepted by
 * ru_circuit_add_part has finite values in range and node indices that exist; part
 * names are unique. Loader and tests both build through these calls, so the value
 * checks live in one place (check_part). */
#include "ringup/circuit.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

typedef struct node_rec {
    char name[RU_NAME_MAX];
    int line, col; /* first mention */
} node_rec;

struct ru_circuit {
    char title[256];
    char file[RU_ERROR_FILE];
    double stray_f;        /* capacitance from every free node to ground (F) */
    node_rec *nodes;       /* [0] is ground */
    size_t nnodes, cap_nodes;
    ru_part *parts;
    size_t nparts, cap_parts;
    char **warnings;
    size_t nwarn;
    ru_run_opts run;
    ru_measure_opts measure;
};

ru_status ru_circuit_create(const char *title, ru_circuit **out)
{
    *out = NULL;
    ru_circuit *c = calloc(1, sizeof *c);
    if (!c)
        return RU_ENOMEM;
    snprintf(c->title, sizeof c->title, "%s", title ? title : "");
    c->stray_f = 1e-12;
    c->run.stop_s = 10e-3;
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
    free(c);
}

static void *dup_array(const void *src, size_t n, size_t size)
{
    void *p = malloc(n ? n * size : 1);
    if (p && n)
        memcpy(p, src, n * size);
    return p;
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
    if (!d->nodes || !d->parts) {
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
    for (size_t i = 1; i < c->nnodes; i++)
        if (strcmp(c->nodes[i].name, name) == 0)
            return (int)i;
    return -1;
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

static int part_terminals(const ru_part *p)
{
    return p->type == RU_PART_AMPLIFIER ? 3 : 2; /* inv (node[3]) checked apart */
}

static ru_status part_error(const ru_circuit *c, const ru_part *p, ru_error *err,
                            const char *what, double v)
{
    return ru_error_set(err, RU_EINPUT, c->file, p->line, p->col,
                        "part %s: %s (got %g)", p->name, what, v);
}

static int finite_all(const double *v, int n)
{
    for (int i = 0; i < n; i++)
        if (!isfinite(v[i]))
            return 0;
    return 1;
}

static ru_status check_wave(const ru_circuit *c, const ru_part *p, ru_error *err)
{
    const ru_wave *w = &p->wave;
    double all[] = {w->value, w->rise_s, w->v0, w->v1, w->at_s, w->edge_s,
                    w->width_s, w->period_s, w->offset, w->amplitude, w->freq_hz,
                    w->phase_deg};
    if (!finite_all(all, (int)(sizeof all / sizeof all[0])))
        return ru_error_set(err, RU_EINPUT, c->file, p->line, p->col,
                            "part %s: waveform values must be finite", p->name);
    if (w->rise_s < 0)
        return part_error(c, p, err, "rise must not be negative", w->rise_s);
    if (w->at_s < 0)
        return part_error(c, p, err, "start time must not be negative", w->at_s);
    if (w->edge_s < 0)
        return part_error(c, p, err, "edge time must not be negative", w->edge_s);
    if (w->kind == RU_WAVE_SINE && w->freq_hz <= 0)
        return part_error(c, p, err, "sine frequency must be positive", w->freq_hz);
    if (w->kind == RU_WAVE_PULSE) {
        if (w->width_s <= 0)
            return part_error(c, p, err, "pulse width must be positive", w->width_s);
        if (w->width_s < 2 * w->edge_s)
            return part_error(c, p, err, "pulse width must hold both edges", w->width_s);
        if (w->period_s < 0 || (w->period_s > 0 && w->period_s <= w->width_s))
            return part_error(c, p, err,
                              "pulse period must be 0 (one pulse) or longer than the width",
                              w->period_s);
    }
    return RU_OK;
}

static ru_status check_exp_like(const ru_circuit *c, const ru_part *p, ru_error *err)
{
    const ru_amp *a = &p->amp;
    if (a->n <= 0)
        return part_error(c, p, err, "n must be positive", a->n);
    if (a->temp_c <= -273.15)
        return part_error(c, p, err, "temp must be above absolute zero", a->temp_c);
    return RU_OK;
}

static ru_status check_opamp(const ru_circuit *c, const ru_part *p, ru_error *err)
{
    const ru_amp *a = &p->amp;
    if (a->gain <= 0)
        return part_error(c, p, err, "gain must be positive", a->gain);
    if (a->gbw_hz <= 0)
        return part_error(c, p, err, "gbw must be positive", a->gbw_hz);
    if (a->vmax_v <= a->vmin_v)
        return part_error(c, p, err, "vmax must be above vmin", a->vmax_v);
    if (a->knee_v <= 0)
        return part_error(c, p, err, "knee must be positive", a->knee_v);
    if (a->slew_v_per_s <= 0)
        return part_error(c, p, err, "slew must be positive", a->slew_v_per_s);
    if (a->rout_ohm <= 0)
        return part_error(c, p, err, "rout must be positive", a->rout_ohm);
    return RU_OK;
}

static ru_status check_table(const ru_circuit *c, const ru_part *p, ru_error *err)
{
    const ru_amp *a = &p->amp;
    if (a->npoints < 2 || a->npoints > RU_TABLE_MAX)
        return ru_error_set(err, RU_EINPUT, c->file, p->line, p->col,
                            "part %s: points needs 2 to %d points", p->name, RU_TABLE_MAX);
    if (!finite_all(a->pt_vin, a->npoints) || !finite_all(a->pt_vout, a->npoints))
        return ru_error_set(err, RU_EINPUT, c->file, p->line, p->col,
                            "part %s: points must be finite", p->name);
    for (int i = 1; i < a->npoints; i++)
        if (!(a->pt_vin[i] > a->pt_vin[i - 1]))
            return ru_error_set(err, RU_EINPUT, c->file, p->line, p->col,
                                "part %s: points: vin must increase strictly (point %d: "
                                "%g after %g)",
                                p->name, i + 1, a->pt_vin[i], a->pt_vin[i - 1]);
    if (a->rout_ohm <= 0)
        return part_error(c, p, err, "rout must be positive", a->rout_ohm);
    return RU_OK;
}

static ru_status check_amp(const ru_circuit *c, const ru_part *p, ru_error *err)
{
    const ru_amp *a = &p->amp;
    double all[] = {a->gain,    a->swing_v, a->center_v, a->rout_ohm, a->is_a,
                    a->n,       a->beta,    a->vsat_v,   a->temp_c,   a->itail_a,
                    a->sign,    a->gbw_hz,  a->vmax_v,   a->vmin_v,   a->knee_v,
                    a->slew_v_per_s};
    if (!finite_all(all, (int)(sizeof all / sizeof all[0])))
        return ru_error_set(err, RU_EINPUT, c->file, p->line, p->col,
                            "part %s: amplifier values must be finite", p->name);
    switch (a->law) {
    case RU_LAW_FOLLOWER_TANH:
        if (a->swing_v <= 0)
            return part_error(c, p, err, "swing must be positive", a->swing_v);
        if (a->rout_ohm <= 0)
            return part_error(c, p, err, "rout must be positive", a->rout_ohm);
        return RU_OK;
    case RU_LAW_EXP_STAGE:
        if (a->is_a <= 0)
            return part_error(c, p, err, "is must be positive", a->is_a);
        if (a->beta <= 0)
            return part_error(c, p, err, "beta must be positive", a->beta);
        if (a->vsat_v <= 0)
            return part_error(c, p, err, "vsat must be positive", a->vsat_v);
        return check_exp_like(c, p, err);
    case RU_LAW_DIFF_PAIR_TANH:
        if (a->itail_a <= 0)
            return part_error(c, p, err, "itail must be positive", a->itail_a);
        if (a->sign != 1.0 && a->sign != -1.0)
            return part_error(c, p, err, "sign must be 1 or -1", a->sign);
        if (a->rout_ohm < 0)
            return part_error(c, p, err, "rout must not be negative (0: none)",
                              a->rout_ohm);
        return check_exp_like(c, p, err);
    case RU_LAW_OPAMP:
        return check_opamp(c, p, err);
    case RU_LAW_TABLE:
        return check_table(c, p, err);
    default:
        return ru_error_set(err, RU_EINPUT, c->file, p->line, p->col,
                            "part %s: unknown amplifier law", p->name);
    }
}

static ru_status check_diode(const ru_circuit *c, const ru_part *p, ru_error *err)
{
    const ru_diode *d = &p->diode;
    double all[] = {d->is_a, d->n, d->rs_ohm, d->temp_c};
    if (!finite_all(all, 4))
        return ru_error_set(err, RU_EINPUT, c->file, p->line, p->col,
                            "part %s: diode values must be finite", p->name);
    if (d->is_a <= 0)
        return part_error(c, p, err, "is must be positive", d->is_a);
    if (d->n <= 0)
        return part_error(c, p, err, "n must be positive", d->n);
    if (d->rs_ohm < 0)
        return part_error(c, p, err, "rs must not be negative", d->rs_ohm);
    if (d->temp_c <= -273.15)
        return part_error(c, p, err, "temp must be above absolute zero", d->temp_c);
    return RU_OK;
}

static ru_status check_thermal(const ru_circuit *c, const ru_part *p, ru_error *err)
{
    const ru_thermal *t = &p->thermal;
    double all[] = {t->r0_ohm, t->alpha_per_k, t->beta_k, t->t0_c,
                    t->tamb_c, t->rth_k_per_w, t->cth_j_per_k};
    if (!finite_all(all, 7))
        return ru_error_set(err, RU_EINPUT, c->file, p->line, p->col,
                            "part %s: thermal-resistor values must be finite", p->name);
    if (t->kind != RU_THERMAL_LAMP && t->kind != RU_THERMAL_NTC)
        return ru_error_set(err, RU_EINPUT, c->file, p->line, p->col,
                            "part %s: unknown thermal-resistor kind", p->name);
    if (t->r0_ohm <= 0)
        return part_error(c, p, err, "r0 must be positive", t->r0_ohm);
    if (t->kind == RU_THERMAL_NTC && t->beta_k <= 0)
        return part_error(c, p, err, "bth must be positive", t->beta_k);
    if (t->t0_c <= -273.15 || t->tamb_c <= -273.15)
        return part_error(c, p, err, "temperatures must be above absolute zero",
                          fmin(t->t0_c, t->tamb_c));
    if (t->kind == RU_THERMAL_LAMP && 1.0 + t->alpha_per_k * (t->tamb_c - t->t0_c) <= 0)
        return part_error(c, p, err, "the lamp's resistance at tamb must be positive "
                                     "(1 + alpha (tamb - t0))",
                          1.0 + t->alpha_per_k * (t->tamb_c - t->t0_c));
    if (t->rth_k_per_w <= 0)
        return part_error(c, p, err, "rth must be positive", t->rth_k_per_w);
    if (t->cth_j_per_k <= 0)
        return part_error(c, p, err, "cth must be positive", t->cth_j_per_k);
    return RU_OK;
}

static ru_status check_two_nodes(const ru_circuit *c, const ru_part *p, ru_error *err)
{
    if (p->node[0] == p->node[1])
        return ru_error_set(err, RU_EINPUT, c->file, p->line, p->col,
                            "part %s: both terminals are on node %s", p->name,
                            ru_circuit_node_name(c, p->node[0]));
    return RU_OK;
}

/* Values and terminals of part p against circuit c (the name is checked apart). */
static ru_status check_values(const ru_circuit *c, const ru_part *p, ru_error *err)
{
    if ((int)p->type < 0 || p->type >= RU_PART_TYPE_COUNT)
        return ru_error_set(err, RU_EINPUT, c->file, p->line, p->col,
                            "part %s: unknown part type", p->name);
    for (int k = 0; k < part_terminals(p); k++)
        if (p->node[k] < 0 || (size_t)p->node[k] >= c->nnodes)
            return ru_error_set(err, RU_EINPUT, c->file, p->line, p->col,
                                "part %s: terminal %d names no node", p->name, k + 1);
    if (p->type == RU_PART_AMPLIFIER && p->node[3] >= (int)c->nnodes)
        return ru_error_set(err, RU_EINPUT, c->file, p->line, p->col,
                            "part %s: inv names no node", p->name);
    if (!isfinite(p->value) || !isfinite(p->series_ohm) || !isfinite(p->tol))
        return ru_error_set(err, RU_EINPUT, c->file, p->line, p->col,
                            "part %s: values must be finite", p->name);
    if (p->tol < 0 || p->tol >= 1)
        return part_error(c, p, err, "tol must be from 0 up to (not including) 100%",
                          p->tol);
    ru_status s;
    switch (p->type) {
    case RU_PART_RESISTOR:
    case RU_PART_CAPACITOR:
    case RU_PART_INDUCTOR:
        if (p->value <= 0)
            return part_error(c, p, err, "value must be positive", p->value);
        if (p->series_ohm < 0)
            return part_error(c, p, err, "series resistance must not be negative",
                              p->series_ohm);
        return check_two_nodes(c, p, err);
    case RU_PART_SUPPLY:
        if (p->node[0] == p->node[1])
            return ru_error_set(err, RU_EINPUT, c->file, p->line, p->col,
                                "part %s: a supply cannot have both terminals on node %s",
                                p->name, ru_circuit_node_name(c, p->node[0]));
        return check_wave(c, p, err);
    case RU_PART_CURRENT:
        return check_wave(c, p, err);
    case RU_PART_POLY:
        if (p->ncoeffs < 1 || p->ncoeffs > RU_POLY_MAX)
            return ru_error_set(err, RU_EINPUT, c->file, p->line, p->col,
                                "part %s: coeffs needs 1 to %d values", p->name,
                                RU_POLY_MAX);
        if (!finite_all(p->coeffs, p->ncoeffs))
            return ru_error_set(err, RU_EINPUT, c->file, p->line, p->col,
                                "part %s: coeffs must be finite", p->name);
        return RU_OK;
    case RU_PART_AMPLIFIER:
        if (p->node[0] == p->node[2] || p->node[1] == p->node[2])
            return ru_error_set(err, RU_EINPUT, c->file, p->line, p->col,
                                "part %s: in and out must differ from ref", p->name);
        if (p->node[0] == ru_part_inv_node(p))
            return ru_error_set(err, RU_EINPUT, c->file, p->line, p->col,
                                "part %s: in and inv must differ", p->name);
        return check_amp(c, p, err);
    case RU_PART_DIODE:
        s = check_two_nodes(c, p, err);
        return s == RU_OK ? check_diode(c, p, err) : s;
    case RU_PART_THERMAL:
        s = check_two_nodes(c, p, err);
        return s == RU_OK ? check_thermal(c, p, err) : s;
    default:
        return RU_EINPUT;
    }
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
    if (s == RU_OK)
        c->parts[i] = *p;
    return s;
}

ru_status ru_circuit_add_part(ru_circuit *c, const ru_part *p, ru_error *err)
{
    ru_status s = check_part(c, p, err);
    if (s != RU_OK)
        return s;
    if (c->nparts == c->cap_parts) {
        size_t cap = c->cap_parts ? 2 * c->cap_parts : 16;
        ru_part *q = realloc(c->parts, cap * sizeof *q);
        if (!q)
            return ru_error_set(err, RU_ENOMEM, c->file, p->line, p->col,
                                "out of memory adding part %s", p->name);
        c->parts = q;
        c->cap_parts = cap;
    }
    c->parts[c->nparts++] = *p;
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
    for (size_t i = 0; i < c->nparts; i++)
        if (strcmp(c->parts[i].name, name) == 0)
            return (int)i;
    return -1;
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
    if (!isfinite(stray_f) || stray_f <= 0)
        return RU_ERANGE;
    c->stray_f = stray_f;
    return RU_OK;
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
        switch (p->type) {
        case RU_PART_RESISTOR:
        case RU_PART_INDUCTOR:
        case RU_PART_SUPPLY:
        case RU_PART_POLY:
        case RU_PART_DIODE:
        case RU_PART_THERMAL:
            uf_join(parent, p->node[0], p->node[1]);
            break;
        case RU_PART_AMPLIFIER:
            uf_join(parent, p->node[1], p->node[2]); /* output to ref */
            if (p->amp.law == RU_LAW_EXP_STAGE) /* input junction, in to inv */
                uf_join(parent, p->node[0], ru_part_inv_node(p));
            break;
        default:
            break;
        }
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
