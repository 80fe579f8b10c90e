/* envfollow.c: the envelope engine (see ringup/envfollow.h): head, envelope steps
 * with output points, tail; the cycle integrations are in cycles.c.
 *
 * The envelope state is Y = (d, t): d = X - x_op for a section point X (n
 * entries, kept on the section by projection), t its time. The independent
 * variable is the cycle index k, from 0 at the head's last crossing.
 *
 * Invariants: one cycle integrator and one envelope CVODE object per run, no
 * global state; the envelope object exists only during the envelope phase; every
 * cycle the run integrates is counted in the stats. */
#define _POSIX_C_SOURCE 200809L

#include "ringup/envfollow.h"

#include "engines/cycles.h"
#include "engines/modes.h"

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
#include <time.h>

#define ENVF_WAIT 3.0         /* periods to wait for a crossing in a cycle from a point */
#define ENVF_MIN_SKIP 20.0    /* fewer cycles than this to skip: integrate them */
#define ENVF_SMOOTH 0.1       /* head ends when the cycle-to-cycle change varies less */

typedef struct envf_run {
    const ru_system *sys;
    const ru_envf_opts *o;
    const ru_envf_sink *sink;
    ru_envf_stats *st;
    size_t n;
    const double *x_op;
    double *q, *scale;        /* section normal, state scales */
    double *xa, *xb, *xc;     /* scratch states */
    double qq;                /* q . q */
    double period;            /* expected period (s) */
    ru_envf_kind kind;        /* kind of the cycles being integrated */
    ru_cyc *cyc;
    /* the envelope integrator */
    SUNContext ctx;
    void *cv;
    N_Vector Y, Yq;
    SUNMatrix A;
    SUNLinearSolver LS;
    double rtol_cycle;        /* tolerance of the cycle integrations */
    double delta_rel;         /* relative difference step of the Jacobian */
    ru_error inner_err;       /* last failure of a cycle pair */
} envf_run;

void ru_envf_opts_for(ru_accuracy acc, ru_envf_opts *o)
{
    memset(o, 0, sizeof *o);
    o->stop_s = 10e-3;
    o->sample_s = 10e-6;
    switch (acc) {
    case RU_ACCURACY_DRAFT:
        o->growth_budget = 1e-2;
        o->rtol_cycle_max = 1e-6;
        o->rtol_env = 1e-4;
        break;
    case RU_ACCURACY_PRECISE:
        o->growth_budget = 1e-4;
        o->rtol_cycle_max = 1e-10;
        o->rtol_env = 1e-7;
        break;
    case RU_ACCURACY_NORMAL:
    default:
        o->growth_budget = 1e-3;
        o->rtol_cycle_max = 1e-8;
        o->rtol_env = 1e-6;
        break;
    }
    o->tail_cycles = 80;
    o->head_max_cycles = 200;
}

#define ENVF_DAMP_PER_RTOL 200.0 /* damping per cycle over rtol, with a margin */
#define ENVF_RTOL_FLOOR 1e-13     /* below this the damping stops falling */

double ru_envf_rtol_cycle(const ru_envf_opts *o)
{
    double w = o->pole.im_rad_per_s, g = 0;
    if (w > 0 && isfinite(o->pole.re_per_s))
        g = 2 * 3.14159265358979323846 * fabs(o->pole.re_per_s) / w;
    double r = o->growth_budget * g / ENVF_DAMP_PER_RTOL;
    if (!(r > ENVF_RTOL_FLOOR))
        r = ENVF_RTOL_FLOOR;
    return fmin(r, o->rtol_cycle_max);
}

