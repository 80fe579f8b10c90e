/* envelope.c: streaming envelope of a sampled oscillation, one point per cycle.
 *
 * The signal may ride on a moving DC level (a bias still settling after power-on).
 * Extrema are sought in d(t) = v(t) - slope * t, where slope is the DC slope read
 * from the last five confirmed extrema v0..v4 at t0..t4: the weighted mean
 * (v0 + 2 v1 + v2)/4 of three successive extrema lies on the DC line at
 * (t0 + 2 t1 + t2)/4 for a sine plus a linear ramp (the extrema are +-A' + s t_k + c,
 * and the A' cancel), and so does (v2 + 2 v3 + v4)/4 a period later; the slope
 * between the two is exact for a linear ramp and constant amplitude. A changing
 * amplitude enters only through its second difference over half periods, which is
 * the same for both means to first order: the slope it adds is about a''' T^2/16
 * (a''' the amplitude's third derivative). The plain midpoint of a maximum and the
 * next minimum, by contrast, sits a' T/4 off the DC line, so two such midpoints read
 * a slope of a'' T/4 with no DC movement at all, and that is largest exactly where
 * growth slows near the settled size: a symmetric start-up read 0.1-0.2 % early.
 * Until five extrema exist the slope is 0; the points made before are dropped then
 * if the slope found says the ramp made more than 1 % of them (drop_early).
 * A candidate extremum is the most extreme d since the last confirmed opposite one;
 * it is confirmed when
 *   - no period hint: d has come back from it by more than RU_ENV_HYST of the swing
 *     since the previous extremum (in d, so once the slope is known the swing is the
 *     oscillation's, not the DC drift's) and by more than floor_v;
 *   - with a period hint P: no later sample has passed it for RU_ENV_HOLD * P and d
 *     has come back from it by more than floor_v and, once the slope is known, by
 *     RU_ENV_HYST of the swing. The hold stays below the half period for a true
 *     period down to 0.6 P, and before the slope is known a raw extremum on a ramp
 *     holds >= 0.3 T while the ramp is below 0.8 of the oscillation's peak slope
 *     A omega (sine plus ramp, computed numerically), so the first cycles are found
 *     as soon as the oscillation reaches ~1.25x the level where extrema exist.
 * The first sample is never an extremum (nothing before it is known).
 * Each confirmed extremum is refined by the parabola through its sample and its two
 * neighbours (detrended). A maximum and the minimum that follows it give one envelope
 * point at the midway time, amplitude = (dmax - dmin)/2 with the current slope:
 * the ramp's own share slope*(tmin - tmax)/2 (raw bias of about slope*T/4) is
 * removed, up to the slope estimate's error times T/4.
 * Invariant: memory is O(envelope points); no sample is stored. */
#include "measure/measure_impl.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

