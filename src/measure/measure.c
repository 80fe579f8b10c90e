/* measure.c: start-up figures of a sampled probe waveform (ringup/measure.h).
 *
 * Samples stream in through ru_measure_push: the envelope tracker (envelope.c) keeps
 * one point per cycle, and a ring buffer keeps the last part of the run (the last
 * 10 % of stop_s, at most RU_RING_MAX samples) for frequency, DC level and spectrum.
 * Memory is therefore O(cycles) + a capacity fixed at create time.
 * ru_measure_finish works on a copy of the ring (so it briefly doubles that
 * memory) and may be called more than once.
 * Choices the header leaves open (to be stated in the README):
 *   - "the run" is what was pushed: the settled window is the last 10 % of
 *     [first t, last t] (= [0.9 stop, stop] for a run from 0 to stop); a run pushed
 *     past stop_s keeps only the last 0.1 stop_s of samples for the sample figures;
 *   - envelope drift = slope of a least-squares line through the window's envelope
 *     points times the window length, over the mean; the quarter spread = the
 *     largest distance of a quarter's mean (by time) from the window's mean, over
 *     it (halves with fewer than 8 points); settled when both are <= 0.5 % and the
 *     window holds at least RU_SETTLE_MIN_CYCLES points;
 *   - every figure is measured on whatever tone there is; whether it is a start-up
 *     (and which figures stand) is the verdict's call (verdict.c), not this file's;
 *   - the start-up time is the entry into the band [L, 2 - L] x settled after which
 *     the envelope never leaves it (L = startup_level), interpolated linearly at
 *     the band edge it crossed last; the growth fit looks at the envelope from the
 *     lowest point before the window up to that time (a power-on transient before
 *     it is not part of the growth);
 *   - settling time: the band crossing interpolated linearly between the last point
 *     outside the band and the next point (the first point's time when none is
 *     outside); NAN when the last point is outside. */
#include "measure/measure_impl.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

struct ru_measure {
    ru_measure_cfg cfg;   /* as given to create */
    ru_envelope env;      /* envelope points so far */
    double *ring;         /* last cap_ring samples (V), oldest at head when full */
    size_t cap_ring;      /* ring capacity (samples), fixed at create */
    size_t head;          /* next write position in ring */
    uint64_t count;       /* samples pushed */
    double t_first_s;     /* time of the first sample (s) */
    double t_last_s;      /* time of the last sample or point (s) */
    double v_last;        /* last sample (V) */
    int gap;              /* 1: the next sample opens a stretch (after a point) */
    uint64_t s_count;     /* samples in the current stretch (all in the ring) */
    double s_t0_s;        /* time of its first sample (s) */
    double s_tlast_s;     /* time of its last sample (s) */
};

#define DRIFT_LIMIT 0.005   /* settled when the window's envelope moves <= 0.5 % */
#define SPREAD_LIMIT 0.005  /* ... and each quarter's mean is within 0.5 % */

void ru_measure_cfg_default(ru_measure_cfg *cfg, double stop_s, double sample_s)
{
    if (!cfg)
        return;
    memset(cfg, 0, sizeof *cfg);
    cfg->stop_s = stop_s;
    cfg->sample_s = sample_s;
    cfg->startup_level = 0.9;
    cfg->growth_lo = 0.01;
    cfg->growth_hi = 0.10;
    cfg->kick_level_v = 0.0;
    cfg->settle_band = 0.01;
}

static int cfg_ok(const ru_measure_cfg *c)
{
    return isfinite(c->stop_s) && isfinite(c->sample_s) && c->stop_s > 0.0 &&
           c->sample_s > 0.0 && c->sample_s < c->stop_s && c->startup_level > 0.0 &&
           c->startup_level <= 1.0 && c->growth_lo > 0.0 &&
           c->growth_hi > c->growth_lo && c->growth_hi <= 1.0 &&
           c->kick_level_v >= 0.0 && isfinite(c->kick_level_v) &&
           c->settle_band > 0.0 && c->settle_band < 1.0 && c->period_hint_s >= 0.0 &&
           isfinite(c->period_hint_s);
}

