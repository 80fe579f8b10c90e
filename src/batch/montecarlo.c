/* montecarlo.c: Monte Carlo over part tolerances (see ringup/montecarlo.h).
 *
 * Invariants: a deviation is a pure function of (seed, sample, part index), so the
 * draws never depend on threads or scheduling; each unit is built, run and
 * freed inside ru_mc_unit_record, which returns only its record (one JSON line,
 * ringup/units.h), and a result is made of records alone (ru_mc_result_add), so
 * memory grows only with the compact per-unit figures, and a study run here, in
 * shards or on MPI ranks gives the same result; the result owns what it returns. */
#include "ringup/montecarlo.h"

#include "base/hash.h"

#include "batch/jsonl.h"
#include "ringup/batch.h"
#include "ringup/params.h"
#include "ringup/units.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define NORMAL_TRIES 64    /* rejection tries (one fails with p 0.0027) */

struct ru_mc_result {
    size_t samples;          /* units */
    size_t started;          /* units that started */
    size_t settled;          /* started units that settled */
    size_t failed;           /* units whose run ended in an error */
    size_t ntol;             /* parts with a tolerance */
    char (*tol_name)[RU_PARAM_NAME_MAX]; /* their names ("RS", "Q1.beta"), circuit order */
    char (*tol_param)[RU_PARAM_NAME_MAX]; /* their PART.KEY ("RS.value", "Q1.beta") */
    double *values;          /* samples x ntol drawn values (part's unit) */
    ru_mc_unit *units;       /* samples records */
    unsigned char *have;     /* samples flags: 1 when the unit's record is in */
    size_t done;             /* records in */
    ru_mc_stats stats[RU_MC_NFIG]; /* over started units */
};

static uint64_t draw_hash(uint64_t seed, uint64_t sample, uint64_t part, uint64_t k)
{
    return ru_hash4(seed, sample, part, k);
}

double ru_mc_deviation(uint64_t seed, uint64_t sample, uint64_t part, ru_mc_dist dist,
                       double tol)
{
    if (!(tol > 0))
        return 0.0;
    if (dist == RU_MC_UNIFORM)
        return tol * (2.0 * ru_hash_uniform(draw_hash(seed, sample, part, 0)) - 1.0);
    for (uint64_t k = 0; k < NORMAL_TRIES; k++) { /* Box-Muller, rejected beyond 3 sigma */
        double z = ru_hash_normal(draw_hash(seed, sample, part, k));
        if (fabs(z) <= 3.0)
            return tol * z / 3.0;
    }
    return 0.0;
}

/* Whether Monte Carlo draws p's value with its tol: resistors, capacitors,
 * inductors, and a crystal's series-resonant frequency. */
static int value_drawn(const ru_part *p)
{
    return p->tol > 0 && (p->type <= RU_PART_INDUCTOR || p->type == RU_PART_CRYSTAL);
}

/* A crystal's motional resistances scaled by one draw of its esr-tol (stream
 * offset 2^32 from the value's, so the two draws are independent). */
static void draw_esr(ru_part *p, uint64_t seed, size_t sample, size_t i, ru_mc_dist dist)
{
    if (p->type != RU_PART_CRYSTAL || !(p->crystal.esr_tol > 0))
        return;
    double f = 1.0 + ru_mc_deviation(seed, sample, (uint64_t)i | (1ull << 32), dist,
                                     p->crystal.esr_tol);
    if (p->crystal.esr_ohm > 0)
        p->crystal.esr_ohm *= f;
    else
        p->crystal.q /= f; /* esr = 2 pi fs L / q */
    for (int k = 0; k < p->crystal.narms; k++)
        p->crystal.arm_esr_ohm[k] *= f;
}

/* The stream of part i's key tolerance on `key`: FNV-1a of the spelling in the high
 * word with its top bit set (never the value's stream i or the esr's i | 2^32), so a
 * draw does not move when other keys get tolerances or their order changes. */
static uint64_t key_stream(size_t i, const char *key)
{
    uint64_t h = 14695981039346656037ull;
    for (const unsigned char *k = (const unsigned char *)key; *k; k++)
        h = (h ^ *k) * 1099511628211ull;
    return (uint64_t)i | (((h & 0x7fffffffull) | 0x80000000ull) << 32);
}

/* Whether part p has anything Monte Carlo draws. */
static int any_drawn(const ru_part *p)
{
    if (value_drawn(p) || (p->type == RU_PART_CRYSTAL && p->crystal.esr_tol > 0))
        return 1;
    for (int k = 0; k < p->nkey_tols; k++)
        if (p->key_tol[k].tol > 0)
            return 1;
    return 0;
}

