/* envelope.c: streaming envelope of a sampled oscillation, one point per cycle.
 *
 * Extrema are found by following the sign of the waveform's movement with
 * hysteresis: a maximum is confirmed once the signal has fallen from it by more than
 * RU_ENV_HYST of the swing since the previous minimum (and by more than floor_v), and
 * likewise for minima. This ignores a slowly moving DC level and noise well below
 * the swing. Each confirmed extreme sample is refined by the parabola through it and
 * its two neighbours. A maximum and the minimum that follows it give one envelope
 * point: amplitude (max - min)/2 at the time midway between them.
 * Invariant: memory is O(envelope points); no sample is stored. */
#include "measure_impl.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

void ru_envelope_init(ru_envelope *e, double floor_v)
{
    memset(e, 0, sizeof *e);
    e->hi.sign = 1;
    e->lo.sign = -1;
    e->floor_v = floor_v > 0.0 ? floor_v : 0.0;
}

void ru_envelope_free(ru_envelope *e)
{
    if (!e)
        return;
    free(e->env_t);
    free(e->env_a);
    e->env_t = e->env_a = NULL;
    e->n_env = e->cap_env = 0;
}

static ru_ext ext_new(uint64_t idx, double t_s, double v, double tlast_s, double vlast)
{
    ru_ext x;
    memset(&x, 0, sizeof x);
    x.ok = 1;
    x.idx = idx;
    x.t_s = t_s;
    x.v = v;
    if (idx > 0) {
        x.has_prev = 1;
        x.vprev = vlast;
        x.dt_s = t_s - tlast_s;
    }
    return x;
}

static void ext_fill_next(ru_ext *x, uint64_t idx, double v)
{
    if (x->ok && !x->has_next && x->idx + 1 == idx) {
        x->vnext = v;
        x->has_next = 1;
    }
}

/* Vertex of the parabola through (prev, v, next); the raw sample without both
 * neighbours or when the three are collinear. */
static void ext_refine(const ru_ext *x, double *t_s, double *v)
{
    *t_s = x->t_s;
    *v = x->v;
    if (!x->has_prev || !x->has_next)
        return;
    double a = x->vprev, b = x->v, c = x->vnext;
    double den = a - 2.0 * b + c;
    if (den == 0.0)
        return;
    double p = 0.5 * (a - c) / den; /* offset in samples, |p| <= 1/2 at an extreme */
    if (p > 0.5)
        p = 0.5;
    if (p < -0.5)
        p = -0.5;
    *v = b - 0.25 * (a - c) * p;
    *t_s = x->t_s + p * x->dt_s;
}

/* Updates a seeker with the sample; returns how far (>= 0, in the sought direction)
 * the sample lies behind the candidate. */
static double seek_update(ru_seek *s, uint64_t idx, double t_s, double v,
                          double tlast_s, double vlast)
{
    ext_fill_next(&s->cand, idx, v);
    ext_fill_next(&s->sub, idx, v);
    double sg = (double)s->sign;
    if (!s->cand.ok || sg * v > sg * s->cand.v) {
        s->cand = ext_new(idx, t_s, v, tlast_s, vlast);
        s->sub.ok = 0;
        return 0.0;
    }
    if (!s->sub.ok || sg * v < sg * s->sub.v)
        s->sub = ext_new(idx, t_s, v, tlast_s, vlast);
    return sg * (s->cand.v - v);
}

static ru_status env_append(ru_envelope *e, double t_s, double a_v)
{
    if (e->n_env == e->cap_env) {
        size_t cap = e->cap_env ? 2 * e->cap_env : 64;
        double *nt = realloc(e->env_t, cap * sizeof *nt);
        if (!nt)
            return RU_ENOMEM;
        e->env_t = nt;
        double *na = realloc(e->env_a, cap * sizeof *na);
        if (!na)
            return RU_ENOMEM;
        e->env_a = na;
        e->cap_env = cap;
    }
    e->env_t[e->n_env] = t_s;
    e->env_a[e->n_env] = a_v;
    e->n_env++;
    return RU_OK;
}

/* The candidate of s is confirmed: record it, and continue seeking the opposite
 * extremum from the sub-candidate. */
static ru_status confirm(ru_envelope *e, const ru_seek *s)
{
    double t, v;
    ext_refine(&s->cand, &t, &v);
    ru_status st = RU_OK;
    if (s->sign > 0) {
        e->have_max = 1;
        e->max_t_s = t;
        e->max_v = v;
    } else if (e->have_max) {
        e->have_max = 0;
        if (e->max_v > v)
            st = env_append(e, 0.5 * (e->max_t_s + t), 0.5 * (e->max_v - v));
    }
    e->last_ext_v = s->cand.v;
    ru_seek next;
    memset(&next, 0, sizeof next);
    next.sign = -s->sign;
    next.cand = s->sub;
    e->seek = next;
    e->mode = 1;
    return st;
}

static double hyst(const ru_envelope *e, double swing_v)
{
    double h = RU_ENV_HYST * fabs(swing_v);
    return h > e->floor_v ? h : e->floor_v;
}

ru_status ru_envelope_push(ru_envelope *e, uint64_t idx, double t_s, double v,
                           double tlast_s, double vlast)
{
    if (e->mode == 1) {
        double back = seek_update(&e->seek, idx, t_s, v, tlast_s, vlast);
        double thr = hyst(e, e->seek.cand.v - e->last_ext_v);
        if (back > 0.0 && back > thr)
            return confirm(e, &e->seek);
        return RU_OK;
    }
    double back_hi = seek_update(&e->hi, idx, t_s, v, tlast_s, vlast);
    double back_lo = seek_update(&e->lo, idx, t_s, v, tlast_s, vlast);
    double thr = hyst(e, e->hi.cand.v - e->lo.cand.v);
    if (back_hi > 0.0 && back_hi > thr)
        return confirm(e, &e->hi);
    if (back_lo > 0.0 && back_lo > thr)
        return confirm(e, &e->lo);
    return RU_OK;
}