ru_status ru_measure_create(const ru_measure_cfg *cfg, ru_measure **out)
{
    if (!cfg || !out)
        return RU_EINPUT;
    *out = NULL;
    if (!cfg_ok(cfg))
        return RU_ERANGE;
    ru_measure *m = calloc(1, sizeof *m);
    if (!m)
        return RU_ENOMEM;
    m->cfg = *cfg;
    double w = ceil(0.1 * cfg->stop_s / cfg->sample_s) + 64.0;
    m->cap_ring = w < (double)RU_RING_MAX ? (size_t)w : RU_RING_MAX;
    m->ring = malloc(m->cap_ring * sizeof *m->ring);
    if (!m->ring) {
        free(m);
        return RU_ENOMEM;
    }
    double hint = cfg->period_hint_s;
    if (hint < RU_ENV_HINT_MIN_SAMPLES * cfg->sample_s)
        hint = 0.0; /* too short to resolve: the hysteresis rule alone */
    ru_envelope_init(&m->env, 0.25 * cfg->kick_level_v, hint);
    *out = m;
    return RU_OK;
}

void ru_measure_destroy(ru_measure *m)
{
    if (!m)
        return;
    ru_envelope_free(&m->env);
    free(m->ring);
    free(m);
}

ru_status ru_measure_push(ru_measure *m, double t_s, double v)
{
    if (!m || !isfinite(t_s) || !isfinite(v))
        return RU_EINPUT;
    if ((m->count > 0 || m->env.n_env > 0) && !(t_s > m->t_last_s))
        return RU_EINPUT;
    if (m->gap) { /* a new stretch: the tracker and the window start afresh */
        ru_envelope_restart(&m->env);
        m->head = 0;
        m->s_count = 0;
        m->gap = 0;
    }
    ru_status st = ru_envelope_push(&m->env, m->s_count, t_s, v, m->s_tlast_s, m->v_last);
    if (st != RU_OK)
        return st;
    if (m->count == 0 && m->env.n_env == 0)
        m->t_first_s = t_s;
    if (m->s_count == 0)
        m->s_t0_s = t_s;
    m->ring[m->head] = v;
    m->head = (m->head + 1) % m->cap_ring;
    m->count++;
    m->s_count++;
    m->t_last_s = m->s_tlast_s = t_s;
    m->v_last = v;
    return RU_OK;
}

ru_status ru_measure_push_point(ru_measure *m, double t_s, double amp_v)
{
    if (!m || !isfinite(t_s) || !isfinite(amp_v) || !(amp_v > 0))
        return RU_EINPUT;
    if ((m->count > 0 || m->env.n_env > 0) && !(t_s > m->t_last_s))
        return RU_EINPUT;
    ru_status st = ru_envelope_add_point(&m->env, t_s, amp_v);
    if (st != RU_OK)
        return st;
    if (m->count == 0 && m->env.n_env == 1)
        m->t_first_s = t_s;
    m->t_last_s = t_s;
    m->gap = 1;
    return RU_OK;
}

void ru_measure_envelope(const ru_measure *m, const double **t_s, const double **amp_v,
                         size_t *n)
{
    if (t_s)
        *t_s = m ? m->env.env_t : NULL;
    if (amp_v)
        *amp_v = m ? m->env.env_a : NULL;
    if (n)
        *n = m ? m->env.n_env : 0;
}

size_t ru_measure_ring_capacity(const ru_measure *m)
{
    return m ? m->cap_ring : 0;
}

size_t ru_measure_envelope_capacity(const ru_measure *m)
{
    return m ? m->env.cap_env : 0;
}

/* ---- figures from the envelope ---------------------------------------------- */

/* Least-squares line y = a + b t over points [i0, i1) with y = f(amp): slope b,
 * rms residual. ln selects y = ln(amp). Returns 0 with fewer than 2 points. */
