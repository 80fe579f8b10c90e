/* ringup/hb.h: harmonic balance with K harmonics: the settled tone (amplitude,
 * frequency, harmonics) and the growth rate at a given amplitude.
 *
 * Every state is a truncated Fourier series on the tone's phase theta,
 *   x(theta) = X0 + Re sum_{k=1..K} X_k e^{j k theta},
 * and the circuit M x' = r(x) is balanced harmonic by harmonic (Galerkin), each
 * part's law evaluated at N = max(64, 8K) phases and transformed:
 *   mean of r(x(theta))                        = 0                 (DC)
 *   2 mean of r(x(theta)) e^{-j k theta}       = (sigma + j k w) M X_k  (k = 1..K)
 * with the probe's fundamental phasor real. With sigma = 0 and the amplitude free
 * this is the periodic steady state (harmonic balance proper); with the probe's
 * fundamental held at A and sigma free it is the growth rate of a tone of that
 * size and shape, sigma_K(A): K = 1 is the describing function (ringup/descfn.h),
 * whose envelope equation dA/dt = sigma(A) A it generalises to a waveform that
 * keeps its harmonics while it grows. Solved by damped Newton with the analytic
 * Jacobian (the Fourier coefficients of dr/dx at every phase), started from the
 * describing function's balance, K raised one at a time. */
#ifndef RINGUP_HB_H
#define RINGUP_HB_H

#include "ringup/status.h"
#include "ringup/system.h"

#include <stddef.h>

#ifdef __cplusplus
extern "C" {
#endif

#define RU_HB_MAX_HARMONICS 15 /* most harmonics a balance carries */
#define RU_HB_REPORT 10        /* harmonics 2..10 reported, as the THD measurement */

typedef struct ru_hb ru_hb;

typedef struct ru_hb_tone {
    int converged;            /* 1: K raised until the amplitude moved < 0.1 % */
    int harmonics;            /* K of the answer */
    double moved;             /* relative change of the amplitude at the last step of K */
    double fundamental_v;     /* probe fundamental (peak) */
    double amplitude_v;       /* half the probe's peak-to-peak (the envelope measure) */
    double frequency_hz;
    double dc_level_v;        /* probe DC level */
    double thd_percent;       /* harmonics 2..min(10, K) against the fundamental */
    double harmonics_dbc[RU_HB_REPORT - 1]; /* 2..10, NAN above K */
    char note[256];           /* why it did not converge, "" otherwise */
} ru_hb_tone;

/* Constructor: balance workspace for the system with the probe (node indices, neg
 * 0 for ground), up to kmax harmonics (1..RU_HB_MAX_HARMONICS). RU_EINPUT when the
 * probe is not a free node, RU_ERANGE for kmax, RU_ENOMEM. */
ru_status ru_hb_create(const ru_system *s, int probe_pos, int probe_neg, int kmax,
                       ru_hb **out, ru_error *err);

/* Destructor; NULL is harmless. */
void ru_hb_destroy(ru_hb *h);

/* Starts from a one-harmonic state x(theta) = x0 + x_re cos(theta) - x_im sin(theta)
 * (n entries each) at w (rad/s), K = 1. */
void ru_hb_start(ru_hb *h, const double *x0, const double *x_re, const double *x_im,
                 double w_rad_per_s);

/* The settled tone: K = 1, 2, ... until the fundamental moved by less than 1e-3
 * (and the frequency by less than 1e-4) at each of the last two steps of K, at most
 * kmax. The tone is filled even when not converged (the last K's answer, with a
 * note); RU_ENOCONVERGE only when no balance was found at all. */
ru_status ru_hb_settle(ru_hb *h, ru_hb_tone *tone, ru_error *err);

/* Growth rate sigma_K(A) and w at probe fundamental amplitude amp_v, with the K of
 * the last ru_hb_settle, continued from the nearest amplitude solved before. */
ru_status ru_hb_sigma_at(ru_hb *h, double amp_v, double *sigma_per_s,
                         double *w_rad_per_s, ru_error *err);

/* Start-up time t = integral from a_from to a_to of dA / (A sigma_K(A)) (adaptive
 * Simpson in ln A). RU_ERANGE when sigma is not positive over the range. */
ru_status ru_hb_startup_time(ru_hb *h, double a_from_v, double a_to_v, double *t_s,
                             ru_error *err);

#ifdef __cplusplus
}
#endif
#endif
