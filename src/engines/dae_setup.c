/* dae_setup.c: the IDA integrator's variables, callbacks and setup (see dae.c): the
 * transform x = S y, the residual F = M x' - r(t, x) and the Newton matrix
 * (cj M - dr/dx) S over its sparse pattern (or dense), the tolerances and the
 * differential flags, and consistent starts by IDACalcIC. */
#include "engines/dae_impl.h"

#include <sunlinsol/sunlinsol_dense.h>
#include <sunlinsol/sunlinsol_klu.h>
#include <sunmatrix/sunmatrix_dense.h>
#include <sunmatrix/sunmatrix_sparse.h>

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define RU_DAE_IC_ATOL 1e-10 /* of each state's scale, for IDACalcIC (below) */

/* ---- variables <-> states ---------------------------------------------------- */

void ru_dae_y_to_x(const dae_run *r, const double *y, double *x)
{
    memcpy(x, y, r->n * sizeof *x);
    for (size_t q = 0; q < r->nmem; q++) {
        int i = r->members[q];
        x[i] += y[r->ref[i]];
    }
}

static void x_to_y(const dae_run *r, const double *x, double *y)
{
    memcpy(y, x, r->n * sizeof *y);
    for (size_t q = 0; q < r->nmem; q++) {
        int i = r->members[q];
        y[i] -= x[r->ref[i]];
    }
}

/* ---- callbacks ----------------------------------------------------------------- */

static int note_status(dae_run *r, ru_status st)
{
    if (r->sys_status == RU_OK)
        r->sys_status = st;
    return st == RU_ENUMERIC ? 1 : -1; /* overflow: let IDA cut the step */
}

/* F = M x' - r(t, x). */
static int dae_res(realtype t, N_Vector yy, N_Vector yp, N_Vector rr, void *user)
{
    dae_run *r = user;
    r->res_evals++;
    double *F = N_VGetArrayPointer(rr);
    ru_dae_y_to_x(r, N_VGetArrayPointer(yy), r->x);
    ru_dae_y_to_x(r, N_VGetArrayPointer(yp), r->xp);
    ru_eval_point ep = {.t_s = t, .dc = 0, .source_scale = 1.0};
    ru_status st = ru_system_residual_sparse(r->sys, &ep, r->x, r->r, NULL);
    if (st != RU_OK)
        return note_status(r, st);
    for (size_t i = 0; i < r->n; i++)
        F[i] = -r->r[i];
    for (size_t j = 0; j < r->n; j++) {
        double xpj = r->xp[j];
        for (long q = r->pat.colptr[j]; q < r->pat.colptr[j + 1]; q++)
            F[r->pat.rowind[q]] += r->pat.mass[q] * xpj;
    }
    for (size_t i = 0; i < r->n; i++)
        if (!isfinite(F[i]))
            return 1;
    return 0;
}

/* J = (cj M - dr/dx) S, sparse or dense. */
static int dae_jac(realtype t, realtype cj, N_Vector yy, N_Vector yp, N_Vector rr,
                   SUNMatrix J, void *user, N_Vector t1, N_Vector t2, N_Vector t3)
{
    (void)yp, (void)rr, (void)t1, (void)t2, (void)t3;
    dae_run *r = user;
    r->jac_evals++;
    ru_dae_y_to_x(r, N_VGetArrayPointer(yy), r->x);
    ru_eval_point ep = {.t_s = t, .dc = 0, .source_scale = 1.0};
    ru_status st = ru_system_residual_sparse(r->sys, &ep, r->x, r->r, r->drv);
    if (st != RU_OK)
        return note_status(r, st);
    double *val;
    size_t n = r->n;
    if (r->klu) {
        memcpy(SM_INDEXPTRS_S(J), r->jcol, (n + 1) * sizeof *r->jcol);
        memcpy(SM_INDEXVALS_S(J), r->jrow, (size_t)r->jnnz * sizeof *r->jrow);
        val = SM_DATA_S(J);
        memset(val, 0, (size_t)r->jnnz * sizeof *val);
    } else {
        val = SM_DATA_D(J); /* column-major n*n */
        memset(val, 0, n * n * sizeof *val);
    }
    for (size_t j = 0; j < n; j++)
        for (long q = r->pat.colptr[j]; q < r->pat.colptr[j + 1]; q++) {
            double a = cj * r->pat.mass[q] - r->drv[q];
            if (!isfinite(a))
                return 1;
            size_t i = (size_t)r->pat.rowind[q];
            if (r->klu) {
                val[r->map1[q]] += a;
                if (r->map2[q] >= 0)
                    val[r->map2[q]] += a;
            } else {
                val[i + j * n] += a;
                if (r->ref[j] >= 0)
                    val[i + (size_t)r->ref[j] * n] += a;
            }
        }
    return 0;
}

