/* wav_impl.h: the band-limited resampler behind ringup/wav.h (private).
 *
 * Input: samples x[0..nx) at spacing dx_s of audio time (the simulation spacing
 * times the time scale); output: y[0..ny) at j / rate_hz. Outside [0, nx) the
 * input is mirrored about its first / last sample (even extension: the local mean
 * and the value are continuous there, an ongoing tone's phase is not). The kernel is a Kaiser-windowed sinc
 * (beta for 110 dB) with its stopband edge at half the lower rate; each output is
 * divided by the sum of its weights, so a constant passes exactly. */
#ifndef RINGUP_WAV_IMPL_H
#define RINGUP_WAV_IMPL_H

#include "ringup/status.h"
#include "ringup/wav.h"

#include <stddef.h>

/* Band of the resampler for input spacing dx_s and output rate rate_hz: the
 * passband edge (Hz of audio time) and the kernel's half-width (s of audio time). */
typedef struct ru_wav_band {
    double low_rate_hz; /* min(1/dx_s, rate_hz) */
    double cutoff_hz;   /* 6 dB point of the sinc, 0.4583 low_rate */
    double pass_hz;     /* passband edge, 0.4167 low_rate */
    double stop_hz;     /* stopband edge, 0.5 low_rate */
    double half_s;      /* kernel half-width (s) */
} ru_wav_band;

void ru_wav_band_for(double dx_s, double rate_hz, ru_wav_band *b);

/* RU_OK or RU_ENOMEM (the kernel table). */
ru_status ru_wav_resample(const double *x, size_t nx, double dx_s, double rate_hz,
                          double *y, size_t ny);

/* The sink (ringup/wav.h); x[0..n) is the probe at t = i * o.sample_s. */
struct ru_wav {
    ru_wav_opts o;   /* options as given (checked) */
    double *x;       /* probe samples (V) at i * sample_s */
    size_t n;        /* samples held */
    size_t cap;      /* samples allocated */
    size_t cap_max;  /* planned span in samples: samples beyond are dropped */
    size_t pushed;   /* samples offered so far */
};

/* Writes y[0..n) (already in [-1, 1]) to path through a temporary file in the same
 * folder and a rename; RU_EIO with the path and the reason. */
ru_status ru_wav_write_file(const char *path, double rate_hz, ru_wav_format format,
                            const double *y, size_t n, ru_error *err);

#endif
