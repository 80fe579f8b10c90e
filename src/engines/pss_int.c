/* pss_int.c: one CVODES integration of the autonomous circuit for the periodic
 * steady-state engines (see pss_int.h).
 *
 * Invariants: one SUNContext and one CVODES object per call, freed before it
 * returns; the right-hand side and Jacobian are the system's with every source at
 * its final value (ep.dc = 1), so the equations do not depend on t; sensitivities
 * s_j = d x / d x0_j obey s_j' = J(x) s_j with the analytic Jacobian (exact
 * variational equations, no difference quotients) and take part in the error test
 * with absolute tolerances atol_i / scale_j; samples come from the dense output of
 * the last internal step, never from a restart; CVODES messages are kept, never
 * printed. */
#include "engines/pss_int.h"

#include <cvodes/cvodes.h>
#include <nvector/nvector_serial.h>
#include <sundials/sundials_context.h>
#include <sunlinsol/sunlinsol_dense.h>
#include <sunmatrix/sunmatrix_dense.h>

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

typedef struct pint {
    const ru_system *sys;
    const ru_pint_req *req;
    size_t n;
    SUNContext ctx;
    void *cv;
    N_Vector y, ys, atol;
    N_Vector *yS;          /* sensitivities (n vectors) or NULL */
    N_Vector *atolS;       /* their absolute tolerances */
    SUNMatrix A;
    SUNLinearSolver LS;
    double *jrow;          /* n*n row-major Jacobian scratch */
    double *fbuf;          /* n: rhs scratch for the root function */
    size_t k;              /* next sample */
    long rhs_evals;
    ru_status sys_status;
    char msg[RU_ERROR_TEXT];
} pint;

static const ru_eval_point pi_ep = {.t_s = 0.0, .dc = 1, .source_scale = 1.0};

static int pi_rhs(realtype t, N_Vector y, N_Vector ydot, void *user)
{
    (void)t;
    pint *p = user;
    p->rhs_evals++;
    double *f = N_VGetArrayPointer(ydot);
    ru_status st = ru_system_eval(p->sys, &pi_ep, N_VGetArrayPointer(y), f, NULL);
    if (st != RU_OK) {
        if (p->sys_status == RU_OK)
            p->sys_status = st;
        return st == RU_ENUMERIC ? 1 : -1;
    }
    for (size_t i = 0; i < p->n; i++)
        if (!isfinite(f[i]))
            return 1;
    return 0;
}

static int pi_jac(realtype t, N_Vector y, N_Vector fy, SUNMatrix J, void *user,
                  N_Vector t1, N_Vector t2, N_Vector t3)
{
    (void)t, (void)fy, (void)t1, (void)t2, (void)t3;
    pint *p = user;
    if (ru_system_eval(p->sys, &pi_ep, N_VGetArrayPointer(y), NULL, p->jrow) != RU_OK)
        return 1;
    size_t n = p->n;
    for (size_t j = 0; j < n; j++) {
        double *col = SM_COLUMN_D(J, (sunindextype)j);
        for (size_t i = 0; i < n; i++) {
            col[i] = p->jrow[i * n + j];
            if (!isfinite(col[i]))
                return 1;
        }
    }
    return 0;
}

/* s_j' = J(x) s_j for every j (the variational equation). */
static int pi_sens(int ns, realtype t, N_Vector y, N_Vector ydot, N_Vector *yS,
                   N_Vector *ySdot, void *user, N_Vector tmp1, N_Vector tmp2)
{
    (void)t, (void)ydot, (void)tmp1, (void)tmp2;
    pint *p = user;
    size_t n = p->n;
    if (ru_system_eval(p->sys, &pi_ep, N_VGetArrayPointer(y), NULL, p->jrow) != RU_OK)
        return 1;
    for (int j = 0; j < ns; j++) {
        const double *s = N_VGetArrayPointer(yS[j]);
        double *d = N_VGetArrayPointer(ySdot[j]);
        for (size_t i = 0; i < n; i++) {
            const double *row = p->jrow + i * n;
            double acc = 0.0;
            for (size_t c = 0; c < n; c++)
                acc += row[c] * s[c];
            d[i] = acc;
        }
    }
    return 0;
}

/* d/dt of the probe: probe_g . f(x). */
static int pi_root(realtype t, N_Vector y, realtype *g, void *user)
{
    (void)t;
    pint *p = user;
    p->rhs_evals++;
    if (ru_system_eval(p->sys, &pi_ep, N_VGetArrayPointer(y), p->fbuf, NULL) != RU_OK)
        return 1;
    double acc = 0.0;
    for (size_t i = 0; i < p->n; i++)
        acc += p->req->probe_g[i] * p->fbuf[i];
    g[0] = acc;
    return 0;
}