/* The quantities drawn, in order: per part, its value, then its key tolerances. */
typedef struct drawn {
    size_t part;
    int key; /* -1: the value; else the index in key_tol */
} drawn;

static size_t list_drawn(const ru_circuit *c, drawn *out)
{
    size_t n = 0;
    for (size_t i = 0; i < ru_circuit_part_count(c); i++) {
        const ru_part *p = ru_circuit_part(c, i);
        if (value_drawn(p)) {
            if (out)
                out[n] = (drawn){i, -1};
            n++;
        }
        for (int k = 0; k < p->nkey_tols; k++)
            if (p->key_tol[k].tol > 0) {
                if (out)
                    out[n] = (drawn){i, k};
                n++;
            }
    }
    return n;
}

static double drawn_value(const ru_part *p, int k)
{
    if (k < 0)
        return p->value;
    const double *v = ru_part_key_cptr(p, p->key_tol[k].key, NULL);
    return v ? *v : NAN;
}

ru_status ru_mc_sample_circuit(const ru_circuit *c, uint64_t seed, size_t sample,
                               ru_mc_dist dist, ru_circuit **out, ru_error *err)
{
    *out = NULL;
    ru_circuit *v = NULL;
    if (ru_circuit_clone(c, &v) != RU_OK)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "out of memory cloning the circuit");
    ru_status s = RU_OK;
    for (size_t i = 0; sample > 0 && s == RU_OK && i < ru_circuit_part_count(v); i++) {
        ru_part p = *ru_circuit_part(v, i);
        if (!any_drawn(&p))
            continue;
        if (value_drawn(&p))
            p.value *= 1.0 + ru_mc_deviation(seed, sample, i, dist, p.tol);
        draw_esr(&p, seed, sample, i, dist);
        for (int k = 0; k < p.nkey_tols; k++) {
            double *slot = ru_part_key_ptr(&p, p.key_tol[k].key, NULL);
            if (slot)
                *slot *= 1.0 + ru_mc_deviation(seed, sample, key_stream(i, p.key_tol[k].key),
                                               dist, p.key_tol[k].tol);
        }
        s = ru_circuit_replace_part(v, i, &p, err);
    }
    if (s != RU_OK)
        ru_circuit_destroy(v);
    else
        *out = v;
    return s;
}

void ru_mc_opts_default(ru_mc_opts *o)
{
    memset(o, 0, sizeof *o);
    o->samples = 100;
    o->seed = 1;
    o->dist = RU_MC_UNIFORM;
    ru_run_request_default(&o->request);
}

const char *ru_mc_figure_key(ru_mc_figure f)
{
    static const char *const keys[RU_MC_NFIG] = {"startup_time_s", "growth_rate_per_s",
                                                 "frequency_hz", "settled_amplitude_v",
                                                 "thd_percent"};
    return (unsigned)f < RU_MC_NFIG ? keys[f] : "";
}

static int cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

static double percentile(const double *sorted, size_t n, double q)
{
    double pos = q * (double)(n - 1), f = floor(pos);
    size_t i = (size_t)f;
    return i + 1 < n ? sorted[i] + (pos - f) * (sorted[i + 1] - sorted[i]) : sorted[n - 1];
}

void ru_mc_stats_of(const double *x, size_t n, ru_mc_stats *s)
{
    double *v = malloc((n ? n : 1) * sizeof *v);
    size_t m = 0;
    for (size_t i = 0; v && i < n; i++)
        if (isfinite(x[i]))
            v[m++] = x[i];
    s->n = m;
    s->min = s->mean = s->max = s->std = s->p05 = s->p95 = NAN;
    if (m > 0) {
        qsort(v, m, sizeof *v, cmp_double);
        double sum = 0, ss = 0;
        for (size_t i = 0; i < m; i++)
            sum += v[i];
        s->mean = sum / (double)m;
        for (size_t i = 0; i < m; i++)
            ss += (v[i] - s->mean) * (v[i] - s->mean);
        s->std = m > 1 ? sqrt(ss / (double)(m - 1)) : 0.0;
        s->min = v[0];
        s->max = v[m - 1];
        s->p05 = percentile(v, m, 0.05);
        s->p95 = percentile(v, m, 0.95);
    }
    free(v);
}

void ru_mc_result_destroy(ru_mc_result *r)
{
    if (!r)
        return;
    free(r->tol_name);
    free(r->tol_param);
    free(r->values);
    free(r->units);
    free(r->have);
    free(r);
}

