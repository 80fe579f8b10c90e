/* wav_finish.c: the post-run chain of the WAV export (see ringup/wav.h): time scale
 * (an automatic pitch for a tone outside the audio band), frame count, band-limited
 * resampling, removal of the DC level and of the slow bias movement, fade-out, peak
 * normalization, then the file.
 *
 * Invariants: the probe buffer is only read; the audio buffers are allocated and
 * freed here (one cleanup path); y stays within [-1, 1] before it is written. */
#include "output/wav_impl.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#define RU_WAV_PI 3.14159265358979323846
#define RU_WAV_DC_FRACTION 0.1 /* DC window: about the last 10 % of the audio */
#define RU_WAV_SILENT 1e-10    /* peak after DC removal / before: below is silence
                                  (rounding of a constant through the filter) */
#define RU_WAV_BIAS_MATTERS 1.122 /* 1 dB: the moving DC changed the level */
#define RU_WAV_AUTO_PITCH_HZ 440.0  /* automatic pitch (concert A) */
#define RU_WAV_AUTO_LOW_HZ 20.0     /* tones below this are raised to the pitch */
#define RU_WAV_AUTO_MAX_S 60.0      /* longest audio the automatic pitch aims at */
#define RU_WAV_AUTO_TOP_HZ 4000.0   /* highest pitch chosen to shorten a long run */

/* The pitch chosen for a tone the listener could not hear at real time (below
 * 20 Hz or above the passband), or 0: 440 Hz, raised (up to 4 kHz) so that the
 * buffered run plays in about a minute at most. Only without a pitch or a time
 * scale of the caller's. */
static double auto_pitch_hz(const ru_wav *w, double tone_hz)
{
    if (!w->o.auto_pitch || w->o.pitch_hz > 0 || w->o.time_scale != 1.0 ||
        !(tone_hz > 0 && isfinite(tone_hz)))
        return 0.0;
    ru_wav_band b;
    ru_wav_band_for(w->o.sample_s, w->o.rate_hz, &b);
    if (tone_hz >= RU_WAV_AUTO_LOW_HZ && tone_hz <= b.pass_hz)
        return 0.0;
    double cycles = tone_hz * (double)(w->n - 1) * w->o.sample_s;
    double p = RU_WAV_AUTO_PITCH_HZ;
    if (cycles / p > RU_WAV_AUTO_MAX_S)
        p = fmin(RU_WAV_AUTO_TOP_HZ, cycles / RU_WAV_AUTO_MAX_S);
    return p;
}

static ru_status time_scale(const ru_wav *w, double tone_hz, double *k,
                            ru_wav_info *info, ru_error *err)
{
    double ap = auto_pitch_hz(w, tone_hz);
    if (ap > 0) {
        *k = tone_hz / ap;
        info->pitch_auto = 1;
        info->pitch_hz = ap;
    } else if (w->o.pitch_hz > 0) {
        if (!(tone_hz > 0 && isfinite(tone_hz)))
            return ru_error_set(err, RU_ERANGE, NULL, 0, 0,
                                "WAV pitch %g Hz needs the tone's frequency, and the "
                                "run has none (no settled tone)", w->o.pitch_hz);
        *k = tone_hz / w->o.pitch_hz;
        info->pitch_hz = w->o.pitch_hz;
    } else
        *k = w->o.time_scale;
    return RU_OK;
}

/* Frames from t = 0 to the end of the buffered span (both ends), cut at
 * max_seconds and at RU_WAV_MAX_FRAMES. */
static size_t audio_frames(const ru_wav *w, double dx_s, int *truncated)
{
    double rate = w->o.rate_hz;
    double f = floor((double)(w->n - 1) * dx_s * rate * (1.0 + 1e-12)) + 1.0;
    if (w->o.max_seconds > 0 && floor(w->o.max_seconds * rate + 0.5) < f)
        f = floor(w->o.max_seconds * rate + 0.5);
    if (f < 1.0)
        f = 1.0;
    *truncated = f > (double)RU_WAV_MAX_FRAMES;
    return *truncated ? RU_WAV_MAX_FRAMES : (size_t)f;
}

/* Integral of the piecewise-linear y (spacing 1/rate) from 0 to tau (s). */
static double pl_integral(const double *y, size_t n, double rate, double tau)
{
    double p = tau * rate, s = 0.0;
    if (p <= 0.0)
        return 0.0;
    if (p > (double)(n - 1))
        p = (double)(n - 1);
    size_t m = (size_t)p;
    for (size_t i = 0; i < m; i++)
        s += 0.5 * (y[i] + y[i + 1]);
    if (m < n - 1) {
        double f = p - (double)m, ym = y[m] + f * (y[m + 1] - y[m]);
        s += 0.5 * f * (y[m] + ym);
    }
    return s / rate;
}

