/* transient.c: the time-domain engine's calls (ringup/transient.h) and its CVODE
 * integrator (BDF, dense direct solver, analytic Jacobian, stability-limit
 * detection when asked) with uniform-rate output by dense output. When IDA runs
 * (ru_transient_plan), the handle holds an IDA run (dae.c) and forwards every call.
 *
 * Invariants:
 * - One SUNContext and one CVODE object per run, owned by its ru_transient handle:
 *   no global state, so runs may go in parallel threads.
 * - ru_transient_advance delivers samples up to a time and returns with the solver
 *   where it is (the last step may lie beyond that time; its interpolant still holds
 *   the samples not yet delivered), so a run in chunks gives exactly the samples of
 *   one run to the horizon stop_s. A jump waits until every sample before it is out.
 * - Samples t_k = k * sample_s are delivered in order, each once, from CVodeGetDky
 *   inside the last internal step [tcur - hlast, tcur]; CVODE is re-initialised only
 *   at the system's breakpoints (after ru_system_apply_jump), never per sample.
 * - A sample that falls on a breakpoint (within eps_t) shows the state after the
 *   jump and is stamped with the breakpoint's own time.
 * - Everything is allocated in setup (vectors, matrix, Jacobian scratch, breakpoint
 *   list); the step loop allocates nothing, so memory does not grow with run length
 *   (the sink receives a pointer into a preallocated N_Vector).
 * - CVODE messages go to an error handler that copies them into the run; the
 *   library prints nothing. */
#define _POSIX_C_SOURCE 200809L

#include "engines/transient_impl.h"

#include <cvodes/cvodes.h>
#include <nvector/nvector_serial.h>
#include <sundials/sundials_context.h>
#include <sunlinsol/sunlinsol_dense.h>
#include <sunmatrix/sunmatrix_dense.h>

#include <float.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>


struct ru_transient {
    const ru_system *sys;      /* the ODE */
    ru_transient_opts opts;    /* a copy of the caller's options */
    const ru_transient_opts *o; /* = &opts */
    ru_sample_fn fn;           /* the sink */
    void *user;
    double t0_wall;            /* creation time (monotonic clock) */
    double busy_s;             /* wall time spent in create and advance */
    size_t n;                  /* number of states */
    SUNContext ctx;            /* per-run SUNDIALS context */
    void *cv;                  /* CVODE memory */
    N_Vector y;                /* solution at the integrator's return time */
    N_Vector ys;               /* interpolated sample */
    N_Vector atol;             /* absolute tolerances (state units) */
    SUNMatrix A;               /* dense Newton matrix */
    SUNLinearSolver LS;        /* dense LU */
    double *jrow;              /* n*n row-major Jacobian scratch */
    double *bp;                /* breakpoints in (0, t_final], sorted */
    size_t nbp;
    double bp_local[RU_TR_BP_LOCAL];
    long k, k_last;            /* next sample index, last sample index */
    long k_stop;               /* the current advance delivers samples up to this */
    size_t ibp;                /* next breakpoint */
    int pending_bp;            /* the last step stopped at breakpoint bp[ibp] and the
                                  jump is not yet applied (samples before it wait) */
    int at_end;                /* the solver reached t_final: no more steps */
    int done;                  /* every sample up to k_last delivered */
    double tprev;              /* furthest time reached (stall detection) */
    long stall;                /* steps without progress in t */
    ru_status failed;          /* a failure ends the run: every later call returns it */
    double t_final;            /* integration end: max(stop_s, k_last*sample_s) */
    double eps_t;              /* time resolution for "same instant" (s) */
    long rhs_evals, jac_evals; /* counted in the callbacks (survive re-inits) */
    long seg_steps, seg_errf, seg_nlf; /* counters of finished segments */
    long samples;              /* samples delivered */
    ru_status sys_status;      /* first failure reported by the system, RU_OK */
    char cvmsg[RU_ERROR_TEXT]; /* last CVODE error message, "" when none */
    ru_dae *dae;               /* not NULL: IDA runs and every call goes to dae.c */
};
typedef struct ru_transient tr_run;

