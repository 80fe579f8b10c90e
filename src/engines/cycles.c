/* cycles.c: the cycle integrator of the envelope engine (see cycles.h).
 *
 * Invariants:
 * - Samples and fine measurement points are delivered for grid times in
 *   (t_done, t] from CVODE's dense output of the step that covers them; after a
 *   root return the rest of that step, (t_root, t_cur], is delivered before the
 *   next step is taken (t_pend), unless the caller restarts elsewhere first.
 * - CVODE is re-initialised at ru_cyc_start and at breakpoints only; counters of
 *   finished segments are summed (CVodeReInit resets CVODE's own).
 * - Nothing is allocated after create except the fine-point buffer of a cycle,
 *   which grows by doubling up to a fixed cap. */
#define _POSIX_C_SOURCE 200809L

#include "engines/cycles.h"

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

#define CYC_FINE 128          /* fine measurement points per expected period */
#define CYC_FINE_CAP 65536    /* most fine points held for one cycle */
#define CYC_MIN_GAP 0.5       /* crossings closer than this many periods: not counted */
#define CYC_BP_MAX 256        /* breakpoints honoured */
#define CYC_MAX_ERR_FAILS 20  /* as the direct engine */
#define CYC_STALL 1000        /* steps without progress in t before giving up */

struct ru_cyc {
    ru_cyc_cfg cfg;
    size_t n;
    double *x_op, *q, *scale, *floor_v; /* n each (owned copies) */
    double amp;               /* oscillation size in scaled units (weights) */
    double amp_run;           /* largest scaled deviation since the last crossing */
    SUNContext ctx;
    void *cv;
    N_Vector y, yq;
    SUNMatrix A;
    SUNLinearSolver LS;
    double *jrow;             /* n*n Jacobian scratch */
    double bp[CYC_BP_MAX];    /* breakpoints in (0, horizon] */
    size_t nbp, ibp;          /* count, next one */
    double t_done;            /* delivered up to here */
    double t_pend;            /* the solver's tcur after a root return */
    double t_start;           /* time of the last start */
    double t_last_cross;      /* last counted crossing (-INFINITY: none) */
    int fresh;                /* 1: started, nothing integrated yet */
    int open;                 /* 1: the next sample delivered opens a stretch */
    long k_next, j_next;      /* next sample index, next fine-point index */
    double fine_dt;
    /* the cycle being measured */
    int in_cycle;             /* 1: cyc_t0/cyc_v0 hold the opening crossing */
    double cyc_t0, cyc_v0;
    double *ft, *fv;          /* fine points (t, v) of the current cycle */
    size_t nf, capf;
    const ru_cyc_req *rq;     /* during advance */
    ru_cyc_counts cnt;        /* counters of finished segments, callbacks' counts */
    ru_status sys_status;
    char cvmsg[RU_ERROR_TEXT];
};

static int cyc_rhs(realtype t, N_Vector y, N_Vector ydot, void *user)
{
    ru_cyc *c = user;
    c->cnt.rhs_evals++;
    double *f = N_VGetArrayPointer(ydot);
    ru_status st = ru_system_rhs(c->cfg.sys, t, N_VGetArrayPointer(y), f);
    if (st != RU_OK) {
        if (c->sys_status == RU_OK)
            c->sys_status = st;
        return st == RU_ENUMERIC ? 1 : -1;
    }
    for (size_t i = 0; i < c->n; i++)
        if (!isfinite(f[i]))
            return 1;
    return 0;
}

static int cyc_jac(realtype t, N_Vector y, N_Vector fy, SUNMatrix J, void *user,
                   N_Vector t1, N_Vector t2, N_Vector t3)
{
    (void)fy, (void)t1, (void)t2, (void)t3;
    ru_cyc *c = user;
    c->cnt.jac_evals++;
    if (ru_system_jacobian(c->cfg.sys, t, N_VGetArrayPointer(y), c->jrow) != RU_OK)
        return 1;
    for (size_t j = 0; j < c->n; j++) {
        double *col = SM_COLUMN_D(J, (sunindextype)j);
        for (size_t i = 0; i < c->n; i++) {
            col[i] = c->jrow[i * c->n + j];
            if (!isfinite(col[i]))
                return 1;
        }
    }
    return 0;
}

static int cyc_root(realtype t, N_Vector y, realtype *g, void *user)
{
    (void)t;
    g[0] = ru_cyc_section(user, N_VGetArrayPointer(y));
    return 0;
}