/* An empty result sized for o->samples units and c's toleranced parts. */
static ru_status result_new(const ru_circuit *c, size_t samples, ru_mc_result **out)
{
    ru_mc_result *r = calloc(1, sizeof *r);
    size_t nd = list_drawn(c, NULL);
    drawn *d = calloc(nd ? nd : 1, sizeof *d);
    if (r) {
        r->samples = samples;
        r->tol_name = calloc(nd ? nd : 1, sizeof *r->tol_name);
        r->tol_param = calloc(nd ? nd : 1, sizeof *r->tol_param);
        r->units = calloc(samples, sizeof *r->units);
        r->have = calloc(samples, 1);
    }
    if (r && d && r->tol_name && r->tol_param) {
        r->ntol = list_drawn(c, d);
        for (size_t k = 0; k < r->ntol; k++) {
            const ru_part *p = ru_circuit_part(c, d[k].part);
            const char *key = d[k].key < 0 ? ru_part_value_key(p) : p->key_tol[d[k].key].key;
            if (d[k].key < 0)
                snprintf(r->tol_name[k], RU_PARAM_NAME_MAX, "%s", p->name);
            else
                snprintf(r->tol_name[k], RU_PARAM_NAME_MAX, "%s.%s", p->name, key);
            snprintf(r->tol_param[k], RU_PARAM_NAME_MAX, "%s.%s", p->name, key ? key : "");
        }
    }
    free(d);
    if (r && r->ntol)
        r->values = calloc(samples * r->ntol, sizeof *r->values);
    if (!r || !r->tol_name || !r->tol_param || !r->units || !r->have ||
        (r->ntol && !r->values)) {
        ru_mc_result_destroy(r);
        return RU_ENOMEM;
    }
    for (size_t i = 0; i < samples; i++)
        r->units[i].index = i;
    *out = r;
    return RU_OK;
}

/* The record of a finished unit: its figures (or error) and drawn values. */
static ru_status unit_record(size_t index, const ru_batch_item *it, const ru_circuit *cv,
                             const ru_circuit *c, char **line)
{
    jl_buf b;
    jl_init(&b);
    jl_int(&b, "unit", (long long)index);
    jl_str(&b, "status", ru_status_str(it->status));
    if (it->status != RU_OK) {
        char msg[256];
        ru_error_format(&it->error, msg, sizeof msg);
        jl_str(&b, "error", msg);
    }
    const ru_measure_result *m = &it->report.meas;
    int ok = it->status == RU_OK;
    jl_str(&b, "verdict", ru_verdict_name(ok ? it->report.verdict : RU_VERDICT_UNDECIDED));
    jl_bool(&b, "started", ok && m->started);
    jl_bool(&b, "settled", ok && m->settled);
    double fig[RU_MC_NFIG] = {m->startup_time_s, m->growth_rate_per_s, m->frequency_hz,
                              m->settled_amplitude_v, m->thd_percent};
    for (int f = 0; f < RU_MC_NFIG; f++)
        jl_num(&b, ru_mc_figure_key((ru_mc_figure)f), ok ? fig[f] : NAN);
    jl_num(&b, "predicted_growth_rate_per_s",
           it->report.pred.have_poles ? it->report.pred.growth_rate_per_s : NAN);
    jl_open(&b, "values", '{');
    size_t nd = list_drawn(c, NULL);
    drawn *d = calloc(nd ? nd : 1, sizeof *d);
    if (!d) {
        free(b.s);
        return RU_ENOMEM;
    }
    list_drawn(c, d);
    for (size_t k = 0; k < nd; k++) {
        const ru_part *p = ru_circuit_part(c, d[k].part);
        char name[RU_PARAM_NAME_MAX];
        if (d[k].key < 0)
            snprintf(name, sizeof name, "%s", p->name);
        else
            snprintf(name, sizeof name, "%s.%s", p->name, p->key_tol[d[k].key].key);
        jl_num(&b, name, cv ? drawn_value(ru_circuit_part(cv, d[k].part), d[k].key) : NAN);
    }
    free(d);
    jl_close(&b, '}');
    return jl_finish(&b, line);
}

ru_status ru_mc_unit_record(const ru_circuit *c, const ru_mc_opts *o, size_t i,
                            char **line, ru_error *err)
{
    *line = NULL;
    ru_batch_item it;
    memset(&it, 0, sizeof it);
    it.request = o->request;
    ru_circuit *cv = NULL;
    it.status = ru_mc_sample_circuit(c, o->seed, i, o->dist, &cv, &it.error);
    if (cv) {
        it.circuit = cv;
        ru_batch_run(&it, 1, 1);
    }
    ru_status s = RU_OK;
    if (it.status == RU_ESTOPPED)
        s = RU_ESTOPPED;
    else if (unit_record(i, &it, cv, c, line) != RU_OK)
        s = ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "Monte Carlo: out of memory");
    ru_circuit_destroy(cv);
    return s;
}

