/* test_wav.c: WAV export of the probe (ringup/wav.h), read back with libsndfile.
 *
 * The sink is fed analytic tones on a uniform grid, as the transient engine feeds
 * it, and the file is read back with libsndfile (an independent reader): rate,
 * format, frame count, peak level, mean, pitch after time scaling, waveform against
 * the analytic tone, fade at the end only, aliasing, errors and the temporary file. */
#define _GNU_SOURCE /* mkdtemp */
#include "ru_test.h"

#include "ringup/wav.h"

#include <complex.h>
#include <dirent.h>
#include <sndfile.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#define PI 3.14159265358979323846
#define LEVEL_12 0.251188643150958 /* 10^(-12/20) */

typedef struct tones {
    double dc_v;                       /* offset (V) */
    int n;                             /* number of cosines */
    double amp_v[3], f_hz[3], ph[3];   /* amplitude (V), frequency, phase (rad) */
    double grow_s;                     /* > 0: the cosines start at 1e-3 and grow
                                          logistically with this time constant (s),
                                          as an oscillator does from a kick */
    double bias_v, bias_tau_s;         /* > 0: a bias that steps from 0 at t = 0 and
                                          settles to bias_v with this time constant,
                                          as a biased stage's power-on */
} tones;

static double tone_at(const tones *s, double t)
{
    double v = 0, env = s->grow_s > 0 ? 1.0 / (1.0 + 999.0 * exp(-t / s->grow_s)) : 1.0;
    for (int i = 0; i < s->n; i++)
        v += s->amp_v[i] * cos(2 * PI * s->f_hz[i] * t + s->ph[i]);
    double bias = s->bias_tau_s > 0 ? s->bias_v * (1.0 - exp(-t / s->bias_tau_s)) : 0.0;
    return s->dc_v + bias + env * v;
}

typedef struct audio {
    double *y;       /* samples as read (full scale 1) */
    size_t n;        /* frames */
    int rate, fmt;   /* sample rate, SF_FORMAT_SUBMASK part */
} audio;

static void read_back(const char *path, audio *a)
{
    SF_INFO info;
    memset(&info, 0, sizeof info);
    SNDFILE *sf = sf_open(path, SFM_READ, &info);
    if (!sf)
        fail_msg("cannot read %s: %s", path, sf_strerror(NULL));
    assert_int_equal(info.channels, 1);
    assert_int_equal(info.format & SF_FORMAT_TYPEMASK, SF_FORMAT_WAV);
    a->n = (size_t)info.frames;
    a->rate = info.samplerate;
    a->fmt = info.format & SF_FORMAT_SUBMASK;
    a->y = malloc((a->n ? a->n : 1) * sizeof *a->y);
    assert_non_null(a->y);
    assert_int_equal(sf_read_double(sf, a->y, (sf_count_t)a->n), (sf_count_t)a->n);
    sf_close(sf);
}

/* Feeds the tone at t = i*h for i = 0 .. stop/h into a new sink and writes path. */
static ru_status export(ru_wav_opts *o, const tones *s, double tone_hz, const char *path,
                        ru_wav_info *info, ru_error *err)
{
    ru_wav *w = NULL;
    ru_status st = ru_wav_create(o, &w, err);
    if (st != RU_OK)
        return st;
    long last = lround(o->stop_s / o->sample_s);
    for (long i = 0; i <= last && st == RU_OK; i++)
        st = ru_wav_push(w, (double)i * o->sample_s, tone_at(s, (double)i * o->sample_s));
    if (st == RU_OK)
        st = ru_wav_finish(w, tone_hz, path, info, err);
    ru_wav_destroy(w);
    return st;
}

static void opts_for(ru_wav_opts *o, double sample_s, double stop_s)
{
    ru_wav_opts_default(o);
    o->sample_s = sample_s;
    o->stop_s = stop_s;
}

static double peak_of(const audio *a)
{
    double p = 0;
    for (size_t i = 0; i < a->n; i++)
        p = fmax(p, fabs(a->y[i]));
    return p;
}

static double rms_of(const double *y, size_t n)
{
    double s = 0;
    for (size_t i = 0; i < n; i++)
        s += y[i] * y[i];
    return sqrt(s / (double)n);
}

