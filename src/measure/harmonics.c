/* harmonics.c: figures from the sampled window at the end of the run (crossings of
 * the mean, DC level over whole periods, frequency), harmonic amplitudes by FFT over
 * whole periods, and the resampler that puts the window onto exactly K periods.
 * Frequency = (upward crossings - 1)/(time from first to last), crossings found
 * with hysteresis (5 % of the window's peak-to-peak) and interpolated linearly.
 * Resampling is 8-point Lagrange: its error on a sine of w rad/sample is below
 * w^8 * 43.1/8! (1e-11 relative at 64 samples/period, 8e-8 for the 3rd harmonic
 * at 61.7), well under what cubic interpolation gives (~1e-6 on the fundamental).
 *
 * FFTW's planner keeps global state of its own and is not thread safe (plan creation
 * and destruction from parallel threads crashed in our trials, see
 * shared/notes/LIBRARIES.md), while fftw_execute is. So plan creation and destruction
 * go under `planner_lock`, the one static object of the library: it guards FFTW's
 * planner, not any state of ours, and holds no data. Plans use FFTW_ESTIMATE, which
 * does not touch the arrays. */
#include "measure/measure_impl.h"

#include <fftw3.h>
#include <math.h>
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static pthread_mutex_t planner_lock = PTHREAD_MUTEX_INITIALIZER;

#define LAGRANGE_POINTS 8

static ru_status check_args(const double *x, size_t n, int periods, int nharm,
                            const double *amp)
{
    if (!x || !amp || n < 4 || periods < 1 || nharm < 1)
        return RU_EINPUT;
    /* harmonic nharm must sit strictly below Nyquist (bin n/2) */
    if ((size_t)periods * (size_t)nharm * 2 >= n)
        return RU_ERANGE;
    return RU_OK;
}

ru_status ru_harmonics(const double *x, size_t n, int periods, int nharm, double *amp,
                       double *thd_percent)
{
    ru_status st = check_args(x, n, periods, nharm, amp);
    if (st != RU_OK)
        return st;
    double *in = fftw_alloc_real(n);
    fftw_complex *out = fftw_alloc_complex(n / 2 + 1);
    fftw_plan plan = NULL;
    if (in && out) {
        pthread_mutex_lock(&planner_lock);
        plan = fftw_plan_dft_r2c_1d((int)n, in, out, FFTW_ESTIMATE);
        pthread_mutex_unlock(&planner_lock);
    }
    if (!plan) {
        st = RU_ENOMEM;
        goto done;
    }
    memcpy(in, x, n * sizeof *in);
    fftw_execute(plan);
    double sum2 = 0.0;
    for (int k = 1; k <= nharm; k++) {
        size_t b = (size_t)k * (size_t)periods;
        amp[k - 1] = 2.0 * hypot(out[b][0], out[b][1]) / (double)n;
        if (k >= 2)
            sum2 += amp[k - 1] * amp[k - 1];
    }
    if (thd_percent)
        *thd_percent = amp[0] > 0.0 ? 100.0 * sqrt(sum2) / amp[0] : NAN;
done:
    if (plan) {
        pthread_mutex_lock(&planner_lock);
        fftw_destroy_plan(plan);
        pthread_mutex_unlock(&planner_lock);
    }
    fftw_free(in);
    fftw_free(out);
    return st;
}

/* Weights of the p-point Lagrange interpolator at position u (in samples, nodes at
 * 0..p-1). Products of (u - j) only, so a node position is exact. */
static void lagrange_weights(int p, double u, double *w)
{
    for (int k = 0; k < p; k++) {
        double num = 1.0, den = 1.0;
        for (int j = 0; j < p; j++) {
            if (j == k)
                continue;
            num *= u - (double)j;
            den *= (double)(k - j);
        }
        w[k] = num / den;
    }
}

void ru_resample(const double *x, size_t n, double t0_s, double dt_s, double ts_s,
                 double span_s, double *out, size_t nout)
{
    int p = n < LAGRANGE_POINTS ? (int)n : LAGRANGE_POINTS;
    double w[LAGRANGE_POINTS];
    for (size_t j = 0; j < nout; j++) {
        double u = (ts_s + span_s * (double)j / (double)nout - t0_s) / dt_s;
        /* stencil centred on u, shifted inwards at the ends of x */
        long i0 = (long)floor(u) - (p / 2 - 1);
        if (i0 < 0)
            i0 = 0;
        if (i0 > (long)n - p)
            i0 = (long)n - p;
        lagrange_weights(p, u - (double)i0, w);
        double s = 0.0;
        for (int k = 0; k < p; k++)
            s += w[k] * x[i0 + k];
        out[j] = s;
    }
}

/* ---- figures from the sample window ------------------------------------------ */

/* Upward crossings of level_v inside the window, linear between samples; a crossing
 * counts only after the signal has been below level_v - hyst_v since the last one.
 * tc needs room for (n - i_w)/2 + 1 entries. */