/* Error weights relative to the deviation from the operating point (cycles.h). */
static int cyc_ewt(N_Vector y, N_Vector ewt, void *user)
{
    ru_cyc *c = user;
    const double *x = N_VGetArrayPointer(y);
    double *w = N_VGetArrayPointer(ewt), r = c->cfg.rtol;
    for (size_t i = 0; i < c->n; i++)
        w[i] = 1.0 / (r * fabs(x[i] - c->x_op[i]) + r * c->amp * c->scale[i] +
                      c->floor_v[i]);
    return 0;
}

static void cyc_errh(int code, const char *module, const char *func, char *msg,
                     void *user)
{
    (void)module, (void)func;
    ru_cyc *c = user;
    if (code < 0)
        snprintf(c->cvmsg, sizeof c->cvmsg, "%s", msg ? msg : "");
}

double ru_cyc_section(const ru_cyc *c, const double *x)
{
    double g = 0;
    for (size_t i = 0; i < c->n; i++)
        g += c->q[i] * (x[i] - c->x_op[i]);
    return g;
}

void ru_cyc_set_period(ru_cyc *c, double period_s)
{
    if (isfinite(period_s) && period_s > 0) {
        c->cfg.period_s = period_s;
        c->fine_dt = period_s / CYC_FINE;
    }
}

static double scaled_dev(const ru_cyc *c, const double *x)
{
    double a = 0;
    for (size_t i = 0; i < c->n; i++)
        a = fmax(a, fabs(x[i] - c->x_op[i]) / c->scale[i]);
    return a;
}

static double probe_v(const ru_cyc *c, double t, const double *x)
{
    return ru_system_node_voltage(c->cfg.sys, c->cfg.probe_pos, t, x) -
           ru_system_node_voltage(c->cfg.sys, c->cfg.probe_neg, t, x);
}

static ru_status setup(ru_cyc *c, ru_error *err)
{
    sunindextype n = (sunindextype)c->n;
    if (SUNContext_Create(NULL, &c->ctx) != 0)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "envelope: no SUNDIALS context");
    c->y = N_VNew_Serial(n, c->ctx);
    c->yq = N_VNew_Serial(n, c->ctx);
    c->A = SUNDenseMatrix(n, n, c->ctx);
    c->cv = CVodeCreate(CV_BDF, c->ctx);
    if (!c->y || !c->yq || !c->A || !c->cv)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "envelope: out of memory");
    c->LS = SUNLinSol_Dense(c->y, c->A, c->ctx);
    if (!c->LS)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "envelope: out of memory");
    memcpy(N_VGetArrayPointer(c->y), c->x_op, c->n * sizeof(double));
    int f = CVodeSetErrHandlerFn(c->cv, cyc_errh, c);
    if (!f) f = CVodeInit(c->cv, cyc_rhs, 0.0, c->y);
    if (!f) f = CVodeWFtolerances(c->cv, cyc_ewt);
    if (!f) f = CVodeSetUserData(c->cv, c);
    if (!f) f = CVodeSetLinearSolver(c->cv, c->LS, c->A);
    if (!f) f = CVodeSetJacFn(c->cv, cyc_jac);
    if (!f) f = CVodeSetStabLimDet(c->cv, SUNTRUE);
    if (!f) f = CVodeSetMaxErrTestFails(c->cv, CYC_MAX_ERR_FAILS);
    if (!f) f = CVodeSetMaxNumSteps(c->cv, -1);
    if (!f) f = CVodeSetMaxHnilWarns(c->cv, -1);
    if (!f) f = CVodeRootInit(c->cv, 1, cyc_root);
    int dir = 1;
    if (!f) f = CVodeSetRootDirection(c->cv, &dir);
    if (!f) f = CVodeSetNoInactiveRootWarn(c->cv);
    if (f)
        return ru_error_set(err, RU_ENUMERIC, NULL, 0, 0,
                            "envelope: solver setup failed: %s", c->cvmsg);
    return RU_OK;
}

