/* ppv.c: the perturbation projection vector and the phase diffusion constant (see
 * ringup/ppv.h), by the CVODES adjoint module.
 *
 * Forward: one period from the steady state's x0 with checkpoints (CVodeAdjInit,
 * Hermite interpolation of the orbit). Backward from T: the adjoint
 * v' = -J(x(t))^T v from v(T) = v1(0) (periodicity), with 2m quadratures per the m
 * noise sources, the projection w_k = v . B_k(x(t)) and its square; the PPV is read
 * at the grid times on the way down. The quadratures are integrated with the sign
 * flipped (CVODES accumulates qB' = fQB from T downward, so qB(0) = -integral of
 * fQB), giving +integral at t = 0.
 *
 * Invariants: one SUNContext and CVODES object per call, freed before it returns;
 * everything the callbacks write lives in the ppv_run on the caller's stack. */
#include "ringup/ppv.h"

#include "engines/floquet.h"
#include "engines/steady_impl.h"

#include <cvodes/cvodes.h>
#include <nvector/nvector_serial.h>
#include <sundials/sundials_context.h>
#include <sunlinsol/sunlinsol_dense.h>
#include <sunmatrix/sunmatrix_dense.h>

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#define RU_PPV_CHECKPOINT_STEPS 200 /* forward steps between checkpoints */

struct ru_ppv {
    ru_ppv_view v;
    ru_ppv_source *src;
    double *grid_v;
};

typedef struct ppv_run {
    const ru_system *sys;
    size_t n, m;
    double temp_c;
    double *jrow;          /* n*n */
    double *B;             /* n*m noise columns */
    double *fbuf;          /* n */
    ru_status sys_status;
    char msg[RU_ERROR_TEXT];
} ppv_run;

static const ru_eval_point ppv_ep = {.t_s = 0.0, .dc = 1, .source_scale = 1.0};

void ru_ppv_opts_default(ru_ppv_opts *o)
{
    memset(o, 0, sizeof *o);
    o->temp_c = 27.0;
}

void ru_ppv_destroy(ru_ppv *p)
{
    if (!p)
        return;
    free(p->src);
    free(p->grid_v);
    free(p);
}

void ru_ppv_get(const ru_ppv *p, ru_ppv_view *v)
{
    *v = p->v;
}

static int pv_rhs(realtype t, N_Vector y, N_Vector ydot, void *user)
{
    (void)t;
    ppv_run *r = user;
    ru_status st = ru_system_eval(r->sys, &ppv_ep, N_VGetArrayPointer(y),
                                  N_VGetArrayPointer(ydot), NULL);
    return st == RU_OK ? 0 : st == RU_ENUMERIC ? 1 : -1;
}

static int pv_jac(realtype t, N_Vector y, N_Vector fy, SUNMatrix J, void *user,
                  N_Vector t1, N_Vector t2, N_Vector t3)
{
    (void)t, (void)fy, (void)t1, (void)t2, (void)t3;
    ppv_run *r = user;
    if (ru_system_eval(r->sys, &ppv_ep, N_VGetArrayPointer(y), NULL, r->jrow) != RU_OK)
        return 1;
    for (size_t j = 0; j < r->n; j++) {
        double *col = SM_COLUMN_D(J, (sunindextype)j);
        for (size_t i = 0; i < r->n; i++)
            col[i] = r->jrow[i * r->n + j];
    }
    return 0;
}

/* v' = -J(x)^T v */
static int pv_rhs_b(realtype t, N_Vector y, N_Vector yB, N_Vector yBdot, void *user)
{
    (void)t;
    ppv_run *r = user;
    if (ru_system_eval(r->sys, &ppv_ep, N_VGetArrayPointer(y), NULL, r->jrow) != RU_OK)
        return 1;
    const double *v = N_VGetArrayPointer(yB);
    double *d = N_VGetArrayPointer(yBdot);
    size_t n = r->n;
    for (size_t j = 0; j < n; j++) {
        double acc = 0.0;
        for (size_t i = 0; i < n; i++)
            acc += r->jrow[i * n + j] * v[i];
        d[j] = -acc;
    }
    return 0;
}

/* d fB / d yB = -J^T */
static int pv_jac_b(realtype t, N_Vector y, N_Vector yB, N_Vector fyB, SUNMatrix JB,
                    void *user, N_Vector t1, N_Vector t2, N_Vector t3)
{
    (void)t, (void)yB, (void)fyB, (void)t1, (void)t2, (void)t3;
    ppv_run *r = user;
    if (ru_system_eval(r->sys, &ppv_ep, N_VGetArrayPointer(y), NULL, r->jrow) != RU_OK)
        return 1;
    size_t n = r->n;
    for (size_t j = 0; j < n; j++) {
        double *col = SM_COLUMN_D(JB, (sunindextype)j);
        for (size_t i = 0; i < n; i++)
            col[i] = -r->jrow[j * n + i];
    }
    return 0;
}

