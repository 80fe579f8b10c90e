/* ringup/ppv.h: phase noise of an oscillator by the perturbation projection vector
 * (Demir, Mehrotra and Roychowdhury, "Phase noise in oscillators: a unifying theory
 * and numerical methods for characterization", IEEE Trans. Circuits Syst. I 47
 * (2000) 655).
 *
 * Along the periodic steady state x_s(t) (ringup/steady.h) with noise entering as
 *   x' = f(x) + B(x) w(t),   w: independent noises of unit one-sided density,
 * the PPV v1(t) is the periodic solution of the adjoint equation v' = -J(x_s)^T v
 * normalised by v1(t) . x_s'(t) = 1. It starts at t = 0 as the left eigenvector of
 * the monodromy matrix for the multiplier 1 (normalised against f(x0)) and is
 * integrated backward over one period (CVODES adjoint module, the forward orbit from
 * checkpoints with Hermite interpolation); the time shift alpha(t) of the noisy
 * oscillation then diffuses, var alpha(t) = c t, with
 *   c = (1/T) integral over a period of sum_k (v1 . B_k)^2 / 2
 * (the 1/2 turns the one-sided unit density into the two-sided 1 of the theory).
 * Each source's share of c is kept. For a source with a flicker corner fc
 * (density (1 + fc/f)) only the DC part of its projection reaches low offsets:
 *   c1 = sum_k fc_k (mean over the period of v1 . B_k)^2 / 2,
 * which adds f0^2 c1 / fm^3 to L(fm) far from the carrier (the low-frequency
 * noise's upconversion; the DC term of the impulse sensitivity, as in the
 * time-varying phase model of Hajimiri and Lee, 1998).
 * The phase noise is the Lorentzian
 *   L(fm) = f0^2 c / (pi^2 f0^4 c^2 + fm^2)   (+ f0^2 c1 / fm^3),
 * period jitter sqrt(c T). */
#ifndef RINGUP_PPV_H
#define RINGUP_PPV_H

#include "ringup/status.h"
#include "ringup/steady.h"
#include "ringup/system.h"

#include <stddef.h>

#ifdef __cplusplus
extern "C" {
#endif

typedef struct ru_ppv ru_ppv;

typedef struct ru_ppv_opts {
    double temp_c;   /* temperature of parts without their own (resistors: 27) */
    double rtol;     /* integration tolerance (0: the steady state's) */
} ru_ppv_opts;

void ru_ppv_opts_default(ru_ppv_opts *o);

/* One noise source's share. */
typedef struct ru_ppv_source {
    ru_noise_info info;  /* which part, kind, flicker corner */
    double c_s;          /* its share of c (s^2/s) */
    double c1_s_hz;      /* its share of c1 (s^2/s times Hz) */
    double mean_proj;    /* mean over the period of v1 . B_k (s / sqrt(Hz)) */
} ru_ppv_source;

typedef struct ru_ppv_view {
    double c_s;                 /* phase diffusion constant (s^2/s) */
    double c1_s_hz;             /* flicker coefficient: L gets f0^2 c1 / fm^3 */
    double period_s;            /* T of the steady state */
    size_t nsrc;
    const ru_ppv_source *src;   /* nsrc entries, in the system's order */
    size_t n, ngrid;
    const double *v;            /* the PPV at t_k = k T / ngrid: ngrid * n */
    double norm_error;          /* max over the grid |v1 . f(x_s) - 1| */
    double periodicity_error;   /* |v1(0) back from T - v1(0)| / |v1(0)| */
    double cpu_s;
} ru_ppv_view;

/* Computes the PPV and c along st's periodic state (st must be found). RU_EINPUT
 * when st has no periodic state; RU_ENUMERIC, RU_ENOMEM. */
ru_status ru_ppv_solve(const ru_system *s, const ru_steady *st, const ru_ppv_opts *o,
                       ru_ppv **out, ru_error *err);

void ru_ppv_destroy(ru_ppv *p);
void ru_ppv_get(const ru_ppv *p, ru_ppv_view *v);

/* L(fm) in dBc/Hz from c, c1 and f0 (the formula above). */
double ru_ppv_dbc(double f0_hz, double c_s, double c1_s_hz, double fm_hz);

/* RMS time jitter (s) from the phase noise integrated over [f1, f2] (both sides of
 * the carrier): sqrt(2 integral L(f) df) / (2 pi f0), the integral in closed form. */
double ru_ppv_rms_jitter(double f0_hz, double c_s, double c1_s_hz, double f1_hz,
                         double f2_hz);

/* Leeson's formula (Leeson, "A simple model of feedback oscillator noise spectrum",
 * Proc. IEEE 54 (1966) 329), in the form with the noise factor F, the carrier power
 * Ps, the loaded Q and the flicker corner fc (from memory):
 *   L(fm) = 10 log10[(2 F k T / Ps) (1 + (f0 / (2 QL fm))^2) (1 + fc / fm)]. */
double ru_leeson_dbc(double f0_hz, double q_loaded, double carrier_w, double noise_factor,
                     double temp_c, double flicker_hz, double fm_hz);

/* Loaded Q of the resonator (leeson.c's head comment): from the complex pole pair
 * nearest f0 of the circuit at x_op with its active element switched off (the loop
 * of amplifier loop_part broken; loop_part < 0: the negative slope of every
 * poly-conductance removed); *from_poles = 1 then. Otherwise, with a loop part, the
 * open-loop Q of the loop gain's phase slope, (f0/2) |d phase/d f|. *q is NAN when
 * neither exists (a lossless resonator, or no loop to break). */
ru_status ru_loaded_q(const ru_system *s, const double *x_op, int loop_part, double f0_hz,
                      double *q, int *from_poles, ru_error *err);

#ifdef __cplusplus
}
#endif
#endif
