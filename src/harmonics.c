/* harmonics.c: harmonic amplitudes by FFT over whole periods, and the resampler
 * that puts a uniformly sampled stretch onto exactly K whole periods.
 *
 * FFTW's planner keeps global state of its own and is not thread safe (plan creation
 * and destruction from parallel threads crashed in our trials, see
 * shared/notes/LIBRARIES.md), while fftw_execute is. So plan creation and destruction
 * go under `planner_lock`, the one static object of the library: it guards FFTW's
 * planner, not any state of ours, and holds no data. Plans use FFTW_ESTIMATE, which
 * does not touch the arrays. */
#include "measure_impl.h"

#include <fftw3.h>
#include <math.h>
#include <pthread.h>
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