/* Error weights relative to the reference state (the options' x_ref as variables,
 * else 0: IDA's own rule): 1/(rtol |y - y_ref| + atol), as transient.c does for
 * CVODE. While IDACalcIC runs (r->in_ic) atol is at least RU_DAE_IC_ATOL of each
 * state's scale: its Newton iteration stalls on rounding below that (a start from
 * the thermal level puts atol near 1e-14 of the scale). */
static int dae_ewt(N_Vector y, N_Vector ewt, void *user)
{
    dae_run *r = user;
    const double *v = N_VGetArrayPointer(y), *at = N_VGetArrayPointer(r->atol);
    double *w = N_VGetArrayPointer(ewt);
    for (size_t i = 0; i < r->n; i++) {
        double a = r->in_ic ? fmax(at[i], RU_DAE_IC_ATOL * at[i] / r->atol_rel) : at[i];
        double d = r->rtol * fabs(v[i] - r->yref[i]) + a;
        if (!(d > 0) || !isfinite(d))
            return -1;
        w[i] = 1.0 / d;
    }
    return 0;
}

static void dae_errh(int code, const char *module, const char *func, char *msg,
                     void *user)
{
    (void)module, (void)func;
    dae_run *r = user;
    if (code < 0)
        snprintf(r->msg, sizeof r->msg, "%s", msg ? msg : "");
}

/* ---- setup --------------------------------------------------------------------- */

static int long_cmp(const void *a, const void *b)
{
    long x = *(const long *)a, y = *(const long *)b;
    return (x > y) - (x < y);
}

/* Position of row in the sorted rows of the Newton matrix's column c. */
static long jfind(const dae_run *r, size_t c, long row)
{
    long lo = (long)r->jcol[c], hi = (long)r->jcol[c + 1] - 1;
    while (lo <= hi) {
        long mid = lo + (hi - lo) / 2;
        if ((long)r->jrow[mid] == row)
            return mid;
        if ((long)r->jrow[mid] < row)
            lo = mid + 1;
        else
            hi = mid - 1;
    }
    return -1;
}

/* The pattern of (cj M - dr/dx) S and where each pattern entry goes in it. */
static ru_status build_newton_pattern(dae_run *r)
{
    size_t n = r->n;
    long nnz = r->pat.nnz;
    long *rows = malloc((size_t)(2 * nnz + 1) * sizeof *rows);
    r->jcol = calloc(n + 1, sizeof *r->jcol);
    r->jrow = malloc((size_t)(2 * nnz + 1) * sizeof *r->jrow);
    r->map1 = malloc((size_t)(nnz + 1) * sizeof *r->map1);
    r->map2 = malloc((size_t)(nnz + 1) * sizeof *r->map2);
    if (!rows || !r->jcol || !r->jrow || !r->map1 || !r->map2) {
        free(rows);
        return RU_ENOMEM;
    }
    long m = 0;
    for (size_t c = 0; c < n; c++) { /* column c: its own rows, and its members' */
        long start = m;
        for (long q = r->pat.colptr[c]; q < r->pat.colptr[c + 1]; q++)
            rows[m++] = r->pat.rowind[q];
        for (size_t k = 0; k < r->nmem; k++) {
            int j = r->members[k];
            if (r->ref[j] == (int)c)
                for (long q = r->pat.colptr[j]; q < r->pat.colptr[j + 1]; q++)
                    rows[m++] = r->pat.rowind[q];
        }
        qsort(rows + start, (size_t)(m - start), sizeof *rows, long_cmp);
        long u = start;
        for (long q = start; q < m; q++)
            if (q == start || rows[q] != rows[u - 1])
                rows[u++] = rows[q];
        for (long q = start; q < u; q++)
            r->jrow[q] = (sunindextype)rows[q];
        m = u;
        r->jcol[c + 1] = (sunindextype)m;
    }
    r->jnnz = m;
    for (size_t j = 0; j < n; j++)
        for (long q = r->pat.colptr[j]; q < r->pat.colptr[j + 1]; q++) {
            r->map1[q] = jfind(r, j, r->pat.rowind[q]);
            r->map2[q] = r->ref[j] >= 0 ? jfind(r, (size_t)r->ref[j], r->pat.rowind[q]) : -1;
        }
    free(rows);
    return RU_OK;
}

