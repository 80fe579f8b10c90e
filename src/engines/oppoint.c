/* oppoint.c: the DC operating point, r(x) = 0 with every source at its final value.
 *
 * Damped Newton: dense LU of dr/dx (LAPACKE_dgesv), the step scaled so no node
 * voltage moves more than VSTEP_MAX_V, then halved while the weighted residual norm
 * does not fall. Converged when both the Newton step (|dx_i| <= 1e-9 + 1e-6 |x_i|)
 * and the residual (|r_i| <= 1e-12 * w_i, w_i >= 1 a row scale, amperes for node
 * rows) are small. When plain Newton fails, source stepping solves at scale 0 and
 * walks the scale to 1, doubling the step on success and halving it on failure.
 * Invariants: x is only overwritten with iterates of the same system; the
 * workspace is private to one call (no shared state, thread-safe). */
#include "engines/smallsig_impl.h"

#include <lapacke.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#define VSTEP_MAX_V 2.0      /* largest node-voltage change per Newton iteration */
#define DX_ABS 1e-9          /* step tolerance, absolute (V or A) */
#define DX_REL 1e-6          /* step tolerance, relative */
#define R_ABS 1e-12          /* residual tolerance (A), times the row scale */
#define PLAIN_MAX_ITER 100   /* Newton iterations of the plain attempt */
#define STEP_MAX_ITER 40     /* Newton iterations per source step */
#define MAX_HALVINGS 40      /* line-search halvings before a Newton attempt stops */
#define DS_FIRST 0.1         /* first source-scale increment */
#define DS_MIN 1e-6          /* smallest source-scale increment before giving up */
#define MAX_SOURCE_TRIES 2000

typedef enum { NEWTON_OK, NEWTON_FAIL, NEWTON_SINGULAR, NEWTON_ERROR } newton_result;

typedef struct newton_ws {
    const ru_system *s;
    size_t n;          /* states */
    size_t nv;         /* node-voltage states (0..nv-1) */
    double *r;         /* residual at x (n) */
    double *dr;        /* dr/dx at x, then its LU (n*n) */
    double *dx;        /* Newton step (n) */
    double *xt;        /* trial state (n) */
    double *rt;        /* trial residual (n) */
    double *w;         /* row weights (n, >= 1) */
    lapack_int *ipiv;  /* LU pivots (n) */
    int iterations;    /* Newton iterations so far, all attempts */
    int singular_col;  /* state index of the zero pivot after NEWTON_SINGULAR */
    ru_status err_st;  /* status of a failed system call after NEWTON_ERROR */
} newton_ws;

static void ws_free(newton_ws *ws)
{
    free(ws->r);
    free(ws->dr);
    free(ws->dx);
    free(ws->xt);
    free(ws->rt);
    free(ws->w);
    free(ws->ipiv);
}

static int ws_alloc(newton_ws *ws, const ru_system *s)
{
    memset(ws, 0, sizeof *ws);
    ws->s = s;
    ws->n = ru_system_size(s);
    ws->nv = ru_system_free_nodes(s);
    size_t n = ws->n ? ws->n : 1;
    ws->r = malloc(n * sizeof(double));
    ws->dr = malloc(n * n * sizeof(double));
    ws->dx = malloc(n * sizeof(double));
    ws->xt = malloc(n * sizeof(double));
    ws->rt = malloc(n * sizeof(double));
    ws->w = malloc(n * sizeof(double));
    ws->ipiv = malloc(n * sizeof(lapack_int));
    return ws->r && ws->dr && ws->dx && ws->xt && ws->rt && ws->w && ws->ipiv;
}

/* Row scales from the Jacobian at x: sum_j |dr_ij| (|x_j| + 1), at least 1. */
static void row_weights(newton_ws *ws, const double *x)
{
    for (size_t i = 0; i < ws->n; i++) {
        double sum = 0.0;
        for (size_t j = 0; j < ws->n; j++)
            sum += fabs(ws->dr[i * ws->n + j]) * (fabs(x[j]) + 1.0);
        ws->w[i] = sum > 1.0 ? sum : 1.0;
    }
}

static double wnorm(const newton_ws *ws, const double *r)
{
    double sum = 0.0;
    for (size_t i = 0; i < ws->n; i++) {
        double q = r[i] / ws->w[i];
        sum += q * q;
    }
    return sqrt(sum);
}

static int residual_small(const newton_ws *ws, const double *r)
{
    for (size_t i = 0; i < ws->n; i++)
        if (!(fabs(r[i]) <= R_ABS * ws->w[i]))
            return 0;
    return 1;
}

static int step_small(const newton_ws *ws, const double *x, const double *dx)
{
    for (size_t i = 0; i < ws->n; i++)
        if (!(fabs(dx[i]) <= DX_ABS + DX_REL * fabs(x[i])))
            return 0;
    return 1;
}