static double now_s(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

int ru_envf_applicable(const ru_system *s, const ru_envf_opts *o, char *why, size_t len)
{
    const char *r = NULL;
    if (ru_system_size(s) == 0)
        r = "the circuit has no states";
    else if (!isfinite(ru_system_autonomous_from(s)))
        r = "a source keeps changing (a sine, a repeating pulse) or the noise kick is on: "
            "cycles are not alike, so they cannot be skipped";
    else if (!o->x_op || !(o->pole.im_rad_per_s > 0))
        r = "there is no dominant complex pole pair to define the cycle";
    if (r && why && len)
        snprintf(why, len, "%s", r);
    return r == NULL;
}

/* ---- section -------------------------------------------------------------- */

/* q = -Im(u) of the dominant mode's left eigenvector, scaled to max |q_i s_i| = 1. */
static ru_status make_section(envf_run *r, ru_error *err)
{
    size_t n = r->n;
    double *v = malloc(4 * n * sizeof *v);
    if (!v)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "envelope: out of memory");
    ru_pole lam;
    ru_status st = ru_mode_near(r->sys, r->x_op, r->o->pole, &lam, v, v + n, v + 2 * n,
                                v + 3 * n);
    if (st == RU_OK) {
        double m = 0;
        for (size_t i = 0; i < n; i++) {
            r->q[i] = -v[3 * n + i];
            m = fmax(m, fabs(r->q[i] * r->scale[i]));
        }
        r->qq = 0;
        for (size_t i = 0; i < n && m > 0; i++) {
            r->q[i] /= m;
            r->qq += r->q[i] * r->q[i];
        }
        if (!(m > 0 && r->qq > 0))
            st = RU_ENUMERIC;
    }
    free(v);
    if (st != RU_OK)
        return ru_error_set(err, RU_ENUMERIC, NULL, 0, 0,
                            "envelope: the dominant mode's eigenvectors were not found");
    return RU_OK;
}

/* x = x_op + P d, P the projection onto the section (along q). */
static void on_section(const envf_run *r, const double *d, double *x)
{
    double qd = 0;
    for (size_t i = 0; i < r->n; i++)
        qd += r->q[i] * d[i];
    for (size_t i = 0; i < r->n; i++)
        x[i] = r->x_op[i] + d[i] - r->q[i] * qd / r->qq;
}

static double scaled_amp(const envf_run *r, const double *d)
{
    double a = 0;
    for (size_t i = 0; i < r->n; i++)
        a = fmax(a, fabs(d[i]) / r->scale[i]);
    return a;
}

/* ---- cycle output ------------------------------------------------------------ */

static ru_status on_sample(void *user, double t, const double *x, size_t n, int first)
{
    envf_run *r = user;
    int flags = (first ? RU_ENVF_FIRST : 0) | (r->kind == RU_ENVF_POINT ? RU_ENVF_ALONE : 0);
    return r->sink->sample ? r->sink->sample(r->sink->user, t, x, n, flags) : RU_OK;
}

static ru_status on_cycle(void *user, const ru_cyc_fig *fg)
{
    envf_run *r = user;
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
    return r->sink->cycle ? r->sink->cycle(r->sink->user, &cy) : RU_OK;
}

/* Integrates in full from the solver's position to the stop time. */
static ru_status run_full_to_end(envf_run *r, ru_error *err)
{
    ru_cyc_req rq = {.t_end_s = r->o->stop_s, .measure = 1, .sample = on_sample,
                     .cycle = on_cycle, .user = r};
    double t;
    r->kind = RU_ENVF_FULL;
    return ru_cyc_advance(r->cyc, &rq, &t, r->xa, err);
}

/* ---- the head ---------------------------------------------------------------- */

/* max_i |a_i - b_i| / s_i */
static double sdist(const envf_run *r, const double *a, const double *b)
{
    double m = 0;
    for (size_t i = 0; i < r->n; i++)
        m = fmax(m, fabs(a[i] - b[i]) / r->scale[i]);
    return m;
}

/* Whether the change from cycle to cycle (X_{k-2}, X_{k-1}, X_k in xa, xb, xc)
 * varies smoothly: the second difference small against the first. */
static int smooth(const envf_run *r)
{
    double d1 = sdist(r, r->xb, r->xa), d2 = sdist(r, r->xc, r->xb), dd = 0;
    for (size_t i = 0; i < r->n; i++)
        dd = fmax(dd, fabs((r->xc[i] - r->xb[i]) - (r->xb[i] - r->xa[i])) / r->scale[i]);
    double amp = sdist(r, r->xc, r->x_op);
    return dd <= ENVF_SMOOTH * fmax(d1, d2) + r->o->rtol_env * amp;
}

