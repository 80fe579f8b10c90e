/* pss_int.h: one integration of the autonomous circuit (every source at its final
 * value) for the periodic steady-state engines (private): CVODES BDF with the
 * analytic Jacobian, optional forward sensitivities with respect to the initial
 * state (the state-transition matrix, the monodromy matrix over one period),
 * samples at uniform times by dense output, and the extrema of one probe located
 * by CVODES root finding on its time derivative.
 *
 * Every call makes and frees its own SUNDIALS context and solver: no state is kept
 * between calls, so calls may run in parallel threads. */
#ifndef RU_PSS_INT_H
#define RU_PSS_INT_H

#include "ringup/system.h"

#include <stddef.h>

/* Receives the state at sample time t (x has n entries); a status other than
 * RU_OK stops the integration. */
typedef ru_status (*ru_pint_sample_fn)(void *user, double t_s, const double *x);

typedef struct ru_pint_req {
    double t_end_s;         /* integrate over [0, t_end_s] (> 0) */
    double rtol;            /* relative tolerance */
    double atol_rel;        /* absolute tolerance of state i: atol_rel * scale[i] */
    const double *scale;    /* typical size of each state (n entries, > 0) */
    int sens;               /* 1: transition matrix into phi */
    double dt_sample_s;     /* sample spacing (0: no samples) */
    size_t nsamples;        /* samples t_k = k dt, k < nsamples, t_k <= t_end */
    ru_pint_sample_fn fn;   /* sink for the samples */
    void *user;
    const double *probe_g;  /* probe = probe_g . x (n entries); NULL: no extrema */
    long max_steps;         /* 0: no limit */
} ru_pint_req;

typedef struct ru_pint_out {
    double probe_max, probe_min; /* extreme probe values at the roots of d/dt probe
                                    (NAN when none was found) */
    double t_max_s, t_min_s;     /* their times */
    int nroots;                  /* extrema found */
    long steps;                  /* internal steps */
    long rhs_evals;              /* right-hand-side evaluations (root function too) */
} ru_pint_out;

/* Integrates x' = f(x) (ep.dc = 1) from x0 at t = 0 to t_end: x_end (n entries),
 * phi (n*n row-major, d x(t_end) / d x0; only with req->sens), samples to req->fn.
 * RU_ENUMERIC with a message on a solver failure, RU_ENOMEM. */
ru_status ru_pint_run(const ru_system *s, const ru_pint_req *req, const double *x0,
                      double *x_end, double *phi, ru_pint_out *out, ru_error *err);

#endif