/* Quadratures, negated (see the head comment): [w_k^2, w_k] for each source k. */
static int pv_quad_b(realtype t, N_Vector y, N_Vector yB, N_Vector qBdot, void *user)
{
    (void)t;
    ppv_run *r = user;
    size_t n = r->n, m = r->m;
    if (ru_system_noise_columns(r->sys, N_VGetArrayPointer(y), r->temp_c, r->B) != RU_OK)
        return -1;
    const double *v = N_VGetArrayPointer(yB);
    double *q = N_VGetArrayPointer(qBdot);
    for (size_t k = 0; k < m; k++) {
        double w = 0.0;
        for (size_t i = 0; i < n; i++)
            w += v[i] * r->B[i * m + k];
        q[2 * k] = -w * w;
        q[2 * k + 1] = -w;
    }
    return 0;
}

static void pv_errh(int code, const char *module, const char *func, char *msg, void *user)
{
    (void)module, (void)func;
    ppv_run *r = user;
    if (code < 0)
        snprintf(r->msg, sizeof r->msg, "%s", msg ? msg : "");
}

typedef struct pv_objs {
    SUNContext ctx;
    void *cv;
    N_Vector y, atol, yB, atolB, qB;
    SUNMatrix A, AB;
    SUNLinearSolver LS, LSB;
} pv_objs;

static void pv_free(pv_objs *o)
{
    if (o->cv)
        CVodeFree(&o->cv);
    if (o->LS)
        SUNLinSolFree(o->LS);
    if (o->LSB)
        SUNLinSolFree(o->LSB);
    if (o->A)
        SUNMatDestroy(o->A);
    if (o->AB)
        SUNMatDestroy(o->AB);
    N_Vector vs[5] = {o->y, o->atol, o->yB, o->atolB, o->qB};
    for (int i = 0; i < 5; i++)
        if (vs[i])
            N_VDestroy(vs[i]);
    if (o->ctx)
        SUNContext_Free(&o->ctx);
}

static ru_status pv_fail(ppv_run *r, const char *what, int flag, ru_error *err)
{
    return ru_error_set(err, RU_ENUMERIC, NULL, 0, 0, "phase noise: %s (flag %d)%s%s", what,
                        flag, r->msg[0] ? ": " : "", r->msg);
}

/* Forward over [0, T] with checkpoints. */
static ru_status pv_forward(ppv_run *r, pv_objs *o, const ru_steady *st, double rtol,
                            ru_error *err)
{
    sunindextype n = (sunindextype)r->n;
    if (SUNContext_Create(NULL, &o->ctx) != 0)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "no SUNDIALS context");
    o->y = N_VNew_Serial(n, o->ctx);
    o->atol = N_VNew_Serial(n, o->ctx);
    o->A = SUNDenseMatrix(n, n, o->ctx);
    o->cv = CVodeCreate(CV_BDF, o->ctx);
    if (!o->y || !o->atol || !o->A || !o->cv)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "out of memory");
    if (!(o->LS = SUNLinSol_Dense(o->y, o->A, o->ctx)))
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "out of memory");
    memcpy(N_VGetArrayPointer(o->y), st->x0, r->n * sizeof(double));
    double *at = N_VGetArrayPointer(o->atol);
    for (size_t i = 0; i < r->n; i++)
        at[i] = rtol * RU_STEADY_ATOL_OVER_RTOL * st->scale[i];
    double T = st->v.period_s, tret = 0;
    int ncheck = 0;
    int f = CVodeSetErrHandlerFn(o->cv, pv_errh, r);
    if (!f) f = CVodeInit(o->cv, pv_rhs, 0.0, o->y);
    if (!f) f = CVodeSVtolerances(o->cv, rtol, o->atol);
    if (!f) f = CVodeSetUserData(o->cv, r);
    if (!f) f = CVodeSetLinearSolver(o->cv, o->LS, o->A);
    if (!f) f = CVodeSetJacFn(o->cv, pv_jac);
    if (!f) f = CVodeSetMaxNumSteps(o->cv, 10000000);
    if (!f) f = CVodeSetMaxErrTestFails(o->cv, 20);
    if (!f) f = CVodeSetStopTime(o->cv, T);
    if (!f) f = CVodeAdjInit(o->cv, RU_PPV_CHECKPOINT_STEPS, CV_HERMITE);
    if (f)
        return pv_fail(r, "forward setup failed", f, err);
    f = CVodeF(o->cv, T, o->y, &tret, CV_NORMAL, &ncheck);
    return f < 0 ? pv_fail(r, "the forward integration failed", f, err) : RU_OK;
}

