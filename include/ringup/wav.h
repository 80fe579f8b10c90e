/* ringup/wav.h: WAV export of the probe waveform (mono, 24-bit PCM or 32-bit float).
 *
 * An ru_wav is a sink: the caller pushes the probe voltage for every transient
 * sample (uniform simulation spacing sample_s, t = 0, sample_s, 2 sample_s, ...)
 * and, after the run, calls ru_wav_finish with the settled tone frequency. Only then
 * is the time scale known when a pitch is asked for, so the probe is buffered:
 *
 *   time scale k (audio seconds per simulated second) = tone_hz / pitch_hz with a
 *   pitch, else opts.time_scale (1 = real time). Audio sample j sits at simulated
 *   time t = j / (rate_hz * k); a frequency f in the simulation plays at f / k.
 *
 * Processing in ru_wav_finish, in this order:
 * 0. Pitch: without pitch_hz and with time scale 1, a tone below 20 Hz or above
 *    the passband at real time would be inaudible or nearly silent, so a pitch is
 *    chosen (opts.auto_pitch, on by default): 440 Hz, raised up to 4 kHz so that
 *    the run plays in about a minute at most (info.pitch_auto, info.pitch_hz).
 * 1. Band-limited resampling onto the audio grid with a Kaiser-windowed sinc whose
 *    stopband starts at half the lower of the two rates (audio rate, stretched
 *    simulation rate): it is the anti-aliasing low-pass when the simulation is
 *    denser than the audio and the band-limited interpolator when it is sparser.
 *    Passband up to 0.417 x that rate (20 kHz at 48 kHz), stopband from 0.5 x on,
 *    designed for 110 dB; see ru_wav_info.passband_hz. Outside the run the probe
 *    is mirrored about its first / last sample (even extension), so no step and
 *    no DC offset is invented at either end.
 * 2. DC removal. With a tone in the audio band: the moving DC, the running mean
 *    over one tone period taken twice (a triangular window two periods wide),
 *    is subtracted: it passes a ramp exactly and has double zeros at the tone and
 *    every harmonic, so the tone is untouched while a biased stage's power-on step
 *    and its bias settling are taken out (a high-pass well below the tone), and
 *    the normalization below follows the tone, not the bias (info.bias_removed).
 *    Otherwise the mean over the last whole number of tone periods (at least one,
 *    about the last 10 % of the audio, ending a filter half-width before the end
 *    of the run's data) is subtracted; without a tone, the mean of the last 10 %.
 * 3. Fade-out: a raised-cosine fade over the last fade_s (default 20 ms, at most
 *    half the file). Never a fade-in: the start-up stays as simulated.
 * 4. Peak normalization: the largest sample magnitude is set to level_dbfs
 *    (default -12 dBFS; above -1 dBFS is refused by ru_wav_create). The sample
 *    peak is set; inter-sample peaks of a band-limited tone sit at most a fraction
 *    of a dB higher, which the 1 dB ceiling leaves room for. One exception, only
 *    when no tone lies in the audio band: the gain never exceeds the one that
 *    would put the unfiltered probe's own peak (after DC removal) at 0 dBFS, so a
 *    tone the filter removed (above the audio band with the automatic pitch
 *    turned off) leaves a near-silent file instead of its residue amplified;
 *    info.level_limited and info.peak_dbfs say so.
 * 5. Written as "<path>.tmp.<pid>-<i>" in the target folder, renamed onto path when
 *    complete; on any failure the temporary file is removed (RU_EIO names the path
 *    and libsndfile's or the system's reason).
 *
 * Memory: 8 bytes per buffered probe sample, plus 8 bytes per audio frame during
 * ru_wav_finish, plus a 330 kB kernel table. Only the simulated span the audio can
 * use is buffered: the whole run without max_seconds; with max_seconds, that span
 * (plus a filter half-width) at the known time scale, or with a pitch at the
 * time scale of half the tone hint (a settled tone more than 2x below the hint
 * gives a shorter file; ru_wav_info says how long). ru_wav_create refuses a plan
 * above RU_WAV_MAX_BUFFER samples (256 MiB) and ru_wav_finish cuts the audio at
 * RU_WAV_MAX_FRAMES (info.truncated). Push never allocates beyond the plan.
 *
 * Threads: no shared state; one ru_wav per run. */
#ifndef RINGUP_WAV_H
#define RINGUP_WAV_H

#include "ringup/status.h"

#include <stddef.h>