static int tr_rhs(realtype t, N_Vector y, N_Vector ydot, void *user)
{
    tr_run *r = user;
    r->rhs_evals++;
    const double *x = N_VGetArrayPointer(y);
    double *f = N_VGetArrayPointer(ydot);
    ru_status st = ru_system_rhs(r->sys, t, x, f);
    if (st != RU_OK) {
        if (r->sys_status == RU_OK)
            r->sys_status = st;
        return st == RU_ENUMERIC ? 1 : -1; /* overflow: let CVODE cut the step */
    }
    for (size_t i = 0; i < r->n; i++)
        if (!isfinite(f[i]))
            return 1; /* recoverable: CVODE retries with a smaller step */
    return 0;
}

static int tr_jac(realtype t, N_Vector y, N_Vector fy, SUNMatrix J, void *user,
                  N_Vector t1, N_Vector t2, N_Vector t3)
{
    (void)fy, (void)t1, (void)t2, (void)t3;
    tr_run *r = user;
    r->jac_evals++;
    ru_status st = ru_system_jacobian(r->sys, t, N_VGetArrayPointer(y), r->jrow);
    if (st != RU_OK) {
        if (r->sys_status == RU_OK)
            r->sys_status = st;
        return st == RU_ENUMERIC ? 1 : -1;
    }
    size_t n = r->n;
    for (size_t j = 0; j < n; j++) {
        double *col = SM_COLUMN_D(J, (sunindextype)j); /* column-major storage */
        for (size_t i = 0; i < n; i++) {
            col[i] = r->jrow[i * n + j];
            if (!isfinite(col[i]))
                return 1;
        }
    }
    return 0;
}

/* Error weights relative to the reference state: 1/(rtol |y - x_ref| + atol). */
static int tr_ewt(N_Vector y, N_Vector ewt, void *user)
{
    tr_run *r = user;
    const double *x = N_VGetArrayPointer(y), *at = N_VGetArrayPointer(r->atol);
    double *w = N_VGetArrayPointer(ewt);
    for (size_t i = 0; i < r->n; i++) {
        double d = r->o->rtol * fabs(x[i] - r->o->x_ref[i]) + at[i];
        if (!(d > 0) || !isfinite(d))
            return -1;
        w[i] = 1.0 / d;
    }
    return 0;
}

/* Keeps CVODE's error text (warnings are dropped: nothing is printed). */
static void tr_errh(int code, const char *module, const char *func, char *msg,
                    void *user)
{
    (void)module, (void)func;
    tr_run *r = user;
    if (code < 0)
        snprintf(r->cvmsg, sizeof r->cvmsg, "%s", msg ? msg : "");
}

/* Sample grid and breakpoint list (sorted, merged within eps_t, in (eps_t, t_final]). */
static ru_status setup_times(tr_run *r, ru_error *err)
{
    const ru_transient_opts *o = r->o;
    r->k_last = (long)floor(o->stop_s * (1.0 + 1e-12) / o->sample_s);
    r->t_final = fmax(o->stop_s, (double)r->k_last * o->sample_s);
    r->eps_t = 1e-9 * o->sample_s + 8.0 * DBL_EPSILON * r->t_final;
    r->bp = r->bp_local;
    return ru_tr_breakpoints(r->sys, r->t_final, r->eps_t, r->bp_local, RU_TR_BP_LOCAL,
                             &r->bp, &r->nbp, err);
}