ru_status ru_cyc_create(const ru_cyc_cfg *cfg, ru_cyc **out, ru_error *err)
{
    *out = NULL;
    if (!cfg || !cfg->sys || !cfg->x_op || !cfg->q || !(cfg->rtol > 0 && cfg->rtol < 1) ||
        !(cfg->period_s > 0) || !(cfg->sample_s > 0) || ru_system_size(cfg->sys) == 0)
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0, "envelope: bad cycle settings");
    ru_cyc *c = calloc(1, sizeof *c);
    if (!c)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "envelope: out of memory");
    c->cfg = *cfg;
    c->n = ru_system_size(cfg->sys);
    c->x_op = malloc(c->n * sizeof(double));
    c->q = malloc(c->n * sizeof(double));
    c->scale = malloc(c->n * sizeof(double));
    c->floor_v = malloc(c->n * sizeof(double));
    c->jrow = malloc(c->n * c->n * sizeof(double));
    c->capf = 4 * CYC_FINE;
    c->ft = malloc(c->capf * sizeof(double));
    c->fv = malloc(c->capf * sizeof(double));
    ru_status st = RU_OK;
    if (!c->x_op || !c->q || !c->scale || !c->floor_v || !c->jrow || !c->ft || !c->fv) {
        st = ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "envelope: out of memory");
        goto fail;
    }
    memcpy(c->x_op, cfg->x_op, c->n * sizeof(double));
    memcpy(c->q, cfg->q, c->n * sizeof(double));
    c->cfg.x_op = c->x_op;
    c->cfg.q = c->q;
    ru_system_state_scale(cfg->sys, c->scale);
    for (size_t i = 0; i < c->n; i++) {
        if (!(isfinite(c->scale[i]) && c->scale[i] > 0))
            c->scale[i] = 1.0;
        c->floor_v[i] = 16.0 * DBL_EPSILON * (fabs(c->x_op[i]) + c->scale[i]);
    }
    double horizon = ru_system_autonomous_from(cfg->sys);
    c->nbp = isfinite(horizon) ? ru_system_breakpoints(cfg->sys, horizon, c->bp, CYC_BP_MAX)
                               : 0;
    if (c->nbp > CYC_BP_MAX)
        c->nbp = CYC_BP_MAX;
    ru_cyc_set_period(c, cfg->period_s);
    if ((st = setup(c, err)) != RU_OK)
        goto fail;
    *out = c;
    return RU_OK;
fail:
    ru_cyc_destroy(c);
    return st;
}

void ru_cyc_destroy(ru_cyc *c)
{
    if (!c)
        return;
    if (c->cv)
        CVodeFree(&c->cv);
    if (c->LS)
        SUNLinSolFree(c->LS);
    if (c->A)
        SUNMatDestroy(c->A);
    if (c->y)
        N_VDestroy(c->y);
    if (c->yq)
        N_VDestroy(c->yq);
    if (c->ctx)
        SUNContext_Free(&c->ctx);
    free(c->x_op);
    free(c->q);
    free(c->scale);
    free(c->floor_v);
    free(c->jrow);
    free(c->ft);
    free(c->fv);
    free(c);
}

/* Adds CVODE's counters of the segment that ends (CVodeReInit resets them). */
static void close_segment(ru_cyc *c)
{
    long v = 0;
    if (CVodeGetNumSteps(c->cv, &v) == CV_SUCCESS)
        c->cnt.steps += v;
    if (CVodeGetNumErrTestFails(c->cv, &v) == CV_SUCCESS)
        c->cnt.err_fails += v;
    if (CVodeGetNumNonlinSolvConvFails(c->cv, &v) == CV_SUCCESS)
        c->cnt.newton_fails += v;
}

void ru_cyc_get_counts(const ru_cyc *c, ru_cyc_counts *k)
{
    *k = c->cnt;
    long v = 0;
    if (CVodeGetNumSteps(c->cv, &v) == CV_SUCCESS)
        k->steps += v;
    if (CVodeGetNumErrTestFails(c->cv, &v) == CV_SUCCESS)
        k->err_fails += v;
    if (CVodeGetNumNonlinSolvConvFails(c->cv, &v) == CV_SUCCESS)
        k->newton_fails += v;
}

static ru_status fail_numeric(ru_cyc *c, int flag, const char *why, ru_error *err)
{
    double t = 0;
    CVodeGetCurrentTime(c->cv, &t);
    if (why)
        return ru_error_set(err, RU_ENUMERIC, NULL, 0, 0,
                            "envelope: cycle integration failed at t = %.6g s: %s", t, why);
    char *name = CVodeGetReturnFlagName(flag);
    ru_error_set(err, RU_ENUMERIC, NULL, 0, 0,
                 "envelope: cycle integration failed at t = %.6g s: %s", t,
                 c->cvmsg[0] ? c->cvmsg : (name ? name : "CVODE failure"));
    free(name);
    return RU_ENUMERIC;
}