static ru_status bad_record(ru_error *err, const char *what)
{
    return ru_error_set(err, RU_EINPUT, NULL, 0, 0, "not a Monte Carlo record of this "
                        "study: %s", what);
}

static ru_status read_unit(ru_mc_result *r, const jv *v, ru_error *err)
{
    double idx = jv_num(jv_get(v, "unit"), NAN);
    const char *st = jv_str(jv_get(v, "status")), *e = jv_str(jv_get(v, "error"));
    const jv *values = jv_get(v, "values"), *started = jv_get(v, "started");
    const jv *settled = jv_get(v, "settled");
    const char *vd = jv_str(jv_get(v, "verdict"));
    if (!(idx >= 0 && idx == floor(idx)) || !st || !started || started->type != JV_BOOL ||
        !settled || settled->type != JV_BOOL || !vd || !values || values->type != JV_OBJ)
        return bad_record(err, "unit, status, verdict, started, settled or values missing");
    if (idx >= (double)r->samples)
        return ru_error_set(err, RU_EINPUT, NULL, 0, 0, "unit %.0f is beyond the %zu units "
                            "of this study", idx, r->samples);
    size_t i = (size_t)idx;
    if (r->have[i])
        return ru_error_set(err, RU_EINPUT, NULL, 0, 0, "unit %zu is there twice", i);
    ru_mc_unit *u = &r->units[i];
    u->status = RU_STATUS_COUNT;
    for (int s = 0; s < RU_STATUS_COUNT; s++)
        if (!strcmp(st, ru_status_str((ru_status)s)))
            u->status = (ru_status)s;
    if (u->status == RU_STATUS_COUNT || (u->status != RU_OK && !e) || values->n != r->ntol)
        return bad_record(err, "bad status, error or values");
    snprintf(u->error, sizeof u->error, "%s", u->status != RU_OK ? e : "");
    int known = 0;
    for (int k = RU_VERDICT_STARTED; k <= RU_VERDICT_DRIVEN && !known; k++)
        if (!strcmp(vd, ru_verdict_name((ru_verdict)k))) {
            u->verdict = (ru_verdict)k;
            known = 1;
        }
    if (!known)
        return bad_record(err, "unknown verdict");
    u->started = started->num != 0;
    u->settled = settled->num != 0;
    for (int f = 0; f < RU_MC_NFIG; f++)
        u->fig[f] = jv_num(jv_get(v, ru_mc_figure_key((ru_mc_figure)f)), NAN);
    u->predicted_growth_per_s = jv_num(jv_get(v, "predicted_growth_rate_per_s"), NAN);
    for (size_t k = 0; k < r->ntol; k++) {
        if (strcmp(values->key[k], r->tol_name[k]) != 0)
            return bad_record(err, "its drawn values name other parts");
        r->values[i * r->ntol + k] = jv_num(&values->item[k], NAN);
    }
    r->have[i] = 1;
    r->done++;
    r->started += (size_t)u->started;
    r->settled += (size_t)(u->started && u->settled);
    r->failed += u->status != RU_OK;
    return RU_OK;
}

ru_status ru_mc_result_add(ru_mc_result *r, const char *line, ru_error *err)
{
    jv *v = NULL;
    char why[128];
    if (jv_parse(line, strlen(line), &v, why, sizeof why) != RU_OK)
        return ru_error_set(err, RU_EINPUT, NULL, 0, 0, "not a JSON line: %s", why);
    ru_status s = read_unit(r, v, err);
    jv_free(v);
    return s;
}

void ru_mc_result_finish(ru_mc_result *r)
{
    double *x = malloc((r->samples ? r->samples : 1) * sizeof *x);
    for (int f = 0; f < RU_MC_NFIG; f++) {
        for (size_t i = 0; x && i < r->samples; i++)
            x[i] = r->have[i] && r->units[i].started ? r->units[i].fig[f] : NAN;
        ru_mc_stats_of(x, x ? r->samples : 0, &r->stats[f]);
    }
    free(x);
}