static int all_finite(const double *v, size_t n)
{
    for (size_t i = 0; i < n; i++)
        if (!isfinite(v[i]))
            return 0;
    return 1;
}

/* Newton step dx = -(dr)^{-1} r, scaled so no node voltage moves more than
 * VSTEP_MAX_V. Destroys ws->dr (LU). */
static newton_result newton_direction(newton_ws *ws)
{
    lapack_int n = (lapack_int)ws->n;
    for (size_t i = 0; i < ws->n; i++)
        ws->dx[i] = -ws->r[i];
    lapack_int info = LAPACKE_dgesv(LAPACK_ROW_MAJOR, n, 1, ws->dr, n, ws->ipiv,
                                    ws->dx, 1);
    if (info > 0) {
        ws->singular_col = (int)info - 1;
        return NEWTON_SINGULAR;
    }
    if (info < 0 || !all_finite(ws->dx, ws->n))
        return NEWTON_FAIL;
    return NEWTON_OK;
}

static double voltage_limit(const newton_ws *ws)
{
    double m = 0.0;
    for (size_t i = 0; i < ws->nv; i++)
        if (fabs(ws->dx[i]) > m)
            m = fabs(ws->dx[i]);
    return m > VSTEP_MAX_V ? VSTEP_MAX_V / m : 1.0;
}

/* Backtracking along dx from x: accepts the first trial whose weighted residual
 * norm is below the current one (or already within tolerance). */
static newton_result line_search(newton_ws *ws, const ru_eval_point *ep, double *x)
{
    double norm0 = wnorm(ws, ws->r);
    double lambda = voltage_limit(ws);
    for (int k = 0; k < MAX_HALVINGS; k++, lambda *= 0.5) {
        for (size_t i = 0; i < ws->n; i++)
            ws->xt[i] = x[i] + lambda * ws->dx[i];
        ru_status st = ru_system_residual(ws->s, ep, ws->xt, ws->rt, NULL);
        if (st != RU_OK || !all_finite(ws->rt, ws->n))
            continue;
        if (wnorm(ws, ws->rt) < norm0 || residual_small(ws, ws->rt)) {
            memcpy(x, ws->xt, ws->n * sizeof *x);
            return NEWTON_OK;
        }
    }
    return NEWTON_FAIL;
}

/* Damped Newton from x at evaluation point ep, at most max_iter iterations. */
static newton_result newton(newton_ws *ws, const ru_eval_point *ep, double *x,
                            int max_iter)
{
    for (int it = 0; it < max_iter; it++) {
        ru_status st = ru_system_residual(ws->s, ep, x, ws->r, ws->dr);
        if (st != RU_OK) {
            ws->err_st = st;
            return NEWTON_ERROR;
        }
        if (!all_finite(ws->r, ws->n) || !all_finite(ws->dr, ws->n * ws->n))
            return NEWTON_FAIL;
        ws->iterations++;
        row_weights(ws, x);
        newton_result nr = newton_direction(ws);
        if (nr != NEWTON_OK)
            return nr;
        if (residual_small(ws, ws->r) && step_small(ws, x, ws->dx)) {
            for (size_t i = 0; i < ws->n; i++)
                x[i] += ws->dx[i];
            return NEWTON_OK;
        }
        nr = line_search(ws, ep, x);
        if (nr != NEWTON_OK)
            return nr;
    }
    return NEWTON_FAIL;
}

/* Source stepping: scale 0 from zeros, then up to 1. *steps counts accepted steps;
 * on failure *scale_reached tells how far it got. */
static newton_result source_stepping(newton_ws *ws, double *x, int *steps,
                                     double *scale_reached)
{
    ru_eval_point ep = {.t_s = 0.0, .dc = 1, .source_scale = 0.0};
    double *xsave = malloc(ws->n * sizeof *xsave);
    newton_result res = NEWTON_FAIL;
    *steps = 0;
    *scale_reached = 0.0;
    if (!xsave)
        return NEWTON_FAIL;
    memset(x, 0, ws->n * sizeof *x);
    res = newton(ws, &ep, x, PLAIN_MAX_ITER);
    double scale = 0.0, ds = DS_FIRST;
    for (int tries = 0; res == NEWTON_OK && scale < 1.0; tries++) {
        if (tries >= MAX_SOURCE_TRIES || ds < DS_MIN) {
            res = NEWTON_FAIL;
            break;
        }
        memcpy(xsave, x, ws->n * sizeof *x);
        ep.source_scale = scale + ds < 1.0 ? scale + ds : 1.0;
        newton_result nr = newton(ws, &ep, x, STEP_MAX_ITER);
        if (nr == NEWTON_ERROR) {
            res = nr;
        } else if (nr == NEWTON_OK) {
            scale = ep.source_scale;
            (*steps)++;
            ds *= 2.0;
        } else {
            memcpy(x, xsave, ws->n * sizeof *x);
            ds *= 0.5;
        }
    }
    *scale_reached = scale;
    free(xsave);
    return res;
}

