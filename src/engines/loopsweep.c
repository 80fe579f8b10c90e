/* loopsweep.c: the loop-gain handle's common part: creation around a kind's own
 * evaluator (loopgain.c: one amplifier; loopnode.c: a node broken by double
 * injection), evaluation, and the sweep with its zero-phase crossings.
 *
 * The sweep unwraps the phase along the frequencies, brackets every crossing of a
 * multiple of 360 degrees and refines it by bisection in log f; the summary
 * reports the crossing with the largest |L|. The adaptive sweep refines its grid
 * where the curve turns fast and around that crossing. */
#include "engines/loop_impl.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define RU_PI 3.14159265358979323846
#define BISECT_MAX 80    /* bisection steps on a phase crossing */
#define BISECT_REL 1e-13 /* stop when the bracket is this narrow (relative) */

ru_status ru_loop_wrap(ru_status (*eval)(ru_loop *, double, double complex *, ru_error *),
                       void (*free_ctx)(void *), void *ctx, const char *label,
                       ru_loop **out, ru_error *err)
{
    ru_loop *l = calloc(1, sizeof *l);
    *out = NULL;
    if (!l) {
        free_ctx(ctx);
        return ru_error_set(err, RU_ENOMEM, "", 0, 0, "loop gain: out of memory");
    }
    l->eval = eval;
    l->free_ctx = free_ctx;
    l->ctx = ctx;
    snprintf(l->label, sizeof l->label, "%s", label);
    *out = l;
    return RU_OK;
}

void ru_loop_destroy(ru_loop *l)
{
    if (!l)
        return;
    l->free_ctx(l->ctx);
    free(l);
}

const char *ru_loop_label(const ru_loop *l) { return l ? l->label : ""; }
const char *ru_loop_node(const ru_loop *l) { return l ? l->node : ""; }
const char *ru_loop_load(const ru_loop *l) { return l ? l->load : ""; }

static ru_status eval_checked(ru_loop *l, double f_hz, double complex *L, ru_error *err)
{
    if (!(isfinite(f_hz) && f_hz >= 0))
        return ru_error_set(err, RU_ERANGE, "", 0, 0,
                            "loop gain: frequency must be finite and >= 0 (got %g)", f_hz);
    ru_status st = l->eval(l, f_hz, L, err);
    if (st == RU_OK && !(isfinite(creal(*L)) && isfinite(cimag(*L))))
        st = ru_error_set(err, RU_ENUMERIC, "", 0, 0,
                          "loop gain of %s is not finite at %g Hz", l->label, f_hz);
    return st;
}

ru_status ru_loop_eval(ru_loop *l, double f_hz, double *re, double *im, ru_error *err)
{
    double complex L = 0;
    ru_status st = eval_checked(l, f_hz, &L, err);
    if (re)
        *re = st == RU_OK ? creal(L) : NAN;
    if (im)
        *im = st == RU_OK ? cimag(L) : NAN;
    return st;
}

static double deg_of(double complex z) { return atan2(cimag(z), creal(z)) * 180.0 / RU_PI; }

/* d wrapped into (-180, 180]. */
static double wrap180(double d)
{
    d = fmod(d, 360.0);
    if (d > 180.0)
        d -= 360.0;
    else if (d <= -180.0)
        d += 360.0;
    return d;
}

/* Bisection in log f for the crossing of `target` degrees between f_lo (unwrapped
 * phase p_lo) and f_hi; returns the frequency and |L| there. */
static ru_status refine_crossing(ru_loop *l, double f_lo, double p_lo, double f_hi,
                                 double target, double *f_x, double *gain, ru_error *err)
{
    double side_lo = p_lo - target;
    double complex L = 0;
    for (int k = 0; k < BISECT_MAX && f_hi - f_lo > BISECT_REL * f_hi; k++) {
        double fm = sqrt(f_lo * f_hi);
        ru_status st = eval_checked(l, fm, &L, err);
        if (st != RU_OK)
            return st;
        double pm = p_lo + wrap180(deg_of(L) - p_lo);
        if ((pm - target) * side_lo > 0) {
            f_lo = fm;
            p_lo = pm;
        } else {
            f_hi = fm;
        }
    }
    *f_x = sqrt(f_lo * f_hi);
    ru_status st = eval_checked(l, *f_x, &L, err);
    *gain = cabs(L);
    return st;
}

