/* dae.c: the time-domain engine on SUNDIALS IDA: BDF on F(t, y, y') = M x' -
 * r(t, x) = 0 with the mass matrix M kept as it is, the Newton matrix
 * cj M - dr/dx assembled from the system's sparse pattern and factored by KLU
 * (or dense LU for small systems), consistent initial values from IDACalcIC.
 *
 * Variables. IDA needs each variable to be either differential or algebraic.
 * A node voltage is, except in a capacitor group with no capacitance to ground
 * (ringup/system.h): there the members' voltages all carry the group's common
 * level, which is algebraic. So the integrator's variables y are x with each
 * such member's voltage replaced by its difference from the group's reference:
 * x = S y, x_i = y_i + y_ref(i) for members, x_i = y_i otherwise. Then
 * M x' = (M S) y' has zero columns exactly at the algebraic variables, and the
 * Newton matrix is (cj M - dr/dx) S: column ref(i) gathers the columns of the
 * group. Without groups S is the identity.
 *
 * Invariants (as transient.c):
 * - one SUNContext and one IDA object per run, owned by its ru_dae handle;
 * - ru_dae_advance delivers samples up to a time and returns with the solver where
 *   it is, so a run in chunks gives exactly the samples of one run to the horizon;
 *   a jump waits until every sample before it is out;
 * - samples t_k = k * sample_s in order, each once, from IDAGetDky inside the
 *   last step, converted to node voltages; IDA is re-initialised only at
 *   breakpoints (after ru_system_apply_jump), each time followed by IDACalcIC, and
 *   the samples at a breakpoint show the consistent state after the jump;
 * - everything is allocated in setup; the step loop allocates nothing;
 * - IDA's messages go to a handler that copies them; nothing is printed. */
#define _POSIX_C_SOURCE 200809L

#include "engines/dae_impl.h"


#include <float.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

/* ---- failures and counters ---------------------------------------------------- */

static ru_status fail_numeric(dae_run *r, int flag, const char *why, ru_error *err)
{
    double t = 0;
    if (r->ida)
        IDAGetCurrentTime(r->ida, &t);
    return ru_tr_fail_numeric(t, why, r->msg, why ? NULL : IDAGetReturnFlagName(flag),
                              "unknown IDA failure", err);
}

static void close_segment(dae_run *r)
{
    long v = 0;
    if (IDAGetNumSteps(r->ida, &v) == IDA_SUCCESS)
        r->seg_steps += v;
    if (IDAGetNumErrTestFails(r->ida, &v) == IDA_SUCCESS)
        r->seg_errf += v;
    if (IDAGetNumNonlinSolvConvFails(r->ida, &v) == IDA_SUCCESS)
        r->seg_nlf += v;
}

static long total_steps(dae_run *r)
{
    long v = 0;
    IDAGetNumSteps(r->ida, &v);
    return r->seg_steps + v;
}

/* ---- samples ------------------------------------------------------------------- */

static ru_status emit(dae_run *r, double t, const double *x, ru_error *err)
{
    ru_status st = r->fn(r->user, t, x, r->n);
    if (st != RU_OK) {
        char tb[48];
        ru_tr_fmt_time(t, tb, sizeof tb);
        return ru_error_set(err, st, NULL, 0, 0, "output stopped the run at t = %s: %s",
                            tb, ru_status_str(st));
    }
    r->samples++;
    r->k++;
    return RU_OK;
}

/* Samples with t_k < tlim (or <= with incl), up to k_stop, from the last step's
 * interpolant. */
static ru_status emit_dense(dae_run *r, double tlim, int incl, ru_error *err)
{
    double tcur = 0, hlast = 0;
    IDAGetCurrentTime(r->ida, &tcur);
    IDAGetLastStep(r->ida, &hlast);
    while (r->k <= r->k_stop) {
        double t = (double)r->k * r->o->sample_s;
        if (incl ? t > tlim : t >= tlim)
            break;
        double tq = fmin(fmax(t, tcur - hlast), tcur);
        int f = IDAGetDky(r->ida, tq, 0, r->ys);
        if (f < 0)
            return ru_error_set(err, RU_ENUMERIC, NULL, 0, 0,
                                "transient: dense output failed at t = %g s: %s", t,
                                r->msg);
        ru_dae_y_to_x(r, N_VGetArrayPointer(r->ys), r->xs);
        ru_status st = emit(r, t, r->xs, err);
        if (st != RU_OK)
            return st;
    }
    return RU_OK;
}

