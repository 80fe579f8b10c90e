/* ringup/envfollow.h: the envelope engine: start-up of slow (high-Q) oscillators
 * at a cost that does not grow with the number of cycles.
 *
 * Method: Petzold's envelope following (L. R. Petzold, "An efficient numerical
 * method for highly oscillatory ordinary differential equations", SIAM J. Numer.
 * Anal. 18 (1981) 455-479), on a Poincare section. The section is the hyperplane
 * where the dominant mode's phase is zero: g(x) = -Im(u^H (x - x_op)) = 0 crossed
 * upward, u the mode's left eigenvector at the operating point x_op (so the
 * other modes, the bias included, do not move it to first order). One cycle is
 * the integration from one crossing to the next (CVODE BDF with its root finding).
 * The states at successive crossings X_k form a slowly varying sequence, the
 * quasi-envelope, with X_{k+1} = Phi(X_k). Taken as a smooth function of a
 * continuous cycle index k, its derivative is estimated at any section point X by
 * integrating two cycles from it:
 *   dX/dk ~ (-3 X + 4 Phi(X) - Phi(Phi(X))) / 2,   dt/dk ~ (3 T_1 - T_2) / 2
 * (the one-sided second-order difference, error of order (sigma T)^2 relative to
 * the derivative), and that envelope equation is integrated in k by a second
 * CVODE BDF with its own error control and Newton iteration (Jacobian by
 * differences of cycle pairs), so envelope steps span hundreds or thousands of
 * cycles and stiff parts (a bias that settles within a cycle) stay stable.
 *
 * A run: (1) the head: every cycle integrated from t = 0 while the sources still
 * move and until the cycle-to-cycle change is smooth; (2) envelope steps, with one
 * cycle computed alone from the envelope at each output point (every point_dt_s);
 * (3) the tail: the last tail_cycles cycles before each stop integrated in full
 * (the settled waveform, THD, frequency); a run in several advances goes on from
 * the tail to the next crossing and skips again. If an envelope step fails, the
 * rest of the run is integrated cycle by cycle and the stats say so.
 *
 * Requirements: the circuit becomes autonomous (every source constant from some
 * time on, no noise) and has a dominant complex pole pair. Other growing modes
 * cannot be followed on one section: the caller should check the poles. */
#ifndef RINGUP_ENVFOLLOW_H
#define RINGUP_ENVFOLLOW_H

#include "ringup/circuit.h"
#include "ringup/smallsig.h"
#include "ringup/status.h"
#include "ringup/system.h"
#include "ringup/transient.h"

#include <stddef.h>