/* SUNDIALS objects, tolerances, callbacks. */
static ru_status setup_solver(tr_run *r, const double *x0, ru_error *err)
{
    sunindextype n = (sunindextype)r->n;
    if (SUNContext_Create(NULL, &r->ctx) != 0)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "transient: no SUNDIALS context");
    r->y = N_VNew_Serial(n, r->ctx);
    r->ys = N_VNew_Serial(n, r->ctx);
    r->atol = N_VNew_Serial(n, r->ctx);
    r->A = SUNDenseMatrix(n, n, r->ctx);
    r->jrow = malloc(r->n * r->n * sizeof *r->jrow);
    r->cv = CVodeCreate(CV_BDF, r->ctx);
    if (!r->y || !r->ys || !r->atol || !r->A || !r->jrow || !r->cv)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "transient: out of memory");
    /* Fused vector operations (CVODE clones y, so its own vectors get them too):
     * one loop where the generic fallback calls N_VLinearSum term by term. */
    if (N_VEnableFusedOps_Serial(r->y, SUNTRUE) || N_VEnableFusedOps_Serial(r->ys, SUNTRUE))
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "transient: vector setup failed");
    r->LS = SUNLinSol_Dense(r->y, r->A, r->ctx);
    if (!r->LS)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "transient: out of memory");
    double *y = N_VGetArrayPointer(r->y), *at = N_VGetArrayPointer(r->atol);
    memcpy(y, x0, r->n * sizeof *y);
    ru_system_state_scale(r->sys, at); /* typical size of each state */
    for (size_t i = 0; i < r->n; i++)
        at[i] = r->o->atol_rel * ((isfinite(at[i]) && at[i] > 0) ? at[i] : 1.0);
    int f = CVodeSetErrHandlerFn(r->cv, tr_errh, r);
    if (!f) f = CVodeInit(r->cv, tr_rhs, 0.0, r->y);
    if (!f) f = CVodeSetUserData(r->cv, r); /* before the weight function takes it */
    if (!f && r->o->x_ref)
        f = CVodeWFtolerances(r->cv, tr_ewt);
    else if (!f)
        f = CVodeSVtolerances(r->cv, r->o->rtol, r->atol);
    if (!f && r->o->max_step_s > 0)
        f = CVodeSetMaxStep(r->cv, r->o->max_step_s);
    if (!f) f = CVodeSetLinearSolver(r->cv, r->LS, r->A);
    if (!f) f = CVodeSetJacFn(r->cv, tr_jac);
    if (!f) f = CVodeSetStabLimDet(r->cv, r->o->stab_lim_det ? SUNTRUE : SUNFALSE);
    /* CVODE gives up after 7 error-test failures in one step by default; an op-amp
     * leaving its rail at draft tolerances needed up to ~20 (measured on a clipping
     * Wien bridge: 5 of 40 Monte Carlo units failed at h ~ 1e-10 s with 7, none
     * with 20). Steps that pass are unchanged. */
    if (!f) f = CVodeSetMaxErrTestFails(r->cv, RU_TR_MAX_ERR_FAILS);
    if (!f) f = CVodeSetMaxNumSteps(r->cv, -1); /* one step per call; limit is ours */
    if (!f) f = CVodeSetMaxHnilWarns(r->cv, -1);
    if (f)
        return ru_error_set(err, RU_ENUMERIC, NULL, 0, 0,
                            "transient: solver setup failed: %s", r->cvmsg);
    return RU_OK;
}

static void run_free(tr_run *r)
{
    if (r->cv)
        CVodeFree(&r->cv);
    if (r->LS)
        SUNLinSolFree(r->LS);
    if (r->A)
        SUNMatDestroy(r->A);
    if (r->y)
        N_VDestroy(r->y);
    if (r->ys)
        N_VDestroy(r->ys);
    if (r->atol)
        N_VDestroy(r->atol);
    if (r->ctx)
        SUNContext_Free(&r->ctx);
    free(r->jrow);
    if (r->bp != r->bp_local)
        free(r->bp);
}

/* Hands one sample to the sink. */
static ru_status emit(tr_run *r, ru_sample_fn fn, void *user, double t,
                      const double *x, ru_error *err)
{
    ru_status st = fn(user, t, x, r->n);
    if (st != RU_OK) {
        char tb[48];
        ru_tr_fmt_time(t, tb, sizeof tb);
        return ru_error_set(err, st, NULL, 0, 0,
                            "output stopped the run at t = %s: %s", tb,
                            ru_status_str(st));
    }
    r->samples++;
    r->k++;
    return RU_OK;
}

/* Delivers samples with t_k < tlim (strict) or <= tlim (incl), interpolated inside
 * the last internal step (times clamped into it against round-off). */