/* Samples with t_k <= tlim from state x, stamped t_at (t_at < 0: their own t_k). */
static ru_status emit_state(dae_run *r, double tlim, double t_at, const double *x,
                            ru_error *err)
{
    while (r->k <= r->k_last && (double)r->k * r->o->sample_s <= tlim) {
        double t = t_at >= 0 ? t_at : (double)r->k * r->o->sample_s;
        ru_status st = emit(r, t, x, err);
        if (st != RU_OK)
            return st;
    }
    return RU_OK;
}

/* At a breakpoint reached as a stop time: the samples before it (as far as this
 * advance goes: else the jump waits), the jump, a new consistent start, every
 * sample on it, then the next stop time. */
static ru_status cross_breakpoint(dae_run *r, ru_error *err)
{
    double b = r->bp[r->ibp];
    ru_status st = emit_dense(r, b - r->eps_t, 0, err);
    if (st != RU_OK || (r->k <= r->k_last && (double)r->k * r->o->sample_s < b - r->eps_t))
        return st; /* paused before the jump (or failed) */
    ru_dae_y_to_x(r, N_VGetArrayPointer(r->yy), r->xs); /* IDA's solution at exactly b */
    ru_system_apply_jump(r->sys, b, r->xs);
    r->ibp++;
    r->pending_bp = 0;
    if (b >= r->t_final - r->eps_t) { /* the last: no restart, show the jump */
        r->at_end = 1;
        return emit_state(r, b + r->eps_t, b, r->xs, err);
    }
    close_segment(r);
    double next = r->ibp < r->nbp ? r->bp[r->ibp] : r->t_final;
    /* The restart is just after the edge (by eps_t, which is far below any step and
     * far above the rounding of b): a source evaluated at b itself may still show
     * its value before the edge, and the algebraic states would follow that. */
    if ((st = ru_dae_consistent_start(r, b + r->eps_t, r->xs, next, 1, err)) != RU_OK)
        return st;
    ru_dae_y_to_x(r, N_VGetArrayPointer(r->yy), r->xs);
    if ((st = emit_state(r, b + r->eps_t, b, r->xs, err)) != RU_OK)
        return st;
    int f = IDASetStopTime(r->ida, next);
    return f ? fail_numeric(r, f, NULL, err) : RU_OK;
}

/* One internal step; its samples follow in advance_to. */
static ru_status take_step(dae_run *r, ru_error *err)
{
    if (r->o->max_steps > 0 && total_steps(r) >= r->o->max_steps) {
        char why[96];
        snprintf(why, sizeof why, "reached the limit of %ld internal steps",
                 r->o->max_steps);
        return fail_numeric(r, 0, why, err);
    }
    double next = r->ibp < r->nbp ? r->bp[r->ibp] : r->t_final, tret = 0.0;
    int f = IDASolve(r->ida, next, &tret, r->yy, r->yp, IDA_ONE_STEP);
    if (f < 0)
        return fail_numeric(r, f, NULL, err);
    if (f == IDA_TSTOP_RETURN && r->ibp < r->nbp)
        r->pending_bp = 1;
    else if (f == IDA_TSTOP_RETURN)
        r->at_end = 1;
    r->stall = tret > r->tprev ? 0 : r->stall + 1;
    r->tprev = fmax(r->tprev, tret);
    if (r->stall > RU_TR_STALL_STEPS)
        return fail_numeric(r, 0, "the step size fell below the time resolution", err);
    return RU_OK;
}