static int line_fit(const double *t, const double *amp, size_t i0, size_t i1, int ln,
                    double *slope, double *rms)
{
    size_t n = i1 - i0;
    if (i1 <= i0 || n < 2)
        return 0;
    double tm = 0.0, ym = 0.0;
    for (size_t i = i0; i < i1; i++) {
        tm += t[i];
        ym += ln ? log(amp[i]) : amp[i];
    }
    tm /= (double)n;
    ym /= (double)n;
    double stt = 0.0, sty = 0.0;
    for (size_t i = i0; i < i1; i++) {
        double y = ln ? log(amp[i]) : amp[i];
        stt += (t[i] - tm) * (t[i] - tm);
        sty += (t[i] - tm) * (y - ym);
    }
    if (!(stt > 0.0))
        return 0;
    double b = sty / stt, r2 = 0.0;
    for (size_t i = i0; i < i1; i++) {
        double y = ln ? log(amp[i]) : amp[i];
        double e = y - (ym + b * (t[i] - tm));
        r2 += e * e;
    }
    *slope = b;
    if (rms)
        *rms = sqrt(r2 / (double)n);
    return 1;
}

/* Window statistics of the envelope: first point index in the window, mean and
 * drift. Returns the number of window points. */
static size_t settle_stats(const ru_envelope *e, double tw_s, double wlen_s, size_t *i0,
                           double *mean, double *drift)
{
    size_t k = 0;
    while (k < e->n_env && e->env_t[k] < tw_s)
        k++;
    *i0 = k;
    size_t n = e->n_env - k;
    if (n == 0)
        return 0;
    double s = 0.0;
    for (size_t i = k; i < e->n_env; i++)
        s += e->env_a[i];
    *mean = s / (double)n;
    double b = 0.0;
    *drift = line_fit(e->env_t, e->env_a, k, e->n_env, 0, &b, NULL)
                 ? b * wlen_s / *mean
                 : 0.0;
    return n;
}

/* Hint for a run that has not settled: how much longer, from the drift's decay
 * between the two halves of the window. */
static void settle_hint(const ru_envelope *e, size_t i0, double tw_s, double wlen_s,
                        double drift, char *note)
{
    double tmid = tw_s + 0.5 * wlen_s, s1 = 0.0, s2 = 0.0;
    size_t im = i0;
    while (im < e->n_env && e->env_t[im] < tmid)
        im++;
    int ok = line_fit(e->env_t, e->env_a, i0, im, 0, &s1, NULL) &&
             line_fit(e->env_t, e->env_a, im, e->n_env, 0, &s2, NULL) &&
             s1 * s2 > 0.0 && fabs(s2) < fabs(s1);
    if (ok) {
        double rate = log(s1 / s2) / (0.5 * wlen_s); /* drift decays as exp(-rate t) */
        double more = log(fabs(drift) / DRIFT_LIMIT) / rate;
        snprintf(note, RU_NOTE_MAX,
                 "envelope still moves %.2g %% over the last 10 %% of the run; "
                 "run about %.3g s longer",
                 100.0 * drift, more > 0.0 ? more : wlen_s);
    } else {
        snprintf(note, RU_NOTE_MAX,
                 "envelope still moves %.2g %% over the last 10 %% of the run; "
                 "run at least twice as long",
                 100.0 * drift);
    }
}

/* Start-up time: the entry into [lo_v, hi_v] after which the envelope stays in it
 * to the end, linear between the last point outside and the next at the edge it
 * crossed; the first point's time when every point is inside, NAN when the last
 * one is outside. */
static double band_entry(const ru_envelope *e, double lo_v, double hi_v)
{
    size_t n = e->n_env, out = n;
    if (n == 0 || e->env_a[n - 1] < lo_v || e->env_a[n - 1] > hi_v)
        return NAN;
    for (size_t i = n; i-- > 0;)
        if (e->env_a[i] < lo_v || e->env_a[i] > hi_v) {
            out = i;
            break;
        }
    if (out == n)
        return e->env_t[0];
    double a0 = e->env_a[out], a1 = e->env_a[out + 1];
    double edge = a0 < lo_v ? lo_v : hi_v;
    double f = (edge - a0) / (a1 - a0);
    return e->env_t[out] + f * (e->env_t[out + 1] - e->env_t[out]);
}

