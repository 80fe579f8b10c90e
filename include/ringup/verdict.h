/* ringup/verdict.h: does it start? One decision, the same for run, compare, sweep,
 * Monte Carlo, the expectations and the automatic run length.
 *
 * Definition (README "Started, and the other verdicts"): the circuit STARTED when, at
 * the end of the run, a self-sustained oscillation is present that was not there at
 * power-on: an envelope that is settled or still growing (not decaying), well above
 * the start level (RU_VERDICT_SEED_RATIO x the physical seed: the thermal noise level
 * or the preset kick) and above the solver's noise floor (RU_VERDICT_FLOOR_RATIO x),
 * in a circuit with no driving waveform at the tone's frequency, and that got there by
 * itself: it grew (RU_VERDICT_GROWTH x from the lowest point before the end), or
 * emerged from below what the probe shows, or came down onto a size it then holds
 * (a limiter, not a ring-down). Growth by a fixed factor from the first visible cycle
 * is not the rule: a power-on transient can show the tone at a tenth of its size.
 * The other verdicts:
 *   NO_START   no tone at the end, or a decaying one, or one at the level noise alone
 *              gives it, with the bias settled (and, where the poles are known, long
 *              enough to see the decay);
 *   LATCHED    no tone, and the circuit sits still at a DC state away from its
 *              operating point (run to a rail, a DC latch-up);
 *   UNDECIDED  too small to tell from the solver's noise, kicked too close to its final
 *              size to show a start, still moving, or not run long enough;
 *   DRIVEN     a driving waveform (sine or pulse train) at the tone's frequency, or a
 *              harmonic or subharmonic of it: the tone is not a start-up.
 * The verdict is measured: the poles never make a run "started". They only say when
 * the evidence is too short to be sure (a decay too slow to see in the window), and
 * `certain` (used by the automatic run length) waits for them. */
#ifndef RINGUP_VERDICT_H
#define RINGUP_VERDICT_H

#include "ringup/measure.h"

#include <stddef.h>

#ifdef __cplusplus
extern "C" {
#endif

typedef enum {
    RU_VERDICT_STARTED,   /* "started" */
    RU_VERDICT_NO_START,  /* "no-start" */
    RU_VERDICT_LATCHED,   /* "latched" */
    RU_VERDICT_UNDECIDED, /* "undecided" */
    RU_VERDICT_DRIVEN     /* "driven" */
} ru_verdict;

#define RU_VERDICT_SEED_RATIO 10.0   /* started: >= 10x the physical start level */
#define RU_VERDICT_FLOOR_RATIO 100.0 /* started: >= 100x the solver's noise floor */
#define RU_VERDICT_GROWTH 1.5        /* grew: >= 1.5x the lowest point before the end */
#define RU_VERDICT_CERTAIN_CYCLES 10 /* certain: at least 10 cycles in the window ... */
#define RU_VERDICT_DRIVES 16         /* driving frequencies considered */

/* The short stable keyword of a verdict (JSON `verdict`). */
const char *ru_verdict_name(ru_verdict v);

typedef struct ru_verdict_input {
    const ru_measure_result *meas; /* the figures at the decision time */
    double seed_v;          /* physical start level on the probe (thermal noise level
                               or the preset kick's share), 0 when unknown */
    int seed_is_kick;       /* 1: the seed is a preset kick (an initial condition), not
                               power-on; a tone not well above it shows no start */
    double floor_v;         /* the solver's noise floor on the probe (V), >= 0 */
    double growth_per_s;    /* predicted growth rate (dominant poles), NAN unknown */
    double period_s;        /* predicted period (s), NAN unknown */
    double slow_per_s;      /* the slowest decaying pole's rate (bias, thermal), NAN
                               unknown: certain also needs the window to span 1/this */
    double t_expect_s;      /* predicted start-up time (s), NAN unknown: with growing
                               poles, no start is called overdue before 3x this */
    double drive_hz[RU_VERDICT_DRIVES]; /* frequencies of the driving waveforms */
    size_t ndrive;
    double op_distance;     /* largest |x - x_op| / scale over the states at the end
                               (NAN: no operating point) */
    double dc_scale_v;      /* the probe's voltage scale (supplies, >= 1 V) */
    double state_motion;    /* largest |x_end - x_window_start| / scale over the states
                               (NAN unknown): a quiet circuit sits still when this and
                               the probe's DC motion are below 1e-3 */
    int final;              /* 1: the run ends here (stop or cap); 0: a check between
                               chunks of an automatic run */
} ru_verdict_input;

typedef struct ru_verdict_result {
    ru_verdict verdict;
    int settled;            /* the tone's envelope settled (the measurement's rule) */
    int certain;            /* longer running would not change the verdict */
    int tone_figures;       /* 1: the tone's amplitude, frequency and THD stand */
    char note[RU_NOTE_MAX]; /* why, in words (for notes) */
} ru_verdict_result;

/* Fills in with neutral values: no seed, no floor, no prediction, no drive, final. */
void ru_verdict_input_default(ru_verdict_input *in);

/* Decides. Pure: reads only its input. */
void ru_verdict_judge(const ru_verdict_input *in, ru_verdict_result *out);

/* Makes the figures follow the verdict: started = (STARTED); settled as judged;
 * a start-up time and settling time only for a settled start; no growth rate for a
 * tone that did not start; no tone figures where there is no start and no driven or
 * held tone (no-start, latched: the DC level stays). Notes say why. */
void ru_verdict_apply(const ru_verdict_result *v, ru_measure_result *m);

#ifdef __cplusplus
}
#endif
#endif