#ifdef __cplusplus
extern "C" {
#endif

typedef struct ru_envf_opts {
    double stop_s;        /* end time (s, > 0) */
    double sample_s;      /* spacing of samples in the integrated stretches (s) */
    double growth_budget; /* relative error of the growth rate that the cycle
                             integration's own damping may cause (sets rtol_cycle) */
    double rtol_cycle_max;/* loosest tolerance of the cycle integrations */
    double rtol_env;      /* relative tolerance of the envelope steps (raised to at
                             least 1e4 times the cycle integrations' tolerance) */
    const double *x_op;   /* operating point (n entries) */
    ru_pole pole;         /* dominant pair (im > 0): the section, the first period */
    int probe_pos;        /* probe node: v(pos) - v(neg) */
    int probe_neg;
    double point_dt_s;    /* spacing of cycles computed alone (0: stop / 400) */
    int tail_cycles;      /* cycles integrated in full at the end (>= 4) */
    int head_max_cycles;  /* most head cycles after the sources settle (>= 3) */
} ru_envf_opts;

/* Tolerances and defaults of an accuracy setting (README has the measurements).
 *
 * The cycle integrations' tolerance follows from the growth per cycle: BDF damps
 * a lightly damped oscillation by a fixed fraction per cycle whatever its Q, about
 * 100 to 180 times rtol here (measured on a lossless tank from rtol 1e-7 to 1e-12,
 * with the weights of cycles.h), while a high-Q oscillator grows by only
 * 2 pi sigma / omega per cycle. So
 *   rtol_cycle = min(rtol_cycle_max, max(1e-13, growth_budget * 2 pi |sigma| / omega / 200))
 * keeps that damping below growth_budget of the growth at any Q; the cost per
 * cycle rises slowly as rtol falls (240 steps per cycle at 1e-10, 670 at 1e-12). */
void ru_envf_opts_for(ru_accuracy acc, ru_envf_opts *o);

/* The cycle integrations' tolerance that o gives (formula above). */
double ru_envf_rtol_cycle(const ru_envf_opts *o);

typedef enum {
    RU_ENVF_FULL,   /* a cycle of an integrated stretch (head, tail, fallback) */
    RU_ENVF_POINT   /* a cycle computed alone from the envelope */
} ru_envf_kind;

/* One computed cycle, from the section crossing that opens it to the next. */
typedef struct ru_envf_cycle {
    double t_s;           /* midway between its maximum and minimum (as the
                             envelope of a direct run is stamped) */
    double t_start_s;     /* the crossing that opens it */
    double period_s;      /* to the next crossing */
    double amplitude_v;   /* (max - min) / 2 of the probe */
    double dc_v;          /* mean of the probe over the cycle */
    ru_envf_kind kind;
} ru_envf_cycle;

#define RU_ENVF_FIRST 1
#define RU_ENVF_ALONE 2

/* Where a run's output goes; either callback may be NULL. A return other than
 * RU_OK stops the run with that status. */
typedef struct ru_envf_sink {
    void *user;
    /* a sample (on the grid k * sample_s) of an integrated stretch or of a cycle
     * computed alone; flags: RU_ENVF_FIRST for the first sample after a jump in
     * time, RU_ENVF_ALONE when it belongs to a cycle computed alone */
    ru_status (*sample)(void *user, double t_s, const double *x, size_t n, int flags);
    ru_status (*cycle)(void *user, const ru_envf_cycle *cy);
} ru_envf_sink;

typedef struct ru_envf_stats {
    ru_solver_stats solver;   /* all cycle integrations: steps, rhs_evals (every
                                 evaluation of the circuit), Jacobians, wall time */
    long cycles_integrated;   /* cycles integrated in all (stretches, points,
                                 envelope evaluations and Jacobians) */
    double cycles_spanned;    /* cycles covered by envelope steps */
    long env_steps;           /* envelope steps taken */
    long env_evals;           /* envelope derivative evaluations (2 cycles each) */
    long env_jacs;            /* envelope Jacobians */
    long env_err_fails, env_newton_fails;
    double t_skip_from_s;     /* envelope steps covered [from, to] (NAN: none) */
    double t_skip_to_s;
    int fell_back;            /* 1: an envelope step failed, the rest was integrated */
    char note[320];           /* why it fell back or skipped nothing; "" otherwise */
} ru_envf_stats;

/* Whether the engine can run this system: returns 1, or 0 with the reason in why
 * (a source that never settles, the noise kick, no dominant pair). */
int ru_envf_applicable(const ru_system *s, const ru_envf_opts *o, char *why, size_t len);

/* A run in steps, as the automatic run length drives it: create positions it at
 * t = 0 with state x0 (o->stop_s is the horizon); each advance integrates to t
 * (at most the horizon) and ends with the last tail_cycles cycles integrated in
 * full, so that what is measured at t has a real settled window; the next advance
 * goes on from there. Constructor / destructor (NULL is harmless). */
typedef struct ru_envf ru_envf;
ru_status ru_envf_create(const ru_system *s, const ru_envf_opts *o, const double *x0,
                         const ru_envf_sink *sink, ru_envf **out, ru_error *err);
void ru_envf_destroy(ru_envf *e);
/* RU_ENUMERIC when even the cycle-by-cycle integration fails (samples delivered
 * stay); an envelope step that fails falls back to cycles (stats say so). */
ru_status ru_envf_advance(ru_envf *e, double t_until_s, ru_error *err);
double ru_envf_time(const ru_envf *e);       /* where the run stands (s) */
int ru_envf_done(const ru_envf *e);          /* 1: at the horizon */
void ru_envf_get_stats(const ru_envf *e, ru_envf_stats *st);

/* Runs from t = 0 with initial state x0 to o->stop_s in one advance. stats and err
 * may be NULL. */
ru_status ru_envf_run(const ru_system *s, const ru_envf_opts *o, const double *x0,
                      const ru_envf_sink *sink, ru_envf_stats *stats, ru_error *err);

#ifdef __cplusplus
}
#endif
#endif