/* Every sample up to index k_stop: the current step's first, then step by step. */
static ru_status advance_to(dae_run *r, ru_error *err)
{
    for (;;) {
        ru_status st = RU_OK;
        if (r->pending_bp) {
            if ((st = cross_breakpoint(r, err)) != RU_OK || r->pending_bp)
                return st;
        } else {
            double tcur = 0;
            IDAGetCurrentTime(r->ida, &tcur);
            st = r->at_end ? emit_dense(r, r->t_final + r->eps_t, 1, err)
                           : emit_dense(r, tcur, 1, err);
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

static void fill_stats(const dae_run *r, ru_solver_stats *stats, double t_reached)
{
    memset(stats, 0, sizeof *stats);
    stats->rtol = r->rtol;
    stats->samples = r->samples;
    stats->rhs_evals = r->res_evals;
    stats->jac_evals = r->jac_evals;
    stats->t_reached_s = t_reached;
    stats->integrator = RU_INTEGRATOR_IDA;
    stats->linsol = r->klu ? RU_LINSOL_KLU : RU_LINSOL_DENSE;
    if (!r->ida)
        return;
    long v = 0;
    stats->steps = total_steps((dae_run *)r);
    stats->err_fails = r->seg_errf + (IDAGetNumErrTestFails(r->ida, &v) ? 0 : v);
    stats->newton_fails = r->seg_nlf + (IDAGetNumNonlinSolvConvFails(r->ida, &v) ? 0 : v);
    IDAGetLastStep(r->ida, &stats->h_last_s);
    IDAGetLastOrder(r->ida, &stats->order_last);
    double tc = 0;
    if (IDAGetCurrentTime(r->ida, &tc) == IDA_SUCCESS && stats->t_reached_s == 0)
        stats->t_reached_s = tc;
}

static double now_s(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

/* No states: the samples are the sources alone. */
static ru_status run_stateless(dae_run *r, ru_error *err)
{
    static const double none[1] = {0.0};
    double tlim = fmin(r->t_final, (double)r->k_stop * r->o->sample_s) + r->eps_t;
    ru_status st = emit_state(r, tlim, -1.0, none, err);
    if (st == RU_OK && r->k > r->k_last)
        r->done = 1;
    return st;
}

void ru_dae_destroy(ru_dae *r)
{
    if (!r)
        return;
    ru_dae_run_free(r);
    free(r);
}

/* Sample grid (as transient.c) and breakpoints. */
static ru_status setup_times(dae_run *r, ru_error *err)
{
    const ru_transient_opts *o = r->o;
    r->k_last = (long)floor(o->stop_s * (1.0 + 1e-12) / o->sample_s);
    r->t_final = fmax(o->stop_s, (double)r->k_last * o->sample_s);
    r->eps_t = 1e-9 * o->sample_s + 8.0 * DBL_EPSILON * r->t_final;
    r->bp = r->bp_local;
    return ru_tr_breakpoints(r->sys, r->t_final, r->eps_t, r->bp_local, RU_TR_BP_LOCAL,
                             &r->bp, &r->nbp, err);
}

ru_status ru_dae_create(const ru_system *s, const ru_transient_opts *o, const double *x0,
                        ru_sample_fn fn, void *user, ru_dae **out, ru_error *err)
{
    double t0 = now_s();
    *out = NULL;
    dae_run *r = calloc(1, sizeof *r);
    if (!r)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "transient: out of memory");
    r->sys = s;
    r->opts = *o;
    r->o = &r->opts;
    r->fn = fn;
    r->user = user;
    r->n = ru_system_size(s);
    ru_linsol ls;
    ru_integrator integ;
    ru_transient_plan(s, o, &integ, &ls);
    r->klu = ls == RU_LINSOL_KLU;
    double fac = o->ida_tol_factor > 0 ? o->ida_tol_factor : 1.0;
    r->rtol = fmin(o->rtol * fac, 0.1);
    r->atol_rel = o->atol_rel * fac;
    ru_status st = setup_times(r, err);
    if (st == RU_OK && r->n > 0) {
        st = ru_dae_setup_solver(r, x0, err);
        if (st == RU_OK) { /* t = 0 is the consistent start */
            ru_dae_y_to_x(r, N_VGetArrayPointer(r->yy), r->xs);
            st = emit_state(r, 0.0, 0.0, r->xs, err);
        }
        if (st == RU_OK) {
            int f = IDASetStopTime(r->ida, r->nbp ? r->bp[0] : r->t_final);
            if (f)
                st = fail_numeric(r, f, NULL, err);
        }
    }
    r->busy_s = now_s() - t0;
    if (st != RU_OK) {
        ru_dae_destroy(r);
        return st;
    }
    *out = r;
    return RU_OK;
}

ru_status ru_dae_advance(ru_dae *r, double t_until_s, ru_error *err)
{
    if (r->failed != RU_OK)
        return ru_error_set(err, r->failed, NULL, 0, 0, "transient: the run already failed");
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
    ru_status st = r->n == 0 ? run_stateless(r, err) : advance_to(r, err);
    r->busy_s += now_s() - t0;
    if (st != RU_OK)
        r->failed = st;
    return st;
}

double ru_dae_time(const ru_dae *r)
{
    if (!r || r->k == 0)
        return 0.0;
    return fmin(r->t_final, (double)(r->k - 1) * r->o->sample_s);
}

int ru_dae_done(const ru_dae *r) { return r && r->done; }

void ru_dae_stats(const ru_dae *r, ru_solver_stats *stats)
{
    fill_stats(r, stats, r->failed != RU_OK ? 0.0 : r->done ? r->t_final : ru_dae_time(r));
    stats->wall_s = r->busy_s;
}
