/* ringup/descfn.h: amplitude prediction by the describing-function method.
 *
 * The oscillation is taken as one sinusoid on a DC level in every state,
 *   x(t) = x0 + Re(X e^{(sigma + j w) t}),
 * and the network's currents are balanced at DC and at the fundamental only (the
 * describing function of every nonlinear part at once, found by a numerical Fourier
 * integral over one cycle of the actual laws; harmonic balance of order one):
 *   mean over the cycle of r(x(theta))                    = 0          (DC)
 *   2 x mean of r(x(theta)) e^{-j theta}                  = (sigma + j w) M X
 * with the probe's phasor fixed to the amplitude A (real). For each A this gives the
 * growth rate sigma(A), the frequency w(A) and the DC shift x0(A): how the dominant
 * pole pair drifts back to the jw axis as the oscillation grows. The settled
 * amplitude is where sigma(A) = 0. For a cubic conductance this is exactly the
 * method of averaging (van der Pol: 2 sqrt(a/(3b))).
 *
 * Where it is only an approximation: strong harmonics (hard clipping, a stage
 * driven into saturation: the tone is not one sinusoid), and laws with memory
 * whose state moves at twice the tone's frequency (a lamp's filament is heated at
 * 2w; only its DC temperature is balanced here). Amplitudes are of the fundamental
 * (peak); the measured envelope is half the peak-to-peak, which differs when
 * harmonics are strong. */
#ifndef RINGUP_DESCFN_H
#define RINGUP_DESCFN_H

#include "ringup/circuit.h"
#include "ringup/status.h"
#include "ringup/system.h"

#include <stddef.h>