/* Backward from T with v(T) = v1; the PPV at the grid times into grid_v. */
static ru_status pv_backward(ppv_run *r, pv_objs *o, const ru_steady *st, const double *v1,
                             double rtol, double *grid_v, double *q, ru_error *err)
{
    sunindextype n = (sunindextype)r->n, nq = (sunindextype)(2 * r->m);
    double T = st->v.period_s;
    int which = 0;
    o->yB = N_VNew_Serial(n, o->ctx);
    o->atolB = N_VNew_Serial(n, o->ctx);
    o->qB = N_VNew_Serial(nq > 0 ? nq : 1, o->ctx);
    o->AB = SUNDenseMatrix(n, n, o->ctx);
    if (!o->yB || !o->atolB || !o->qB || !o->AB ||
        !(o->LSB = SUNLinSol_Dense(o->yB, o->AB, o->ctx)))
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "out of memory");
    memcpy(N_VGetArrayPointer(o->yB), v1, r->n * sizeof(double));
    N_VConst(0.0, o->qB);
    double *ab = N_VGetArrayPointer(o->atolB);
    for (size_t i = 0; i < r->n; i++) /* v1 . f = 1 and f_i ~ 2 pi scale_i / T */
        ab[i] = rtol * RU_STEADY_ATOL_OVER_RTOL * T / (2.0 * M_PI * st->scale[i]);
    int f = CVodeCreateB(o->cv, CV_BDF, &which);
    if (!f) f = CVodeInitB(o->cv, which, pv_rhs_b, T, o->yB);
    if (!f) f = CVodeSVtolerancesB(o->cv, which, rtol, o->atolB);
    if (!f) f = CVodeSetUserDataB(o->cv, which, r);
    if (!f) f = CVodeSetLinearSolverB(o->cv, which, o->LSB, o->AB);
    if (!f) f = CVodeSetJacFnB(o->cv, which, pv_jac_b);
    if (!f) f = CVodeSetMaxNumStepsB(o->cv, which, 10000000);
    if (!f && nq > 0) f = CVodeQuadInitB(o->cv, which, pv_quad_b, o->qB);
    if (!f && nq > 0) f = CVodeSetQuadErrConB(o->cv, which, SUNTRUE);
    if (!f && nq > 0) f = CVodeQuadSStolerancesB(o->cv, which, rtol, 1e-300);
    if (f)
        return pv_fail(r, "backward setup failed", f, err);
    size_t ng = st->v.ngrid;
    double tret = 0;
    for (size_t k = ng; k-- > 0;) {
        double t = T * (double)k / (double)ng;
        if (k > 0 || t < T) {
            f = CVodeB(o->cv, t, CV_NORMAL);
            if (f < 0)
                return pv_fail(r, "the adjoint integration failed", f, err);
        }
        f = CVodeGetB(o->cv, which, &tret, o->yB);
        if (f < 0)
            return pv_fail(r, "no adjoint solution", f, err);
        memcpy(grid_v + k * r->n, N_VGetArrayPointer(o->yB), r->n * sizeof(double));
    }
    if (nq > 0) {
        f = CVodeGetQuadB(o->cv, which, &tret, o->qB);
        if (f < 0)
            return pv_fail(r, "no quadratures", f, err);
        memcpy(q, N_VGetArrayPointer(o->qB), (size_t)nq * sizeof(double));
    }
    return RU_OK;
}

/* Normalisation along the grid and periodicity of the result. */
static void pv_checks(ppv_run *r, const ru_steady *st, const double *v1, ru_ppv *p)
{
    size_t n = r->n, ng = st->v.ngrid;
    double worst = 0.0;
    for (size_t k = 0; k < ng; k++) {
        if (ru_system_eval(r->sys, &ppv_ep, st->grid_x + k * n, r->fbuf, NULL) != RU_OK)
            continue;
        double d = 0.0;
        for (size_t i = 0; i < n; i++)
            d += p->grid_v[k * n + i] * r->fbuf[i];
        worst = fmax(worst, fabs(d - 1.0));
    }
    p->v.norm_error = worst;
    double num = 0.0, den = 0.0;
    for (size_t i = 0; i < n; i++) { /* in the states' scaled units */
        double a = p->grid_v[i] * st->scale[i], b = v1[i] * st->scale[i];
        num += (a - b) * (a - b);
        den += b * b;
    }
    p->v.periodicity_error = den > 0 ? sqrt(num / den) : NAN;
}