#ifdef __cplusplus
extern "C" {
#endif

#define RU_WAV_CEILING_DBFS (-1.0)          /* highest peak level accepted */
#define RU_WAV_MAX_BUFFER ((size_t)1 << 25) /* buffered probe samples (256 MiB) */
#define RU_WAV_MAX_FRAMES ((size_t)1 << 25) /* audio frames (11.6 min at 48 kHz) */
#define RU_WAV_MIN_SECONDS 0.1           /* shortest --wav-seconds: longer than the 20 ms fade */
#define RU_WAV_PITCH_MIN_HZ 20.0            /* lowest --wav-pitch: the audible band */
#define RU_WAV_PITCH_MAX_HZ 20000.0         /* highest --wav-pitch */

typedef enum {
    RU_WAV_PCM24 = 0, /* 24-bit integer PCM */
    RU_WAV_FLOAT = 1  /* 32-bit IEEE float */
} ru_wav_format;

typedef struct ru_wav_opts {
    double rate_hz;      /* audio sample rate (Hz, whole number, 1000..768000); 48000 */
    ru_wav_format format;/* sample format; RU_WAV_PCM24 */
    double level_dbfs;   /* peak level (dBFS, -100..-1); -12 */
    double pitch_hz;     /* > 0: the tone plays at this pitch (k = tone_hz/pitch_hz);
                            0: use time_scale */
    double time_scale;   /* audio seconds per simulated second without a pitch; 1 */
    double max_seconds;  /* audio length cap (s), RU_WAV_MIN_SECONDS up to RU_WAV_MAX_FRAMES
                            at rate_hz; 0 = the whole run, stretched */
    double fade_s;       /* raised-cosine fade-out at the end (s); 0.02 */
    double sample_s;     /* spacing of the pushed samples (s, > 0), required */
    double stop_s;       /* run length (s, > 0), required: bounds the buffer */
    double tone_hint_hz; /* expected tone (Hz; e.g. the predicted one) or 0: bounds
                            the buffer when both pitch_hz and max_seconds are set */
    int auto_pitch;      /* 1 (default): without pitch_hz and with time_scale 1, a
                            tone below 20 Hz or above the passband gets a pitch
                            chosen by ru_wav_finish (see ru_wav_info.pitch_auto) */
} ru_wav_opts;

/* What ru_wav_finish did. */
typedef struct ru_wav_info {
    double time_scale;     /* k used (audio s per simulated s) */
    double tone_audio_hz;  /* where the tone lands in the audio (Hz; NAN: no tone) */
    double passband_hz;    /* audio content above this is attenuated or removed */
    double seconds;        /* audio length written (s) */
    size_t frames;         /* audio frames written */
    double sim_span_s;     /* simulated time the audio covers (s) */
    double dc_removed_v;   /* the probe DC that was subtracted (V) */
    double fullscale_v;    /* probe volts (after DC removal) that map to 0 dBFS;
                              INFINITY when silent */
    double fade_s;         /* fade-out length used (s) */
    double peak_dbfs;      /* peak written (dBFS): the level unless level_limited */
    int level_limited;     /* 1: gain capped (most of the probe lay outside the
                              audio band, e.g. tone_audio_hz > passband_hz) */
    int truncated;         /* 1: audio cut at RU_WAV_MAX_FRAMES */
    int silent;            /* 1: nothing left after DC removal; zeros written */
    int pitch_auto;        /* 1: the pitch was chosen automatically (the tone lay
                              outside the audio band at real time) */
    double pitch_hz;       /* pitch the tone plays at (Hz), 0 without one */
    int bias_removed;      /* 1: the moving DC (bias settling) was removed and it
                              mattered: with only the settled DC removed the peak
                              would have been more than 1 dB higher */
    size_t buffer_bytes;   /* memory of the probe buffer (bytes) */
    size_t audio_bytes;    /* memory of the audio buffer during finish (bytes) */
} ru_wav_info;

typedef struct ru_wav ru_wav;

/* Defaults above; sample_s and stop_s are left 0 (the caller must set them). */
void ru_wav_opts_default(ru_wav_opts *o);

/* Checks the options (RU_ERANGE with a sentence naming the option, e.g. a level
 * above -1 dBFS) and plans the buffer. */
ru_status ru_wav_create(const ru_wav_opts *o, ru_wav **out, ru_error *err);

/* One probe sample (V) at simulated time t_s; samples must come in order on the
 * grid k * sample_s (within 0.1 % of a spacing; RU_ERANGE otherwise, or for a
 * non-finite v). Samples beyond the planned span are accepted and dropped.
 * RU_ENOMEM when the buffer cannot grow. Signature fits a measurement-style sink. */
ru_status ru_wav_push(ru_wav *w, double t_s, double v);

/* Resamples, removes DC, fades out, normalizes and writes path (see above).
 * tone_hz: the settled tone frequency (Hz) in the simulation, e.g. the measured
 * one (the predicted one when the run did not settle), NAN when there is none;
 * required when a pitch was asked for (RU_ERANGE otherwise). info may be NULL.
 * Returns RU_OK, RU_ERANGE (fewer than 2 samples, no tone for the pitch),
 * RU_ENOMEM or RU_EIO. May be called more than once (the buffer is kept). */
ru_status ru_wav_finish(ru_wav *w, double tone_hz, const char *path, ru_wav_info *info,
                        ru_error *err);

/* Destructor; NULL is harmless. */
void ru_wav_destroy(ru_wav *w);

#ifdef __cplusplus
}
#endif
#endif