/* Mean over the last whole tone periods (about 10 % of the audio) ending at end_s;
 * without a tone, over the last 10 %. */
static double settled_dc(const double *y, size_t n, double rate, double tone_audio_hz,
                         double end_s)
{
    if (n < 2 || !(end_s > 0))
        return y[0];
    double len = RU_WAV_DC_FRACTION * end_s;
    if (tone_audio_hz > 0 && isfinite(tone_audio_hz)) {
        double per = 1.0 / tone_audio_hz, m = floor(len / per);
        if (m < 1.0)
            m = 1.0;
        if (m * per > end_s)
            m = floor(end_s / per);
        len = m >= 1.0 ? m * per : end_s;
    }
    return (pl_integral(y, n, rate, end_s) - pl_integral(y, n, rate, end_s - len)) / len;
}

/* Integral of the piecewise-linear y from 0 to tau (s), tau in [0, end], from the
 * running trapezoid sums cum (cum[i]: the integral up to frame i). */
static double cum_integral(const double *y, const double *cum, size_t n, double rate,
                           double tau)
{
    double p = tau * rate;
    if (p <= 0.0)
        return 0.0;
    if (p >= (double)(n - 1))
        return cum[n - 1];
    size_t m = (size_t)p;
    double f = p - (double)m, ym = y[m] + f * (y[m + 1] - y[m]);
    return cum[m] + 0.5 * f * (y[m] + ym) / rate;
}

/* out[i] = mean of y over one period centred on frame i (a running mean; O(n)),
 * or with subtract set, out[i] -= that mean. Within half a period of either end
 * the window stays a whole period inside the data (one-sided), so a tone that is
 * already running at an end still averages to zero. cum is scratch of n entries;
 * out may not alias y or cum. Needs period_s <= the data's length. */
static void running_mean(const double *y, size_t n, double rate, double period_s,
                         double *cum, double *out, int subtract)
{
    double end_s = (double)(n - 1) / rate;
    cum[0] = 0.0;
    for (size_t i = 1; i < n; i++)
        cum[i] = cum[i - 1] + 0.5 * (y[i - 1] + y[i]) / rate;
    for (size_t i = 0; i < n; i++) {
        double t = (double)i / rate, lo = t - 0.5 * period_s, hi = t + 0.5 * period_s;
        if (lo < 0.0) {
            lo = 0.0;
            hi = period_s;
        } else if (hi > end_s) {
            hi = end_s;
            lo = end_s - period_s;
        }
        double mean = (cum_integral(y, cum, n, rate, hi) -
                       cum_integral(y, cum, n, rate, lo)) / period_s;
        out[i] = subtract ? out[i] - mean : mean;
    }
}

/* Removes the moving DC level: the running mean over one tone period, taken twice
 * (a triangular window two periods wide). It passes a linear ramp exactly and has
 * double zeros at the tone and every harmonic, so the tone and its harmonics are
 * untouched while a biased stage's power-on step and bias settling (slower than a
 * period) are taken out: a high-pass well below the tone, as a coupling capacitor
 * would be, without its thump. Returns 0 when out of memory (y unchanged). */
static int remove_moving_dc(double *y, size_t n, double rate, double period_s)
{
    double *cum = malloc(n * sizeof *cum), *m1 = malloc(n * sizeof *m1);
    if (!cum || !m1) {
        free(cum);
        free(m1);
        return 0;
    }
    running_mean(y, n, rate, period_s, cum, m1, 0);
    running_mean(m1, n, rate, period_s, cum, y, 1);
    free(cum);
    free(m1);
    return 1;
}

/* Raised-cosine fade over the last L frames (L <= n/2); the last frame is 0. */
static size_t fade_out(double *y, size_t n, double rate, double fade_s)
{
    size_t L = (size_t)floor(fade_s * rate + 0.5);
    if (L > n / 2)
        L = n / 2;
    for (size_t m = 0; m < L; m++)
        y[n - L + m] *= 0.5 * (1.0 + cos(RU_WAV_PI * (double)(m + 1) / (double)L));
    return L;
}

static double peak_of(const double *y, size_t n)
{
    double p = 0.0;
    for (size_t i = 0; i < n; i++)
        p = fmax(p, fabs(y[i]));
    return p;
}