static double cpu_now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_THREAD_CPUTIME_ID, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

static void pv_sums(ppv_run *r, const ru_steady *st, const double *q, ru_ppv *p)
{
    double T = st->v.period_s;
    p->v.c_s = p->v.c1_s_hz = 0.0;
    for (size_t k = 0; k < r->m; k++) {
        ru_ppv_source *s = &p->src[k];
        ru_system_noise_info(r->sys, k, &s->info);
        double msq = q[2 * k] / T, mean = q[2 * k + 1] / T;
        s->mean_proj = mean;
        s->c_s = 0.5 * msq;
        s->c1_s_hz = 0.5 * s->info.flicker_corner_hz * mean * mean;
        p->v.c_s += s->c_s;
        p->v.c1_s_hz += s->c1_s_hz;
    }
}

ru_status ru_ppv_solve(const ru_system *s, const ru_steady *st, const ru_ppv_opts *o,
                       ru_ppv **out, ru_error *err)
{
    *out = NULL;
    double cpu0 = cpu_now();
    if (!st->v.found)
        return ru_error_set(err, RU_EINPUT, NULL, 0, 0,
                            "phase noise: there is no periodic steady state");
    size_t n = st->n, m = ru_system_noise_count(s), ng = st->v.ngrid;
    ppv_run r = {.sys = s, .n = n, .m = m, .temp_c = o->temp_c};
    ru_ppv *p = calloc(1, sizeof *p);
    double *v1 = malloc((n + n * n + n * (m ? m : 1) + n + 2 * m + 1) * sizeof *v1);
    if (p) {
        p->src = calloc(m ? m : 1, sizeof *p->src);
        p->grid_v = calloc(ng * n, sizeof *p->grid_v);
    }
    if (!p || !v1 || !p->src || !p->grid_v) {
        ru_ppv_destroy(p);
        free(v1);
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "out of memory");
    }
    r.jrow = v1 + n;
    r.B = r.jrow + n * n;
    r.fbuf = r.B + n * (m ? m : 1);
    double *q = r.fbuf + n, rtol = o->rtol > 0 ? o->rtol : st->rtol;
    ru_status rs = ru_system_eval(s, &ppv_ep, st->x0, r.fbuf, NULL);
    if (rs == RU_OK)
        rs = ru_floquet_phase_vector(st->phi, st->scale, n, r.fbuf, v1);
    if (rs != RU_OK)
        rs = ru_error_set(err, RU_ENUMERIC, NULL, 0, 0,
                          "phase noise: the monodromy matrix has no simple multiplier 1");
    pv_objs ob;
    memset(&ob, 0, sizeof ob);
    if (rs == RU_OK)
        rs = pv_forward(&r, &ob, st, rtol, err);
    if (rs == RU_OK)
        rs = pv_backward(&r, &ob, st, v1, rtol, p->grid_v, q, err);
    pv_free(&ob);
    if (rs == RU_OK) {
        pv_sums(&r, st, q, p);
        pv_checks(&r, st, v1, p);
        p->v.period_s = st->v.period_s;
        p->v.nsrc = m;
        p->v.src = p->src;
        p->v.n = n;
        p->v.ngrid = ng;
        p->v.v = p->grid_v;
        p->v.cpu_s = cpu_now() - cpu0;
        *out = p;
    } else {
        ru_ppv_destroy(p);
    }
    free(v1);
    return rs;
}

double ru_ppv_dbc(double f0_hz, double c_s, double c1_s_hz, double fm_hz)
{
    double a = M_PI * f0_hz * f0_hz * c_s;
    double l = f0_hz * f0_hz * c_s / (a * a + fm_hz * fm_hz) +
               f0_hz * f0_hz * c1_s_hz / (fm_hz * fm_hz * fm_hz);
    return 10.0 * log10(l);
}

double ru_ppv_rms_jitter(double f0_hz, double c_s, double c1_s_hz, double f1_hz,
                         double f2_hz)
{
    /* integral of f0^2 c / (a^2 + f^2) is (f0^2 c / a) atan(f / a), a = pi f0^2 c,
     * i.e. atan(f/a) / pi; of f0^2 c1 / f^3 it is -f0^2 c1 / (2 f^2) */
    double a = M_PI * f0_hz * f0_hz * c_s, white = 0.0;
    if (a > 0)
        white = (atan(f2_hz / a) - atan(f1_hz / a)) / M_PI;
    double flick = 0.5 * f0_hz * f0_hz * c1_s_hz * (1.0 / (f1_hz * f1_hz) - 1.0 / (f2_hz * f2_hz));
    return sqrt(2.0 * (white + flick)) / (2.0 * M_PI * f0_hz);
}
