/* wav.c: the WAV export sink (see ringup/wav.h): options, the probe buffer, and the
 * post-run chain resample -> DC removal -> fade-out -> peak normalization -> file.
 *
 * Invariants:
 * - x[0..n) holds the probe at t = i * sample_s, i < cap_max (the planned span);
 *   pushed counts every sample offered, so the grid check covers dropped ones too.
 * - The buffer grows by doubling up to cap_max, never beyond; finish reads it only,
 *   so it may be called again (another path or tone).
 * - No global state; nothing is printed. */
#include "ringup/wav.h"

#include "output/wav_impl.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#define RU_WAV_GRID_TOL 1e-3   /* allowed offset of a pushed time (spacings) */
#define RU_WAV_FIRST_CAP 4096  /* first buffer allocation (samples) */


void ru_wav_opts_default(ru_wav_opts *o)
{
    memset(o, 0, sizeof *o);
    o->rate_hz = 48000.0;
    o->format = RU_WAV_PCM24;
    o->level_dbfs = -12.0;
    o->time_scale = 1.0;
    o->fade_s = 0.02;
    o->auto_pitch = 1;
}

static ru_status check_audio(const ru_wav_opts *o, ru_error *err)
{
    if (!(o->rate_hz >= 1000 && o->rate_hz <= 768000 && o->rate_hz == floor(o->rate_hz)))
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0,
                            "WAV rate must be a whole number of Hz from 1000 to 768000 "
                            "(got %g Hz)", o->rate_hz);
    if (o->format != RU_WAV_PCM24 && o->format != RU_WAV_FLOAT)
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0, "WAV format must be 24-bit PCM "
                            "or float");
    if (!(o->level_dbfs <= RU_WAV_CEILING_DBFS && o->level_dbfs >= -100.0))
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0,
                            "WAV level %g dBFS refused: the peak level must be from "
                            "-100 dBFS up to %g dBFS (headroom against clipping)",
                            o->level_dbfs, RU_WAV_CEILING_DBFS);
    if (!(o->fade_s >= 0 && o->fade_s <= 10.0))
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0,
                            "WAV fade-out must be from 0 to 10 s (got %g s)", o->fade_s);
    return RU_OK;
}

static ru_status check_time(const ru_wav_opts *o, ru_error *err)
{
    if (!(o->pitch_hz >= 0 && o->pitch_hz < 1e9))
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0,
                            "WAV pitch must be > 0 Hz (got %g Hz)", o->pitch_hz);
    if (o->pitch_hz > 0 && !(o->pitch_hz >= RU_WAV_PITCH_MIN_HZ &&
                             o->pitch_hz <= RU_WAV_PITCH_MAX_HZ))
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0,
                            "WAV pitch %g Hz is outside the audible band (%g Hz to %g kHz, "
                            "common practice): the tone could not be heard",
                            o->pitch_hz, RU_WAV_PITCH_MIN_HZ, RU_WAV_PITCH_MAX_HZ / 1e3);
    if (o->pitch_hz == 0 && !(o->time_scale > 0 && o->time_scale < 1e15))
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0,
                            "WAV time scale must be > 0 (got %g)", o->time_scale);
    double longest_s = (double)RU_WAV_MAX_FRAMES / o->rate_hz;
    if (!(o->max_seconds == 0 ||
          (o->max_seconds >= RU_WAV_MIN_SECONDS && o->max_seconds <= longest_s)))
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0,
                            "WAV length %g s is outside %g s to %.0f s (the longest file at "
                            "%g Hz)",
                            o->max_seconds, RU_WAV_MIN_SECONDS, longest_s, o->rate_hz);
    if (!(o->sample_s > 0 && isfinite(o->sample_s) && o->stop_s > 0 &&
          isfinite(o->stop_s) && o->tone_hint_hz >= 0 && isfinite(o->tone_hint_hz)))
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0,
                            "WAV export needs the run's sample spacing and stop time "
                            "(got %g s and %g s)", o->sample_s, o->stop_s);
    return RU_OK;
}

/* Simulated span the audio can use (s): the run, or max_seconds plus a filter
 * half-width at the smallest time scale expected. */
static double planned_span_s(const ru_wav_opts *o)
{
    double k = o->pitch_hz > 0 ? 0.5 * o->tone_hint_hz / o->pitch_hz : o->time_scale;
    if (!(o->max_seconds > 0) || !(k > 0))
        return o->stop_s;
    ru_wav_band b;
    ru_wav_band_for(o->sample_s * k, o->rate_hz, &b);
    double span = (o->max_seconds + b.half_s + 2.0 / o->rate_hz) / k;
    return span < o->stop_s ? span : o->stop_s;
}

ru_status ru_wav_create(const ru_wav_opts *o, ru_wav **out, ru_error *err)
{
    if (!o || !out)
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0, "WAV: missing options");
    *out = NULL;
    ru_status st = check_audio(o, err);
    if (st == RU_OK)
        st = check_time(o, err);
    if (st != RU_OK)
        return st;
    double want = floor(planned_span_s(o) / o->sample_s * (1.0 + 1e-12)) + 2.0;
    if (want > (double)RU_WAV_MAX_BUFFER)
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0,
                            "WAV export would buffer %.3g probe samples (%.0f MiB, limit "
                            "%zu MiB): shorten the audio length or coarsen the sample "
                            "spacing", want, want * 8.0 / 1048576.0,
                            RU_WAV_MAX_BUFFER * 8 / 1048576);
    ru_wav *w = calloc(1, sizeof *w);
    if (!w)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "WAV: out of memory");
    w->o = *o;
    w->cap_max = (size_t)want;
    *out = w;
    return RU_OK;
}

static ru_status grow(ru_wav *w)
{
    size_t cap = w->cap ? 2 * w->cap : RU_WAV_FIRST_CAP;
    if (cap > w->cap_max)
        cap = w->cap_max;
    double *x = realloc(w->x, cap * sizeof *x);
    if (!x)
        return RU_ENOMEM;
    w->x = x;
    w->cap = cap;
    return RU_OK;
}

ru_status ru_wav_push(ru_wav *w, double t_s, double v)
{
    if (!w || !isfinite(v))
        return RU_ERANGE;
    double h = w->o.sample_s, tk = (double)w->pushed * h;
    if (!(fabs(t_s - tk) <= RU_WAV_GRID_TOL * h))
        return RU_ERANGE; /* not on the uniform grid, or out of order */
    w->pushed++;
    if (w->n >= w->cap_max)
        return RU_OK; /* beyond the span the audio can use */
    if (w->n == w->cap && grow(w) != RU_OK)
        return RU_ENOMEM;
    w->x[w->n++] = v;
    return RU_OK;
}

void ru_wav_destroy(ru_wav *w)
{
    if (!w)
        return;
    free(w->x);
    free(w);
}
