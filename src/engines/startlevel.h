/* startlevel.h: the level the dominant mode starts its exponential growth from
 * (private to the engines and the analysis above them).
 *
 * Linearised about the operating point x_op (every source at its final value),
 * M dx' = A dx + r(t, x_op), the dominant mode's coordinate z (dx = z v + conj),
 * with left vector u (u^H J = lambda u^H, J = M^{-1} A) obeys
 *   z' = lambda z + g(t),   g(t) = u^H M^{-1} r(t, x_op) / (u^H v),
 * so once the sources are still, z(t) = e^{lambda t} z_inf with
 *   z_inf = z(0) + integral_0^inf e^{-lambda tau} g(tau) dtau + sum over jumps,
 * z(0) the projection of the initial state (a preset, the supplies' jump at t = 0).
 * The start level is the probe amplitude 2 |z_inf| |v_probe|: the envelope the
 * exponential growth extrapolates back to at t = 0. The integral is done between
 * the sources' breakpoints by product integration (the drive g interpolated by a
 * quadratic at three Gauss points, e^{-lambda tau} integrated exactly), refined
 * until halving the pieces moves the result by less than 1e-10.
 *
 * Noise (Johnson-Nyquist): each resistor R drives its nodes with a white current
 * of two-sided density 2kT/R, each inductor series resistance its branch with a
 * voltage of density 2kTR. Projected on the mode, w(t) = integral e^{-lambda tau}
 * sum_k gamma_k n_k dtau (gamma_k = u^H M^{-1} b_k / (u^H v)) is a complex
 * Gaussian whose variance grows to  E|w|^2 = sum_k |gamma_k|^2 S_k / (2 sigma)
 * (the variance accumulated by a linear unstable mode driven by white noise,
 * sigma = Re lambda > 0). The amplitude then grows as e^{sigma t} |z_inf + w|:
 * |z_inf + w| is Rician, and the start-up time follows its log-mean, which is
 * what level_v gives (sqrt(E|w|^2) e^{-gamma_E/2} when z_inf = 0, gamma_E Euler's
 * constant); log_sd is the standard deviation of its logarithm. */
#ifndef RU_STARTLEVEL_H
#define RU_STARTLEVEL_H

#include "ringup/smallsig.h"
#include "ringup/system.h"

typedef enum ru_start_kind {
    RU_START_PRESET,    /* the preset voltages (and any supply ramp) */
    RU_START_POWER_ON,  /* the supplies' ramp from 0 */
    RU_START_NOISE      /* thermal noise (and the supplies' ramp) */
} ru_start_kind;

typedef struct ru_start_level {
    ru_start_kind kind;
    int driven;          /* 1: a periodic source never stops driving: no level */
    double level_v;      /* the probe amplitude the growth starts from (log-mean
                            over noise realisations for noise) */
    double step_v;       /* the initial state's share alone (no ramp) */
    double det_v;        /* initial state plus every source's ramp and jumps */
    double noise_rms_v;  /* rms of the accumulated noise (noise kick; else 0) */
    double log_sd;       /* standard deviation of ln(level) (0 when deterministic) */
} ru_start_level;

/* The start level of the dominant mode near `dom` on the probe (node indices)
 * for the circuit's kick; sources are followed up to t_stop_s; noise at
 * noise_temp_c. RU_ENUMERIC when the mode cannot be had, RU_ERANGE for a noise
 * kick whose mode does not grow (sigma <= 0: no accumulated level). */
ru_status ru_start_level_compute(const ru_system *s, const double *x_op, ru_pole dom,
                                 int probe_pos, int probe_neg, double t_stop_s,
                                 double noise_temp_c, ru_start_level *out,
                                 ru_error *err);

#endif