/* Largest |mean of a quarter (by time) / mean - 1| over the window's points
 * [i0, n); halves with fewer than 8 points, 0 with fewer than 2. */
static double quarter_spread(const ru_envelope *e, size_t i0, double tw_s, double wlen_s,
                             double mean)
{
    size_t n = e->n_env - i0;
    int parts = n >= 8 ? 4 : n >= 2 ? 2 : 0;
    double worst = 0.0;
    for (int q = 0; q < parts; q++) {
        double ta = tw_s + wlen_s * q / parts, tb = tw_s + wlen_s * (q + 1) / parts, s = 0;
        size_t k = 0;
        for (size_t i = i0; i < e->n_env; i++)
            if (e->env_t[i] >= ta && (e->env_t[i] < tb || q == parts - 1)) {
                s += e->env_a[i];
                k++;
            }
        if (k > 0)
            worst = fmax(worst, fabs(s / (double)k / mean - 1.0));
    }
    return worst;
}

/* Time of the first envelope point at or above level_v from index `from` on
 * (INFINITY when none): the growth phase ends there. */
static double first_above(const ru_envelope *e, size_t from, double level_v)
{
    for (size_t i = from; i < e->n_env; i++)
        if (e->env_a[i] >= level_v)
            return e->env_t[i];
    return INFINITY;
}

static void growth_fit(const ru_envelope *e, const ru_measure_cfg *c, size_t from,
                       double settled_v, double t_limit_s, ru_measure_result *r)
{
    double lo = c->growth_lo * settled_v, hi = c->growth_hi * settled_v;
    double kick = 2.0 * c->kick_level_v;
    /* the envelope rises through the window once before start-up ends, so the
     * matching points are contiguous: fit from the first to the last of them */
    size_t i0 = e->n_env, i1 = 0;
    for (size_t i = from; i < e->n_env && e->env_t[i] <= t_limit_s; i++) {
        double a = e->env_a[i];
        if (a >= lo && a <= hi && a > kick) {
            if (i0 == e->n_env)
                i0 = i;
            i1 = i + 1;
        }
    }
    if (i0 == e->n_env)
        i0 = i1 = 0;
    double slope = NAN, rms = NAN;
    if (i1 - i0 < 3 || !line_fit(e->env_t, e->env_a, i0, i1, 1, &slope, &rms)) {
        const char *why = from < e->n_env && e->env_a[from] > lo
                              ? "the first visible cycle is already above the window "
                                "(a large kick, or growth hidden under a power-on "
                                "transient); lower the kick or raise the window"
                              : "the envelope grows too fast to put 3 cycles in the "
                                "window; widen the window";
        snprintf(r->growth_note, RU_NOTE_MAX,
                 "fewer than 3 cycles between %g%% and %g%% of the settled amplitude: %s",
                 100.0 * c->growth_lo, 100.0 * c->growth_hi, why);
        r->growth_fit_points = (int)(i1 - i0);
        return;
    }
    r->growth_rate_per_s = slope;
    r->growth_fit_rms = rms;
    double tm = 0, ym = 0; /* the fitted line at t = 0: the level the growth extrapolates to */
    for (size_t i = i0; i < i1; i++) {
        tm += e->env_t[i] / (double)(i1 - i0);
        ym += log(e->env_a[i]) / (double)(i1 - i0);
    }
    r->growth_fit_level_v = exp(ym - slope * tm);
    r->growth_fit_t0_s = e->env_t[i0];
    r->growth_fit_t1_s = e->env_t[i1 - 1];
    r->growth_fit_points = (int)(i1 - i0);
}

static double settling_time(const ru_envelope *e, double settled_v, double band)
{
    double tol = band * settled_v;
    size_t n = e->n_env;
    if (n == 0 || fabs(e->env_a[n - 1] - settled_v) > tol)
        return NAN;
    size_t last_out = n; /* none */
    for (size_t i = n; i-- > 0;) {
        if (fabs(e->env_a[i] - settled_v) > tol) {
            last_out = i;
            break;
        }
    }
    if (last_out == n)
        return e->env_t[0];
    double a0 = e->env_a[last_out], a1 = e->env_a[last_out + 1];
    double edge = a0 < settled_v ? settled_v - tol : settled_v + tol;
    double f = (edge - a0) / (a1 - a0);
    return e->env_t[last_out] + f * (e->env_t[last_out + 1] - e->env_t[last_out]);
}