/* Names the state that makes dr/dx singular: a node with no DC path when the
 * circuit has one, else an all-zero row, else the zero pivot's column. */
static ru_status singular_error(const newton_ws *ws, ru_error *err)
{
    const ru_circuit *c = ru_system_circuit(ws->s);
    int node = 0;
    if (ru_circuit_find_floating_node(c, &node)) {
        int line = 0, col = 0;
        ru_circuit_node_place(c, node, &line, &col);
        return ru_error_set(err, RU_EINPUT, ru_circuit_file(c), line, col,
                            "operating point: node %s has no DC path to ground",
                            ru_circuit_node_name(c, node));
    }
    return ru_error_set(err, RU_EINPUT, ru_circuit_file(c), 0, 0,
                        "operating point: the DC equations are singular at %s (no "
                        "DC path, or a loop of supplies and inductors)",
                        ru_ss_state_label(ws->s, ws->singular_col));
}

/* RU_ENOCONVERGE naming the row with the largest residual at x (scale 1). */
static ru_status noconverge_error(newton_ws *ws, const double *x, double scale,
                                  ru_error *err)
{
    ru_eval_point ep = {.t_s = 0.0, .dc = 1, .source_scale = 1.0};
    const ru_circuit *c = ru_system_circuit(ws->s);
    int worst = 0;
    double big = -1.0;
    if (ru_system_residual(ws->s, &ep, x, ws->r, NULL) == RU_OK) {
        size_t rows = ws->nv ? ws->nv : ws->n;
        for (size_t i = 0; i < rows; i++) {
            double a = isfinite(ws->r[i]) ? fabs(ws->r[i]) : INFINITY;
            if (a > big) {
                big = a;
                worst = (int)i;
            }
        }
    }
    return ru_error_set(err, RU_ENOCONVERGE, ru_circuit_file(c), 0, 0,
                        "operating point did not converge (sources stepped to %.3g of "
                        "their value); largest residual %.3g at %s",
                        scale, big, ru_ss_state_label(ws->s, worst));
}

static double max_residual(const newton_ws *ws, const double *x)
{
    ru_eval_point ep = {.t_s = 0.0, .dc = 1, .source_scale = 1.0};
    if (ru_system_residual(ws->s, &ep, x, ws->r, NULL) != RU_OK)
        return NAN;
    size_t rows = ws->nv ? ws->nv : ws->n;
    double m = 0.0;
    for (size_t i = 0; i < rows; i++)
        m = fabs(ws->r[i]) > m ? fabs(ws->r[i]) : m;
    return m;
}

ru_status ru_oppoint_solve_ex(const ru_system *s, double *x, int use_guess,
                              int force_stepping, ru_oppoint_stats *stats,
                              ru_error *err)
{
    newton_ws ws;
    ru_status st = RU_OK;
    int steps = 0;
    double scale = 1.0;
    ru_eval_point ep = {.t_s = 0.0, .dc = 1, .source_scale = 1.0};
    if (!ws_alloc(&ws, s)) {
        st = ru_error_set(err, RU_ENOMEM, "", 0, 0, "operating point: out of memory");
        goto done;
    }
    if (!use_guess)
        memset(x, 0, ws.n * sizeof *x);
    if (ws.n == 0)
        goto done;
    newton_result res = NEWTON_FAIL;
    if (!force_stepping) {
        res = newton(&ws, &ep, x, PLAIN_MAX_ITER);
        if (res == NEWTON_SINGULAR && ws.iterations == 1) {
            st = singular_error(&ws, err);
            goto done;
        }
    }
    if (res != NEWTON_OK && res != NEWTON_ERROR) {
        int first = ws.iterations;
        res = source_stepping(&ws, x, &steps, &scale);
        if (res == NEWTON_SINGULAR && ws.iterations == first + 1) {
            st = singular_error(&ws, err);
            goto done;
        }
    }
    if (res == NEWTON_ERROR)
        st = ru_error_set(err, ws.err_st, "", 0, 0,
                          "operating point: the system could not be evaluated");
    else if (res != NEWTON_OK)
        st = noconverge_error(&ws, x, scale, err);
done:
    if (stats) {
        stats->iterations = ws.iterations;
        stats->source_steps = steps;
        stats->residual = ws.r ? max_residual(&ws, x) : NAN;
    }
    ws_free(&ws);
    return st;
}

ru_status ru_oppoint_solve(const ru_system *s, double *x, int use_guess,
                           ru_oppoint_stats *stats, ru_error *err)
{
    return ru_oppoint_solve_ex(s, x, use_guess, 0, stats, err);
}