static ru_status alloc_run(dae_run *r)
{
    size_t n = r->n;
    ru_system_sparsity(r->sys, &r->pat);
    r->ref = malloc(n * sizeof *r->ref);
    r->members = malloc(n * sizeof *r->members);
    r->x = malloc(5 * n * sizeof *r->x);
    r->drv = malloc((size_t)(r->pat.nnz + 1) * sizeof *r->drv);
    if (!r->ref || !r->members || !r->x || !r->drv)
        return RU_ENOMEM;
    r->xp = r->x + n;
    r->r = r->x + 2 * n;
    r->xs = r->x + 3 * n;
    r->yref = r->x + 4 * n;
    r->nmem = 0;
    for (size_t i = 0; i < n; i++) {
        int g = ru_system_state_group(r->sys, i);
        r->ref[i] = (g >= 0 && (size_t)g != i) ? g : -1;
        if (r->ref[i] >= 0)
            r->members[r->nmem++] = (int)i;
    }
    return r->klu ? build_newton_pattern(r) : RU_OK;
}

/* Tolerances (per variable, as transient.c) and the differential flags. */
static void fill_tolerances(dae_run *r)
{
    double *at = N_VGetArrayPointer(r->atol), *id = N_VGetArrayPointer(r->id);
    ru_system_state_scale(r->sys, at);
    for (size_t i = 0; i < r->n; i++) {
        at[i] = r->atol_rel * ((isfinite(at[i]) && at[i] > 0) ? at[i] : 1.0);
        id[i] = ru_system_state_kind(r->sys, i) == RU_STATE_DIFFERENTIAL ? 1.0 : 0.0;
    }
}

static ru_status setup_linear(dae_run *r)
{
    sunindextype n = (sunindextype)r->n;
    if (r->klu) {
        r->A = SUNSparseMatrix(n, n, (sunindextype)r->jnnz, CSC_MAT, r->ctx);
        r->LS = r->A ? SUNLinSol_KLU(r->yy, r->A, r->ctx) : NULL;
    } else {
        r->A = SUNDenseMatrix(n, n, r->ctx);
        r->LS = r->A ? SUNLinSol_Dense(r->yy, r->A, r->ctx) : NULL;
    }
    return r->LS ? RU_OK : RU_ENOMEM;
}