void ru_envelope_init(ru_envelope *e, double floor_v, double period_s)
{
    memset(e, 0, sizeof *e);
    e->hi.sign = 1;
    e->lo.sign = -1;
    e->floor_v = floor_v > 0.0 ? floor_v : 0.0;
    e->period_s = period_s > 0.0 && isfinite(period_s) ? period_s : 0.0;
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

/* Detrended value of a sample. */
static double det(const ru_envelope *e, double t_s, double v)
{
    return v - e->slope_v_s * t_s;
}

/* Vertex of the parabola through the detrended (prev, v, next), returned with the
 * DC put back; the raw sample without both neighbours or when they are collinear. */
static void ext_refine(const ru_envelope *e, const ru_ext *x, double *t_s, double *v)
{
    *t_s = x->t_s;
    *v = x->v;
    if (!x->has_prev || !x->has_next)
        return;
    double sl = e->slope_v_s * x->dt_s;
    double a = x->vprev + sl, b = x->v, c = x->vnext - sl; /* + const offset */
    double den = a - 2.0 * b + c;
    if (den == 0.0)
        return;
    double p = 0.5 * (a - c) / den; /* offset in samples, |p| <= 1/2 at an extreme */
    if (p > 0.5)
        p = 0.5;
    if (p < -0.5)
        p = -0.5;
    /* detrended vertex b - (a - c) p / 4, then the ramp over p samples put back */
    *v = b - 0.25 * (a - c) * p + p * sl;
    *t_s = x->t_s + p * x->dt_s;
}

/* Updates a seeker with the sample; returns how far (>= 0, in the sought direction)
 * the detrended sample lies behind the candidate. */
static double seek_update(const ru_envelope *e, ru_seek *s, uint64_t idx, double t_s,
                          double v, double tlast_s, double vlast)
{
    ext_fill_next(&s->cand, idx, v);
    ext_fill_next(&s->sub, idx, v);
    double sg = (double)s->sign, d = det(e, t_s, v);
    double dc = s->cand.ok ? det(e, s->cand.t_s, s->cand.v) : 0.0;
    if (!s->cand.ok || sg * d > sg * dc) {
        if (s->sub.ok)
            s->rise_v = sg * (d - det(e, s->sub.t_s, s->sub.v));
        else if (s->cand.ok)
            s->rise_v += sg * (d - dc);
        s->cand = ext_new(idx, t_s, v, tlast_s, vlast);
        s->sub.ok = 0;
        return 0.0;
    }
    if (!s->sub.ok || sg * d < sg * det(e, s->sub.t_s, s->sub.v))
        s->sub = ext_new(idx, t_s, v, tlast_s, vlast);
    return sg * (dc - d);
}

/* Keeps every second point of the older half (RU_ENV_KEEP): the newer half, where
 * the settled window lies, stays whole. Indices into the envelope move with it. */
static void thin_older_half(ru_envelope *e)
{
    size_t half = e->n_env / 2, k = 0;
    for (size_t i = 0; i < half; i += 2, k++) {
        e->env_t[k] = e->env_t[i];
        e->env_a[k] = e->env_a[i];
    }
    size_t drop = half - k;
    memmove(e->env_t + k, e->env_t + half, (e->n_env - half) * sizeof *e->env_t);
    memmove(e->env_a + k, e->env_a + half, (e->n_env - half) * sizeof *e->env_a);
    e->n_env -= drop;
    e->env_from = e->env_from >= half ? e->env_from - drop : e->env_from / 2;
}

ru_status ru_envelope_add_point(ru_envelope *e, double t_s, double a_v)
{
    if (e->n_env >= RU_ENV_KEEP)
        thin_older_half(e);
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

/* Once the slope is first known: the (at most two) points whose extrema were
 * located with a slope of 0 are dropped when the ramp's share in them, slope * half period / 2,
 * exceeds RU_ENV_EARLY_SHARE of their amplitude (they read the ramp, not the
 * oscillation); on a level DC they stay. */
static void drop_early(ru_envelope *e)
{
    double half_s = (e->ext_t[RU_ENV_SLOPE_EXT - 1] - e->ext_t[0]) / (RU_ENV_SLOPE_EXT - 1);
    double share_v = 0.5 * fabs(e->slope_v_s) * half_s;
    size_t keep = e->env_from;
    for (size_t i = e->env_from; i < e->n_env; i++) {
        if (share_v <= RU_ENV_EARLY_SHARE * e->env_a[i]) {
            e->env_t[keep] = e->env_t[i];
            e->env_a[keep] = e->env_a[i];
            keep++;
        }
    }
    e->n_env = keep;
}

/* A slope no larger than a growing tone's own midpoint drift, g^2 a / (4 T) for a
 * growth g = sigma T per period (the plain midpoints' reading, above), is taken as
 * growth, not DC movement (0): removing a slope that small changes an envelope
 * point by at most about 3 a g^2/16, while a real ramp or a settling bias is far
 * above it once the tone is large enough to show extrema; a settled tone (g = 0)
 * keeps any slope. g comes from the half swings of two pairs of extrema a period
 * apart. */
static double growth_guard(const ru_envelope *e, double slope_v_s, double period_s)
{
    /* half swings of the first and the last pair of the four extrema, a period apart */
    double a0 = 0.5 * fabs(e->ext_v[1] - e->ext_v[0]);
    double a1 = 0.5 * fabs(e->ext_v[3] - e->ext_v[2]);
    if (!(period_s > 0) || !(a1 > 0 && a0 > 0))
        return slope_v_s;
    double g = log(a1 / a0), spurious = g * g * a1 / (4.0 * period_s);
    return fabs(slope_v_s) < 3.0 * spurious ? 0.0 : slope_v_s;
}

/* Index of the newest kept extremum (n_ext > 0). */
static size_t last_ext(const ru_envelope *e)
{
    return (e->n_ext < RU_ENV_SLOPE_EXT ? e->n_ext : RU_ENV_SLOPE_EXT) - 1;
}

/* Keeps the last five extrema and, once there are five, re-reads the DC slope from
 * the weighted means of the first three and the last three (a period apart). */
static void ext_record(ru_envelope *e, double t_s, double v)
{
    enum { N = RU_ENV_SLOPE_EXT };
    if (e->n_ext >= N) {
        memmove(e->ext_t, e->ext_t + 1, (N - 1) * sizeof *e->ext_t);
        memmove(e->ext_v, e->ext_v + 1, (N - 1) * sizeof *e->ext_v);
    }
    size_t k = e->n_ext < N ? e->n_ext : N - 1;
    e->ext_t[k] = t_s;
    e->ext_v[k] = v;
    e->n_ext++;
    if (e->n_ext < N)
        return;
    const double *t = e->ext_t, *x = e->ext_v;
    double ta = 0.25 * (t[0] + 2.0 * t[1] + t[2]), va = 0.25 * (x[0] + 2.0 * x[1] + x[2]);
    double tb = 0.25 * (t[2] + 2.0 * t[3] + t[4]), vb = 0.25 * (x[2] + 2.0 * x[3] + x[4]);
    if (tb > ta)
        e->slope_v_s = growth_guard(e, (vb - va) / (tb - ta), tb - ta);
}

/* The candidate of s is confirmed: record it, and continue seeking the opposite
 * extremum from the sub-candidate. */
static ru_status confirm(ru_envelope *e, const ru_seek *s)
{
    double t, v;
    ext_refine(e, &s->cand, &t, &v);
    ext_record(e, t, v);
    ru_status st = RU_OK;
    if (s->sign > 0) {
        e->have_max = 1;
        e->max_t_s = t;
        e->max_v = v;
    } else if (e->have_max) {
        e->have_max = 0;
        double amp = 0.5 * (det(e, e->max_t_s, e->max_v) - det(e, t, v));
        if (amp > 0.0)
            st = ru_envelope_add_point(e, 0.5 * (e->max_t_s + t), amp);
    }
    if (e->n_ext == RU_ENV_SLOPE_EXT)
        drop_early(e); /* its extrema were located with a slope of 0 */
    ru_seek next;
    memset(&next, 0, sizeof next);
    next.sign = -s->sign;
    next.cand = s->sub;
    e->seek = next;
    e->mode = 1;
    return st;
}

/* Whether the candidate of s, lying back behind by `back` (detrended) at t_s after a
 * detrended swing of swing_v since the previous extremum, is confirmed. */
static int confirmed(const ru_envelope *e, const ru_seek *s, double t_s, double back,
                     double swing_v)
{
    if (!(back > 0.0) || !s->cand.has_prev)
        return 0;
    double thr = e->floor_v;
    if (e->period_s <= 0.0 || e->n_ext >= RU_ENV_SLOPE_EXT) {
        double h = RU_ENV_HYST * fabs(swing_v);
        thr = h > thr ? h : thr;
    }
    if (!(back > thr))
        return 0;
    return e->period_s <= 0.0 || t_s - s->cand.t_s >= RU_ENV_HOLD * e->period_s;
}

/* The search has waited too long for the next extremum: with a DC slope read
 * from extrema before the bias changed course, the detrended signal can run away
 * monotonically and no extremum would ever be confirmed again. Start afresh from
 * a slope of 0, keeping the envelope points made so far. */
static int stalled(const ru_envelope *e, double t_s)
{
    if (e->n_ext == 0)
        return 0;
    size_t k = last_ext(e);
    double wait = 0.0;
    if (e->period_s > 0.0)
        wait = RU_ENV_STALL * e->period_s;
    else if (e->n_ext >= 2)
        wait = 2.0 * RU_ENV_STALL * (e->ext_t[k] - e->ext_t[k - 1]);
    return wait > 0.0 && t_s - e->ext_t[k] > wait;
}

void ru_envelope_restart(ru_envelope *e)
{
    double floor_v = e->floor_v, period_s = e->period_s;
    double *env_t = e->env_t, *env_a = e->env_a;
    size_t n_env = e->n_env, cap_env = e->cap_env;
    ru_envelope_init(e, floor_v, period_s);
    e->env_t = env_t;
    e->env_a = env_a;
    e->n_env = n_env;
    e->cap_env = cap_env;
    e->env_from = n_env;
}

ru_status ru_envelope_push(ru_envelope *e, uint64_t idx, double t_s, double v,
                           double tlast_s, double vlast)
{
    if (e->mode == 1 && stalled(e, t_s))
        ru_envelope_restart(e);
    if (e->mode == 1) {
        double back = seek_update(e, &e->seek, idx, t_s, v, tlast_s, vlast);
        const ru_ext *c = &e->seek.cand;
        double last = e->n_ext ? det(e, e->ext_t[last_ext(e)], e->ext_v[last_ext(e)])
                               : det(e, c->t_s, c->v);
        if (confirmed(e, &e->seek, t_s, back, det(e, c->t_s, c->v) - last))
            return confirm(e, &e->seek);
        return RU_OK;
    }
    double back_hi = seek_update(e, &e->hi, idx, t_s, v, tlast_s, vlast);
    double back_lo = seek_update(e, &e->lo, idx, t_s, v, tlast_s, vlast);
    if (confirmed(e, &e->hi, t_s, back_hi, e->hi.rise_v))
        return confirm(e, &e->hi);
    if (confirmed(e, &e->lo, t_s, back_lo, e->lo.rise_v))
        return confirm(e, &e->lo);
    return RU_OK;
}