static void record_crossing(ru_loop_summary *sum, double f_hz, double gain)
{
    if (!sum->found || gain > sum->gain) {
        sum->found = 1;
        sum->crossover_hz = f_hz;
        sum->gain = gain;
        sum->margin_db = 20.0 * log10(gain);
    }
}

/* A sweep point whose phase is exactly a multiple of 360 is a crossing itself. */
static ru_status exact_crossing(ru_loop *l, double f_hz, ru_loop_summary *sum,
                                ru_error *err)
{
    double complex L;
    ru_status st = eval_checked(l, f_hz, &L, err);
    if (st == RU_OK)
        record_crossing(sum, f_hz, cabs(L));
    return st;
}

/* Every multiple of 360 crossed between unwrapped phases p0 (at f0) and p1 (at
 * f1); one that p0 sits on was counted with the previous interval. */
static ru_status crossings_in(ru_loop *l, double f0, double p0, double f1, double p1,
                              ru_loop_summary *sum, ru_error *err)
{
    double lo = p0 < p1 ? p0 : p1, hi = p0 < p1 ? p1 : p0;
    ru_status st = RU_OK;
    for (double k = ceil(lo / 360.0); st == RU_OK && k * 360.0 <= hi; k += 1.0) {
        double target = k * 360.0, fx, gx;
        if (target == p0)
            continue;
        if (target == p1) {
            st = exact_crossing(l, f1, sum, err);
            continue;
        }
        st = refine_crossing(l, f0, p0, f1, target, &fx, &gx, err);
        if (st == RU_OK)
            record_crossing(sum, fx, gx);
    }
    return st;
}

static ru_status sweep_check(double fmin_hz, double fmax_hz, size_t npts, ru_error *err)
{
    if (!(isfinite(fmin_hz) && isfinite(fmax_hz) && fmin_hz > 0 && fmax_hz > fmin_hz))
        return ru_error_set(err, RU_ERANGE, "", 0, 0,
                            "sweep: need 0 < fmin < fmax (got %g, %g)", fmin_hz, fmax_hz);
    if (npts < 2)
        return ru_error_set(err, RU_ERANGE, "", 0, 0,
                            "sweep: need at least 2 points (got %zu)", npts);
    return RU_OK;
}

static double log_point(double fmin, double fmax, size_t k, size_t npts)
{
    if (k + 1 == npts)
        return fmax;
    return fmin * pow(fmax / fmin, (double)k / (double)(npts - 1));
}

ru_status ru_loop_sweep(ru_loop *l, double fmin_hz, double fmax_hz, size_t npts,
                        double *f_hz, double *mag, double *phase_deg,
                        ru_loop_summary *sum, ru_error *err)
{
    ru_loop_summary res = {0, NAN, NAN, NAN};
    double f_prev = 0.0, p_prev = 0.0;
    ru_status st = sweep_check(fmin_hz, fmax_hz, npts, err);
    for (size_t k = 0; st == RU_OK && k < npts; k++) {
        double f = log_point(fmin_hz, fmax_hz, k, npts);
        double complex L;
        st = eval_checked(l, f, &L, err);
        if (st != RU_OK)
            break;
        double p = k == 0 ? deg_of(L) : p_prev + wrap180(deg_of(L) - p_prev);
        if (f_hz)
            f_hz[k] = f;
        if (mag)
            mag[k] = cabs(L);
        if (phase_deg)
            phase_deg[k] = p;
        if (k == 0 && fmod(p, 360.0) == 0.0)
            st = exact_crossing(l, f, &res, err);
        else if (k > 0)
            st = crossings_in(l, f_prev, p_prev, f, p, &res, err);
        f_prev = f;
        p_prev = p;
    }
    if (sum)
        *sum = res;
    return st;
}

/* ---- the adaptive sweep ---- */

