/* wav_resample.c: band-limited resampling for the WAV export (see wav_impl.h).
 *
 * Design (Kaiser's window formulas, as in Oppenheim & Schafer, Discrete-Time
 * Signal Processing, section on the Kaiser window method): for a stopband
 * attenuation A = 110 dB, beta = 0.1102 (A - 8.7) = 11.16 and a transition width
 * of (A - 7.95) / (14.36 N) of the rate for N taps. With the sinc's zero crossings
 * at multiples of 1/(2 fc) and RU_WAV_ZERO crossings on each side, N = 2 * 40 /
 * 0.9167 = 87 taps at the lower rate: transition 0.082 x rate, centred on
 * fc = 0.4583 x rate, so the stopband starts at 0.4996 x rate (below Nyquist).
 *
 * The kernel is tabulated at RU_WAV_RES points per zero crossing and read with
 * linear interpolation: error below (pi / RES)^2 / 8 = 1.2e-6 of the peak weight.
 * Invariant: the table is local to one call (no global state). */
#include "output/wav_impl.h"

#include <math.h>
#include <stdlib.h>

#define RU_WAV_PI 3.14159265358979323846
#define RU_WAV_ZERO 40       /* sinc zero crossings on each side of the centre */
#define RU_WAV_RES 1024      /* table points per zero crossing */
#define RU_WAV_BETA 11.16    /* Kaiser beta for 110 dB */
#define RU_WAV_CUT 0.458333  /* fc / low rate: (0.5 - 1/12 / 2) */
#define RU_WAV_PASS 0.416667 /* passband edge / low rate: (0.5 - 1/12) */

/* Modified Bessel function of the first kind, order 0 (power series). */
static double bessel_i0(double x)
{
    double sum = 1.0, term = 1.0, q = 0.25 * x * x;
    for (int k = 1; k < 200; k++) {
        term *= q / ((double)k * (double)k);
        sum += term;
        if (term < 1e-17 * sum)
            break;
    }
    return sum;
}

void ru_wav_band_for(double dx_s, double rate_hz, ru_wav_band *b)
{
    double rin = 1.0 / dx_s;
    b->low_rate_hz = rin < rate_hz ? rin : rate_hz;
    b->cutoff_hz = RU_WAV_CUT * b->low_rate_hz;
    b->pass_hz = RU_WAV_PASS * b->low_rate_hz;
    b->stop_hz = 0.5 * b->low_rate_hz;
    b->half_s = RU_WAV_ZERO / (2.0 * b->cutoff_hz);
}

/* K(z) = sinc(z) * kaiser(z / ZERO) for z = i / RES, i = 0 .. ZERO*RES + 1. */
static double *kernel_table(void)
{
    size_t n = (size_t)RU_WAV_ZERO * RU_WAV_RES + 2;
    double *t = malloc(n * sizeof *t);
    if (!t)
        return NULL;
    double i0b = bessel_i0(RU_WAV_BETA);
    for (size_t i = 0; i < n; i++) {
        double z = (double)i / RU_WAV_RES, r = z / RU_WAV_ZERO;
        double s = i == 0 ? 1.0 : sin(RU_WAV_PI * z) / (RU_WAV_PI * z);
        t[i] = r >= 1.0 ? 0.0 : s * bessel_i0(RU_WAV_BETA * sqrt(1.0 - r * r)) / i0b;
    }
    return t;
}

/* Even extension about the first and the last sample: x[-i] = x[i] and
 * x[last + i] = x[last - i] (clamped for records shorter than the kernel). */
static size_t mirror(long i, long last)
{
    if (i < 0)
        i = -i;
    if (i > last)
        i = 2 * last - i;
    return (size_t)(i < 0 ? 0 : (i > last ? last : i));
}

/* One output sample at input-index coordinate u (z = |u - i| * step). */
static double one_output(const double *x, size_t nx, const double *tab, double u,
                         double wi, double step)
{
    long i0 = (long)ceil(u - wi), i1 = (long)floor(u + wi), last = (long)nx - 1;
    double acc = 0.0, wsum = 0.0;
    for (long i = i0; i <= i1; i++) {
        double p = fabs(u - (double)i) * step * RU_WAV_RES;
        size_t m = (size_t)p;
        if (m >= (size_t)RU_WAV_ZERO * RU_WAV_RES)
            continue;
        double f = p - (double)m, k = tab[m] + f * (tab[m + 1] - tab[m]);
        acc += k * x[mirror(i, last)];
        wsum += k;
    }
    return wsum != 0.0 ? acc / wsum : 0.0;
}

ru_status ru_wav_resample(const double *x, size_t nx, double dx_s, double rate_hz,
                          double *y, size_t ny)
{
    ru_wav_band b;
    ru_wav_band_for(dx_s, rate_hz, &b);
    double *tab = kernel_table();
    if (!tab)
        return RU_ENOMEM;
    double wi = b.half_s / dx_s;             /* half-width in input samples */
    double step = 2.0 * b.cutoff_hz * dx_s;  /* zero crossings per input sample */
    double per_out = 1.0 / (rate_hz * dx_s); /* input samples per output sample */
    for (size_t j = 0; j < ny; j++)
        y[j] = one_output(x, nx, tab, (double)j * per_out, wi, step);
    free(tab);
    return RU_OK;
}