ru_status ru_mc_check(const ru_circuit *c, const ru_mc_opts *o, ru_error *err)
{
    if (o->samples < 1 || o->samples > RU_MC_MAX_SAMPLES)
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0,
                            "Monte Carlo: %zu samples asked, from 1 to %d allowed (only the "
                            "figures of each unit are kept, but runs take time)",
                            o->samples, RU_MC_MAX_SAMPLES);
    if (o->request.keep || o->request.out_dir || o->request.wav_path)
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0,
                            "Monte Carlo: units write no files and keep no pictures");
    for (size_t i = 0; i < ru_circuit_part_count(c); i++)
        if (any_drawn(ru_circuit_part(c, i)))
            return RU_OK;
    return ru_error_set(err, RU_EINPUT, ru_circuit_file(c), 0, 0,
                        "Monte Carlo: no part has a tolerance (give resistors, capacitors "
                        "or inductors a tol, e.g. tol: 1%%, a crystal tol: 20ppm or "
                        "esr-tol: 20%%, a supply tol: 5%%, any part tol: {KEY: 10%%})");
}

ru_status ru_mc_result_create(const ru_circuit *c, const ru_mc_opts *o, ru_mc_result **out,
                              ru_error *err)
{
    *out = NULL;
    ru_status s = ru_mc_check(c, o, err);
    if (s == RU_OK && result_new(c, o->samples, out) != RU_OK)
        s = ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "Monte Carlo: out of memory");
    return s;
}

typedef struct mc_job {
    const ru_circuit *c;
    const ru_mc_opts *o;
    ru_mc_result *r;
} mc_job;

static ru_status job_run(void *ctx, size_t i, char **line, ru_error *err)
{
    mc_job *j = ctx;
    return ru_mc_unit_record(j->c, j->o, i, line, err);
}

static ru_status job_accept(void *ctx, size_t i, const char *line, ru_error *err)
{
    (void)i;
    mc_job *j = ctx;
    return ru_mc_result_add(j->r, line, err);
}

ru_status ru_mc_run(const ru_circuit *c, const ru_mc_opts *o, ru_mc_result **out,
                    ru_error *err)
{
    mc_job j = {.c = c, .o = o};
    ru_status s = ru_mc_result_create(c, o, &j.r, err);
    if (s != RU_OK)
        return s;
    ru_units_job job = {.count = o->samples, .threads = o->threads, .stop = o->request.stop,
                        .run = job_run, .accept = job_accept, .ctx = &j};
    s = ru_units_run(&job, NULL, err);
    if (s != RU_OK) {
        ru_mc_result_destroy(j.r);
        return s;
    }
    ru_mc_result_finish(j.r);
    *out = j.r;
    return RU_OK;
}

size_t ru_mc_sample_count(const ru_mc_result *r) { return r->samples; }
size_t ru_mc_done_count(const ru_mc_result *r) { return r->done; }
int ru_mc_unit_done(const ru_mc_result *r, size_t i) { return i < r->samples && r->have[i]; }
size_t ru_mc_started_count(const ru_mc_result *r) { return r->started; }
size_t ru_mc_settled_count(const ru_mc_result *r) { return r->settled; }
size_t ru_mc_failed_count(const ru_mc_result *r) { return r->failed; }
size_t ru_mc_tol_count(const ru_mc_result *r) { return r->ntol; }

const ru_mc_unit *ru_mc_get_unit(const ru_mc_result *r, size_t i)
{
    return i < r->samples ? &r->units[i] : NULL;
}

const ru_mc_stats *ru_mc_get_stats(const ru_mc_result *r, ru_mc_figure f)
{
    return (unsigned)f < RU_MC_NFIG ? &r->stats[f] : NULL;
}

const char *ru_mc_tol_param(const ru_mc_result *r, size_t k)
{
    return k < r->ntol ? r->tol_param[k] : NULL;
}

const char *ru_mc_tol_name(const ru_mc_result *r, size_t k)
{
    return k < r->ntol ? r->tol_name[k] : NULL;
}

double ru_mc_value(const ru_mc_result *r, size_t i, size_t k)
{
    return i < r->samples && k < r->ntol ? r->values[i * r->ntol + k] : NAN;
}

size_t ru_mc_latest(const ru_mc_result *r, size_t *idx, size_t max)
{
    size_t n = 0;
    for (size_t i = 0; i < r->samples; i++) {
        if (!r->units[i].started)
            continue;
        double t = r->units[i].fig[RU_MC_STARTUP];
        size_t pos = n < max ? n++ : max; /* insertion into the kept top `max` */
        while (pos > 0) {
            double tp = r->units[idx[pos - 1]].fig[RU_MC_STARTUP];
            int later = isfinite(t) && (!isfinite(tp) || t > tp);
            if (!later)
                break;
            if (pos < max)
                idx[pos] = idx[pos - 1];
            pos--;
        }
        if (pos < max)
            idx[pos] = i;
    }
    return n;
}