/* Refinement thresholds: a step between neighbours above REFINE_DB or REFINE_DEG
 * gets its geometric midpoint (the response command's rule, cli/response.c);
 * within NEAR_SPAN of the crossing the finer NEAR_DB and NEAR_DEG apply, so the
 * phase slope there (which sets the loaded Q) is drawn and read smoothly. */
#define REFINE_DB 1.0
#define REFINE_DEG 10.0
#define NEAR_DB 0.1
#define NEAR_DEG 1.0
#define NEAR_SPAN 1.05
#define REFINE_PASSES 40
#define REFINE_MIN_STEP 1e-9 /* neighbours closer than this (relative) stay */

typedef struct grid {
    size_t n, cap;
    double *f;          /* Hz, ascending */
    double complex *L;  /* L there */
    double *score;      /* scratch: roughness of each step */
    double f_near;      /* the crossing (NAN before it is known) */
} grid;

/* How much the step from point i to i + 1 exceeds its thresholds (> 1: rough). */
static double roughness(const grid *g, size_t i)
{
    if (!(g->f[i + 1] > g->f[i] * (1.0 + REFINE_MIN_STEP)))
        return 0.0;
    double a = cabs(g->L[i]), b = cabs(g->L[i + 1]);
    double ddb = a > 0 && b > 0 ? fabs(20.0 * log10(b / a)) : INFINITY;
    double dp = fabs(wrap180(deg_of(g->L[i + 1]) - deg_of(g->L[i])));
    int near = isfinite(g->f_near) && g->f[i + 1] > g->f_near / NEAR_SPAN &&
               g->f[i] < g->f_near * NEAR_SPAN;
    double r1 = ddb / (near ? NEAR_DB : REFINE_DB), r2 = dp / (near ? NEAR_DEG : REFINE_DEG);
    return r1 > r2 ? r1 : r2;
}

static int cmp_desc(const void *pa, const void *pb)
{
    double a = *(const double *)pa, b = *(const double *)pb;
    return (a < b) - (a > b);
}

/* One pass: midpoints into every rough step, or into the roughest ones that fit.
 * Returns how many were added (0: smooth or full). */
static ru_status refine_pass(ru_loop *l, grid *g, size_t *added, ru_error *err)
{
    size_t add = 0, room = g->cap - g->n;
    double cut = 1.0;
    *added = 0;
    for (size_t i = 0; i + 1 < g->n; i++)
        add += (g->score[i] = roughness(g, i)) > 1.0;
    if (add == 0 || room == 0)
        return RU_OK;
    if (add > room) { /* keep the roughest `room` steps */
        double *tmp = malloc((g->n - 1) * sizeof *tmp);
        if (!tmp)
            return ru_error_set(err, RU_ENOMEM, "", 0, 0, "loop gain: out of memory");
        memcpy(tmp, g->score, (g->n - 1) * sizeof *tmp);
        qsort(tmp, g->n - 1, sizeof *tmp, cmp_desc);
        cut = tmp[room - 1];
        free(tmp);
        add = 0;
        for (size_t i = 0; i + 1 < g->n; i++)
            if (g->score[i] > 1.0 && g->score[i] >= cut && add < room)
                add++;
            else
                g->score[i] = 0.0;
    }
    size_t j = g->n + add; /* from the end, midpoints where a step is rough */
    for (size_t i = g->n; i-- > 0;) {
        if (i + 1 < g->n && g->score[i] > 1.0) {
            j--;
            g->f[j] = sqrt(g->f[i] * g->f[i + 1]);
            g->L[j] = NAN;
        }
        j--;
        g->f[j] = g->f[i];
        g->L[j] = g->L[i];
    }
    g->n += add;
    for (size_t i = 0; i < g->n; i++)
        if (isnan(creal(g->L[i]))) {
            ru_status st = eval_checked(l, g->f[i], &g->L[i], err);
            if (st != RU_OK)
                return st;
        }
    *added = add;
    return RU_OK;
}