/* ---- the sample window -------------------------------------------------------- */

static ru_status win_make(const ru_measure *m, double tw_s, ru_window *w)
{
    memset(w, 0, sizeof *w);
    w->n = m->s_count < m->cap_ring ? (size_t)m->s_count : m->cap_ring;
    w->x = malloc((w->n ? w->n : 1) * sizeof *w->x);
    if (!w->x)
        return RU_ENOMEM;
    size_t start = m->s_count < m->cap_ring ? 0 : m->head;
    for (size_t i = 0; i < w->n; i++)
        w->x[i] = m->ring[(start + i) % m->cap_ring];
    w->dt_s = m->s_count > 1 ? (m->s_tlast_s - m->s_t0_s) / (double)(m->s_count - 1)
                             : m->cfg.sample_s;
    w->t0_s = m->s_tlast_s - w->dt_s * (double)(w->n ? w->n - 1 : 0);
    double k = ceil((tw_s - w->t0_s) / w->dt_s - 1e-9);
    w->i_w = k <= 0.0 ? 0 : (k >= (double)w->n ? w->n : (size_t)k);
    return RU_OK;
}

/* DC motion over the window: the mean of its last quarter less that of its first.
 * With a tone each quarter is cut to whole periods of it (a partial period would
 * read as DC); NAN when the window holds fewer than 4 periods. */
static double dc_motion(const ru_window *w, double f_hz)
{
    size_t nw = w->n - w->i_w, q = nw / 4;
    if (isfinite(f_hz) && f_hz > 0) {
        double per = 1.0 / (f_hz * w->dt_s); /* samples per period */
        double k = floor((double)q / per);
        if (k < 1)
            return NAN;
        q = (size_t)llround(k * per);
    }
    if (q == 0)
        return NAN;
    double s0 = 0, s1 = 0;
    for (size_t i = 0; i < q; i++) {
        s0 += w->x[w->i_w + i];
        s1 += w->x[w->n - q + i];
    }
    return (s1 - s0) / (double)q;
}

/* DC level, frequency, THD and harmonics from the settled window. */
static ru_status window_figures(const ru_measure *m, double tw_s, ru_measure_result *r)
{
    ru_window w;
    ru_status st = win_make(m, tw_s, &w);
    if (st == RU_OK)
        st = ru_window_figures(&w, r);
    if (st == RU_OK)
        r->dc_motion_v = dc_motion(&w, r->frequency_hz);
    free(w.x);
    return st;
}

/* ---- ru_measure_finish -------------------------------------------------------- */

static void result_init(ru_measure_result *r)
{
    memset(r, 0, sizeof *r);
    r->startup_time_s = r->growth_rate_per_s = NAN;
    r->growth_fit_t0_s = r->growth_fit_t1_s = r->growth_fit_rms = NAN;
    r->growth_fit_level_v = NAN;
    r->frequency_hz = r->settled_amplitude_v = r->settling_time_s = NAN;
    r->thd_percent = r->dc_level_v = r->envelope_drift = r->fundamental_v = NAN;
    r->window_spread = r->window_s = r->first_cycle_t_s = NAN;
    r->trough_v = r->trough_t_s = r->peak_envelope_v = r->peak_t_s = NAN;
    r->decay_before_per_s = r->dc_motion_v = r->t_first_s = r->t_last_s = NAN;
    for (int k = 0; k < RU_HARMONICS - 1; k++)
        r->harmonics_dbc[k] = NAN;
}

/* The envelope's shape around the settled window: the lowest point before it, the
 * largest point of all and how fast the envelope came down from that peak to the
 * window (a limiter holding a tone that started above its size flattens out; a
 * passive ring-down keeps its rate). */
