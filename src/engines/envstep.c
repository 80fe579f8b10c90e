/* envstep.c: the envelope steps of the envelope engine (ringup/envfollow.h) and the
 * helpers the run shares (section projection, cycle output): the
 * envelope equation dX/dk, dt/dk from pairs of cycles, integrated in the cycle index
 * by CVODE BDF with a Jacobian of differences, output points where t(k) crosses
 * their times, and the hand-over to cycle-by-cycle integration before each stop.
 *
 * Invariants: the envelope CVODE object lives only inside one ru_envf_skip call;
 * every cycle it integrates goes through the run's one cycle integrator. */
#include "engines/envfollow_impl.h"

#include <cvode/cvode.h>
#include <nvector/nvector_serial.h>
#include <sundials/sundials_context.h>
#include <sunlinsol/sunlinsol_dense.h>
#include <sunmatrix/sunmatrix_dense.h>

#include <float.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* ---- shared with envfollow.c ---- */

/* x = x_op + P d, P the projection onto the section (along q). */
void ru_envf_on_section(const ru_envf *r, const double *d, double *x)
{
    double qd = 0;
    for (size_t i = 0; i < r->n; i++)
        qd += r->q[i] * d[i];
    for (size_t i = 0; i < r->n; i++)
        x[i] = r->x_op[i] + d[i] - r->q[i] * qd / r->qq;
}

double ru_envf_scaled_amp(const ru_envf *r, const double *d)
{
    double a = 0;
    for (size_t i = 0; i < r->n; i++)
        a = fmax(a, fabs(d[i]) / r->scale[i]);
    return a;
}

/* ---- cycle output ------------------------------------------------------------ */

ru_status ru_envf_on_sample(void *user, double t, const double *x, size_t n, int first)
{
    ru_envf *r = user;
    int flags = (first ? RU_ENVF_FIRST : 0) | (r->kind == RU_ENVF_POINT ? RU_ENVF_ALONE : 0);
    return r->sink.sample ? r->sink.sample(r->sink.user, t, x, n, flags) : RU_OK;
}

ru_status ru_envf_on_cycle(void *user, const ru_cyc_fig *fg)
{
    ru_envf *r = user;
    ru_envf_cycle cy = {
        .t_s = 0.5 * (fg->tmax_s + fg->tmin_s),
        .t_start_s = fg->t0_s,
        .period_s = fg->t1_s - fg->t0_s,
        .amplitude_v = 0.5 * (fg->vmax_v - fg->vmin_v),
        .dc_v = fg->mean_v,
        .kind = r->kind,
    };
    if (cy.period_s > 0.5 * r->period && cy.period_s < 2.0 * r->period)
        r->period = cy.period_s;
    return r->sink.cycle ? r->sink.cycle(r->sink.user, &cy) : RU_OK;
}

/* Two cycles from section point x at t: t1, x1 and t2, x2. */
static int cycle_pair(ru_envf *r, double t, const double *x, double *t1, double *x1,
                      double *t2, double *x2)
{
    ru_cyc_req rq = {.crossings = 1, .t_end_s = INFINITY, .wait_periods = ENVF_WAIT};
    ru_status st = ru_cyc_start(r->cyc, t, x, 1, &r->inner_err);
    if (st == RU_OK)
        st = ru_cyc_advance(r->cyc, &rq, t1, x1, &r->inner_err);
    if (st == RU_OK)
        st = ru_cyc_advance(r->cyc, &rq, t2, x2, &r->inner_err);
    return st == RU_OK ? 0 : (st == RU_ENUMERIC ? 1 : -1);
}

static int env_rhs(realtype k, N_Vector Yv, N_Vector Fv, void *user)
{
    (void)k;
    ru_envf *r = user;
    const double *y = N_VGetArrayPointer(Yv);
    double *f = N_VGetArrayPointer(Fv), t = y[r->n], t1, t2;
    r->st.env_evals++;
    ru_envf_on_section(r, y, r->xa);
    int rc = cycle_pair(r, t, r->xa, &t1, r->xb, &t2, r->xc);
    if (rc)
        return rc;
    for (size_t i = 0; i < r->n; i++) {
        r->xb[i] -= r->x_op[i];
        r->xc[i] -= r->x_op[i];
    }
    ru_envf_on_section(r, r->xb, r->xb); /* back to x_op + P(x - x_op) */
    ru_envf_on_section(r, r->xc, r->xc);
    for (size_t i = 0; i < r->n; i++)
        f[i] = (-3.0 * (r->xa[i] - r->x_op[i]) + 4.0 * (r->xb[i] - r->x_op[i]) -
                (r->xc[i] - r->x_op[i])) / 2.0;
    f[r->n] = (3.0 * (t1 - t) - (t2 - t1)) / 2.0;
    for (size_t i = 0; i <= r->n; i++)
        if (!isfinite(f[i]))
            return 1;
    return 0;
}