static ru_status refine_all(ru_loop *l, grid *g, ru_error *err)
{
    size_t added = 1;
    ru_status st = RU_OK;
    for (int pass = 0; st == RU_OK && added > 0 && pass < REFINE_PASSES; pass++)
        st = refine_pass(l, g, &added, err);
    return st;
}

/* Puts f (with L) among the points in order, unless it is there already. */
static void insert_point(grid *g, double f, double complex L)
{
    size_t i = 0;
    while (i < g->n && g->f[i] < f)
        i++;
    if (g->n == g->cap || (i < g->n && g->f[i] == f))
        return;
    memmove(g->f + i + 1, g->f + i, (g->n - i) * sizeof *g->f);
    memmove(g->L + i + 1, g->L + i, (g->n - i) * sizeof *g->L);
    g->f[i] = f;
    g->L[i] = L;
    g->n++;
}

/* The zero-phase crossings along the grid (phases unwrapped along it) into sum. */
static ru_status grid_crossings(ru_loop *l, const grid *g, ru_loop_summary *sum,
                                ru_error *err)
{
    double p_prev = deg_of(g->L[0]);
    ru_status st = RU_OK;
    if (fmod(p_prev, 360.0) == 0.0)
        st = exact_crossing(l, g->f[0], sum, err);
    for (size_t k = 1; st == RU_OK && k < g->n; k++) {
        double p = p_prev + wrap180(deg_of(g->L[k]) - p_prev);
        st = crossings_in(l, g->f[k - 1], p_prev, g->f[k], p, sum, err);
        p_prev = p;
    }
    return st;
}

ru_status ru_loop_sweep_adaptive(ru_loop *l, double fmin_hz, double fmax_hz,
                                 size_t nbase, size_t max_pts, double *f_hz, double *mag,
                                 double *phase_deg, size_t *npts, ru_loop_summary *sum,
                                 ru_error *err)
{
    ru_loop_summary res = {0, NAN, NAN, NAN};
    grid g = {0, max_pts, NULL, NULL, NULL, NAN};
    *npts = 0;
    ru_status st = sweep_check(fmin_hz, fmax_hz, nbase, err);
    if (st == RU_OK && max_pts < nbase + 1)
        st = ru_error_set(err, RU_ERANGE, "", 0, 0,
                          "sweep: room for %zu points, the grid alone takes %zu", max_pts,
                          nbase + 1);
    if (st == RU_OK) {
        g.f = malloc(max_pts * sizeof *g.f);
        g.L = malloc(max_pts * sizeof *g.L);
        g.score = malloc(max_pts * sizeof *g.score);
        if (!g.f || !g.L || !g.score)
            st = ru_error_set(err, RU_ENOMEM, "", 0, 0, "loop gain: out of memory");
    }
    g.cap = max_pts - 1; /* room for the crossing */
    for (size_t k = 0; st == RU_OK && k < nbase; k++) {
        g.f[k] = log_point(fmin_hz, fmax_hz, k, nbase);
        st = eval_checked(l, g.f[k], &g.L[k], err);
        g.n = k + 1;
    }
    if (st == RU_OK)
        st = refine_all(l, &g, err);
    if (st == RU_OK)
        st = grid_crossings(l, &g, &res, err);
    if (st == RU_OK && res.found) {
        double complex Lx;
        g.cap = max_pts;
        st = eval_checked(l, res.crossover_hz, &Lx, err);
        if (st == RU_OK)
            insert_point(&g, res.crossover_hz, Lx);
        g.f_near = res.crossover_hz;
        if (st == RU_OK)
            st = refine_all(l, &g, err);
    }
    double p = 0.0;
    for (size_t k = 0; st == RU_OK && k < g.n; k++) {
        p = k == 0 ? deg_of(g.L[0]) : p + wrap180(deg_of(g.L[k]) - p);
        if (f_hz)
            f_hz[k] = g.f[k];
        if (mag)
            mag[k] = cabs(g.L[k]);
        if (phase_deg)
            phase_deg[k] = p;
    }
    if (st == RU_OK)
        *npts = g.n;
    if (sum)
        *sum = res;
    free(g.f);
    free(g.L);
    free(g.score);
    return st;
}
