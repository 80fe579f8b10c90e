/* montecarlo.c: Monte Carlo over part tolerances (see ringup/montecarlo.h).
 *
 * Invariants: a deviation is a pure function of (seed, sample, part index), so the
 * draws never depend on threads or chunking; units are run by ru_batch_run in
 * chunks, each chunk's circuits and reports freed before the next, so memory grows
 * only with the compact per-unit records; the result owns everything it returns. */
#include "ringup/montecarlo.h"

#include "base/hash.h"

#include "ringup/batch.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define CHUNK_PER_THREAD 8 /* units per thread in one ru_batch_run call */
#define NORMAL_TRIES 64    /* rejection tries (one fails with p 0.0027) */

struct ru_mc_result {
    size_t samples;          /* units */
    size_t started;          /* units that started */
    size_t settled;          /* started units that settled */
    size_t failed;           /* units whose run ended in an error */
    size_t ntol;             /* parts with a tolerance */
    char (*tol_name)[RU_NAME_MAX]; /* their names, circuit order */
    int *tol_part;           /* their part indices */
    double *values;          /* samples x ntol drawn values (part's unit) */
    ru_mc_unit *units;       /* samples records */
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
        int esr = p.type == RU_PART_CRYSTAL && p.crystal.esr_tol > 0;
        if (!value_drawn(&p) && !esr)
            continue;
        if (value_drawn(&p))
            p.value *= 1.0 + ru_mc_deviation(seed, sample, i, dist, p.tol);
        draw_esr(&p, seed, sample, i, dist);
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
    free(r->tol_part);
    free(r->values);
    free(r->units);
    free(r);
}

/* An empty result sized for o->samples units and c's toleranced parts. */
static ru_status result_new(const ru_circuit *c, size_t samples, ru_mc_result **out)
{
    ru_mc_result *r = calloc(1, sizeof *r);
    size_t np = ru_circuit_part_count(c);
    if (r) {
        r->samples = samples;
        r->tol_name = calloc(np ? np : 1, sizeof *r->tol_name);
        r->tol_part = calloc(np ? np : 1, sizeof *r->tol_part);
        r->units = calloc(samples, sizeof *r->units);
    }
    for (size_t i = 0; r && r->tol_name && r->tol_part && i < np; i++) {
        const ru_part *p = ru_circuit_part(c, i);
        if (value_drawn(p)) {
            snprintf(r->tol_name[r->ntol], RU_NAME_MAX, "%s", p->name);
            r->tol_part[r->ntol++] = (int)i;
        }
    }
    if (r && r->ntol)
        r->values = calloc(samples * r->ntol, sizeof *r->values);
    if (!r || !r->tol_name || !r->tol_part || !r->units || (r->ntol && !r->values)) {
        ru_mc_result_destroy(r);
        return RU_ENOMEM;
    }
    *out = r;
    return RU_OK;
}

/* The compact record of a finished batch item. */
static void keep_unit(ru_mc_result *r, size_t index, const ru_batch_item *it)
{
    ru_mc_unit *u = &r->units[index];
    u->index = index;
    u->status = it->status;
    for (int f = 0; f < RU_MC_NFIG; f++)
        u->fig[f] = NAN;
    u->predicted_growth_per_s = it->report.pred.have_poles
                                    ? it->report.pred.growth_rate_per_s : NAN;
    u->verdict = it->status == RU_OK ? it->report.verdict : RU_VERDICT_UNDECIDED;
    if (it->status != RU_OK) {
        ru_error_format(&it->error, u->error, sizeof u->error);
        r->failed++;
        return;
    }
    const ru_measure_result *m = &it->report.meas;
    u->started = m->started != 0;
    u->settled = m->settled != 0;
    r->started += (size_t)u->started;
    r->settled += (size_t)(u->started && u->settled);
    double fig[RU_MC_NFIG] = {m->startup_time_s, m->growth_rate_per_s, m->frequency_hz,
                              m->settled_amplitude_v, m->thd_percent};
    memcpy(u->fig, fig, sizeof fig);
}

/* Prepares units [first, first + n) into items (a unit that cannot be built
 * keeps its error in its item). */