/* The stop time: the next breakpoint or the request's end, whichever comes first. */
static int set_stop(ru_cyc *c, double t_end)
{
    double t = c->ibp < c->nbp ? c->bp[c->ibp] : INFINITY;
    t = fmin(t, t_end);
    return isfinite(t) ? CVodeSetStopTime(c->cv, t) : CV_SUCCESS;
}

ru_status ru_cyc_start(ru_cyc *c, double t0_s, const double *x0, int on_section,
                       ru_error *err)
{
    close_segment(c);
    memcpy(N_VGetArrayPointer(c->y), x0, c->n * sizeof(double));
    c->amp = scaled_dev(c, x0);
    c->amp_run = c->amp;
    int f = CVodeReInit(c->cv, t0_s, c->y);
    if (f)
        return fail_numeric(c, f, NULL, err);
    c->cnt.restarts++;
    c->ibp = 0;
    while (c->ibp < c->nbp && c->bp[c->ibp] <= t0_s * (1 + 1e-12))
        c->ibp++;
    double ss = c->cfg.sample_s;
    c->k_next = (long)ceil(t0_s / ss - 1e-9);
    c->j_next = (long)floor(t0_s / c->fine_dt) + 1;
    c->t_start = c->t_done = c->t_pend = t0_s;
    c->t_last_cross = on_section ? t0_s : -INFINITY;
    c->fresh = 1;
    c->open = 1;
    c->in_cycle = on_section;
    c->cyc_t0 = t0_s;
    c->cyc_v0 = probe_v(c, t0_s, x0);
    c->nf = 0;
    return RU_OK;
}

static ru_status add_fine(ru_cyc *c, double t, double v)
{
    if (c->nf == c->capf) {
        if (c->capf >= CYC_FINE_CAP)
            return RU_OK; /* a cycle far longer than expected: keep what fits */
        size_t cap = 2 * c->capf;
        double *a = realloc(c->ft, cap * sizeof *a);
        if (!a)
            return RU_ENOMEM;
        c->ft = a;
        double *b = realloc(c->fv, cap * sizeof *b);
        if (!b)
            return RU_ENOMEM;
        c->fv = b;
        c->capf = cap;
    }
    c->ft[c->nf] = t;
    c->fv[c->nf] = v;
    c->nf++;
    return RU_OK;
}

/* Samples and fine points with grid times in (t_done, tb], from the dense output
 * of the current step (times clamped into it against round-off). */
static ru_status deliver(ru_cyc *c, double tb, ru_error *err)
{
    const ru_cyc_req *rq = c->rq;
    double tcur = 0, h = 0;
    CVodeGetCurrentTime(c->cv, &tcur);
    CVodeGetLastStep(c->cv, &h);
    double lo = tcur - h, ss = c->cfg.sample_s, eps = 1e-9 * ss;
    double *yq = N_VGetArrayPointer(c->yq);
    if (rq->sample) {
        for (double t; (t = (double)c->k_next * ss) <= tb + eps; c->k_next++) {
            if (CVodeGetDky(c->cv, fmin(fmax(t, lo), tcur), 0, c->yq) < 0)
                return fail_numeric(c, 0, "dense output failed", err);
            ru_status st = rq->sample(rq->user, t, yq, c->n, c->open);
            c->open = 0;
            if (st != RU_OK)
                return ru_error_set(err, st, NULL, 0, 0,
                                    "output stopped the run at t = %.6g s", t);
            c->cnt.samples++;
        }
    }
    if (rq->measure && c->in_cycle) {
        for (double t; (t = (double)c->j_next * c->fine_dt) <= tb; c->j_next++) {
            if (CVodeGetDky(c->cv, fmin(fmax(t, lo), tcur), 0, c->yq) < 0)
                return fail_numeric(c, 0, "dense output failed", err);
            if (add_fine(c, t, probe_v(c, t, yq)) != RU_OK)
                return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "envelope: out of memory");
        }
    } else {
        c->j_next = (long)floor(tb / c->fine_dt) + 1;
    }
    if (tb > c->t_done)
        c->t_done = tb;
    return RU_OK;
}