/* Jacobian by forward differences: one cycle pair per section coordinate; the
 * time column is zero (the system is autonomous). */
static int env_jac(realtype k, N_Vector Yv, N_Vector Fy, SUNMatrix J, void *user,
                   N_Vector t1, N_Vector t2, N_Vector t3)
{
    (void)t3;
    ru_envf *r = user;
    r->st.env_jacs++;
    size_t n = r->n;
    double *yp = N_VGetArrayPointer(t1), *fp = N_VGetArrayPointer(t2);
    const double *y = N_VGetArrayPointer(Yv), *f0 = N_VGetArrayPointer(Fy);
    memcpy(yp, y, (n + 1) * sizeof *yp);
    double a = ru_envf_scaled_amp(r, y);
    for (size_t j = 0; j < n; j++) {
        double dj = r->delta_rel * (fabs(y[j]) + a * r->scale[j]);
        if (!(dj > 0))
            dj = r->delta_rel * r->scale[j];
        yp[j] = y[j] + dj;
        int rc = env_rhs(k, t1, t2, r);
        yp[j] = y[j];
        if (rc)
            return rc;
        double *col = SM_COLUMN_D(J, (sunindextype)j);
        for (size_t i = 0; i <= n; i++)
            col[i] = (fp[i] - f0[i]) / dj;
    }
    double *col = SM_COLUMN_D(J, (sunindextype)n);
    for (size_t i = 0; i <= n; i++)
        col[i] = 0;
    return 0;
}

/* Weights of the envelope state: each section coordinate to rtol_env of the
 * oscillation's size, the time to rtol_env of itself. */
static int env_ewt(N_Vector Yv, N_Vector W, void *user)
{
    ru_envf *r = user;
    const double *y = N_VGetArrayPointer(Yv);
    double *w = N_VGetArrayPointer(W), e = r->o.rtol_env, a = ru_envf_scaled_amp(r, y);
    for (size_t i = 0; i < r->n; i++)
        w[i] = 1.0 / (e * (fabs(y[i]) + a * r->scale[i]) +
                      16.0 * DBL_EPSILON * (fabs(r->x_op[i]) + r->scale[i]));
    w[r->n] = 1.0 / (e * (fabs(y[r->n]) + r->period));
    return 0;
}

static void env_errh(int code, const char *module, const char *func, char *msg,
                     void *user)
{
    (void)module, (void)func;
    ru_envf *r = user;
    if (code < 0)
        snprintf(r->st.note, sizeof r->st.note, "%s", msg ? msg : "");
}

static ru_status env_setup(ru_envf *r, double t_h, const double *x_h, double k_max,
                           ru_error *err)
{
    sunindextype m = (sunindextype)(r->n + 1);
    if (SUNContext_Create(NULL, &r->ctx) != 0)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "envelope: no SUNDIALS context");
    r->Y = N_VNew_Serial(m, r->ctx);
    r->Yq = N_VNew_Serial(m, r->ctx);
    r->A = SUNDenseMatrix(m, m, r->ctx);
    r->cv = CVodeCreate(CV_BDF, r->ctx);
    if (!r->Y || !r->Yq || !r->A || !r->cv ||
        !(r->LS = SUNLinSol_Dense(r->Y, r->A, r->ctx)))
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "envelope: out of memory");
    double *y = N_VGetArrayPointer(r->Y);
    for (size_t i = 0; i < r->n; i++)
        y[i] = x_h[i] - r->x_op[i];
    y[r->n] = t_h;
    int f = CVodeSetErrHandlerFn(r->cv, env_errh, r);
    if (!f) f = CVodeInit(r->cv, env_rhs, 0.0, r->Y);
    if (!f) f = CVodeWFtolerances(r->cv, env_ewt);
    if (!f) f = CVodeSetUserData(r->cv, r);
    if (!f) f = CVodeSetLinearSolver(r->cv, r->LS, r->A);
    if (!f) f = CVodeSetJacFn(r->cv, env_jac);
    if (!f) f = CVodeSetStabLimDet(r->cv, SUNTRUE);
    if (!f) f = CVodeSetMaxNumSteps(r->cv, -1);
    if (!f) f = CVodeSetMaxHnilWarns(r->cv, -1);
    if (!f) f = CVodeSetInitStep(r->cv, 1.0);
    if (!f) f = CVodeSetMaxStep(r->cv, fmax(k_max, 1.0));
    if (f)
        return ru_error_set(err, RU_ENUMERIC, NULL, 0, 0, "envelope: setup failed: %s",
                            r->st.note);
    r->st.note[0] = 0;
    return RU_OK;
}

