/* measure_impl.h: private parts shared by measure.c, envelope.c and harmonics.c.
 *
 * Not installed, not part of the public API. The envelope tracker turns a stream of
 * samples into one envelope point per cycle (memory O(cycles)); the harmonics helpers
 * resample a uniformly sampled stretch onto whole periods and call ru_harmonics.
 * Invariants: env_t/env_a hold n_env points with strictly increasing times;
 * cap_env >= n_env and grows by doubling only. */
#ifndef RU_MEASURE_IMPL_H
#define RU_MEASURE_IMPL_H

#include "ringup/measure.h"

#include <stdint.h>

/* One candidate extremum: the extreme sample and its two neighbours. */
typedef struct ru_ext {
    double t_s;       /* time of the extreme sample (s) */
    double v;         /* its value (V) */
    double vprev;     /* sample before it (V), valid when has_prev */
    double vnext;     /* sample after it (V), valid when has_next */
    double dt_s;      /* sample spacing around it (s) */
    uint64_t idx;     /* global sample index */
    int ok;           /* 1: this candidate holds a sample */
    int has_prev;     /* 1: vprev is set */
    int has_next;     /* 1: vnext is set */
} ru_ext;

/* Seeks one extremum: the maximum when sign = +1, the minimum when sign = -1. */
typedef struct ru_seek {
    ru_ext cand;      /* most extreme sample since the last confirmed opposite one */
    ru_ext sub;       /* most opposite sample after cand (next candidate) */
    int sign;         /* +1 seeks a maximum, -1 a minimum */
    double rise_v;    /* detrended swing (V, >= 0) that led to cand: from the deepest
                         opposite sample between the previous cand and it */
} ru_seek;

/* Streaming envelope: extrema of the signal less a DC ramp estimated from the
 * midpoints of the last extrema, confirmed by hysteresis and (with a period hint) a
 * hold time, refined by a parabola. */
/* Extrema needed before the DC slope is estimated: two weighted means of three
 * successive extrema, a period apart (envelope.c). */
#define RU_ENV_SLOPE_EXT 5

typedef struct ru_envelope {
    int mode;            /* 0: direction unknown (hi and lo both seek), 1: tracking */
    ru_seek hi, lo;      /* mode 0: seek the first maximum / minimum */
    ru_seek seek;        /* mode 1: the extremum sought now */
    double floor_v;      /* minimum hysteresis (V): noise the swing must beat */
    double period_s;     /* hinted period (s); 0: none, hysteresis rule only */
    double slope_v_s;    /* DC slope estimate (V/s), 0 until RU_ENV_SLOPE_EXT extrema */
    double ext_t[RU_ENV_SLOPE_EXT]; /* refined times of the last confirmed extrema
                                       (s), oldest first */
    double ext_v[RU_ENV_SLOPE_EXT]; /* their refined values, DC included (V) */
    size_t n_ext;        /* extrema confirmed since the last restart */
    size_t env_from;     /* first envelope point made since the last restart */
    int have_max;        /* 1: max_t_s/max_v wait for their following minimum */
    double max_t_s;      /* refined time of that maximum (s) */
    double max_v;        /* refined value of that maximum, DC included (V) */
    double *env_t;       /* envelope point times (s) */
    double *env_a;       /* envelope amplitudes (V) */
    size_t n_env;        /* points held */
    size_t cap_env;      /* capacity of env_t and env_a */
} ru_envelope;

/* Envelope points kept at most (4 MiB): when full, the older half is thinned to every
 * second point, so the newest points (the settled window) stay whole and memory
 * stays flat however long a run goes. */
#define RU_ENV_KEEP ((size_t)1 << 18)

/* Hysteresis as a fraction of the current half-cycle swing (common practice). */
#define RU_ENV_HYST 0.2
/* With a period hint P: an extremum holds (is not passed) for RU_ENV_HOLD * P. */
#define RU_ENV_HOLD 0.3
/* Points made before the slope was known are dropped above this ramp share. */
#define RU_ENV_EARLY_SHARE 0.01
/* No extremum confirmed for this many hinted periods (or, without a hint, this many
 * times the last half period): the DC slope estimate is stale (the bias changed
 * course) and the search restarts from a slope of 0. */
#define RU_ENV_STALL 2.5
/* A hint shorter than this many samples is ignored (cannot be resolved). */
#define RU_ENV_HINT_MIN_SAMPLES 8.0

/* floor_v: minimum hysteresis (V); period_s: hinted period (s), 0 when unknown. */
void ru_envelope_init(ru_envelope *e, double floor_v, double period_s);
void ru_envelope_free(ru_envelope *e);
/* Feeds sample number idx (t_s, v); vlast/tlast is the previous sample when
 * idx > 0. Returns RU_ENOMEM when an envelope point cannot be stored. */
ru_status ru_envelope_push(ru_envelope *e, uint64_t idx, double t_s, double v,
                           double tlast_s, double vlast);

/* Starts the search afresh (slope 0, no candidates), keeping the points made. */
void ru_envelope_restart(ru_envelope *e);
/* Appends an envelope point (time after every point held). */
ru_status ru_envelope_add_point(ru_envelope *e, double t_s, double a_v);

/* Largest number of samples the spectrum window keeps (8 MiB of doubles). */
#define RU_RING_MAX ((size_t)1 << 20)
/* Most whole periods resampled for the spectrum. */
#define RU_THD_MAX_PERIODS 64
/* Fewest whole periods for THD. */
#define RU_THD_MIN_PERIODS 4

/* Resamples x (n uniform samples, x[i] at t0_s + i*dt_s) onto out[0..nout-1] at
 * ts_s + j*span_s/nout by 8-point Lagrange interpolation. */
void ru_resample(const double *x, size_t n, double t0_s, double dt_s, double ts_s,
                 double span_s, double *out, size_t nout);

/* The sample window: the ring contents, oldest first. */
typedef struct ru_window {
    double *x;     /* samples (V), owned by whoever made the window */
    size_t n;      /* samples held */
    size_t i_w;    /* first sample inside the settled window */
    double t0_s;   /* time of x[0] (s) */
    double dt_s;   /* spacing (s) */
} ru_window;

/* DC level, frequency, THD and harmonics (into r) from the part of the window from
 * i_w on: crossings of the mean, the mean over whole periods, and the spectrum of the
 * last (at most RU_THD_MAX_PERIODS) whole periods. Only RU_ENOMEM fails. */
ru_status ru_window_figures(const ru_window *w, ru_measure_result *r);

/* Internal queries for tests: capacities of the bounded buffers (entries). */
size_t ru_measure_ring_capacity(const ru_measure *m);
size_t ru_measure_envelope_capacity(const ru_measure *m);

#endif