/* Frequency from upward zero crossings (linear interpolation) in [j0, j1). */
static double zero_cross_hz(const audio *a, size_t j0, size_t j1)
{
    double first = -1, lastt = -1;
    long count = 0;
    for (size_t j = j0; j + 1 < j1; j++) {
        if (a->y[j] < 0 && a->y[j + 1] >= 0) {
            double t = ((double)j + a->y[j] / (a->y[j] - a->y[j + 1])) / a->rate;
            if (count == 0)
                first = t;
            lastt = t;
            count++;
        }
    }
    assert_true(count > 2);
    return (double)(count - 1) / (lastt - first);
}

/* Amplitude of the component at f_hz over y[j0 .. j0+n) (DFT at one frequency). */
static double amp_at(const double *y, size_t j0, size_t n, double rate, double f_hz)
{
    double complex s = 0;
    for (size_t j = 0; j < n; j++)
        s += y[j0 + j] * cexp(-I * 2 * PI * f_hz * (double)(j0 + j) / rate);
    return 2.0 * cabs(s) / (double)n;
}

static int count_entries(const char *dir)
{
    DIR *d = opendir(dir);
    int n = 0;
    assert_non_null(d);
    for (struct dirent *e; (e = readdir(d));)
        if (strcmp(e->d_name, ".") && strcmp(e->d_name, ".."))
            n++;
    closedir(d);
    return n;
}

static void cleanup_dir(const char *dir, const char *file)
{
    char p[128];
    snprintf(p, sizeof p, "%s/%s", dir, file);
    unlink(p);
    rmdir(dir);
}

/* 1 kHz, 3 V on a 2.5 V bias, simulated at 192 kHz, 0.5 s of 24-bit audio. */
static void test_pcm24_round_trip(void **state)
{
    (void)state;
    char dir[] = "/tmp/ru_wav_XXXXXX", path[64];
    assert_non_null(mkdtemp(dir));
    snprintf(path, sizeof path, "%s/probe.wav", dir);
    tones s = {.dc_v = 2.5, .n = 1, .amp_v = {3.0}, .f_hz = {1000}};
    ru_wav_opts o;
    opts_for(&o, 1.0 / 192000, 1.0);
    o.max_seconds = 0.5;
    ru_wav_info info;
    ru_error err;
    assert_int_equal(export(&o, &s, 1000, path, &info, &err), RU_OK);
    audio a;
    read_back(path, &a);
    /* Reference: the options (48 kHz, 24-bit) and frames = seconds * rate. */
    assert_int_equal(a.rate, 48000);
    assert_int_equal(a.fmt, SF_FORMAT_PCM_24);
    assert_int_equal(a.n, 24000);
    assert_int_equal(info.frames, 24000);
    /* Reference: -12 dBFS = 20 log10(peak). 24-bit rounding moves the peak by at most
     * 2^-24 / 0.25 = 2.4e-7 relative (2e-6 dB), far inside 0.01 dB. */
    RU_ASSERT_NEAR(20 * log10(peak_of(&a)), -12.0, 0.01);
    /* Reference: definition of the mean. Without DC removal the mean would be
     * 2.5/3 * 0.2512 = 0.209; the DC window covers whole periods, and what is left
     * comes from the faded last 20 ms and the onset (measured 5e-6): 1e-4. */
    double mean = 0;
    for (size_t j = 0; j < a.n; j++)
        mean += a.y[j] / (double)a.n;
    RU_ASSERT_NEAR(mean, 0.0, 1e-4);
    RU_ASSERT_NEAR(info.dc_removed_v, 2.5, 1e-6);
    /* First 2 ms unfaded (no fade-in): the analytic cosine at the same level within
     * 0.5 % of the level (a fade-in would miss by up to 100 %; the mirror extension
     * continues a cosine at its crest, measured 5e-7). Reference: the tone's formula. */
    double onset = 0;
    for (size_t j = 0; j < 96; j++)
        onset = fmax(onset, fabs(a.y[j] - LEVEL_12 * cos(2 * PI * 1000.0 * (double)j / 48000)));
    print_message("mean %.2e, onset error %.2e of the level\n", mean, onset / LEVEL_12);
    assert_true(onset < 5e-3 * LEVEL_12);
    /* Fade at the end only: raised cosine over 20 ms (960 frames) ending at 0; over
     * the last 5 ms the gain is at most 0.5 (1 + cos(0.75 pi)) = 0.146 (definition of
     * the raised-cosine fade). */
    RU_ASSERT_NEAR(a.y[a.n - 1], 0.0, 2e-7);
    double mid = rms_of(a.y + 12000, 4800), end = rms_of(a.y + a.n - 240, 240);
    RU_ASSERT_NEAR(rms_of(a.y, 240), mid, 0.01 * mid);
    assert_true(end < 0.146 * mid);
    RU_ASSERT_NEAR(info.fade_s, 0.02, 1e-12);
    /* The temporary file is gone: only probe.wav is left. */
    assert_int_equal(count_entries(dir), 1);
    free(a.y);
    cleanup_dir(dir, "probe.wav");
}