static ru_status emit_dense(tr_run *r, double tlim, int incl, ru_sample_fn fn,
                            void *user, ru_error *err)
{
    double tcur = 0, hlast = 0;
    CVodeGetCurrentTime(r->cv, &tcur);
    CVodeGetLastStep(r->cv, &hlast);
    while (r->k <= r->k_stop) {
        double t = (double)r->k * r->o->sample_s;
        if (incl ? t > tlim : t >= tlim)
            break;
        double tq = fmin(fmax(t, tcur - hlast), tcur);
        int f = CVodeGetDky(r->cv, tq, 0, r->ys);
        if (f < 0)
            return ru_error_set(err, RU_ENUMERIC, NULL, 0, 0,
                                "transient: dense output failed at t = %g s: %s", t,
                                r->cvmsg);
        ru_status st = emit(r, fn, user, t, N_VGetArrayPointer(r->ys), err);
        if (st != RU_OK)
            return st;
    }
    return RU_OK;
}

/* Delivers samples with t_k <= tlim straight from state x (after a jump), stamped
 * with time t_at (the breakpoint itself, so that the sink evaluates the sources on
 * the same side of the edge as x; t_at < 0: each sample's own t_k). */
static ru_status emit_state(tr_run *r, double tlim, double t_at, const double *x,
                            ru_sample_fn fn, void *user, ru_error *err)
{
    while (r->k <= r->k_last && (double)r->k * r->o->sample_s <= tlim) {
        double t = t_at >= 0 ? t_at : (double)r->k * r->o->sample_s;
        ru_status st = emit(r, fn, user, t, x, err);
        if (st != RU_OK)
            return st;
    }
    return RU_OK;
}

static ru_status fail_numeric(tr_run *r, int flag, const char *why, ru_error *err)
{
    double t = 0;
    CVodeGetCurrentTime(r->cv, &t);
    return ru_tr_fail_numeric(t, why, r->cvmsg, why ? NULL : CVodeGetReturnFlagName(flag),
                              "unknown CVODE failure", err);
}

/* Adds the counters of the current segment (CVodeReInit resets them). */
static void close_segment(tr_run *r)
{
    long v = 0;
    if (CVodeGetNumSteps(r->cv, &v) == CV_SUCCESS)
        r->seg_steps += v;
    if (CVodeGetNumErrTestFails(r->cv, &v) == CV_SUCCESS)
        r->seg_errf += v;
    if (CVodeGetNumNonlinSolvConvFails(r->cv, &v) == CV_SUCCESS)
        r->seg_nlf += v;
}

static long total_steps(tr_run *r)
{
    long v = 0;
    CVodeGetNumSteps(r->cv, &v);
    return r->seg_steps + v;
}

/* At a breakpoint reached as a stop time: the samples before it (as far as the
 * current advance goes: if it ends before them, the jump waits), the jump, every
 * sample on it, then a restart with the next stop time. */
static ru_status cross_breakpoint(tr_run *r, ru_sample_fn fn, void *user, ru_error *err)
{
    double b = r->bp[r->ibp];
    ru_status st = emit_dense(r, b - r->eps_t, 0, fn, user, err);
    if (st != RU_OK || (r->k <= r->k_last && (double)r->k * r->o->sample_s < b - r->eps_t))
        return st; /* paused before the jump (or failed) */
    double *y = N_VGetArrayPointer(r->y); /* CVODE's solution at exactly b */
    ru_system_apply_jump(r->sys, b, y);
    st = emit_state(r, b + r->eps_t, b, y, fn, user, err);
    if (st != RU_OK)
        return st;
    r->ibp++;
    r->pending_bp = 0;
    if (b >= r->t_final - r->eps_t) {
        r->at_end = 1;
        return RU_OK;
    }
    close_segment(r);
    double next = r->ibp < r->nbp ? r->bp[r->ibp] : r->t_final;
    int f = CVodeReInit(r->cv, b, r->y);
    if (!f)
        f = CVodeSetStopTime(r->cv, next);
    return f ? fail_numeric(r, f, NULL, err) : RU_OK;
}