ru_status ru_dae_setup_solver(dae_run *r, const double *x0, ru_error *err)
{
    sunindextype n = (sunindextype)r->n;
    if (SUNContext_Create(NULL, &r->ctx) != 0)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "transient: no SUNDIALS context");
    r->yy = N_VNew_Serial(n, r->ctx);
    r->yp = N_VNew_Serial(n, r->ctx);
    r->ys = N_VNew_Serial(n, r->ctx);
    r->atol = N_VNew_Serial(n, r->ctx);
    r->id = N_VNew_Serial(n, r->ctx);
    r->ida = IDACreate(r->ctx);
    if (!r->yy || !r->yp || !r->ys || !r->atol || !r->id || !r->ida ||
        alloc_run(r) != RU_OK || setup_linear(r) != RU_OK)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "transient: out of memory");
    if (N_VEnableFusedOps_Serial(r->yy, SUNTRUE) || N_VEnableFusedOps_Serial(r->yp, SUNTRUE))
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "transient: vector setup failed");
    fill_tolerances(r);
    if (r->o->x_ref)
        x_to_y(r, r->o->x_ref, r->yref);
    else
        memset(r->yref, 0, r->n * sizeof *r->yref);
    x_to_y(r, x0, N_VGetArrayPointer(r->yy));
    N_VConst(0.0, r->yp);
    int f = IDASetErrHandlerFn(r->ida, dae_errh, r);
    if (!f) f = IDAInit(r->ida, dae_res, 0.0, r->yy, r->yp);
    if (!f) f = IDASetUserData(r->ida, r); /* before the weight function takes it */
    if (!f) f = IDAWFtolerances(r->ida, dae_ewt);
    if (!f && r->o->max_step_s > 0)
        f = IDASetMaxStep(r->ida, r->o->max_step_s);
    if (!f) f = IDASetId(r->ida, r->id);
    if (!f) f = IDASetLinearSolver(r->ida, r->LS, r->A);
    if (!f) f = IDASetJacFn(r->ida, dae_jac);
    if (!f) f = IDASetMaxErrTestFails(r->ida, RU_TR_MAX_ERR_FAILS);
    if (!f) f = IDASetMaxNumSteps(r->ida, -1); /* one step per call; the limit is ours */
    if (f)
        return ru_error_set(err, RU_ENUMERIC, NULL, 0, 0,
                            "transient: solver setup failed: %s", r->msg);
    double tnext = r->nbp ? r->bp[0] : r->t_final;
    return ru_dae_consistent_start(r, 0.0, x0, tnext, 0, err);
}

void ru_dae_run_free(dae_run *r)
{
    if (r->ida)
        IDAFree(&r->ida);
    if (r->LS)
        SUNLinSolFree(r->LS);
    if (r->A)
        SUNMatDestroy(r->A);
    N_Vector v[5] = {r->yy, r->yp, r->ys, r->atol, r->id};
    for (int i = 0; i < 5; i++)
        if (v[i])
            N_VDestroy(v[i]);
    if (r->ctx)
        SUNContext_Free(&r->ctx);
    free(r->ref);
    free(r->members);
    free(r->x);
    free(r->drv);
    free(r->jcol);
    free(r->jrow);
    free(r->map1);
    free(r->map2);
    if (r->bp != r->bp_local)
        free(r->bp);
}

ru_status ru_dae_consistent_start(dae_run *r, double t, const double *x, double tnext,
                                  int reinit, ru_error *err)
{
    double *y = N_VGetArrayPointer(r->yy), *yp = N_VGetArrayPointer(r->yp);
    x_to_y(r, x, y);
    int dae = ru_system_algebraic_count(r->sys) > 0;
    ru_status st = ru_system_storage_rates(r->sys, t, x, r->xp); /* y' (a DAE: a guess) */
    if (st != RU_OK && !dae)
        return ru_error_set(err, st, NULL, 0, 0, "the rates at the start are not finite");
    if (st != RU_OK)
        memset(r->xp, 0, r->n * sizeof *r->xp);
    for (size_t i = 0; i < r->n; i++)
        yp[i] = isfinite(r->xp[i]) ? r->xp[i] : 0.0; /* members' rates are relative */
    for (size_t q = 0; q < r->nmem; q++)
        yp[r->members[q]] -= yp[r->ref[r->members[q]]];
    int f = reinit || !dae ? IDAReInit(r->ida, t, r->yy, r->yp) : 0;
    if (!f && dae) { /* an ODE needs no IDACalcIC: the storage rates are its exact y' */
        r->in_ic = 1;
        f = IDACalcIC(r->ida, IDA_YA_YDP_INIT, t + fmax(tnext - t, r->eps_t));
        r->in_ic = 0;
        if (!f)
            f = IDAGetConsistentIC(r->ida, r->yy, r->yp);
    }
    if (f) {
        char tb[48];
        ru_tr_fmt_time(t, tb, sizeof tb);
        return ru_error_set(err, RU_ENUMERIC, NULL, 0, 0,
                            "no consistent state at t = %s (the nodes without "
                            "capacitance have no solution of KCL there, or Newton "
                            "failed): %s",
                            tb, r->msg[0] ? r->msg : "IDACalcIC failed");
    }
    return RU_OK;
}