/* The samples at t0 itself right after a start (the state given). */
static ru_status deliver_fresh(ru_cyc *c, ru_error *err)
{
    const ru_cyc_req *rq = c->rq;
    double ss = c->cfg.sample_s, t0 = c->t_start;
    const double *x = N_VGetArrayPointer(c->y);
    for (double t; rq->sample && (t = (double)c->k_next * ss) <= t0 + 1e-9 * ss;
         c->k_next++) {
        ru_status st = rq->sample(rq->user, t0, x, c->n, c->open);
        if (st != RU_OK)
            return ru_error_set(err, st, NULL, 0, 0, "output stopped the run at t = %.6g s",
                                t0);
        c->open = 0;
        c->cnt.samples++;
    }
    c->fresh = 0;
    return RU_OK;
}

/* Vertex of the parabola through three points (t, v) (Newton form
 * v = v0 + d1 (t - t0) + a (t - t0)(t - t1)); the middle point when the vertex is
 * not between the outer two. */
static void vertex(const double *t, const double *v, double *tv, double *vv)
{
    double d1 = (v[1] - v[0]) / (t[1] - t[0]), d2 = (v[2] - v[1]) / (t[2] - t[1]);
    double a = (d2 - d1) / (t[2] - t[0]);
    *tv = t[1];
    *vv = v[1];
    if (a == 0 || !isfinite(a))
        return;
    double tx = 0.5 * (t[0] + t[1]) - d1 / (2 * a);
    if (!(tx >= t[0] && tx <= t[2]))
        return;
    *tv = tx;
    *vv = v[0] + d1 * (tx - t[0]) + a * (tx - t[0]) * (tx - t[1]);
}

/* Closes the cycle [cyc_t0, t1] (probe v1 at t1) and reports it. */
static ru_status close_cycle(ru_cyc *c, double t1, double v1, ru_error *err)
{
    const ru_cyc_req *rq = c->rq;
    if (add_fine(c, t1, v1) != RU_OK)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "envelope: out of memory");
    size_t m = c->nf + 1; /* point 0 is the opening crossing */
    double *t = c->ft, *v = c->fv;
    size_t imax = 0, imin = 0;
    double sum = 0;
    double tp = c->cyc_t0, vp = c->cyc_v0;
    double vmax = vp, vmin = vp;
    for (size_t i = 0; i < c->nf; i++) {
        sum += 0.5 * (v[i] + vp) * (t[i] - tp);
        tp = t[i];
        vp = v[i];
        if (v[i] > vmax) { vmax = v[i]; imax = i + 1; }
        if (v[i] < vmin) { vmin = v[i]; imin = i + 1; }
    }
    ru_cyc_fig fg = {.t0_s = c->cyc_t0, .t1_s = t1, .vmax_v = vmax, .vmin_v = vmin};
    fg.tmax_s = imax ? t[imax - 1] : c->cyc_t0;
    fg.tmin_s = imin ? t[imin - 1] : c->cyc_t0;
    fg.mean_v = t1 > c->cyc_t0 ? sum / (t1 - c->cyc_t0) : v1;
    double pt[3], pv[3];
    for (int pass = 0; pass < 2; pass++) {
        size_t k = pass ? imin : imax;
        if (k == 0 || k + 1 >= m)
            continue;
        for (int j = 0; j < 3; j++) {
            size_t idx = k - 1 + (size_t)j;
            pt[j] = idx ? t[idx - 1] : c->cyc_t0;
            pv[j] = idx ? v[idx - 1] : c->cyc_v0;
        }
        vertex(pt, pv, pass ? &fg.tmin_s : &fg.tmax_s, pass ? &fg.vmin_v : &fg.vmax_v);
    }
    c->nf = 0;
    c->cyc_t0 = t1;
    c->cyc_v0 = v1;
    if (rq->cycle)
        return rq->cycle(rq->user, &fg);
    return RU_OK;
}

/* At a crossing (state x at t): counts it unless it comes too soon. */
static ru_status on_root(ru_cyc *c, double t, const double *x, int *counted,
                         ru_error *err)
{
    *counted = 0;
    if (isfinite(c->t_last_cross) && t - c->t_last_cross < CYC_MIN_GAP * c->cfg.period_s)
        return RU_OK;
    *counted = 1;
    c->cnt.crossings++;
    c->t_last_cross = t;
    c->amp = fmax(c->amp_run, scaled_dev(c, x));
    c->amp_run = scaled_dev(c, x);
    if (c->rq->measure && c->in_cycle)
        return close_cycle(c, t, probe_v(c, t, x), err);
    c->in_cycle = 1;
    c->nf = 0;
    c->cyc_t0 = t;
    c->cyc_v0 = probe_v(c, t, x);
    return RU_OK;
}

