/* tone.c: the settled tone end to end (ringup/tone.h): compile, operating point,
 * periodic steady state, one period of every node to steady.csv.
 *
 * Order: system -> probe -> operating point (its failure only removes the
 * describing-function start; a given start state still works) -> shooting Newton
 * -> CSV. The tone owns the system and the steady state; nothing is shared. */
#include "analysis/tone_impl.h"

#include "ringup/smallsig.h"
#include "ringup/system.h"
#include "ringup/wavefile.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>


void ru_tone_request_default(ru_tone_request *rq)
{
    memset(rq, 0, sizeof *rq);
    rq->temp_c = 27.0;
    rq->noise_factor = 1.0;
}

void ru_tone_destroy(ru_tone *t)
{
    if (!t)
        return;
    ru_ppv_destroy(t->ppv);
    ru_steady_destroy(t->steady);
    ru_system_destroy(t->sys);
    free(t->x_op);
    free(t);
}

const char *ru_tone_probe(const ru_tone *t)
{
    return t->probe;
}

void ru_tone_steady(const ru_tone *t, ru_steady_view *v)
{
    ru_steady_get(t->steady, v);
}

void ru_tone_spectrum_get(const ru_tone *t, ru_tone_spectrum *sp)
{
    *sp = t->spec;
}

/* Harmonics 1..10 of the probe's grid (exactly one period). */
static void tone_harmonics(ru_tone *t)
{
    ru_steady_view v;
    ru_steady_get(t->steady, &v);
    ru_tone_spectrum *sp = &t->spec;
    double amp[RU_HARMONICS], thd = NAN;
    sp->fundamental_v = sp->thd_percent = NAN;
    for (int h = 0; h < RU_HARMONICS - 1; h++)
        sp->harmonics_dbc[h] = NAN;
    if (!v.found || ru_harmonics(v.grid_probe, v.ngrid, 1, RU_HARMONICS, amp, &thd) != RU_OK)
        return;
    sp->fundamental_v = amp[0];
    sp->thd_percent = thd;
    for (int h = 1; h < RU_HARMONICS && amp[0] > 0; h++)
        sp->harmonics_dbc[h - 1] = amp[h] > 0 ? 20.0 * log10(amp[h] / amp[0]) : -INFINITY;
}

const ru_system *ru_tone_system(const ru_tone *t)
{
    return t->sys;
}

/* The file's probe, or the first free node. */
static ru_status tone_probe(const ru_circuit *c, ru_tone *t, int *pos, int *neg,
                            ru_error *err)
{
    const ru_measure_opts *mo = ru_circuit_measure_opts_const(c);
    *pos = mo->probe_pos;
    *neg = mo->probe_neg;
    for (size_t i = 1; *pos < 0 && i < ru_circuit_node_count(c); i++)
        if (ru_system_node_state(t->sys, (int)i) >= 0) {
            *pos = (int)i;
            *neg = 0;
        }
    if (*pos < 0)
        return ru_error_set(err, RU_EINPUT, ru_circuit_file(c), 0, 0,
                            "the circuit has no free node to probe");
    if (*neg > 0)
        snprintf(t->probe, sizeof t->probe, "%s-%s", ru_circuit_node_name(c, *pos),
                 ru_circuit_node_name(c, *neg));
    else
        snprintf(t->probe, sizeof t->probe, "%s", ru_circuit_node_name(c, *pos));
    return RU_OK;
}

/* One period of every node (sources at their final values) into DIR/steady.csv. */
static ru_status tone_csv(const ru_tone *t, const char *dir, ru_error *err)
{
    ru_steady_view v;
    ru_steady_get(t->steady, &v);
    char path[4096];
    if ((size_t)snprintf(path, sizeof path, "%s/steady.csv", dir) >= sizeof path)
        return ru_error_set(err, RU_EIO, NULL, 0, 0, "output folder name too long");
    ru_csv *w = NULL;
    ru_status st = ru_csv_open(t->sys, path, &w, err);
    if (st != RU_OK)
        return st;
    ru_csv_set_dc(w, 1);
    for (size_t k = 0; k < v.ngrid && st == RU_OK; k++)
        st = ru_csv_sample(w, v.period_s * (double)k / (double)v.ngrid,
                           v.grid_x + k * v.n, v.n);
    ru_status cs = ru_csv_close(w, st == RU_OK, err);
    return st != RU_OK ? ru_error_set(err, st, NULL, 0, 0, "cannot write '%s'", path) : cs;
}

ru_status ru_tone_run(const ru_circuit *c, const ru_tone_request *rq, ru_tone **out,
                      ru_error *err)
{
    *out = NULL;
    ru_tone *t = calloc(1, sizeof *t);
    if (!t)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "out of memory");
    ru_status st = ru_system_create(c, &t->sys, err);
    int pos = -1, neg = 0;
    if (st == RU_OK)
        st = tone_probe(c, t, &pos, &neg, err);
    if (st == RU_OK) {
        size_t n = ru_system_size(t->sys);
        ru_oppoint_stats ops;
        ru_error e;
        t->x_op = calloc(n ? n : 1, sizeof *t->x_op);
        if (!t->x_op)
            st = ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "out of memory");
        else if (ru_oppoint_solve(t->sys, t->x_op, 0, &ops, &e) != RU_OK) {
            free(t->x_op);
            t->x_op = NULL;
        }
    }
    if (st == RU_OK) {
        ru_steady_opts o;
        ru_steady_opts_default(&o);
        o.probe_pos = pos;
        o.probe_neg = neg;
        if (rq->rtol > 0)
            o.rtol = rq->rtol;
        if (rq->grid > 0)
            o.grid = rq->grid;
        o.x_start = rq->x_start;
        o.period_start_s = rq->period_start_s;
        if (!t->x_op && !rq->x_start)
            st = ru_error_set(err, RU_ENOCONVERGE, ru_circuit_file(c), 0, 0,
                              "no operating point, so no describing-function start for "
                              "the periodic steady state");
        else
            st = ru_steady_solve(t->sys, t->x_op, &o, &t->steady, err);
    }
    if (st == RU_OK)
        tone_harmonics(t);
    if (st == RU_OK && rq->jitter)
        st = ru_tone_noise_run(c, t, rq, err);
    if (st == RU_OK && rq->out_dir) {
        ru_steady_view v;
        ru_steady_get(t->steady, &v);
        if (v.found)
            st = tone_csv(t, rq->out_dir, err);
    }
    if (st != RU_OK) {
        ru_tone_destroy(t);
        return st;
    }
    *out = t;
    return RU_OK;
}