/* Float WAV: values stored as written (LIBRARIES.md), so the peak is the level. */
static void test_float_format(void **state)
{
    (void)state;
    char dir[] = "/tmp/ru_wav_XXXXXX", path[64];
    assert_non_null(mkdtemp(dir));
    snprintf(path, sizeof path, "%s/f.wav", dir);
    tones s = {.dc_v = -1.0, .n = 1, .amp_v = {0.02}, .f_hz = {1000}};
    ru_wav_opts o;
    opts_for(&o, 1.0 / 96000, 0.25);
    o.format = RU_WAV_FLOAT;
    o.level_dbfs = -6.0;
    ru_error err;
    assert_int_equal(export(&o, &s, 1000, path, NULL, &err), RU_OK);
    audio a;
    read_back(path, &a);
    assert_int_equal(a.fmt, SF_FORMAT_FLOAT);
    /* Whole run: frames from t = 0 to 0.25 s inclusive = 0.25 * 48000 + 1. */
    assert_int_equal(a.n, 12001);
    /* Reference: 10^(-6/20); float32 rounding is 6e-8 relative. */
    RU_ASSERT_REL(peak_of(&a), pow(10, -6.0 / 20), 1e-6);
    free(a.y);
    cleanup_dir(dir, "f.wav");
}

/* Never above -1 dBFS: -0.5 is refused, -1 is met exactly on a 100 V tone. */
static void test_level_ceiling(void **state)
{
    (void)state;
    char dir[] = "/tmp/ru_wav_XXXXXX", path[64];
    assert_non_null(mkdtemp(dir));
    snprintf(path, sizeof path, "%s/l.wav", dir);
    ru_wav_opts o;
    opts_for(&o, 1e-5, 0.1);
    o.level_dbfs = -0.5;
    ru_wav *w = NULL;
    ru_error err;
    assert_int_equal(ru_wav_create(&o, &w, &err), RU_ERANGE);
    assert_null(w);
    assert_non_null(strstr(err.msg, "-1 dBFS"));
    o.level_dbfs = -1.0;
    tones s = {.n = 1, .amp_v = {100.0}, .f_hz = {700}};
    assert_int_equal(export(&o, &s, 700, path, NULL, &err), RU_OK);
    audio a;
    read_back(path, &a);
    /* Reference: 20 log10(peak) <= -1; 24-bit rounding is 1e-6 dB. */
    double db = 20 * log10(peak_of(&a));
    assert_true(db <= -1.0 + 1e-5);
    RU_ASSERT_NEAR(db, -1.0, 0.01);
    free(a.y);
    cleanup_dir(dir, "l.wav");
}

/* 1 MHz simulated with --wav-pitch 1 kHz: time scale 1e6/1e3 = 1000. */
static void test_pitch_1mhz(void **state)
{
    (void)state;
    char dir[] = "/tmp/ru_wav_XXXXXX", path[64];
    assert_non_null(mkdtemp(dir));
    snprintf(path, sizeof path, "%s/p.wav", dir);
    tones s = {.n = 1, .amp_v = {1.0}, .f_hz = {1e6}, .ph = {0.3}};
    ru_wav_opts o;
    opts_for(&o, 1.0 / 72e6, 2e-3);
    o.pitch_hz = 1000;
    o.max_seconds = 1.0;
    o.tone_hint_hz = 1e6;
    ru_wav_info info;
    ru_error err;
    assert_int_equal(export(&o, &s, 1e6, path, &info, &err), RU_OK);
    audio a;
    read_back(path, &a);
    assert_int_equal(a.n, 48000);
    /* Reference: time scaling f_audio = f_sim / k with k = f_settled / pitch = 1000.
     * Linear interpolation of crossings at 48 samples per period errs by ~1e-7
     * relative over 800 periods; 1e-5 leaves room. */
    RU_ASSERT_REL(zero_cross_hz(&a, 4800, 43200), 1000.0, 1e-5);
    RU_ASSERT_REL(info.time_scale, 1000.0, 1e-12);
    RU_ASSERT_REL(info.tone_audio_hz, 1000.0, 1e-12);
    free(a.y);
    /* A pitch needs a tone: none given is an error, not a guess. */
    assert_int_equal(export(&o, &s, NAN, path, NULL, &err), RU_ERANGE);
    assert_non_null(strstr(err.msg, "pitch"));
    cleanup_dir(dir, "p.wav");
}

