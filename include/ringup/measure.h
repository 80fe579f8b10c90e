/* ringup/measure.h: start-up measurements on a sampled probe waveform.
 *
 * Samples are pushed one at a time as the transient engine delivers them (uniform
 * spacing); memory stays bounded by the number of cycles (one envelope point per
 * cycle) plus a fixed window for the spectrum, never by the number of samples.
 * Definitions (README has the full text):
 *   envelope      per cycle, from extrema refined by a parabola through the three
 *                 samples around each: amplitude = (max - following min)/2, at the
 *                 time midway between them; ignores the DC level.
 *   settled       mean envelope over the last 10 % of the run; `settled` is true
 *                 when the envelope there moves by at most 0.5 % (fitted line) and
 *                 the mean of each quarter of the window lies within 0.5 % of the
 *                 window's mean, with at least RU_SETTLE_MIN_CYCLES cycles in it.
 *   startup time  the first time the envelope enters the start-up band
 *                 [L, 2 - L] * settled (L = startup_level: +-10 % for 90 %) and
 *                 stays in it to the end, interpolated linearly between envelope
 *                 points, from t = 0; NAN when the last point is outside.
 *   growth rate   least-squares slope of ln(envelope) over the points between
 *                 growth_lo and growth_hi of settled and above the kick's level.
 *   frequency     from interpolated crossings of the mean over the settled window.
 *   THD           harmonics 2..10 by FFT over an integer number of periods
 *                 (the settled window resampled onto exactly K periods).
 *   settling time last time the envelope is outside +-1 % of settled.
 * A figure that cannot be had is NAN, with a reason in the result's notes. */
#ifndef RINGUP_MEASURE_H
#define RINGUP_MEASURE_H

#include "ringup/status.h"

#include <stddef.h>

#ifdef __cplusplus
extern "C" {
#endif

#define RU_HARMONICS 10 /* harmonics 2..RU_HARMONICS are reported */

typedef struct ru_measure ru_measure;

typedef struct ru_measure_cfg {
    double stop_s;         /* run end (s): the settled window is the last 10 % */
    double sample_s;       /* sample spacing (s) */
    double startup_level;  /* fraction of settled amplitude (0.9) */
    double growth_lo;      /* growth-fit window, fractions of settled (0.01) */
    double growth_hi;      /* (0.10) */
    double kick_level_v;   /* envelope level the kick itself gives (0 for none);
                              growth points must exceed 2x this */
    double settle_band;    /* settling band, fraction of settled (0.01) */
    double period_hint_s;  /* expected period (s) from the poles, 0 when unknown: lets
                              the envelope find cycles riding on a moving DC level */
} ru_measure_cfg;

/* Fills cfg with the defaults above for a run of stop_s sampled at sample_s. */
void ru_measure_cfg_default(ru_measure_cfg *cfg, double stop_s, double sample_s);

#define RU_NOTE_MAX 256

/* Fewest envelope points in the settled window for `settled`. */
#define RU_SETTLE_MIN_CYCLES 4

typedef struct ru_measure_result {
    int started;                 /* set by the verdict (ringup/verdict.h), 0 here */
    int settled;                 /* 1: the last-10 % envelope is settled (above) */
    double startup_time_s;
    double growth_rate_per_s;    /* sigma of exp(sigma t) */
    double growth_fit_t0_s;      /* fit window start and end times */
    double growth_fit_t1_s;
    double growth_fit_rms;       /* rms residual of ln(envelope) in the fit */
    double growth_fit_level_v;   /* the fitted exponential at t = 0: the level the
                                    growth extrapolates back to (NAN without a fit) */
    int growth_fit_points;
    double frequency_hz;
    double settled_amplitude_v;
    double settling_time_s;
    double fundamental_v;        /* peak amplitude of the settled tone's fundamental */
    double thd_percent;
    double harmonics_dbc[RU_HARMONICS - 1]; /* [0] is the 2nd harmonic */
    double dc_level_v;           /* mean over the settled window */
    double envelope_drift;       /* relative change over the settled window */
    double window_spread;        /* largest |quarter mean / window mean - 1| there */
    double window_s;             /* length of the settled window (s) */
    size_t window_points;        /* envelope points in it */
    double t_first_s, t_last_s;  /* times of the first and the last sample pushed */
    double first_cycle_t_s;      /* time of the first envelope point (NAN: none) */
    double trough_v;             /* lowest envelope point before the window (NAN: none) */
    double trough_t_s;           /* its time */
    double peak_envelope_v;      /* largest envelope point (overshoot when > settled) */
    double peak_t_s;             /* its time */
    double decay_before_per_s;   /* d ln(envelope)/dt from the peak to the window start
                                    (NAN: the peak is in the window) */
    double dc_motion_v;          /* mean of the window's last quarter of samples less
                                    that of its first quarter (V) */
    size_t cycles;               /* envelope points found */
    char growth_note[RU_NOTE_MAX];  /* why growth is NAN, or "" */
    char settle_note[RU_NOTE_MAX];  /* hint when not settled, or "" */
    char thd_note[RU_NOTE_MAX];     /* why THD is NAN, or "" */
} ru_measure_result;

/* Constructor. */
ru_status ru_measure_create(const ru_measure_cfg *cfg, ru_measure **out);
/* Destructor; NULL is harmless. */
void ru_measure_destroy(ru_measure *m);

/* Adds the next sample (t strictly increasing, uniform spacing). */
ru_status ru_measure_push(ru_measure *m, double t_s, double v);

/* Adds one envelope point made elsewhere: a cycle that an engine skipping cycles
 * computed alone, with its time (midway between its maximum and minimum) and
 * amplitude ((max - min)/2). Times increase across samples and points. The sample
 * stream restarts after a point: the next sample may follow after a gap, and the
 * frequency, DC level and THD come from the samples after the last point (they
 * should cover the settled window's last cycles). */
ru_status ru_measure_push_point(ru_measure *m, double t_s, double amp_v);

/* Computes every figure from what was pushed; may be called once at the end. */
ru_status ru_measure_finish(ru_measure *m, ru_measure_result *res);

/* The envelope points found so far (time and amplitude arrays of *n entries,
 * owned by m, valid until the next push or destroy). */
void ru_measure_envelope(const ru_measure *m, const double **t_s, const double **amp_v,
                         size_t *n);

/* Harmonic analysis of exactly `periods` whole periods held in x[0..n-1]
 * (uniformly sampled, n samples spanning the periods end-exclusive): amplitudes of
 * harmonics 1..nharm (amp[0] is the fundamental, volts peak) and THD in percent
 * (sqrt(sum_{k>=2} A_k^2)/A_1 * 100). Uses FFTW; plans are made under a lock. */
ru_status ru_harmonics(const double *x, size_t n, int periods, int nharm, double *amp,
                       double *thd_percent);

#ifdef __cplusplus
}
#endif
#endif