static size_t crossings(const ru_window *w, double level_v, double hyst_v, double *tc)
{
    size_t nc = 0;
    int armed = 0;
    for (size_t i = w->i_w + 1; i < w->n; i++) {
        double a = w->x[i - 1], b = w->x[i];
        if (a < level_v - hyst_v)
            armed = 1;
        if (armed && a < level_v && b >= level_v) {
            double f = (level_v - a) / (b - a);
            tc[nc++] = w->t0_s + w->dt_s * ((double)(i - 1) + f);
            armed = 0;
        }
    }
    return nc;
}

/* Value of the linear interpolant at t_s (clamped to the samples). */
static double lin_at(const ru_window *w, double t_s)
{
    double u = (t_s - w->t0_s) / w->dt_s;
    if (u <= 0.0)
        return w->x[0];
    size_t i = (size_t)u;
    if (i + 1 >= w->n)
        return w->x[w->n - 1];
    double f = u - (double)i;
    return w->x[i] + f * (w->x[i + 1] - w->x[i]);
}

/* Mean of the linear interpolant over [ta_s, tb_s] (trapezoid rule, exact ends). */
static double mean_between(const ru_window *w, double ta_s, double tb_s)
{
    double ua = (ta_s - w->t0_s) / w->dt_s, ub = (tb_s - w->t0_s) / w->dt_s;
    size_t ia = (size_t)ceil(ua), ib = (size_t)floor(ub);
    if (ib >= w->n)
        ib = w->n - 1;
    if (ia > ib)
        return 0.5 * (lin_at(w, ta_s) + lin_at(w, tb_s));
    double s = 0.5 * ((double)ia - ua) * (lin_at(w, ta_s) + w->x[ia]);
    for (size_t i = ia; i < ib; i++)
        s += 0.5 * (w->x[i] + w->x[i + 1]);
    s += 0.5 * (ub - (double)ib) * (w->x[ib] + lin_at(w, tb_s));
    return s / (ub - ua);
}

/* Resamples the last K whole periods (ending at the last crossing) and fills THD and
 * harmonics. */
static ru_status spectrum(const ru_window *w, const double *tc, size_t nc, double f_hz,
                          ru_measure_result *r)
{
    size_t periods = nc - 1;
    if (periods < RU_THD_MIN_PERIODS) {
        snprintf(r->thd_note, RU_NOTE_MAX,
                 "only %zu whole periods in the last 10 %% of the run (need %d); run "
                 "longer",
                 periods, RU_THD_MIN_PERIODS);
        return RU_OK;
    }
    int K = periods < RU_THD_MAX_PERIODS ? (int)periods : RU_THD_MAX_PERIODS;
    double spp = 1.0 / (f_hz * w->dt_s);
    size_t M = 32;
    while ((double)M < spp && M < 4096)
        M *= 2;
    size_t N = (size_t)K * M;
    double *y = malloc(N * sizeof *y);
    if (!y)
        return RU_ENOMEM;
    double span_s = (double)K / f_hz;
    ru_resample(w->x, w->n, w->t0_s, w->dt_s, tc[nc - 1] - span_s, span_s, y, N);
    double amp[RU_HARMONICS], thd = NAN;
    ru_status st = ru_harmonics(y, N, K, RU_HARMONICS, amp, &thd);
    free(y);
    if (st != RU_OK)
        return st;
    r->thd_percent = thd;
    r->fundamental_v = amp[0];
    for (int k = 2; k <= RU_HARMONICS; k++) {
        double rel = amp[k - 1] / amp[0];
        /* floor at -300 dBc so an exactly zero harmonic stays a finite number */
        r->harmonics_dbc[k - 2] = rel > 1e-15 ? 20.0 * log10(rel) : -300.0;
    }
    return RU_OK;
}

ru_status ru_window_figures(const ru_window *wp, ru_measure_result *r)
{
    const ru_window w = *wp;
    ru_status st = RU_OK;
    double *tc = NULL;
    size_t nw = w.n - w.i_w;
    if (nw < 8) {
        snprintf(r->thd_note, RU_NOTE_MAX, "too few samples in the last 10 %% of the run");
        goto done;
    }
    double lo = w.x[w.i_w], hi = lo, s = 0.0;
    for (size_t i = w.i_w; i < w.n; i++) {
        s += w.x[i];
        lo = w.x[i] < lo ? w.x[i] : lo;
        hi = w.x[i] > hi ? w.x[i] : hi;
    }
    double dc = s / (double)nw, hyst = 0.05 * (hi - lo);
    r->dc_level_v = dc;
    tc = malloc((nw / 2 + 2) * sizeof *tc);
    if (!tc) {
        st = RU_ENOMEM;
        goto done;
    }
    size_t nc = 0;
    for (int pass = 0; pass < 2; pass++) { /* mean over whole periods, then again */
        nc = crossings(&w, dc, hyst, tc);
        if (nc < 2)
            break;
        dc = mean_between(&w, tc[0], tc[nc - 1]);
    }
    if (nc < 2) {
        snprintf(r->thd_note, RU_NOTE_MAX,
                 "no whole period in the last 10 %% of the run; run longer");
        goto done;
    }
    nc = crossings(&w, dc, hyst, tc);
    r->dc_level_v = dc;
    if (nc >= 2) {
        r->frequency_hz = (double)(nc - 1) / (tc[nc - 1] - tc[0]);
        st = spectrum(&w, tc, nc, r->frequency_hz, r);
    }
done:
    free(tc);
    return st;
}