/* Least-squares gain of y against s and the largest residual, over [j0, j1). */
static double fit_residual(const double *y, const double *s, size_t j0, size_t j1,
                           double *gain)
{
    double num = 0, den = 0, worst = 0;
    for (size_t j = j0; j < j1; j++)
        num += y[j] * s[j], den += s[j] * s[j];
    *gain = num / den;
    for (size_t j = j0; j < j1; j++)
        worst = fmax(worst, fabs(y[j] - *gain * s[j]));
    return worst;
}

/* Real time: a tone simulated at spacing h keeps its frequency and its waveform. */
static void check_real_time(double sample_s, double stop_s, size_t frames)
{
    char dir[] = "/tmp/ru_wav_XXXXXX", path[64];
    assert_non_null(mkdtemp(dir));
    snprintf(path, sizeof path, "%s/r.wav", dir);
    tones s = {.n = 1, .amp_v = {1.0}, .f_hz = {440}, .ph = {-PI / 2}};
    ru_wav_opts o;
    opts_for(&o, sample_s, stop_s);
    o.format = RU_WAV_FLOAT;
    ru_error err;
    assert_int_equal(export(&o, &s, 440, path, NULL, &err), RU_OK);
    audio a;
    read_back(path, &a);
    assert_int_equal(a.n, frames);
    /* Reference: time scale 1 keeps 440 Hz (crossing error as in the pitch test). */
    RU_ASSERT_REL(zero_cross_hz(&a, 2400, a.n - 2400), 440.0, 1e-5);
    double *ref = malloc(a.n * sizeof *ref), gain = 0;
    assert_non_null(ref);
    for (size_t j = 0; j < a.n; j++)
        ref[j] = tone_at(&s, (double)j / 48000);
    /* Reference: Whittaker-Shannon: samples of a tone below half the rate determine
     * it, so the resampled audio is the same sine at the audio times. Bound: the
     * filter's passband ripple (1e-5 for 110 dB Kaiser), the kernel table (1.2e-6)
     * and float32 (6e-8): 3e-5 of the level. */
    double worst = fit_residual(a.y, ref, 2400, a.n - 2400, &gain);
    print_message("h = %g s: gain %.6f of the level, worst residual %.2e of it\n",
                  sample_s, gain / LEVEL_12, worst / LEVEL_12);
    /* The peak is set on the whole file, which includes the band-limited onset at
     * t = 0 (a slope step overshoots; measured 0.23 % with 8 kHz input): 0.5 %. */
    RU_ASSERT_REL(gain, LEVEL_12, 5e-3);
    assert_true(worst < 3e-5 * gain);
    free(ref);
    free(a.y);
    cleanup_dir(dir, "r.wav");
}

static void test_440_at_48k(void **state)
{
    (void)state;
    check_real_time(1.0 / 48000, 1.0, 48001); /* same rate: pass-through */
}

static void test_440_from_8k(void **state)
{
    (void)state;
    check_real_time(1.0 / 8000, 0.5, 24001); /* simulation sparser: interpolation */
}

/* A tone above the audio Nyquist after stretching: rate 48 kHz, a 1 kHz tone and an
 * equal one at f_hi; point sampling would fold f_hi to 48k - f_hi at full size. */
