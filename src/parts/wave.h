/* wave.h: source waveforms (ru_wave, private): their keys, checks and listing
 * text (shared by the supply and the current source), and their evaluation.
 *
 * Conventions: every wave is 0 before t = 0 (power-on); from t = 0 on it follows
 * its kind (circuit.h). Value and slope are right-continuous: at an edge time the
 * value after the edge is returned, and at a kink the slope on the right side, so
 * an integrator restarted at a breakpoint sees the new segment. Jumps at t = 0
 * (a dc wave with rise 0, a step at 0 with no edge, v0 of a step or pulse, a sine
 * offset) are the initial state's business; ru_wave_jump covers t > 0 only. */
#ifndef RINGUP_WAVE_H
#define RINGUP_WAVE_H

#include "ringup/part.h"
#include "parts/desc.h"

/* The wave kinds as variants of a source (indexed by ru_wave_kind), p's kind, and
 * setting it. */
#define RU_WAVE_KINDS 4
const ru_variant *ru_wave_variant(int i);
int ru_wave_variant_of(const ru_part *p);
void ru_wave_set_variant(ru_part *p, int i);

/* Checks of p's waveform (finite, times not negative, sine frequency and pulse
 * timing). */
ru_status ru_wave_check(const ru_part *p, const ru_part_env *env, ru_error *err);

/* Listing text of p's waveform in unit ("12 V", "sine 1 V at 1000 Hz"). */
void ru_wave_describe(const ru_part *p, const char *unit, char *buf, size_t size);

/* Value and slope at time t_s scaled by scale, or with dc 1 the final value and
 * slope 0, with dc 2 the value at t_s and slope 0: the source as an evaluation
 * point sees it. */
void ru_wave_eval(const ru_wave *w, double t_s, int dc, double scale, double *v,
                  double *dvdt);

double ru_wave_value(const ru_wave *w, double t_s);
double ru_wave_slope(const ru_wave *w, double t_s); /* d value / dt (unit/s) */

/* The value the wave settles at for the DC analysis: dc -> value, step -> v1,
 * sine -> offset, pulse -> v0 (its base). */
double ru_wave_final(const ru_wave *w);

/* Largest |value| the wave takes (for tolerance scales). */
double ru_wave_peak(const ru_wave *w);

/* v(t+) - v(t-) when a zero-width edge falls on t > 0 (within 1e-12 relative),
 * else 0. */
double ru_wave_jump(const ru_wave *w, double t_s);

/* Smallest breakpoint (jump or slope change) strictly after t_s, or INFINITY. */
double ru_wave_next_breakpoint(const ru_wave *w, double t_s);

/* Time from which the wave stays at one value for good (dc: the end of the rise;
 * step: the end of its edge; a single pulse: its end); INFINITY for a sine of
 * non-zero amplitude and a repeating pulse. */
double ru_wave_constant_from(const ru_wave *w);

#endif