/* Integrates every cycle from t = 0 until skipping can begin. *t_h gets the time
 * of the last crossing (state in xc); *done = 1 when the run reached its end. */
static ru_status run_head(envf_run *r, const double *x0, double *t_h, int *done,
                          ru_error *err)
{
    const ru_envf_opts *o = r->o;
    double t_auto = ru_system_autonomous_from(r->sys), t = 0, tlast = NAN;
    ru_status st = ru_cyc_start(r->cyc, 0.0, x0, 0, err);
    ru_cyc_req rq = {.crossings = 1, .t_end_s = o->stop_s, .measure = 1,
                     .sample = on_sample, .cycle = on_cycle, .user = r};
    int after = 0;
    r->kind = RU_ENVF_FULL;
    *done = 0;
    while (st == RU_OK) {
        if ((st = ru_cyc_advance(r->cyc, &rq, &t, r->xa, err)) != RU_OK)
            break;
        if (t >= o->stop_s * (1 - 1e-12)) {
            *done = 1;
            break;
        }
        double *old = r->xa; /* rotate: xa <- xb <- xc <- new */
        r->xa = r->xb;
        r->xb = r->xc;
        r->xc = old;
        if (isfinite(tlast) && t - tlast > 0.5 * r->period && t - tlast < 2 * r->period)
            r->period = t - tlast;
        tlast = t;
        ru_cyc_set_period(r->cyc, r->period);
        if (t > t_auto)
            after++;
        if (t + (o->tail_cycles + ENVF_MIN_SKIP) * r->period >= o->stop_s) {
            snprintf(r->st->note, sizeof r->st->note,
                     "the run is too short to skip cycles: every cycle was integrated");
            st = run_full_to_end(r, err);
            *done = 1;
            break;
        }
        if ((after >= 3 && smooth(r)) || after > o->head_max_cycles) {
            *t_h = t;
            break;
        }
    }
    return st;
}

/* ---- the envelope equation ----------------------------------------------------- */

/* Two cycles from section point x at t: t1, x1 and t2, x2. */
static int cycle_pair(envf_run *r, double t, const double *x, double *t1, double *x1,
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
    envf_run *r = user;
    const double *y = N_VGetArrayPointer(Yv);
    double *f = N_VGetArrayPointer(Fv), t = y[r->n], t1, t2;
    r->st->env_evals++;
    on_section(r, y, r->xa);
    int rc = cycle_pair(r, t, r->xa, &t1, r->xb, &t2, r->xc);
    if (rc)
        return rc;
    for (size_t i = 0; i < r->n; i++) {
        r->xb[i] -= r->x_op[i];
        r->xc[i] -= r->x_op[i];
    }
    on_section(r, r->xb, r->xb); /* back to x_op + P(x - x_op) */
    on_section(r, r->xc, r->xc);
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
    envf_run *r = user;
    r->st->env_jacs++;
    size_t n = r->n;
    double *yp = N_VGetArrayPointer(t1), *fp = N_VGetArrayPointer(t2);
    const double *y = N_VGetArrayPointer(Yv), *f0 = N_VGetArrayPointer(Fy);
    memcpy(yp, y, (n + 1) * sizeof *yp);
    double a = scaled_amp(r, y);
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
    envf_run *r = user;
    const double *y = N_VGetArrayPointer(Yv);
    double *w = N_VGetArrayPointer(W), e = r->o->rtol_env, a = scaled_amp(r, y);
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
    envf_run *r = user;
    if (code < 0)
        snprintf(r->st->note, sizeof r->st->note, "%s", msg ? msg : "");
}

static ru_status env_setup(envf_run *r, double t_h, const double *x_h, double k_max,
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
                            r->st->note);
    r->st->note[0] = 0;
    return RU_OK;
}