static double alias_db(double f_sim_lo, double f_sim_hi, double sample_s, double stop_s,
                       double pitch_hz)
{
    char dir[] = "/tmp/ru_wav_XXXXXX", path[64];
    assert_non_null(mkdtemp(dir));
    snprintf(path, sizeof path, "%s/a.wav", dir);
    tones s = {.n = 2, .amp_v = {1.0, 1.0}, .f_hz = {f_sim_lo, f_sim_hi}, .ph = {0, 1}};
    ru_wav_opts o;
    opts_for(&o, sample_s, stop_s);
    o.format = RU_WAV_FLOAT;
    o.pitch_hz = pitch_hz;
    o.max_seconds = 1.0;
    ru_wav_info info;
    ru_error err;
    assert_int_equal(export(&o, &s, f_sim_lo, path, &info, &err), RU_OK);
    audio a;
    read_back(path, &a);
    double k = info.time_scale, fa = 48000 - f_sim_hi / k;
    /* 0.5 s in the middle: whole periods of 1 kHz and of the alias frequencies
     * used (18 kHz, 23 kHz), so the two bins do not leak into each other. */
    double main_amp = amp_at(a.y, 12000, 24000, 48000, f_sim_lo / k);
    double alias = amp_at(a.y, 12000, 24000, 48000, fa);
    /* The 1 kHz tone is there; the peak also holds the band-limited onset of the
     * removed tone, which starts abruptly at t = 0 (a click in the first samples),
     * so only a floor is asserted. */
    assert_true(main_amp > 0.5 * LEVEL_12);
    free(a.y);
    cleanup_dir(dir, "a.wav");
    return 20 * log10(alias / main_amp);
}

static void test_alias_rejection(void **state)
{
    (void)state;
    /* The measuring tool sees a folded tone: point sampling 30 kHz at 48 kHz gives a
     * full-size 18 kHz component. Reference: sampling theorem (folding at fs/2). */
    double *naive = malloc(48000 * sizeof *naive);
    assert_non_null(naive);
    for (int j = 0; j < 48000; j++)
        naive[j] = cos(2 * PI * 30000.0 * j / 48000 + 1);
    RU_ASSERT_REL(amp_at(naive, 12000, 24000, 48000, 18000), 1.0, 1e-9);
    free(naive);
    /* Reference: sampling theorem; the filter's stopband starts at 23.99 kHz and is
     * designed for 110 dB (wav_resample.c); 100 dB is asserted (the kernel table's
     * interpolation error is about -118 dB). Measured figures are in the report. */
    double d30 = alias_db(1000, 30000, 1.0 / 192000, 1.0, 0);
    double d25 = alias_db(1000, 25000, 1.0 / 192000, 1.0, 0);
    double dp = alias_db(1e6, 30e6, 1.0 / 72e6, 1e-3, 1000); /* 30th harmonic, stretched */
    print_message("alias: 30 kHz %.1f dB, 25 kHz %.1f dB, 30 MHz at pitch 1 kHz %.1f dB\n",
                  d30, d25, dp);
    assert_true(d30 < -100);
    assert_true(d25 < -100);
    assert_true(dp < -100);
}

/* A tone wholly above the audio band (30 kHz at 48 kHz, no pitch) growing from a
 * 1 mV kick: the filter removes it and the gain cap keeps its residue from being
 * blown up to -12 dBFS. */
static void test_out_of_band(void **state)
{
    (void)state;
    char dir[] = "/tmp/ru_wav_XXXXXX", path[64];
    assert_non_null(mkdtemp(dir));
    snprintf(path, sizeof path, "%s/o.wav", dir);
    tones s = {.n = 1, .amp_v = {1.0}, .f_hz = {30000}, .ph = {1.0}, .grow_s = 5e-3};
    ru_wav_opts o;
    opts_for(&o, 1.0 / 192000, 0.5);
    o.format = RU_WAV_FLOAT;
    o.auto_pitch = 0; /* real time asked for: the tone is out of the band */
    ru_wav_info info;
    ru_error err;
    assert_int_equal(export(&o, &s, 30000, path, &info, &err), RU_OK);
    audio a;
    read_back(path, &a);
    /* Reference: sampling theorem (30 kHz is not representable at 48 kHz). The cap
     * maps the 1 V tone to 0 dBFS; what is left is the band-limited onset of the
     * 1 mV start (a kink at t = 0, below -60 dB of the tone) and the stopband
     * leakage (below -110 dB): asserted below -50 dBFS and -100 dBFS rms. */
    assert_true(info.level_limited);
    assert_true(info.tone_audio_hz > info.passband_hz);
    RU_ASSERT_NEAR(20 * log10(peak_of(&a)), info.peak_dbfs, 1e-3);
    print_message("out of band: peak %.1f dBFS, rms after 50 ms %.1f dBFS\n",
                  info.peak_dbfs, 20 * log10(rms_of(a.y + 2400, a.n - 3600)));
    assert_true(info.peak_dbfs < -50);
    assert_true(rms_of(a.y + 2400, a.n - 3600) < 1e-5);
    free(a.y);
    cleanup_dir(dir, "o.wav");
}