/* Largest |x - dc| of the unfiltered probe over the simulated span of the audio. */
static double raw_peak(const ru_wav *w, double dx_s, size_t frames, double dc)
{
    double end = (double)(frames - 1) / w->o.rate_hz, p = 0.0;
    for (size_t i = 0; i < w->n && (double)i * dx_s <= end * (1.0 + 1e-12); i++)
        p = fmax(p, fabs(w->x[i] - dc));
    return p;
}

/* DC removal, fade-out, normalization of y (in volts on entry). With a tone in
 * the audio band, the moving DC goes (remove_moving_dc) and the gain is level /
 * peak. Otherwise the settled DC goes and the gain is at most 1 / (the unfiltered
 * probe's peak): what the filter removed (a tone above the audio band) is never
 * amplified past full scale. */
static ru_status shape(const ru_wav *w, double dx_s, double *y, size_t n, double end_s,
                       ru_wav_info *info)
{
    double rate = w->o.rate_hz, before = peak_of(y, n);
    double dc = settled_dc(y, n, rate, info->tone_audio_hz, end_s);
    double tone = info->tone_audio_hz, per = 1.0 / tone;
    int track = tone > 0 && isfinite(tone) && tone <= info->passband_hz &&
                per * rate >= 2.0 && 4.0 * per <= (double)(n - 1) / rate;
    double plain = 0.0; /* the peak with only the settled DC removed */
    for (size_t i = 0; i < n; i++)
        plain = fmax(plain, fabs(y[i] - dc));
    if (track) {
        if (!remove_moving_dc(y, n, rate, per))
            return RU_ENOMEM;
    } else {
        for (size_t i = 0; i < n; i++)
            y[i] -= dc;
    }
    info->dc_removed_v = dc;
    info->fade_s = (double)fade_out(y, n, rate, w->o.fade_s) / rate;
    double peak = peak_of(y, n), level = pow(10.0, w->o.level_dbfs / 20.0);
    info->bias_removed = track && plain > RU_WAV_BIAS_MATTERS * peak;
    double gain = level / peak;
    double cap = track ? INFINITY : 1.0 / raw_peak(w, dx_s, n, dc);
    info->silent = !(peak > RU_WAV_SILENT * before);
    info->level_limited = !info->silent && cap < gain;
    gain = info->silent ? 0.0 : fmin(gain, cap);
    info->fullscale_v = info->silent ? INFINITY : 1.0 / gain;
    info->peak_dbfs = info->silent ? -INFINITY : 20.0 * log10(peak * gain);
    for (size_t i = 0; i < n; i++)
        y[i] *= gain;
    return RU_OK;
}

ru_status ru_wav_finish(ru_wav *w, double tone_hz, const char *path, ru_wav_info *info,
                        ru_error *err)
{
    ru_wav_info local;
    info = info ? info : &local;
    memset(info, 0, sizeof *info);
    if (!w || !path || w->n < 2)
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0,
                            "WAV export needs a path and at least 2 probe samples "
                            "(got %zu)", w ? w->n : 0);
    double k = 1.0;
    ru_status st = time_scale(w, tone_hz, &k, info, err);
    if (st != RU_OK)
        return st;
    double dx = w->o.sample_s * k, rate = w->o.rate_hz;
    ru_wav_band band;
    ru_wav_band_for(dx, rate, &band);
    size_t n = audio_frames(w, dx, &info->truncated);
    info->time_scale = k;
    info->tone_audio_hz = tone_hz > 0 && isfinite(tone_hz) ? tone_hz / k : NAN;
    info->passband_hz = band.pass_hz;
    info->frames = n;
    info->seconds = (double)n / rate;
    info->sim_span_s = (double)n / rate / k;
    info->buffer_bytes = w->cap * sizeof *w->x;
    info->audio_bytes = n * sizeof(double);
    double *y = malloc(n * sizeof *y);
    if (!y || ru_wav_resample(w->x, w->n, dx, rate, y, n) != RU_OK) {
        st = ru_error_set(err, RU_ENOMEM, NULL, 0, 0,
                          "WAV: out of memory for %zu audio frames", n);
        goto cleanup;
    }
    double end_s = fmin((double)(n - 1) / rate, (double)(w->n - 1) * dx - band.half_s);
    st = shape(w, dx, y, n,
               end_s > 0.5 * (double)(n - 1) / rate ? end_s : (double)(n - 1) / rate, info);
    if (st != RU_OK) {
        ru_error_set(err, st, NULL, 0, 0, "WAV: out of memory for %zu audio frames", n);
        goto cleanup;
    }
    st = ru_wav_write_file(path, rate, w->o.format, y, n, err);
cleanup:
    free(y);
    return st;
}