/* One internal step; samples from its interpolant follow in advance_to. */
static ru_status take_step(tr_run *r, ru_error *err)
{
    if (r->o->max_steps > 0 && total_steps(r) >= r->o->max_steps) {
        char why[96];
        snprintf(why, sizeof why, "reached the limit of %ld internal steps",
                 r->o->max_steps);
        return fail_numeric(r, 0, why, err);
    }
    double next = r->ibp < r->nbp ? r->bp[r->ibp] : r->t_final, tret = 0.0;
    int f = CVode(r->cv, next, r->y, &tret, CV_ONE_STEP);
    if (f < 0)
        return fail_numeric(r, f, NULL, err);
    if (f == CV_TSTOP_RETURN && r->ibp < r->nbp)
        r->pending_bp = 1;
    else if (f == CV_TSTOP_RETURN)
        r->at_end = 1;
    r->stall = tret > r->tprev ? 0 : r->stall + 1;
    r->tprev = fmax(r->tprev, tret);
    if (r->stall > RU_TR_STALL_STEPS)
        return fail_numeric(r, 0, "the step size fell below the time resolution", err);
    return RU_OK;
}

/* Delivers every sample up to index r->k_stop: from the current step's interpolant
 * first, then step by step (one internal step per call, samples from each step's
 * interpolant). Stops between samples whenever the limit is reached, keeping the
 * solver where it is, so the next call goes on seamlessly. */
static ru_status advance_to(tr_run *r, ru_sample_fn fn, void *user, ru_error *err)
{
    for (;;) {
        ru_status st = RU_OK;
        if (r->pending_bp) {
            if ((st = cross_breakpoint(r, fn, user, err)) != RU_OK || r->pending_bp)
                return st;
        } else {
            double tcur = 0;
            CVodeGetCurrentTime(r->cv, &tcur);
            st = r->at_end ? emit_dense(r, r->t_final + r->eps_t, 1, fn, user, err)
                           : emit_dense(r, tcur, 1, fn, user, err);
            if (st != RU_OK)
                return st;
        }
        if (r->k > r->k_last) {
            r->done = 1;
            return RU_OK;
        }
        if (r->k > r->k_stop || r->at_end)
            return RU_OK;
        if ((st = take_step(r, err)) != RU_OK)
            return st;
    }
}

static void fill_stats(tr_run *r, ru_solver_stats *stats, double t_reached)
{
    memset(stats, 0, sizeof *stats);
    stats->rtol = r->o->rtol;
    stats->samples = r->samples;
    stats->rhs_evals = r->rhs_evals;
    stats->jac_evals = r->jac_evals;
    stats->t_reached_s = t_reached;
    if (!r->cv)
        return;
    long v = 0;
    stats->steps = total_steps(r);
    stats->err_fails = r->seg_errf + (CVodeGetNumErrTestFails(r->cv, &v) ? 0 : v);
    stats->newton_fails =
        r->seg_nlf + (CVodeGetNumNonlinSolvConvFails(r->cv, &v) ? 0 : v);
    CVodeGetLastStep(r->cv, &stats->h_last_s);
    CVodeGetLastOrder(r->cv, &stats->order_last);
    double tc = 0;
    if (CVodeGetCurrentTime(r->cv, &tc) == CV_SUCCESS && stats->t_reached_s == 0)
        stats->t_reached_s = tc;
}