static void env_free(envf_run *r)
{
    if (r->cv) {
        long v = 0;
        if (CVodeGetNumSteps(r->cv, &v) == CV_SUCCESS)
            r->st->env_steps += v;
        if (CVodeGetNumErrTestFails(r->cv, &v) == CV_SUCCESS)
            r->st->env_err_fails += v;
        if (CVodeGetNumNonlinSolvConvFails(r->cv, &v) == CV_SUCCESS)
            r->st->env_newton_fails += v;
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
static double env_locate(envf_run *r, double te, double k1, double h)
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
static ru_status point_cycle(envf_run *r, double te, ru_error *err)
{
    on_section(r, N_VGetArrayPointer(r->Yq), r->xa);
    ru_cyc_req rq = {.crossings = 1, .t_end_s = INFINITY, .wait_periods = ENVF_WAIT,
                     .measure = 1, .sample = on_sample, .cycle = on_cycle, .user = r};
    double t;
    r->kind = RU_ENVF_POINT;
    ru_status st = ru_cyc_start(r->cyc, te, r->xa, 1, err);
    return st == RU_OK ? ru_cyc_advance(r->cyc, &rq, &t, r->xb, err) : st;
}

/* Envelope steps from the head's last crossing (t_h, state in x_end) until the
 * tail's start; *t_end and x_end get where the cycle-by-cycle integration takes
 * over (the tail, or the last accepted envelope state after a failure). */
static ru_status run_envelope(envf_run *r, double t_h, double t_tail, double *t_end,
                              double *x_end, ru_error *err)
{
    const ru_envf_opts *o = r->o;
    double dt_pt = o->point_dt_s > 0 ? o->point_dt_s : o->stop_s / 400.0;
    double t_pt = (floor(t_h / dt_pt) + 1.0) * dt_pt;
    ru_status st = env_setup(r, t_h, x_end, (t_tail - t_h) / r->period, err);
    if (st != RU_OK)
        return st;
    double *y = N_VGetArrayPointer(r->Y), k = 0, h = 0;
    *t_end = t_h;
    r->st->t_skip_from_s = t_h;
    for (;;) {
        int f = CVode(r->cv, 1e30, r->Y, &k, CV_ONE_STEP);
        if (f < 0) {
            r->st->fell_back = 1;
            char msg[sizeof r->st->note];
            snprintf(msg, sizeof msg, "%s", r->st->note);
            snprintf(r->st->note, sizeof r->st->note,
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
            on_section(r, N_VGetArrayPointer(r->Yq), x_end);
            *t_end = N_VGetArrayPointer(r->Yq)[r->n];
            r->st->cycles_spanned = ke;
            break;
        }
        on_section(r, y, x_end);
        *t_end = tn;
        r->st->cycles_spanned = k;
    }
done:
    r->st->t_skip_to_s = *t_end;
    env_free(r);
    return st;
}

/* ---- the run ----------------------------------------------------------------- */

static ru_status check_opts(const ru_system *s, const ru_envf_opts *o, const double *x0,
                            ru_error *err)
{
    char why[200];
    if (!s || !o || !x0)
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0, "envelope: missing argument");
    if (!ru_envf_applicable(s, o, why, sizeof why))
        return ru_error_set(err, RU_EINPUT, NULL, 0, 0,
                            "the envelope engine cannot run this circuit: %s", why);
    if (!(isfinite(o->stop_s) && o->stop_s > 0 && isfinite(o->sample_s) &&
          o->sample_s > 0 && o->rtol_cycle_max > 0 && o->rtol_cycle_max < 1 &&
          o->growth_budget >= 0 && o->rtol_env > 0 &&
          o->rtol_env < 1 && o->tail_cycles >= 4 && o->head_max_cycles >= 3 &&
          o->point_dt_s >= 0))
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0, "envelope: bad settings");
    for (size_t i = 0; i < ru_system_size(s); i++)
        if (!isfinite(x0[i]) || !isfinite(o->x_op[i]))
            return ru_error_set(err, RU_ERANGE, NULL, 0, 0,
                                "envelope: initial state or operating point not finite");
    return RU_OK;
}

static void fill_stats(envf_run *r, double wall0)
{
    ru_envf_stats *st = r->st;
    if (r->cyc) {
        ru_cyc_counts k;
        ru_cyc_get_counts(r->cyc, &k);
        st->solver.steps = k.steps;
        st->solver.rhs_evals = k.rhs_evals;
        st->solver.jac_evals = k.jac_evals;
        st->solver.err_fails = k.err_fails;
        st->solver.newton_fails = k.newton_fails;
        st->solver.samples = k.samples;
        st->cycles_integrated = k.crossings;
    }
    st->solver.rtol = r->rtol_cycle;
    st->solver.t_reached_s = r->o->stop_s;
    st->solver.wall_s = now_s() - wall0;
}

static ru_status run_alloc(envf_run *r, ru_error *err)
{
    size_t n = r->n;
    r->q = malloc(n * sizeof *r->q);
    r->scale = malloc(n * sizeof *r->scale);
    r->xa = malloc(n * sizeof *r->xa);
    r->xb = malloc(n * sizeof *r->xb);
    r->xc = malloc(n * sizeof *r->xc);
    if (!r->q || !r->scale || !r->xa || !r->xb || !r->xc)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "envelope: out of memory");
    ru_system_state_scale(r->sys, r->scale);
    for (size_t i = 0; i < n; i++)
        if (!(isfinite(r->scale[i]) && r->scale[i] > 0))
            r->scale[i] = 1.0;
    return RU_OK;
}

