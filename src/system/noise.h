/* noise.h: Johnson-Nyquist thermal noise as a deterministic function of time
 * (private). Each noise source is a piecewise-linear waveform through independent
 * Gaussian knots every dt_s = 1/(2 B): a counter-based generator (a hash of the
 * seed, the source and the knot index) gives the knots, so the noise is a pure
 * function of t, needs no state and is the same in every thread and on every rerun
 * with the same seed.
 *
 * Spectrum: knots of variance s2 joined linearly have the two-sided power spectral
 * density s2 dt sinc^4(f dt); the one-sided density at low frequency is 2 s2 dt.
 * For a resistor's current noise (one-sided 4kT/R) s2 = 2kT/(R dt); for the voltage
 * noise of a series resistance (4kTR) s2 = 2kTR/dt. Flat within 0.5 dB up to
 * about 0.13 B, so B is set well above the oscillation. */
#ifndef RU_NOISE_H
#define RU_NOISE_H

#include <stdint.h>

typedef struct ru_noise {
    int on;            /* 0: no noise */
    uint64_t seed;     /* the run's seed */
    double dt_s;       /* knot spacing 1/(2 B) */
    double kt_j;       /* k T at the noise temperature (J) */
} ru_noise;

/* Unit-variance noise of source `id` at time t (linear between Gaussian knots). */
double ru_noise_unit(const ru_noise *nz, uint64_t id, double t_s);

#endif