static double now_s(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

/* No states (every node driven): the samples are the sources alone. */
static ru_status run_stateless(tr_run *r, ru_sample_fn fn, void *user, ru_error *err)
{
    static const double none[1] = {0.0}; /* read-only: never written */
    double tlim = fmin(r->t_final, (double)r->k_stop * r->o->sample_s) + r->eps_t;
    ru_status st = emit_state(r, tlim, -1.0, none, fn, user, err);
    if (st == RU_OK && r->k > r->k_last)
        r->done = 1;
    return st;
}

void ru_transient_destroy(ru_transient *r)
{
    if (!r)
        return;
    ru_dae_destroy(r->dae);
    run_free(r);
    free(r);
}

ru_status ru_transient_create(const ru_system *s, const ru_transient_opts *o,
                              const double *x0, ru_sample_fn fn, void *user,
                              ru_transient **out, ru_error *err)
{
    double t0 = now_s();
    *out = NULL;
    ru_status st = ru_tr_check_opts(s, o, x0, fn, err);
    if (st != RU_OK)
        return st;
    ru_integrator integ;
    ru_linsol ls;
    ru_transient_plan(s, o, &integ, &ls);
    if (integ == RU_INTEGRATOR_CVODE && ru_system_algebraic_count(s) > 0)
        return ru_error_set(err, RU_EINPUT, NULL, 0, 0,
                            "transient: CVODE needs capacitance at every node (%zu "
                            "algebraic states here); use IDA",
                            ru_system_algebraic_count(s));
    tr_run *r = calloc(1, sizeof *r);
    if (!r)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "transient: out of memory");
    if (integ == RU_INTEGRATOR_IDA) {
        st = ru_dae_create(s, o, x0, fn, user, &r->dae, err);
        if (st != RU_OK) {
            free(r);
            return st;
        }
        *out = r;
        return RU_OK;
    }
    r->sys = s;
    r->opts = *o;
    r->o = &r->opts;
    r->fn = fn;
    r->user = user;
    r->t0_wall = t0;
    r->n = ru_system_size(s);
    st = setup_times(r, err);
    r->k_stop = 0;
    if (st == RU_OK && r->n > 0) {
        st = setup_solver(r, x0, err);
        if (st == RU_OK)
            st = emit_state(r, 0.0, 0.0, x0, fn, user, err); /* t = 0 is x0 */
        if (st == RU_OK) {
            int f = CVodeSetStopTime(r->cv, r->nbp ? r->bp[0] : r->t_final);
            if (f)
                st = fail_numeric(r, f, NULL, err);
        }
    }
    r->busy_s = now_s() - t0;
    if (st != RU_OK) {
        ru_transient_destroy(r);
        return st;
    }
    *out = r;
    return RU_OK;
}

ru_status ru_transient_advance(ru_transient *r, double t_until_s, ru_error *err)
{
    if (!r)
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0, "transient: no run");
    if (r->dae)
        return ru_dae_advance(r->dae, t_until_s, err);
    if (r->failed != RU_OK)
        return ru_error_set(err, r->failed, NULL, 0, 0,
                            "transient: the run already failed");
    if (r->done)
        return RU_OK;
    double t0 = now_s();
    long k = isfinite(t_until_s) && t_until_s < r->t_final
                 ? (long)floor(t_until_s * (1.0 + 1e-12) / r->o->sample_s)
                 : r->k_last;
    r->k_stop = k < r->k_last ? k : r->k_last;
    if (r->k_stop < r->k) {
        r->busy_s += now_s() - t0;
        return RU_OK;
    }
    ru_status st = r->n == 0 ? run_stateless(r, r->fn, r->user, err)
                             : advance_to(r, r->fn, r->user, err);
    r->busy_s += now_s() - t0;
    if (st != RU_OK)
        r->failed = st;
    return st;
}

double ru_transient_time(const ru_transient *r)
{
    if (r && r->dae)
        return ru_dae_time(r->dae);
    if (!r || r->k == 0)
        return 0.0;
    return fmin(r->t_final, (double)(r->k - 1) * r->o->sample_s);
}

int ru_transient_done(const ru_transient *r)
{
    if (r && r->dae)
        return ru_dae_done(r->dae);
    return r && r->done;
}

void ru_transient_stats(const ru_transient *r, ru_solver_stats *stats)
{
    if (!r || !stats)
        return;
    if (r->dae) {
        ru_dae_stats(r->dae, stats);
        return;
    }
    fill_stats((tr_run *)r, stats,
               r->failed != RU_OK ? 0.0 : r->done ? r->t_final : ru_transient_time(r));
    stats->wall_s = r->busy_s;
    stats->integrator = RU_INTEGRATOR_CVODE;
    stats->linsol = RU_LINSOL_DENSE;
    stats->stab_lim_det = r->o->stab_lim_det != 0;
}

ru_status ru_transient_run(const ru_system *s, const ru_transient_opts *o,
                           const double *x0, ru_sample_fn fn, void *user,
                           ru_solver_stats *stats, ru_error *err)
{
    double t0 = now_s();
    ru_transient *r = NULL;
    ru_status st = ru_transient_create(s, o, x0, fn, user, &r, err);
    if (st == RU_OK)
        st = ru_transient_advance(r, INFINITY, err);
    if (stats) {
        memset(stats, 0, sizeof *stats);
        if (r)
            ru_transient_stats(r, stats);
        stats->wall_s = now_s() - t0;
    }
    ru_transient_destroy(r);
    return st;
}