static void pi_errh(int code, const char *module, const char *func, char *msg, void *user)
{
    (void)module, (void)func;
    pint *p = user;
    if (code < 0)
        snprintf(p->msg, sizeof p->msg, "%s", msg ? msg : "");
}

static void pi_free(pint *p)
{
    if (p->cv)
        CVodeFree(&p->cv);
    if (p->LS)
        SUNLinSolFree(p->LS);
    if (p->A)
        SUNMatDestroy(p->A);
    if (p->yS)
        N_VDestroyVectorArray(p->yS, (int)p->n);
    if (p->atolS)
        N_VDestroyVectorArray(p->atolS, (int)p->n);
    if (p->y)
        N_VDestroy(p->y);
    if (p->ys)
        N_VDestroy(p->ys);
    if (p->atol)
        N_VDestroy(p->atol);
    if (p->ctx)
        SUNContext_Free(&p->ctx);
    free(p->jrow);
    free(p->fbuf);
}

static ru_status pi_fail(pint *p, const char *what, int flag, ru_error *err)
{
    double t = 0;
    if (p->cv)
        CVodeGetCurrentTime(p->cv, &t);
    return ru_error_set(err, RU_ENUMERIC, NULL, 0, 0,
                        "periodic steady state: %s at t = %.6g s (flag %d)%s%s", what, t,
                        flag, p->msg[0] ? ": " : "", p->msg);
}

static ru_status pi_setup_sens(pint *p, ru_error *err)
{
    const ru_pint_req *q = p->req;
    size_t n = p->n;
    p->yS = N_VCloneVectorArray((int)n, p->y);
    p->atolS = N_VCloneVectorArray((int)n, p->y);
    if (!p->yS || !p->atolS)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "out of memory");
    for (size_t j = 0; j < n; j++) {
        double *s = N_VGetArrayPointer(p->yS[j]), *a = N_VGetArrayPointer(p->atolS[j]);
        for (size_t i = 0; i < n; i++) {
            s[i] = i == j ? 1.0 : 0.0;
            a[i] = q->atol_rel * q->scale[i] / q->scale[j];
        }
    }
    int f = CVodeSensInit(p->cv, (int)n, CV_STAGGERED, pi_sens, p->yS);
    if (!f)
        f = CVodeSensSVtolerances(p->cv, q->rtol, p->atolS);
    if (!f)
        f = CVodeSetSensErrCon(p->cv, SUNTRUE);
    return f ? pi_fail(p, "sensitivity setup failed", f, err) : RU_OK;
}

static ru_status pi_setup(pint *p, const double *x0, ru_error *err)
{
    const ru_pint_req *q = p->req;
    sunindextype n = (sunindextype)p->n;
    if (SUNContext_Create(NULL, &p->ctx) != 0)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "no SUNDIALS context");
    p->y = N_VNew_Serial(n, p->ctx);
    p->ys = N_VNew_Serial(n, p->ctx);
    p->atol = N_VNew_Serial(n, p->ctx);
    p->A = SUNDenseMatrix(n, n, p->ctx);
    p->jrow = malloc(p->n * p->n * sizeof *p->jrow);
    p->fbuf = malloc(p->n * sizeof *p->fbuf);
    p->cv = CVodeCreate(CV_BDF, p->ctx);
    if (!p->y || !p->ys || !p->atol || !p->A || !p->jrow || !p->fbuf || !p->cv)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "out of memory");
    p->LS = SUNLinSol_Dense(p->y, p->A, p->ctx);
    if (!p->LS)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "out of memory");
    double *y = N_VGetArrayPointer(p->y), *at = N_VGetArrayPointer(p->atol);
    memcpy(y, x0, p->n * sizeof *y);
    for (size_t i = 0; i < p->n; i++)
        at[i] = q->atol_rel * q->scale[i];
    int f = CVodeSetErrHandlerFn(p->cv, pi_errh, p);
    if (!f) f = CVodeInit(p->cv, pi_rhs, 0.0, p->y);
    if (!f) f = CVodeSVtolerances(p->cv, q->rtol, p->atol);
    if (!f) f = CVodeSetUserData(p->cv, p);
    if (!f) f = CVodeSetLinearSolver(p->cv, p->LS, p->A);
    if (!f) f = CVodeSetJacFn(p->cv, pi_jac);
    if (!f) f = CVodeSetMaxErrTestFails(p->cv, 20);
    if (!f) f = CVodeSetMaxNumSteps(p->cv, -1);
    if (!f) f = CVodeSetMaxHnilWarns(p->cv, -1);
    if (!f) f = CVodeSetStopTime(p->cv, q->t_end_s);
    if (!f && q->probe_g) f = CVodeRootInit(p->cv, 1, pi_root);
    if (f)
        return pi_fail(p, "solver setup failed", f, err);
    return q->sens ? pi_setup_sens(p, err) : RU_OK;
}

