/* ringup/transient.h: the time-domain engine (SUNDIALS CVODE, BDF, dense direct
 * linear solver, analytic Jacobian, stability-limit detection).
 *
 * Output goes to a caller's callback at uniform sample times t_k = k * sample_s
 * (k = 0, 1, ... while t_k <= stop_s), in one call or in chunks (ru_transient_advance), interpolated with CVODE's dense output
 * inside each internal step; the integrator is never restarted per sample, only
 * at the system's breakpoints (jumps). Nothing is stored: memory does not grow
 * with run length. On a numerical failure the run stops with RU_ENUMERIC, the
 * samples already delivered stay delivered and stats->t_reached_s says how far
 * it got. */
#ifndef RINGUP_TRANSIENT_H
#define RINGUP_TRANSIENT_H

#include "ringup/circuit.h"
#include "ringup/status.h"
#include "ringup/system.h"

#include <stddef.h>

#ifdef __cplusplus
extern "C" {
#endif

/* Called for each output sample, in time order; x holds the n states. A return
 * other than RU_OK stops the run with that status (e.g. a disk error). */
typedef ru_status (*ru_sample_fn)(void *user, double t_s, const double *x, size_t n);

typedef struct ru_transient_opts {
    double stop_s;      /* end time (s, > 0) */
    double sample_s;    /* output spacing (s, > 0) */
    double rtol;        /* relative tolerance */
    double atol_rel;    /* absolute tolerance of state i = atol_rel * scale_i, where
                           scale_i comes from ru_system_state_scale */
    long max_steps;     /* internal steps allowed in all (0: no limit) */
    double max_step_s;  /* longest internal step (s); 0: no limit */
    const double *x_ref; /* NULL: the error of state i is weighed against
                           rtol |x_i| + atol_i (CVODE's rule); else against
                           rtol |x_i - x_ref_i| + atol_i: relative to the distance
                           from a reference state (the operating point), so a small
                           oscillation on a large DC bias is held to rtol of its own
                           size (n entries, must outlive the run) */
} ru_transient_opts;

/* Tolerances of an accuracy setting (documented in README with the measurement
 * that justifies them). */
void ru_transient_opts_for(ru_accuracy acc, ru_transient_opts *o);

/* The integrator's own damping of an undamped oscillation, delta/omega per radian, at
 * relative tolerance rtol with the error weighed relative to the operating point
 * (x_ref) and atol a hundredth of rtol times the tone: the table measured on this
 * engine (tests/bench_damping.c, kept in src/engines/tolerance.c). */
double ru_transient_damping_per_rad(double rtol);

/* The loosest rtol <= rtol_max whose damping per radian stays at or below
 * rate_per_rad; *resolved = 0 (and the tightest measured rtol) when none does. */
double ru_transient_rtol_for(double rate_per_rad, double rtol_max, int *resolved);

typedef struct ru_solver_stats {
    long steps;          /* internal steps */
    long rhs_evals;      /* right-hand-side evaluations */
    long jac_evals;      /* Jacobian evaluations */
    long err_fails;      /* local error test failures */
    long newton_fails;   /* nonlinear solver convergence failures */
    long samples;        /* samples delivered */
    double rtol;         /* relative tolerance used */
    double t_reached_s;  /* last time the solution reached */
    double h_last_s;     /* last internal step size */
    int order_last;      /* last BDF order */
    double wall_s;       /* wall-clock time of the run */
} ru_solver_stats;

/* Runs from t = 0 with initial state x0 (n = ru_system_size entries) to o->stop_s.
 * stats and err may be NULL. */
ru_status ru_transient_run(const ru_system *s, const ru_transient_opts *o,
                           const double *x0, ru_sample_fn fn, void *user,
                           ru_solver_stats *stats, ru_error *err);

/* A run in steps, for callers that decide as they go how long to run (the automatic
 * run length): create delivers the sample at t = 0; each advance delivers every
 * sample with t_k <= t_until_s (never past the horizon o->stop_s, which also bounds
 * the breakpoints considered) and returns with the solver where it is. The samples
 * are exactly those of ru_transient_run to the same horizon. After a failure every
 * call returns it. */
typedef struct ru_transient ru_transient;

/* Constructor (copies *o; the system, sink and user data must outlive the run). */
ru_status ru_transient_create(const ru_system *s, const ru_transient_opts *o,
                              const double *x0, ru_sample_fn fn, void *user,
                              ru_transient **out, ru_error *err);
/* Destructor; NULL is harmless. */
void ru_transient_destroy(ru_transient *tr);
ru_status ru_transient_advance(ru_transient *tr, double t_until_s, ru_error *err);
/* Time of the last sample delivered (s). */
double ru_transient_time(const ru_transient *tr);
/* 1 when every sample to the horizon has been delivered. */
int ru_transient_done(const ru_transient *tr);
/* Counters so far (wall_s: time spent inside create and advance). */
void ru_transient_stats(const ru_transient *tr, ru_solver_stats *stats);

#ifdef __cplusplus
}
#endif
#endif