/* A biased stage's power-on: the bias jumps to 9 V and settles over 40 periods
 * while a 0.3 V, 1 kHz tone grows from a 0.3 mV kick (time constant 5 periods).
 * Removing only the settled DC leaves the 9 V step as the file's peak and the tone
 * about 30 dB down; with the moving DC removed the settled tone sits at the
 * level. */
static void test_bias_removed(void **state)
{
    (void)state;
    char dir[] = "/tmp/ru_wav_XXXXXX", path[64];
    assert_non_null(mkdtemp(dir));
    snprintf(path, sizeof path, "%s/b.wav", dir);
    tones s = {.n = 1, .amp_v = {0.3}, .f_hz = {1000}, .grow_s = 5e-3,
               .bias_v = 9.0, .bias_tau_s = 40e-3};
    ru_wav_opts o;
    opts_for(&o, 1.0 / 96000, 0.5);
    o.format = RU_WAV_FLOAT;
    ru_wav_info info;
    ru_error err;
    assert_int_equal(export(&o, &s, 1000, path, &info, &err), RU_OK);
    audio a;
    read_back(path, &a);
    assert_true(info.bias_removed);
    assert_false(info.level_limited);
    /* Reference: the settled tone's amplitude by a single-frequency DFT over 0.1 s
     * (100 whole periods, so the DFT is exact for a steady tone) before the fade,
     * against the level: the tone, settled to 0.3 V, should be the file's peak.
     * The triangular running mean has double zeros at 1 kHz (a boxcar of one
     * period: sin(pi f T)/(pi f T), zero at f = 1/T; Oppenheim & Schafer,
     * "Discrete-Time Signal Processing", moving-average filter; from memory), so
     * the tone passes unchanged; what is left of the bias after its first periods
     * is its curvature over two periods, tau = 40 periods: below 1e-3 of 9 V. */
    double amp = amp_at(a.y, 14400, 4800, 48000, 1000);
    print_message("bias removed: settled tone %.2f dB of the level, peak %.2f dBFS\n",
                  20 * log10(amp / LEVEL_12), info.peak_dbfs);
    RU_ASSERT_REL(amp, LEVEL_12, 0.03);
    /* The mean of the settled part is the tone's: zero (the bias is gone). */
    double mean = 0;
    for (size_t j = 14400; j < 19200; j++)
        mean += a.y[j] / 4800.0;
    assert_true(fabs(mean) < 1e-3 * LEVEL_12);
    free(a.y);
    cleanup_dir(dir, "b.wav");
}

/* A 30 kHz tone with no pitch asked for: the pitch is chosen (440 Hz) so the file
 * is not silent; asking for real time (auto_pitch 0) keeps it out of the band
 * (test_out_of_band). */
static void test_auto_pitch(void **state)
{
    (void)state;
    char dir[] = "/tmp/ru_wav_XXXXXX", path[64];
    assert_non_null(mkdtemp(dir));
    snprintf(path, sizeof path, "%s/p.wav", dir);
    tones s = {.n = 1, .amp_v = {1.0}, .f_hz = {30000}, .ph = {1.0}, .grow_s = 5e-3};
    ru_wav_opts o;
    opts_for(&o, 1.0 / 480000, 0.05);
    o.format = RU_WAV_FLOAT;
    ru_wav_info info;
    ru_error err;
    assert_int_equal(export(&o, &s, 30000, path, &info, &err), RU_OK);
    audio a;
    read_back(path, &a);
    assert_true(info.pitch_auto);
    RU_ASSERT_NEAR(info.pitch_hz, 440.0, 1e-12);
    /* Reference: time scaling f_audio = f_sim / k, k = 30 kHz / 440 Hz = 68.18; the
     * 0.05 s run plays for 0.05 k = 3.41 s. */
    RU_ASSERT_REL(info.time_scale, 30000.0 / 440.0, 1e-12);
    RU_ASSERT_REL(info.seconds, 0.05 * 30000.0 / 440.0, 1e-3);
    RU_ASSERT_REL(zero_cross_hz(&a, a.n / 2, a.n - 4800), 440.0, 1e-4);
    RU_ASSERT_NEAR(info.peak_dbfs, -12.0, 0.01);
    free(a.y);
    cleanup_dir(dir, "p.wav");
}

