/* envfollow_impl.h: the private layout of an envelope-engine run, shared by
 * envfollow.c (section, head, the run's phases, the public calls) and envstep.c
 * (the envelope steps).
 *
 * Invariants: one cycle integrator per run; the envelope CVODE object exists only
 * during envelope steps (cv NULL otherwise); xa, xb, xc are the last three
 * crossing states of the head, then scratch. */
#ifndef RU_ENVFOLLOW_IMPL_H
#define RU_ENVFOLLOW_IMPL_H

#include "ringup/envfollow.h"

#include "engines/cycles.h"

#include <cvode/cvode.h>
#include <sundials/sundials_linearsolver.h>
#include <sundials/sundials_matrix.h>
#include <sundials/sundials_nvector.h>

#define ENVF_WAIT 3.0      /* periods to wait for a crossing in a cycle from a point */
#define ENVF_MIN_SKIP 20.0 /* fewer cycles than this to skip: integrate them */
#define ENVF_SMOOTH 0.1    /* the head ends when the cycle-to-cycle change varies less */

struct ru_envf {
    const ru_system *sys;
    ru_envf_opts o;           /* a copy (x_op points into x_op below) */
    ru_envf_sink sink;
    ru_envf_stats st;
    size_t n;
    double *x_op;             /* operating point (owned copy) */
    double *q, *scale;        /* section normal, state scales */
    double *xa, *xb, *xc;     /* crossing history, scratch */
    double *x_now;            /* the state where the run stands (on the section when
                                 on_sec) */
    double t_now;             /* its time */
    int on_sec;               /* 1: x_now is a section point, the integrator restarts */
    int head_done;            /* 1: the head is over, cycles may be skipped */
    int head_after;           /* head crossings after the sources settled */
    double head_tlast;        /* time of the head's last crossing */
    double qq;                /* q . q */
    double period;            /* expected period (s) */
    ru_envf_kind kind;        /* kind of the cycles being integrated */
    ru_cyc *cyc;
    double wall0, wall_s;     /* wall time of the advances */
    /* the envelope integrator */
    SUNContext ctx;
    void *cv;
    N_Vector Y, Yq;
    SUNMatrix A;
    SUNLinearSolver LS;
    double rtol_cycle;        /* tolerance of the cycle integrations */
    double delta_rel;         /* relative difference step of the Jacobian */
    ru_error inner_err;       /* last failure of a cycle pair */
};

/* x = x_op + P d, P the projection onto the section (along q). */
void ru_envf_on_section(const ru_envf *r, const double *d, double *x);
/* max_i |d_i| / s_i */
double ru_envf_scaled_amp(const ru_envf *r, const double *d);
/* The cycle integrator's sample and cycle callbacks (user = the run). */
ru_status ru_envf_on_sample(void *user, double t, const double *x, size_t n, int first);
ru_status ru_envf_on_cycle(void *user, const ru_cyc_fig *fg);

/* Envelope steps from the section point (t_h, state in x_end) until t_tail;
 * *t_end and x_end get where cycle-by-cycle integration takes over (t_tail, or the
 * last accepted envelope state after a failure: then st.fell_back is set). */
ru_status ru_envf_skip(ru_envf *r, double t_h, double t_tail, double *t_end,
                       double *x_end, ru_error *err);
/* Frees the envelope integrator (adds its counters to the stats). */
void ru_envf_env_free(ru_envf *r);

#endif
