/* loopsweep.c: the loop-gain handle's common part: creation around a kind's own
 * evaluator (loopgain.c: one amplifier; loopnode.c: a node broken by double
 * injection), evaluation, and the sweep with its zero-phase crossings.
 *
 * The sweep unwraps the phase along the frequencies, brackets every crossing of a
 * multiple of 360 degrees and refines it by bisection in log f; the summary
 * reports the crossing with the largest |L|. */
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
