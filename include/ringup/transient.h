/* ringup/transient.h: the time-domain engine: BDF with the analytic Jacobian on one
 * of two integrators behind one interface.
 * - CVODE (SUNDIALS) on the explicit form x' = M^{-1} r(t, x) with a dense direct
 *   solver and, when asked, stability-limit detection: the fastest for small
 *   circuits whose capacitance matrix is not singular.
 * - IDA (SUNDIALS) on the implicit form M x' - r(t, x) = 0 with M kept as a mass
 *   matrix: the only one for a DAE (nodes without capacitance, ringup/system.h), and
 *   the faster for large circuits, where the Newton matrix cj M - dr/dx is sparse
 *   and solved by KLU (SuiteSparse; dense LU below a size). Consistent initial
 *   values (the algebraic states, and every rate) come from IDACalcIC at t = 0 and
 *   after every jump. A capacitor group's common level is integrated as its own
 *   variable (members as differences from their reference), so every variable is
 *   either differential or algebraic, as IDA needs; samples are node voltages.
 * RU_INTEGRATOR_AUTO (the default) takes CVODE for an ODE of at most
 * RU_TR_CVODE_MAX states and IDA otherwise; the stats say which ran.
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

typedef enum ru_integrator {
    RU_INTEGRATOR_AUTO,  /* CVODE for an ODE of at most RU_TR_CVODE_MAX states, else IDA */
    RU_INTEGRATOR_CVODE, /* x' = M^{-1} r (an ODE only: RU_EINPUT for a DAE) */
    RU_INTEGRATOR_IDA    /* M x' = r */
} ru_integrator;

typedef enum ru_linsol {
    RU_LINSOL_AUTO,      /* IDA: dense up to RU_TR_DENSE_MAX states, else KLU */
    RU_LINSOL_DENSE,     /* dense LU (the only one for CVODE) */
    RU_LINSOL_KLU        /* sparse LU of the Newton matrix (IDA only) */
} ru_linsol;

/* Sizes where the automatic choices switch: instruction counts (callgrind) of 20 ms
 * of the tank chains of tests/bench_run.c at normal accuracy put CVODE (without
 * stability-limit detection) and IDA with KLU level at 6 to 10 states (2 states:
 * CVODE 211M, IDA dense 226M, IDA KLU 232M; 6: 337M, 348M, 329M; 10: 556M, 620M,
 * 548M; 20: 1289M, 1377M, 984M); dense LU beats KLU in IDA only at 2 states. */
#define RU_TR_CVODE_MAX 8
#define RU_TR_DENSE_MAX 3

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
    ru_integrator integrator; /* which integrator (AUTO: by size and form) */
    ru_linsol linsol;   /* IDA's linear solver (AUTO: by size) */
    int stab_lim_det;   /* CVODE's stability-limit detection: 1 on, 0 off */
    double ida_tol_factor; /* IDA runs at rtol and atol times this (0: 1): its error
                              estimate is more conservative than CVODE's, so the
                              same accuracy needs looser settings (README) */
} ru_transient_opts;

/* Tolerances of an accuracy setting for each integrator (documented in README with
 * the measurements that justify them); integrator and linear solver AUTO,
 * stability-limit detection on. */
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
    ru_integrator integrator; /* the integrator that ran (CVODE or IDA) */
    ru_linsol linsol;    /* its linear solver (DENSE or KLU) */
    int stab_lim_det;    /* CVODE ran with stability-limit detection */
} ru_solver_stats;

/* Which integrator and linear solver a run with options o would take on s. */
void ru_transient_plan(const ru_system *s, const ru_transient_opts *o,
                       ru_integrator *integrator, ru_linsol *linsol);

/* "CVODE, dense", "CVODE, dense, stability limit" (detection on), "IDA, KLU
 * sparse" or "IDA, dense" for the stats of a run. */
const char *ru_transient_engine_name(const ru_solver_stats *st);

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
