/* ringup/steady.h: the periodic steady state of an autonomous oscillator.
 *
 * Method: shooting Newton for autonomous oscillators. The unknowns are a state x0
 * on the limit cycle and the period T; the equations are periodicity,
 * phi(x0, T) - x0 = 0, where phi is the flow of x' = f(x) with every source at its
 * final value, and a phase condition that pins the free time shift: x0 lies on the
 * hyperplane through the starting point x_ref normal to the flow there,
 * f(x_ref) . W (x0 - x_ref) = 0 (W: the states' scales). Newton's matrix is
 *   [ Phi - I   f(phi(x0, T)) ]
 *   [ n^T       0             ]
 * with Phi = d phi / d x0, the monodromy matrix, from CVODES forward sensitivities
 * (the exact variational equations with the analytic Jacobian). Its eigenvalues are
 * the Floquet multipliers: one is 1 (the phase, along the orbit); the largest of the
 * others, mu2, sets how fast the amplitude recovers from a disturbance,
 * exp(-t / tau) with tau = -T / ln|mu2|.
 *
 * Start: a given state and period (the end of a settled transient), or the
 * describing function's balance at its settled amplitude (every state's DC level and
 * fundamental phasor), then three periods of plain integration to let fast modes
 * die out. When Newton fails it is continued from a transient of growing length.
 * Newton can fall onto the trivial solution (the DC operating point, periodic with
 * any T): that is detected and reported (RU_ENOCONVERGE), never returned.
 *
 * The tolerances tighten as Newton converges (the final iterations at opts.rtol);
 * the period's accuracy is estimated by one more integration at rtol/10 and one
 * Newton correction with the final matrix. The waveform is one period on a uniform
 * grid by dense output; the probe's extremes come from root finding on its time
 * derivative. (Harmonics: ringup/tone.h, an FFT of the grid, exact for a periodic
 * wave up to the grid's Nyquist harmonic.) */
#ifndef RINGUP_STEADY_H
#define RINGUP_STEADY_H

#include "ringup/status.h"
#include "ringup/system.h"

#include <stddef.h>

#ifdef __cplusplus
extern "C" {
#endif

typedef struct ru_steady ru_steady;

typedef struct ru_steady_opts {
    int probe_pos, probe_neg;     /* probe v(pos) - v(neg) (node indices, neg 0: ground) */
    double rtol;                  /* final integration tolerance (0: 1e-10) */
    int max_newton;               /* Newton iterations in all (0: 40) */
    size_t grid;                  /* samples per period of the waveform (0: 1024; >= 64) */
    const double *x_start;        /* start state near the cycle (n entries) or NULL */
    double period_start_s;        /* its period (> 0 when x_start is given) */
    double max_transient_periods; /* longest continuation transient, periods (0: 3000) */
} ru_steady_opts;

/* Fills o with the defaults above (probe: node 1). */
void ru_steady_opts_default(ru_steady_opts *o);

typedef struct ru_multiplier {
    double re, im;
} ru_multiplier;

#define RU_STEADY_NOTE 256

typedef struct ru_steady_view {
    int found;                   /* 1: a periodic state; 0: no oscillation (note says why) */
    size_t n;                    /* states */
    double period_s, frequency_hz;
    double period_rel_error;     /* estimated relative error of the period */
    double amplitude_v;          /* (max - min) / 2 of the probe */
    double probe_max_v, probe_min_v;
    double dc_level_v;           /* mean of the probe over the period */
    const ru_multiplier *multipliers; /* n: the phase multiplier first, then by modulus */
    double phase_multiplier_error;    /* |mu_phase - 1| */
    double recovery_time_s;      /* -T / ln|mu2| (INFINITY: not stable; NAN: n < 2) */
    double recovery_cycles;      /* recovery_time_s / T */
    int recovery_oscillates;     /* 1: mu2 is complex (the amplitude rings as it recovers) */
    double recovery_ring_hz;     /* arg(mu2) / (2 pi T) when it rings, else 0 */
    int newton_iterations;
    double transient_periods;    /* periods integrated before Newton (warm-up, continuation) */
    const char *start;           /* "describing function", "given state" or "transient" */
    const double *x0;            /* state at t = 0 of the period (n) */
    const double *monodromy;     /* Phi (n*n row-major) */
    size_t ngrid;                /* waveform samples, t_k = k T / ngrid */
    const double *grid_x;        /* ngrid * n states, row k at grid_x + k n */
    const double *grid_probe;    /* ngrid probe values */
    long steps;                  /* integrator steps in all */
    double cpu_s;                /* processor time of the solve (this thread) */
    const char *note;            /* why not found, or a caveat ("" none) */
} ru_steady_view;

/* Finds the periodic steady state. x_op is the operating point (n entries; NULL
 * when none was found: then only a given start state can be used). RU_OK with
 * view.found = 0 when the circuit does not oscillate (stable operating point and no
 * describing-function amplitude); RU_EINPUT for a circuit driven by a periodic
 * source or a probe that sees no state; RU_ENOCONVERGE when Newton falls onto the
 * operating point or does not converge even after continuation (err says which);
 * RU_ENUMERIC, RU_ENOMEM. *out is created only on RU_OK. */
ru_status ru_steady_solve(const ru_system *s, const double *x_op, const ru_steady_opts *o,
                          ru_steady **out, ru_error *err);

/* Destructor; NULL is harmless. */
void ru_steady_destroy(ru_steady *st);

/* Read-only view, valid until the handle is destroyed. */
void ru_steady_get(const ru_steady *st, ru_steady_view *v);

#ifdef __cplusplus
}
#endif
#endif