/* A breakpoint reached as a stop time: samples before it, the jump, the samples on
 * it, a restart. */
static ru_status cross_bp(ru_cyc *c, double b, ru_error *err)
{
    ru_status st = deliver(c, b - 1e-9 * c->cfg.sample_s, err);
    if (st != RU_OK)
        return st;
    double *y = N_VGetArrayPointer(c->y);
    ru_system_apply_jump(c->cfg.sys, b, y);
    const ru_cyc_req *rq = c->rq;
    for (double t; rq->sample && (t = (double)c->k_next * c->cfg.sample_s) <=
                                     b + 1e-9 * c->cfg.sample_s; c->k_next++) {
        st = rq->sample(rq->user, b, y, c->n, c->open);
        c->open = 0;
        if (st != RU_OK)
            return ru_error_set(err, st, NULL, 0, 0, "output stopped the run at t = %.6g s",
                                b);
        c->cnt.samples++;
    }
    close_segment(c);
    c->ibp++;
    int f = CVodeReInit(c->cv, b, c->y);
    if (f)
        return fail_numeric(c, f, NULL, err);
    c->t_done = c->t_pend = b;
    return RU_OK;
}

ru_status ru_cyc_advance(ru_cyc *c, const ru_cyc_req *rq, double *t_s, double *x,
                         ru_error *err)
{
    c->rq = rq;
    ru_status st = RU_OK;
    int count = 0;
    double *y = N_VGetArrayPointer(c->y);
    if (c->fresh && (st = deliver_fresh(c, err)) != RU_OK)
        return st;
    if (c->t_pend > c->t_done && (st = deliver(c, c->t_pend, err)) != RU_OK)
        return st;
    int f = set_stop(c, rq->t_end_s);
    if (f)
        return fail_numeric(c, f, NULL, err);
    double tprev = c->t_done, tret = c->t_done, wait_from = c->t_done;
    long stall = 0;
    for (;;) {
        f = CVode(c->cv, c->t_done + c->cfg.period_s, c->y, &tret, CV_ONE_STEP);
        if (f < 0)
            return fail_numeric(c, f, NULL, err);
        double tcur = tret;
        CVodeGetCurrentTime(c->cv, &tcur);
        if (f == CV_ROOT_RETURN) {
            int counted = 0;
            if ((st = deliver(c, tret, err)) != RU_OK ||
                (st = on_root(c, tret, y, &counted, err)) != RU_OK)
                return st;
            if (counted) {
                count++;
                wait_from = tret;
                if (rq->crossings > 0 && count >= rq->crossings) {
                    c->t_pend = tcur;
                    memcpy(x, y, c->n * sizeof *x);
                    *t_s = tret;
                    return RU_OK;
                }
            }
            if ((st = deliver(c, tcur, err)) != RU_OK)
                return st;
            continue;
        }
        if (f == CV_TSTOP_RETURN && c->ibp < c->nbp &&
            fabs(tret - c->bp[c->ibp]) <= 1e-12 * fmax(1.0, fabs(tret)) &&
            tret < rq->t_end_s) {
            if ((st = cross_bp(c, tret, err)) != RU_OK)
                return st;
            if ((f = set_stop(c, rq->t_end_s)) != 0)
                return fail_numeric(c, f, NULL, err);
            continue;
        }
        if ((st = deliver(c, tret, err)) != RU_OK)
            return st;
        if (f == CV_TSTOP_RETURN) {
            memcpy(x, y, c->n * sizeof *x);
            *t_s = tret;
            c->t_pend = tret;
            return RU_OK;
        }
        c->amp_run = fmax(c->amp_run, scaled_dev(c, y));
        if (rq->wait_periods > 0 && tret - wait_from > rq->wait_periods * c->cfg.period_s)
            return fail_numeric(c, 0, "no section crossing came (the oscillation died "
                                      "out, or its DC level left the section)", err);
        stall = tret > tprev ? 0 : stall + 1;
        tprev = fmax(tprev, tret);
        if (stall > CYC_STALL)
            return fail_numeric(c, 0, "the step size fell below the time resolution", err);
    }
}