static void prepare_chunk(const ru_circuit *c, const ru_mc_opts *o, ru_mc_result *r,
                          size_t first, size_t n, ru_batch_item *items, ru_circuit **cv)
{
    for (size_t j = 0; j < n; j++) {
        size_t idx = first + j;
        memset(&items[j], 0, sizeof items[j]);
        items[j].request = o->request;
        items[j].status = ru_mc_sample_circuit(c, o->seed, idx, o->dist, &cv[j],
                                               &items[j].error);
        items[j].circuit = cv[j];
        for (size_t k = 0; k < r->ntol; k++)
            r->values[idx * r->ntol + k] =
                cv[j] ? ru_circuit_part(cv[j], (size_t)r->tol_part[k])->value : NAN;
    }
}

/* Runs the built items of a chunk (compacted so failed builds are skipped). */
static void run_chunk(ru_batch_item *items, size_t n, ru_batch_item *tmp, int threads)
{
    size_t m = 0;
    for (size_t j = 0; j < n; j++)
        if (items[j].circuit)
            tmp[m++] = items[j];
    ru_batch_run(tmp, m, threads);
    m = 0;
    for (size_t j = 0; j < n; j++)
        if (items[j].circuit)
            items[j] = tmp[m++];
}

static void finish_stats(ru_mc_result *r)
{
    double *x = malloc(r->samples * sizeof *x);
    for (int f = 0; f < RU_MC_NFIG; f++) {
        for (size_t i = 0; x && i < r->samples; i++)
            x[i] = r->units[i].started ? r->units[i].fig[f] : NAN;
        ru_mc_stats_of(x, x ? r->samples : 0, &r->stats[f]);
    }
    free(x);
}

static ru_status check_opts(const ru_circuit *c, const ru_mc_opts *o, ru_error *err)
{
    if (o->samples < 1 || o->samples > RU_MC_MAX_SAMPLES)
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0,
                            "Monte Carlo: %zu samples asked, from 1 to %d allowed (only the "
                            "figures of each unit are kept, but runs take time)",
                            o->samples, RU_MC_MAX_SAMPLES);
    if (o->request.keep || o->request.out_dir || o->request.wav_path)
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0,
                            "Monte Carlo: units write no files and keep no pictures");
    for (size_t i = 0; i < ru_circuit_part_count(c); i++) {
        const ru_part *p = ru_circuit_part(c, i);
        if (p->tol > 0 || (p->type == RU_PART_CRYSTAL && p->crystal.esr_tol > 0))
            return RU_OK;
    }
    return ru_error_set(err, RU_EINPUT, ru_circuit_file(c), 0, 0,
                        "Monte Carlo: no part has a tolerance (give resistors, capacitors "
                        "or inductors a tol, e.g. tol: 1%%, a crystal tol: 20ppm or "
                        "esr-tol: 20%%)");
}

ru_status ru_mc_run(const ru_circuit *c, const ru_mc_opts *o, ru_mc_result **out,
                    ru_error *err)
{
    *out = NULL;
    ru_status s = check_opts(c, o, err);
    if (s != RU_OK)
        return s;
    ru_mc_result *r = NULL;
    int threads = o->threads > 0 ? o->threads : ru_batch_cpu_count();
    size_t chunk = (size_t)threads * CHUNK_PER_THREAD;
    ru_batch_item *items = calloc(chunk, sizeof *items), *tmp = calloc(chunk, sizeof *tmp);
    ru_circuit **cv = calloc(chunk, sizeof *cv);
    if (!items || !tmp || !cv || result_new(c, o->samples, &r) != RU_OK)
        s = ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "Monte Carlo: out of memory");
    for (size_t first = 0; s == RU_OK && first < o->samples; first += chunk) {
        size_t n = o->samples - first < chunk ? o->samples - first : chunk;
        prepare_chunk(c, o, r, first, n, items, cv);
        run_chunk(items, n, tmp, threads);
        for (size_t j = 0; j < n; j++) {
            keep_unit(r, first + j, &items[j]);
            ru_circuit_destroy(cv[j]);
            cv[j] = NULL;
        }
    }
    if (s == RU_OK) {
        finish_stats(r);
        *out = r;
    } else {
        ru_mc_result_destroy(r);
    }
    free(items);
    free(tmp);
    free(cv);
    return s;
}

size_t ru_mc_sample_count(const ru_mc_result *r) { return r->samples; }
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