/* With a length cap and a known time scale only the span the audio needs is kept:
 * 0.1 s + the filter half-width (0.91 ms) at 192 kHz, although 10 s are pushed. */
static void test_memory_bound(void **state)
{
    (void)state;
    char dir[] = "/tmp/ru_wav_XXXXXX", path[64];
    assert_non_null(mkdtemp(dir));
    snprintf(path, sizeof path, "%s/m.wav", dir);
    tones s = {.n = 1, .amp_v = {1.0}, .f_hz = {500}};
    ru_wav_opts o;
    opts_for(&o, 1.0 / 192000, 10.0);
    o.max_seconds = 0.1;
    ru_wav_info info;
    ru_error err;
    assert_int_equal(export(&o, &s, 500, path, &info, &err), RU_OK);
    /* Reference: the bound in wav.h, (0.1 + 0.00091 + 2/48000) s * 192 kHz + 2. */
    assert_true(info.buffer_bytes <= 8 * 19400);
    assert_int_equal(info.frames, 4800);
    cleanup_dir(dir, "m.wav");
}

static void test_errors(void **state)
{
    (void)state;
    ru_wav_opts o;
    ru_wav *w = NULL;
    ru_error err;
    ru_wav_destroy(NULL);
    opts_for(&o, 1e-6, 1.0);
    o.rate_hz = 44100.5; /* not a whole number */
    assert_int_equal(ru_wav_create(&o, &w, &err), RU_ERANGE);
    opts_for(&o, 1e-9, 1.0); /* 1e9 samples to buffer: refused before the run */
    assert_int_equal(ru_wav_create(&o, &w, &err), RU_ERANGE);
    assert_non_null(strstr(err.msg, "MiB"));
    opts_for(&o, 1e-3, 1.0);
    assert_int_equal(ru_wav_create(&o, &w, &err), RU_OK);
    assert_int_equal(ru_wav_push(w, 0.0, 1.0), RU_OK);
    assert_int_equal(ru_wav_push(w, 0.0015, 1.0), RU_ERANGE); /* off the grid */
    assert_int_equal(ru_wav_push(w, 0.001, NAN), RU_ERANGE);
    assert_int_equal(ru_wav_finish(w, 100, "/tmp/x.wav", NULL, &err), RU_ERANGE);
    assert_int_equal(ru_wav_push(w, 0.001, 1.0), RU_OK);
    /* Missing folder: RU_EIO naming the path and the reason. */
    const char *bad = "/tmp/ru_wav_no_such_folder/sub/x.wav";
    assert_int_equal(ru_wav_finish(w, 100, bad, NULL, &err), RU_EIO);
    assert_non_null(strstr(err.msg, bad));
    assert_non_null(strstr(err.msg, "No such file"));
    /* Target is a folder: the rename fails and the temporary file is removed. */
    char dir[] = "/tmp/ru_wav_XXXXXX", path[64];
    assert_non_null(mkdtemp(dir));
    snprintf(path, sizeof path, "%s/d.wav", dir);
    assert_int_equal(mkdir(path, 0755), 0);
    assert_int_equal(ru_wav_finish(w, 100, path, NULL, &err), RU_EIO);
    assert_non_null(strstr(err.msg, path));
    assert_int_equal(count_entries(dir), 1);
    rmdir(path);
    rmdir(dir);
    ru_wav_destroy(w);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_pcm24_round_trip), cmocka_unit_test(test_float_format),
        cmocka_unit_test(test_level_ceiling),    cmocka_unit_test(test_pitch_1mhz),
        cmocka_unit_test(test_bias_removed),     cmocka_unit_test(test_auto_pitch),
        cmocka_unit_test(test_440_at_48k),       cmocka_unit_test(test_440_from_8k),
        cmocka_unit_test(test_alias_rejection),  cmocka_unit_test(test_out_of_band),
        cmocka_unit_test(test_memory_bound),
        cmocka_unit_test(test_errors),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