void ru_envf_env_free(ru_envf *r)
{
    if (r->cv) {
        long v = 0;
        if (CVodeGetNumSteps(r->cv, &v) == CV_SUCCESS)
            r->st.env_steps += v;
        if (CVodeGetNumErrTestFails(r->cv, &v) == CV_SUCCESS)
            r->st.env_err_fails += v;
        if (CVodeGetNumNonlinSolvConvFails(r->cv, &v) == CV_SUCCESS)
            r->st.env_newton_fails += v;
        CVodeFree(&r->cv);
    }
    if (r->LS)
        SUNLinSolFree(r->LS);
    if (r->A)
        SUNMatDestroy(r->A);
    if (r->Y)
        N_VDestroy(r->Y);
    if (r->Yq)
        N_VDestroy(r->Yq);
    if (r->ctx)
        SUNContext_Free(&r->ctx);
    r->cv = NULL;
    r->LS = NULL;
    r->A = NULL;
    r->Y = r->Yq = NULL;
    r->ctx = NULL;
}

/* The envelope state where t(k) = te, k within the last step [k1 - h, k1]
 * (t(k) increases: secant steps on the interpolant, kept inside the step). */
static double env_locate(ru_envf *r, double te, double k1, double h)
{
    double *yq = N_VGetArrayPointer(r->Yq), lo = k1 - h, hi = k1;
    CVodeGetDky(r->cv, lo, 0, r->Yq);
    double tlo = yq[r->n];
    CVodeGetDky(r->cv, hi, 0, r->Yq);
    double thi = yq[r->n], k = hi;
    for (int it = 0; it < 60 && thi > tlo; it++) {
        k = lo + (hi - lo) * (te - tlo) / (thi - tlo);
        k = fmin(fmax(k, lo), hi);
        CVodeGetDky(r->cv, k, 0, r->Yq);
        double tk = yq[r->n];
        if (fabs(tk - te) <= 1e-14 * fabs(te) + 1e-6 * r->period)
            break;
        if (tk < te) {
            lo = k;
            tlo = tk;
        } else {
            hi = k;
            thi = tk;
        }
    }
    CVodeGetDky(r->cv, k, 0, r->Yq);
    return k;
}

/* One cycle computed alone from the envelope point (te, Yq). */
static ru_status point_cycle(ru_envf *r, double te, ru_error *err)
{
    ru_envf_on_section(r, N_VGetArrayPointer(r->Yq), r->xa);
    ru_cyc_req rq = {.crossings = 1, .t_end_s = INFINITY, .wait_periods = ENVF_WAIT,
                     .measure = 1, .sample = ru_envf_on_sample, .cycle = ru_envf_on_cycle, .user = r};
    double t;
    r->kind = RU_ENVF_POINT;
    ru_status st = ru_cyc_start(r->cyc, te, r->xa, 1, err);
    return st == RU_OK ? ru_cyc_advance(r->cyc, &rq, &t, r->xb, err) : st;
}

ru_status ru_envf_skip(ru_envf *r, double t_h, double t_tail, double *t_end,
                       double *x_end, ru_error *err)
{
    const ru_envf_opts *o = &r->o;
    double dt_pt = o->point_dt_s > 0 ? o->point_dt_s : o->stop_s / 400.0;
    double t_pt = (floor(t_h / dt_pt) + 1.0) * dt_pt;
    ru_status st = env_setup(r, t_h, x_end, (t_tail - t_h) / r->period, err);
    if (st != RU_OK)
        return st;
    double *y = N_VGetArrayPointer(r->Y), k = 0, h = 0, base = r->st.cycles_spanned;
    *t_end = t_h;
    if (!isfinite(r->st.t_skip_from_s))
        r->st.t_skip_from_s = t_h;
    for (;;) {
        int f = CVode(r->cv, 1e30, r->Y, &k, CV_ONE_STEP);
        if (f < 0) {
            r->st.fell_back = 1;
            char msg[sizeof r->st.note];
            snprintf(msg, sizeof msg, "%s", r->st.note);
            snprintf(r->st.note, sizeof r->st.note,
                     "an envelope step failed at t = %.6g s (%.80s%s%.80s); the rest "
                     "was integrated cycle by cycle",
                     *t_end, msg, r->inner_err.msg[0] ? ": " : "", r->inner_err.msg);
            break;
        }
        CVodeGetLastStep(r->cv, &h);
        double tn = y[r->n];
        for (; t_pt <= tn && t_pt < t_tail - 2 * r->period; t_pt += dt_pt) {
            env_locate(r, t_pt, k, h);
            if ((st = point_cycle(r, t_pt, err)) != RU_OK)
                goto done;
        }
        if (tn >= t_tail) {
            double ke = env_locate(r, t_tail, k, h);
            ru_envf_on_section(r, N_VGetArrayPointer(r->Yq), x_end);
            *t_end = N_VGetArrayPointer(r->Yq)[r->n];
            r->st.cycles_spanned = base + ke;
            break;
        }
        ru_envf_on_section(r, y, x_end);
        *t_end = tn;
        r->st.cycles_spanned = base + k;
    }
done:
    r->st.t_skip_to_s = *t_end;
    ru_envf_env_free(r);
    return st;
}