ru_status ru_envf_run(const ru_system *s, const ru_envf_opts *o, const double *x0,
                      const ru_envf_sink *sink, ru_envf_stats *stats, ru_error *err)
{
    double wall0 = now_s();
    ru_envf_stats local;
    ru_envf_sink nosink = {0};
    envf_run r = {.sys = s, .o = o, .sink = sink ? sink : &nosink,
                  .st = stats ? stats : &local};
    memset(r.st, 0, sizeof *r.st);
    r.st->t_skip_from_s = r.st->t_skip_to_s = NAN;
    ru_status st = check_opts(s, o, x0, err);
    if (st != RU_OK)
        return st;
    r.n = ru_system_size(s);
    r.x_op = o->x_op;
    r.period = 2 * 3.14159265358979323846 / o->pole.im_rad_per_s;
    r.rtol_cycle = ru_envf_rtol_cycle(o);
    r.delta_rel = sqrt(r.rtol_cycle);
    double *x_end = NULL, t_h = 0, t_end = 0;
    int done = 0;
    if ((st = run_alloc(&r, err)) != RU_OK || (st = make_section(&r, err)) != RU_OK)
        goto out;
    ru_cyc_cfg cc = {.sys = s, .rtol = r.rtol_cycle, .x_op = o->x_op, .q = r.q,
                     .period_s = r.period, .sample_s = o->sample_s,
                     .probe_pos = o->probe_pos, .probe_neg = o->probe_neg};
    if ((st = ru_cyc_create(&cc, &r.cyc, err)) != RU_OK)
        goto out;
    if ((st = run_head(&r, x0, &t_h, &done, err)) != RU_OK || done)
        goto out;
    double t_tail = o->stop_s - o->tail_cycles * r.period;
    if (!(x_end = malloc(r.n * sizeof *x_end))) {
        st = ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "envelope: out of memory");
        goto out;
    }
    memcpy(x_end, r.xc, r.n * sizeof *x_end);
    t_end = t_h;
    if ((st = run_envelope(&r, t_h, t_tail, &t_end, x_end, err)) != RU_OK)
        goto out;
    if ((st = ru_cyc_start(r.cyc, t_end, x_end, 1, err)) == RU_OK)
        st = run_full_to_end(&r, err);
out:
    fill_stats(&r, wall0);
    env_free(&r);
    ru_cyc_destroy(r.cyc);
    free(x_end);
    free(r.q);
    free(r.scale);
    free(r.xa);
    free(r.xb);
    free(r.xc);
    return st;
}