/* Samples with t_k <= tlim from the last step's interpolant. */
static ru_status pi_emit(pint *p, double tlim, ru_error *err)
{
    const ru_pint_req *q = p->req;
    if (!q->fn || !(q->dt_sample_s > 0))
        return RU_OK;
    double tcur = 0, hlast = 0;
    CVodeGetCurrentTime(p->cv, &tcur);
    CVodeGetLastStep(p->cv, &hlast);
    while (p->k < q->nsamples) {
        double t = (double)p->k * q->dt_sample_s;
        if (t > tlim)
            break;
        double tq = fmin(fmax(t, tcur - hlast), tcur);
        int f = CVodeGetDky(p->cv, tq, 0, p->ys);
        if (f < 0)
            return pi_fail(p, "dense output failed", f, err);
        ru_status st = q->fn(q->user, t, N_VGetArrayPointer(p->ys));
        if (st != RU_OK)
            return ru_error_set(err, st, NULL, 0, 0, "periodic steady state: output failed");
        p->k++;
    }
    return RU_OK;
}

static void pi_extremum(pint *p, double t, ru_pint_out *out)
{
    const double *y = N_VGetArrayPointer(p->y);
    double v = 0.0;
    for (size_t i = 0; i < p->n; i++)
        v += p->req->probe_g[i] * y[i];
    out->nroots++;
    if (!(v <= out->probe_max)) { /* also replaces NAN */
        out->probe_max = v;
        out->t_max_s = t;
    }
    if (!(v >= out->probe_min)) {
        out->probe_min = v;
        out->t_min_s = t;
    }
}

static ru_status pi_loop(pint *p, ru_pint_out *out, ru_error *err)
{
    const ru_pint_req *q = p->req;
    for (;;) {
        double tret = 0, tcur = 0;
        int f = CVode(p->cv, q->t_end_s, p->y, &tret, CV_ONE_STEP);
        if (f < 0)
            return pi_fail(p, "the integrator failed", f, err);
        CVodeGetCurrentTime(p->cv, &tcur);
        ru_status st = pi_emit(p, f == CV_TSTOP_RETURN ? q->t_end_s : tcur, err);
        if (st != RU_OK)
            return st;
        if (f == CV_ROOT_RETURN)
            pi_extremum(p, tret, out);
        if (f == CV_TSTOP_RETURN)
            return RU_OK;
        long steps = 0;
        CVodeGetNumSteps(p->cv, &steps);
        if (q->max_steps > 0 && steps > q->max_steps)
            return pi_fail(p, "too many internal steps", 0, err);
    }
}

ru_status ru_pint_run(const ru_system *s, const ru_pint_req *req, const double *x0,
                      double *x_end, double *phi, ru_pint_out *out, ru_error *err)
{
    pint p;
    memset(&p, 0, sizeof p);
    memset(out, 0, sizeof *out);
    out->probe_max = out->probe_min = out->t_max_s = out->t_min_s = NAN;
    p.sys = s;
    p.req = req;
    p.n = ru_system_size(s);
    if (p.n == 0 || !(req->t_end_s > 0) || !isfinite(req->t_end_s))
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0,
                            "periodic steady state: nothing to integrate");
    ru_status st = pi_setup(&p, x0, err);
    if (st == RU_OK)
        st = pi_loop(&p, out, err);
    if (st == RU_OK) {
        memcpy(x_end, N_VGetArrayPointer(p.y), p.n * sizeof *x_end);
        if (req->sens && phi) {
            double t = 0;
            int f = CVodeGetSens(p.cv, &t, p.yS);
            if (f < 0)
                st = pi_fail(&p, "no sensitivities", f, err);
            for (size_t j = 0; st == RU_OK && j < p.n; j++) {
                const double *sj = N_VGetArrayPointer(p.yS[j]);
                for (size_t i = 0; i < p.n; i++)
                    phi[i * p.n + j] = sj[i];
            }
        }
    }
    if (p.cv)
        CVodeGetNumSteps(p.cv, &out->steps);
    out->rhs_evals = p.rhs_evals;
    if (st == RU_OK && p.sys_status != RU_OK)
        st = RU_OK; /* a rejected trial step the solver recovered from */
    pi_free(&p);
    return st;
}
