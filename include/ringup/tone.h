/* ringup/tone.h: the settled tone of a circuit, end to end: what `ringup steady`
 * (and `ringup jitter`) print.
 *
 * ru_tone_run compiles the circuit, finds the operating point, solves the periodic
 * steady state (ringup/steady.h) from the describing function's prediction or from
 * a given state, and writes one period of every node to DIR/steady.csv when asked.
 * It touches no shared state, so several may run in parallel threads. */
#ifndef RINGUP_TONE_H
#define RINGUP_TONE_H

#include "ringup/circuit.h"
#include "ringup/measure.h"
#include "ringup/status.h"
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
} ru_tone_request;

/* Fills rq with the defaults (no file, start from the prediction). */
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

/* The compiled system the tone was solved on (state names, sizes). */
const ru_system *ru_tone_system(const ru_tone *t);

#ifdef __cplusplus
}
#endif
#endif
