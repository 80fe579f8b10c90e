/* cycles.h: the cycle integrator of the envelope engine (private).
 *
 * A CVODE BDF integrator (dense LU, the system's analytic Jacobian) that stops on
 * a Poincare section: the hyperplane g(x) = q^T (x - x_op) = 0, crossed with g
 * rising (CVODE's root finding; a crossing closer than half the expected period
 * to the previous one is not counted, so a section point where a cycle starts is
 * never its own end). It integrates whole stretches (many cycles, through the
 * sources' breakpoints and jumps) or a single cycle from any state, delivers
 * samples on the global grid k * sample_s and measures the probe over each cycle
 * (extrema refined by a parabola through fine dense-output points, mean by the
 * trapezoid rule).
 *
 * Error weights are relative to the deviation from the operating point,
 *   w_i = 1 / (rtol |x_i - x_op,i| + rtol a s_i + floor_i),
 * where a is the size of the oscillation (max_i |x_i - x_op,i| / s_i, renewed at
 * every start and crossing), s_i the state's scale and floor_i a round-off floor:
 * an oscillation of a microvolt on a bias of volts is integrated to rtol of its own
 * size, so the numerical damping per cycle is the same at every amplitude.
 *
 * One integrator per run (no shared state); everything is allocated at create. */
#ifndef RU_CYCLES_H
#define RU_CYCLES_H

#include "ringup/status.h"
#include "ringup/system.h"

#include <stddef.h>

typedef struct ru_cyc ru_cyc;

typedef struct ru_cyc_cfg {
    const ru_system *sys;
    double rtol;          /* relative tolerance */
    const double *x_op;   /* operating point (n), copied */
    const double *q;      /* section normal (n), copied */
    double period_s;      /* expected period (s, > 0) */
    double sample_s;      /* spacing of delivered samples (s, > 0) */
    int probe_pos;        /* probe node (v(pos) - v(neg)) */
    int probe_neg;
} ru_cyc_cfg;

/* One cycle between two section crossings, measured on the probe. */
typedef struct ru_cyc_fig {
    double t0_s, t1_s;    /* the crossings that bound it */
    double vmax_v, vmin_v;/* probe extrema (parabola-refined) */
    double tmax_s, tmin_s;/* their times */
    double mean_v;        /* mean over the cycle */
} ru_cyc_fig;

/* A sample on the grid (first = 1: the first one after a restart). */
typedef ru_status (*ru_cyc_sample_fn)(void *user, double t_s, const double *x, size_t n,
                                      int first);
/* A finished cycle (with measure on). */
typedef ru_status (*ru_cyc_cycle_fn)(void *user, const ru_cyc_fig *fig);

typedef struct ru_cyc_req {
    int crossings;          /* stop at this many crossings (0: only at t_end_s) */
    double t_end_s;         /* stop at this time at the latest (INFINITY: none) */
    double wait_periods;    /* > 0: fail when no crossing comes within this many
                               expected periods (0: wait for ever) */
    int measure;            /* 1: measure every cycle, reported through cycle */
    ru_cyc_sample_fn sample;/* samples on the grid, NULL: none */
    ru_cyc_cycle_fn cycle;  /* finished cycles, NULL: none */
    void *user;
} ru_cyc_req;

/* Constructor; fails with RU_ENOMEM or RU_ERANGE (bad settings). */
ru_status ru_cyc_create(const ru_cyc_cfg *cfg, ru_cyc **out, ru_error *err);
/* Destructor; NULL is harmless. */
void ru_cyc_destroy(ru_cyc *c);

/* (Re)starts at (t0, x0). on_section = 1 when x0 lies on the section (a crossing at
 * t0 is then the previous one); the system's breakpoints after t0 are honoured. */
ru_status ru_cyc_start(ru_cyc *c, double t0_s, const double *x0, int on_section,
                       ru_error *err);

/* Integrates on from where the last call stopped until req->crossings crossings
 * (counted in this call) or req->t_end_s. *t_s and x (n entries) get the time and
 * state where it stopped (the last crossing, exactly on the section). RU_ENUMERIC
 * when the solver fails or no crossing comes within req->wait_periods (err says
 * which). */
ru_status ru_cyc_advance(ru_cyc *c, const ru_cyc_req *req, double *t_s, double *x,
                         ru_error *err);

/* Counters over the integrator's life. */
typedef struct ru_cyc_counts {
    long steps, rhs_evals, jac_evals, err_fails, newton_fails, restarts, samples;
    long crossings;
} ru_cyc_counts;
void ru_cyc_get_counts(const ru_cyc *c, ru_cyc_counts *k);

/* The section function g(x) = q^T (x - x_op). */
double ru_cyc_section(const ru_cyc *c, const double *x);

/* The expected period (renewed by the caller from measured ones). */
void ru_cyc_set_period(ru_cyc *c, double period_s);

#endif
