/* ringup/tone.h: the settled tone of a circuit, end to end: what `ringup steady`
 * (and `ringup jitter`) print.
 *
 * ru_tone_run compiles the circuit, finds the operating point, solves the periodic
 * steady state (ringup/steady.h) from the describing function's prediction or from
 * a given state, and writes one period of every node to DIR/steady.csv when asked.
 * With rq.jitter it adds the phase noise by the PPV (ringup/ppv.h) on offsets from
 * 10 Hz to f0/2, the period and RMS jitter, and Leeson's formula beside it with the
 * loaded Q from the poles and the carrier power Ps from the steady state: the AC
 * power the period dissipates in the circuit's resistances (resistors, inductors'
 * series resistance, thermal resistors), sum over them of the mean of
 * (v - mean v)^2 / R.
 * It touches no shared state, so several may run in parallel threads. */
#ifndef RINGUP_TONE_H
#define RINGUP_TONE_H

#include "ringup/circuit.h"
#include "ringup/measure.h"
#include "ringup/status.h"
#include "ringup/ppv.h"
#include "ringup/steady.h"

#include <stddef.h>

#ifdef __cplusplus
extern "C" {
#endif

typedef struct ru_tone ru_tone;

typedef struct ru_tone_request {
    double rtol;              /* final integration tolerance (0: the engine's 1e-10) */
    size_t grid;              /* samples per period (0: 1024) */
    const char *out_dir;      /* folder for steady.csv; NULL writes no file */
    const double *x_start;    /* start state (ru_system_size entries) or NULL */
    double period_start_s;    /* its period (with x_start) */
    int jitter;               /* 1: phase noise and jitter too (ringup/ppv.h) */
    double temp_c;            /* temperature of parts without their own (deg C) */
    double band_lo_hz;        /* RMS jitter band (0: the phase-noise plot's range) */
    double band_hi_hz;
    double noise_factor;      /* Leeson's F (1) */
    const char *loop_part;    /* amplifier whose loop is broken for the loaded Q (NULL:
                                 the file's measure.loop, "" for none) */
} ru_tone_request;

/* Fills rq with the defaults (no file, start from the prediction, no phase noise,
 * 27 C, F = 1). */
void ru_tone_request_default(ru_tone_request *rq);

/* Runs the analysis. RU_OK also when the circuit does not oscillate (see the view's
 * `found` and note); RU_EINPUT (a driven circuit, a probe that sees no state),
 * RU_ENOCONVERGE (Newton fell onto the operating point or found no cycle),
 * RU_ENUMERIC, RU_EIO (steady.csv). *out is made on RU_OK only. */
ru_status ru_tone_run(const ru_circuit *c, const ru_tone_request *rq, ru_tone **out,
                      ru_error *err);

/* Destructor; NULL is harmless. */
void ru_tone_destroy(ru_tone *t);

/* The probe's name ("out" or "a-b"). */
const char *ru_tone_probe(const ru_tone *t);

/* The periodic steady state (valid until the tone is destroyed). */
void ru_tone_steady(const ru_tone *t, ru_steady_view *v);

/* The probe's spectrum over one period of the steady state (FFT of the grid). */
typedef struct ru_tone_spectrum {
    double fundamental_v;        /* peak amplitude of the fundamental (V) */
    double thd_percent;          /* harmonics 2..10 over the fundamental */
    double harmonics_dbc[RU_HARMONICS - 1]; /* [0] is the 2nd harmonic */
} ru_tone_spectrum;

void ru_tone_spectrum_get(const ru_tone *t, ru_tone_spectrum *sp);

#define RU_TONE_OFFSETS_MAX 200

/* Phase noise and jitter (rq.jitter); have = 0 when not asked or no tone. */
typedef struct ru_tone_noise {
    int have;
    ru_ppv_view ppv;             /* c, c1, the sources' shares, the PPV, its checks */
    double f0_hz;
    size_t npts;                 /* offsets, ascending */
    const double *offset_hz;
    const double *ppv_dbc;       /* L(fm) from the PPV (dBc/Hz) */
    const double *leeson_dbc;    /* Leeson's L(fm), or NULL when not given */
    double lorentz_hz;           /* pi f0^2 c: the Lorentzian's half width */
    double flicker_hz;           /* c1 / c: where the 1/f^3 part meets the 1/f^2 part
                                    (NAN without flicker) */
    double period_jitter_s;      /* sqrt(c T) */
    double rms_jitter_s;         /* over [band_lo_hz, band_hi_hz] */
    double band_lo_hz, band_hi_hz;
    double temp_c;
    int have_leeson;
    double q_loaded;             /* Leeson's QL */
    int q_from_poles;            /* 1: from the poles; 0: from the loop's phase slope */
    double carrier_w;            /* Ps */
    double noise_factor;         /* F */
    double leeson_flicker_hz;    /* fc in Leeson's formula: the largest source corner */
    double leeson_corner_hz;     /* f0 / (2 QL) */
    double effective_noise_factor; /* the F with which Leeson's 1/f^2 term equals the
                                    PPV's: 2 c QL^2 Ps / (kT) */
    const char *note;            /* why Leeson is not given, or "" */
} ru_tone_noise;

void ru_tone_noise_get(const ru_tone *t, ru_tone_noise *nv);

/* The compiled system the tone was solved on (state names, sizes). */
const ru_system *ru_tone_system(const ru_tone *t);

#ifdef __cplusplus
}
#endif
#endif