#ifdef __cplusplus
extern "C" {
#endif

typedef struct ru_df_point {
    double amplitude_v;        /* fundamental amplitude on the probe (peak, V) */
    double growth_rate_per_s;  /* sigma(A) */
    double frequency_hz;       /* w(A) / (2 pi) */
    double dc_shift_v;         /* probe DC level at that amplitude minus at A -> 0 */
} ru_df_point;

typedef struct ru_df_result {
    int found;                 /* 1: sigma(A) crosses 0 in the range searched */
    double settled_amplitude_v;/* A where sigma = 0 (NAN when not found) */
    double frequency_hz;       /* w there / (2 pi) */
    double dc_level_v;         /* probe DC level there */
    char note[256];            /* why not found, or a caveat; "" otherwise */
} ru_df_result;

/* The balance as a handle: solved amplitudes are kept, so sigma(A) can be asked at
 * any amplitude (each query continues from the nearest solution). Not shared
 * between threads (one handle per thread; the system may be shared). */
typedef struct ru_df ru_df;

/* Constructor: the balance at the small-signal limit (1e-6 of the circuit's
 * voltage scale) for the probe (node indices, neg 0 for ground) at the operating
 * point x_op. RU_ERANGE when there is no complex pole pair (nothing oscillates),
 * RU_EINPUT when the probe is not a free node or does not see the mode,
 * RU_ENOCONVERGE, RU_ENOMEM. */
ru_status ru_df_create(const ru_system *s, const double *x_op, int probe_pos,
                       int probe_neg, ru_df **out, ru_error *err);

/* Destructor; NULL is harmless. */
void ru_df_destroy(ru_df *d);

/* sigma(A), w(A) and the DC shift at probe amplitude amp_v (> 0). RU_ENOCONVERGE
 * when the continuation cannot reach it. */
ru_status ru_df_at(ru_df *d, double amp_v, ru_df_point *p, ru_error *err);

/* The sweep and zero of ru_df_analyse on a handle; after a zero is found the
 * settled balance can be read with ru_df_zero_state. */
ru_status ru_df_find(ru_df *d, double amp_max_v, ru_df_point *curve, size_t max_pts,
                     size_t *npts, ru_df_result *res, ru_error *err);

/* The one-harmonic state where sigma = 0 (after ru_df_find found it):
 * x(theta) = x0 + x_re cos(theta) - x_im sin(theta), n entries each, and w.
 * RU_EINPUT when no zero was found. */
ru_status ru_df_zero_state(const ru_df *d, double *x0, double *x_re, double *x_im,
                           double *w_rad_per_s);

/* Start-up time from the envelope equation dA/dt = sigma(A) A (the describing
 * function's growth rate at each amplitude, method of averaging):
 *   t = integral from a_from to a_to of dA / (A sigma(A)),
 * by adaptive Simpson in ln A (relative tolerance 1e-7); below the first balance
 * sigma is the linear limit's. RU_ERANGE when sigma is not positive over the whole
 * range (the envelope never gets there) or the levels are not 0 < a_from < a_to. */
ru_status ru_df_startup_time(ru_df *d, double a_from_v, double a_to_v, double *t_s,
                             ru_error *err);

/* A growth-rate law sigma(A) for ru_slowflow_run: sigma at amplitude amp_v (> 0)
 * into *sigma_per_s; a status other than RU_OK stops the integration. */
typedef ru_status (*ru_sigma_fn)(void *user, double amp_v, double *sigma_per_s,
                                 ru_error *err);

/* The method of averaging's slow flow dA/dt = sigma(A) A integrated in time from
 * A(0) = a0_v > 0 to t_stop_s > 0: npts (>= 2) points, t_s[k] = k t_stop_s /
 * (npts - 1), amp_v[k] = A(t_s[k]) (caller-owned arrays of npts). Classical RK4 in
 * ln A with steps of at most 0.02 / max(|sigma|, |d sigma / d ln A|) (a local error
 * far below 1e-6 relative). RU_ERANGE for bad arguments; the law's status when it
 * fails (the points before it are written, *nout says how many; nout may be NULL). */
ru_status ru_slowflow_run(ru_sigma_fn sigma, void *user, double a0_v, double t_stop_s,
                          size_t npts, double *t_s, double *amp_v, size_t *nout,
                          ru_error *err);

/* The slow flow of the describing function's sigma(A) on a handle (below the first
 * balance, the linear limit's sigma, as in ru_df_startup_time). */
ru_status ru_df_slow_flow(ru_df *d, double a0_v, double t_stop_s, size_t npts,
                          double *t_s, double *amp_v, size_t *nout, ru_error *err);

/* Sweeps the probe amplitude from a small value (the linear limit) up to amp_max_v
 * (0: 100x the largest supply or 100 V), on a geometric grid of at most max_pts
 * points (curve may be NULL), stops past the zero of sigma, and refines the zero.
 * x_op is the operating point; probe_pos/probe_neg are node indices (neg 0 for
 * ground). *npts gets the number of curve points written. */
ru_status ru_df_analyse(const ru_system *s, const double *x_op, int probe_pos,
                        int probe_neg, double amp_max_v, ru_df_point *curve,
                        size_t max_pts, size_t *npts, ru_df_result *res, ru_error *err);

/* As ru_df_analyse without the curve, and, when res->found, the balance at the
 * settled amplitude for every state (n entries each): x(t) = x_dc + x_re cos(w t)
 * - x_im sin(w t). A starting guess for the periodic steady state. */
ru_status ru_df_settled_state(const ru_system *s, const double *x_op, int probe_pos,
                              int probe_neg, double *x_dc, double *x_re, double *x_im,
                              ru_df_result *res, ru_error *err);

/* A memoryless scalar law y = f(x) for ru_df_gain. */
typedef double (*ru_df_law_fn)(void *user, double x);

/* Sinusoidal-input describing function of f around the bias x0 at amplitude a:
 *   N(a) = (1/(pi a)) integral_0^{2 pi} f(x0 + a sin t) sin t dt
 * (the fundamental's in-phase gain; for a memoryless law there is no quadrature
 * part), by the trapezoid rule over `samples` points (exact for polynomials of
 * degree below samples - 1; a law with kinks converges as 1/samples^2). */
double ru_df_gain(ru_df_law_fn f, void *user, double x0, double a, int samples);

/* The describing function of an amplifier's law: the output current's in-phase
 * fundamental over the control amplitude a (a transconductance, A/V) with the
 * control voltage vc = vc0 + a sin t and the output held at vo0. For a law that
 * is a voltage source behind rout (follower-tanh), that is N_voltage / rout. Each
 * law gives its own contribution (its descriptor's df_out); NAN for a law whose
 * output follows vc only through an internal state (opamp), which has no
 * memoryless describing function, and for an unknown law. */
double ru_df_amp_gain(const struct ru_amp *amp, double vc0_v, double vo0_v, double a_v);

/* Same for a law with an upper rail (the cmos-inverter's vdd terminal) at vdd_v
 * above ref; ru_df_amp_gain is this with vdd_v = 0. */
double ru_df_amp_gain_rail(const struct ru_amp *amp, double vc0_v, double vo0_v,
                           double vdd_v, double a_v);

#ifdef __cplusplus
}
#endif
#endif