static size_t shape_stats(const ru_envelope *e, size_t i0, double tw_s, double mean,
                          ru_measure_result *r)
{
    size_t trough = 0, peak = 0;
    for (size_t i = 1; i < i0; i++)
        if (e->env_a[i] < e->env_a[trough])
            trough = i;
    if (i0 > 0) {
        r->trough_v = e->env_a[trough];
        r->trough_t_s = e->env_t[trough];
    }
    for (size_t i = 1; i < e->n_env; i++)
        if (e->env_a[i] > e->env_a[peak])
            peak = i;
    r->peak_envelope_v = e->env_a[peak];
    r->peak_t_s = e->env_t[peak];
    if (peak < i0 && tw_s > e->env_t[peak])
        r->decay_before_per_s = log(mean / e->env_a[peak]) / (tw_s - e->env_t[peak]);
    return trough;
}

ru_status ru_measure_finish(ru_measure *m, ru_measure_result *r)
{
    if (!m || !r)
        return RU_EINPUT;
    result_init(r);
    const ru_envelope *e = &m->env;
    r->cycles = e->n_env;
    if (m->count < 2 || m->s_count < 2) {
        snprintf(r->growth_note, RU_NOTE_MAX, "fewer than 2 samples");
        return RU_OK;
    }
    r->t_first_s = m->t_first_s;
    r->t_last_s = m->t_last_s;
    double wlen = 0.1 * (m->t_last_s - m->t_first_s), tw = m->t_last_s - wlen;
    r->window_s = wlen;
    ru_status st = window_figures(m, tw, r);
    if (st != RU_OK)
        return st;
    if (e->n_env > 0)
        r->first_cycle_t_s = e->env_t[0];
    size_t i0 = 0;
    double mean = NAN, drift = NAN;
    r->window_points = settle_stats(e, tw, wlen, &i0, &mean, &drift);
    if (r->window_points == 0) {
        snprintf(r->growth_note, RU_NOTE_MAX, "no cycle in the last 10 %% of the run");
        snprintf(r->settle_note, RU_NOTE_MAX, "no cycle in the last 10 %% of the run");
        return RU_OK;
    }
    r->envelope_drift = drift;
    r->settled_amplitude_v = mean;
    r->window_spread = quarter_spread(e, i0, tw, wlen, mean);
    size_t trough = shape_stats(e, i0, tw, mean, r);
    r->settled = r->window_points >= RU_SETTLE_MIN_CYCLES && fabs(drift) <= DRIFT_LIMIT &&
                 r->window_spread <= SPREAD_LIMIT;
    if (!r->settled && r->window_points < RU_SETTLE_MIN_CYCLES)
        snprintf(r->settle_note, RU_NOTE_MAX,
                 "only %s in the last 10 %% of the run: too few to tell whether the "
                 "envelope still moves; run longer",
                 r->window_points == 1 ? "one cycle"
                 : r->window_points == 2 ? "two cycles" : "three cycles");
    else if (!r->settled && fabs(drift) > DRIFT_LIMIT)
        settle_hint(e, i0, tw, wlen, drift, r->settle_note);
    else if (!r->settled)
        snprintf(r->settle_note, RU_NOTE_MAX,
                 "the envelope still swings: a quarter of the last 10 %% of the run "
                 "lies %.2g %% from its mean; run longer", 100.0 * r->window_spread);
    double lvl = m->cfg.startup_level;
    r->startup_time_s = band_entry(e, lvl * mean, (2.0 - lvl) * mean);
    /* the growth phase: from the lowest point before the envelope first reaches the
     * start-up level up to there (a later bounce of an amplitude control is not it) */
    double t_reach = first_above(e, 0, lvl * mean);
    size_t from = 0;
    for (size_t i = 1; i < e->n_env && e->env_t[i] < t_reach; i++)
        if (e->env_a[i] < e->env_a[from])
            from = i;
    (void)trough;
    growth_fit(e, &m->cfg, from, mean, t_reach, r);
    r->settling_time_s = settling_time(e, mean, m->cfg.settle_band);
    return RU_OK;
}
