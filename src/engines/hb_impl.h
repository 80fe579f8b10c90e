/* hb_impl.h: the harmonic-balance handle (ringup/hb.h) shared by hb.c (its
 * equations, the analytic Jacobian and the damped Newton solve) and hb_tone.c
 * (raising K, the settled tone, sigma_K(A) and the start-up integral).
 *
 * Unknowns for K active harmonics, m = n (2K + 1) + 2 reals:
 *   [X0 (n) | Re X_1 (n), Im X_1 (n) | ... | Re X_K, Im X_K | sigma | w],
 * x(theta) = X0 + sum_k (Re X_k cos k theta - Im X_k sin k theta). The last two
 * equations fix the probe: its fundamental's imaginary part is 0 (the phase), and
 * either its real part is amp_v (sigma free) or sigma is 0 (the amplitude free). */
#ifndef RU_HB_IMPL_H
#define RU_HB_IMPL_H

#include "ringup/hb.h"

#include <lapacke.h>

#define RU_HB_CACHE 512 /* sigma_K(A) solutions kept */

struct ru_hb {
    const ru_system *s;
    size_t n;              /* states */
    int kmax, k;           /* harmonics allocated, active */
    int kp, kn;            /* probe states (-1: ground or driven) */
    double vscale;         /* voltage scale of convergence (V) */
    int periodic;          /* 1: sigma = 0, amplitude free; 0: amplitude amp_v fixed */
    double amp_v;
    double *M;             /* mass matrix n*n */
    double *u;             /* unknowns for the active K */
    double *x, *r, *D;     /* one phase: state, residual, dr/dx */
    double *Dr, *Di;       /* Fourier coefficients of dr/dx, m = 0..2 kmax, n*n each */
    double *F, *J;         /* residual, Jacobian (row-major) */
    double *rowscale, *du, *ut, *usave;
    lapack_int *piv;
    int settled_k;         /* K of the last ru_hb_settle (0: none) */
    size_t ncache;         /* sigma_K(A) solutions at settled_k, amplitude ascending */
    double *camp, *cu;
};

/* Unknowns for K harmonics. */
static inline size_t ru_hb_size(size_t n, int k) { return n * (size_t)(2 * k + 1) + 2; }

/* Index of Re X_k (state i); Im X_k is n further on. */
static inline size_t ru_hb_re(size_t n, int k, size_t i) { return n + 2 * n * (size_t)(k - 1) + i; }

/* Damped Newton on the active mode from h->u (overwritten). RU_ENOCONVERGE. */
ru_status ru_hb_newton(ru_hb *h);

/* Probe phasor of harmonic k (k = 0: the DC level, imaginary part 0). */
void ru_hb_probe(const ru_hb *h, const double *u, int k, double *re, double *im);

#endif
