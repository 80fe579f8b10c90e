/* test_harmonics.c: ru_harmonics (FFT over whole periods), the 8-point Lagrange
 * resampler, and THD through the full ru_measure path.
 * References: the DFT definition summed directly (O(N^2)), the identity
 * sin^3 x = (3 sin x - sin 3x)/4, and the Lagrange interpolation error bound. */
#include "ru_test.h"

#include "measure/measure_impl.h"
#include "ringup/measure.h"

#include <pthread.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

/* Deterministic uniform numbers in [0, 1) (64-bit LCG, Knuth's MMIX constants,
 * from memory; any fixed generator does here). */
static double lcg01(uint64_t *s)
{
    *s = *s * 6364136223846793005ULL + 1442695040888963407ULL;
    return (double)(*s >> 11) / 9007199254740992.0;
}

/* Amplitude 2|X_b|/N of DFT bin b, summed directly from the definition
 * X_b = sum_n x_n exp(-2 pi i b n / N), with exact integer phase reduction. */
static double dft_amp(const double *x, size_t n, size_t b)
{
    long double re = 0.0L, im = 0.0L;
    for (size_t i = 0; i < n; i++) {
        size_t ph = (b * i) % n;
        long double a = 2.0L * 3.14159265358979323846264338327950288L * (long double)ph /
                        (long double)n;
        re += (long double)x[i] * cosl(a);
        im -= (long double)x[i] * sinl(a);
    }
    return (double)(2.0L * sqrtl(re * re + im * im) / (long double)n);
}

/* Random multi-harmonic signal plus broadband pseudo-noise, N not a power of 2. */
static void test_against_direct_dft(void **state)
{
    (void)state;
    const size_t n = 1500;
    const int periods = 7, nharm = RU_HARMONICS;
    double *x = calloc(n, sizeof *x);
    assert_non_null(x);
    uint64_t s = 99;
    for (int k = 1; k <= 12; k++) { /* harmonics 11, 12 too: must not leak in */
        double a = (k == 1 ? 1.0 : 0.01 + 0.2 * lcg01(&s)), ph = 6.283 * lcg01(&s);
        for (size_t i = 0; i < n; i++)
            x[i] += a * cos(2.0 * M_PI * k * periods * (double)i / (double)n + ph);
    }
    for (size_t i = 0; i < n; i++)
        x[i] += 0.3 + 0.05 * (lcg01(&s) - 0.5);
    double amp[RU_HARMONICS], thd = NAN;
    assert_int_equal(ru_harmonics(x, n, periods, nharm, amp, &thd), RU_OK);
    double sum2 = 0.0, ref[RU_HARMONICS];
    for (int k = 1; k <= nharm; k++) {
        ref[k - 1] = dft_amp(x, n, (size_t)(k * periods));
        /* 1e-9 relative: FFT rounding is ~1e-15 * log N; direct sum in long
         * double. The tolerance leaves room and still catches a wrong bin, scale or
         * leakage (which would be >= 1e-4 here). */
        RU_ASSERT_REL(amp[k - 1], ref[k - 1], 1e-9);
        if (k >= 2)
            sum2 += ref[k - 1] * ref[k - 1];
    }
    RU_ASSERT_REL(thd, 100.0 * sqrt(sum2) / ref[0], 1e-9);
    free(x);
}

/* v = A sin x + b (A sin x)^3 = (A + 3 b A^3/4) sin x - (b A^3/4) sin 3x, so
 * HD3 = (b A^2/4)/(1 + 3 b A^2/4) and THD = HD3 (no other harmonic). */
static void sin3_expected(double A, double b, double *hd3)
{
    double a1 = A + 0.75 * b * A * A * A, a3 = 0.25 * b * A * A * A;
    *hd3 = a3 / a1;
}

static void test_sin3_exact_periods(void **state)
{
    (void)state;
    const double A = 0.9, b = 0.35;
    const size_t n = 4096;
    const int periods = 16;
    double *x = malloc(n * sizeof *x);
    assert_non_null(x);
    for (size_t i = 0; i < n; i++) {
        double s = A * sin(2.0 * M_PI * periods * (double)i / (double)n + 0.3);
        x[i] = s + b * s * s * s - 0.1;
    }
    double amp[RU_HARMONICS], thd = NAN, hd3;
    assert_int_equal(ru_harmonics(x, n, periods, RU_HARMONICS, amp, &thd), RU_OK);
    sin3_expected(A, b, &hd3);
    /* Reference: sin^3 identity. Sampled on exact whole periods the DFT is exact
     * but for rounding (~1e-15); tolerance 1e-12. */
    RU_ASSERT_REL(amp[0], A + 0.75 * b * A * A * A, 1e-12);
    RU_ASSERT_REL(amp[2] / amp[0], hd3, 1e-12);
    RU_ASSERT_REL(thd, 100.0 * hd3, 1e-12);
    RU_ASSERT_NEAR(amp[1], 0.0, 1e-13);
    RU_ASSERT_NEAR(amp[4], 0.0, 1e-13);
    free(x);
}

/* The same waveform through ru_measure: steady amplitude after a start-up, frequency
 * not a whole number of samples per period, so the settled window is resampled onto
 * whole periods. Error budget for HD3 = A3/A1:
 *  - resampler: 8-point Lagrange remainder for the 3rd harmonic at 3 * 2 pi / 61.7
 *    rad per sample is <= (0.305)^8 * 43.1/8! ~ 8e-8 of A3 (standard bound);
 *  - period: a relative error eps of the period from crossings leaks the
 *    fundamental into bin 3K with about A1 * eps/2 (Dirichlet kernel, first order),
 *    i.e. eps/2 * A1/A3 ~ 10 eps relative on HD3; linear crossing interpolation
 *    leaves eps <= 2.4e-6 / periods ~ 1e-7 (see test_measure.c), so <= 1e-6.
 * Tolerance on HD3 and THD: 1e-6 relative (3e-7 observed). */
static void test_sin3_through_measure(void **state)
{
    (void)state;
    const double A = 0.9, b = 0.35, f = 1234.5, dt = 1.0 / (f * 61.7), stop = 0.2;
    ru_measure_cfg cfg;
    ru_measure_cfg_default(&cfg, stop, dt);
    ru_measure *m = NULL;
    assert_int_equal(ru_measure_create(&cfg, &m), RU_OK);
    size_t n = (size_t)(stop / dt);
    for (size_t i = 0; i <= n; i++) {
        double t = (double)i * dt;
        double env = A / sqrt(1.0 + (1e4 - 1.0) * exp(-2.0 * 300.0 * t)); /* A at ~30 ms */
        double s = env * sin(2.0 * M_PI * f * t);
        assert_int_equal(ru_measure_push(m, t, s + b * s * s * s + 1.2), RU_OK);
    }
    ru_measure_result r;
    assert_int_equal(ru_measure_finish(m, &r), RU_OK);
    double hd3;
    sin3_expected(A, b, &hd3);
    assert_int_equal(r.settled, 1); /* whether it is a start is the verdict's call */
    RU_ASSERT_REL(pow(10.0, r.harmonics_dbc[1] / 20.0), hd3, 1e-6);
    RU_ASSERT_REL(r.thd_percent, 100.0 * hd3, 1e-6);
    /* even harmonics are absent: below -140 dBc (1e-7, same error budget) */
    assert_true(r.harmonics_dbc[0] < -140.0);
    assert_true(r.harmonics_dbc[2] < -140.0);
    RU_ASSERT_REL(r.frequency_hz, f, 1e-6);
    RU_ASSERT_NEAR(r.dc_level_v, 1.2, 1e-6);
    ru_measure_destroy(m);
}

/* Resampler on a sine of w rad/sample: the 8-point Lagrange remainder is bounded by
 * w^8 max|prod_{j=0..7}(u - j)| / 8! with the product <= 43.1 on the central
 * interval (u in [3, 4]); standard interpolation error bound. */
static void test_resample_bound(void **state)
{
    (void)state;
    const size_t n = 400;
    const double w = 2.0 * M_PI / 20.0, t0 = 0.25, dt = 1e-3;
    double x[400], y[300];
    for (size_t i = 0; i < n; i++)
        x[i] = sin(w * (double)i + 0.4);
    /* 300 points over [t0 + 10 dt, t0 + 380 dt): stencils stay central */
    const double ts = t0 + 10.0 * dt, span = 370.0 * dt;
    ru_resample(x, n, t0, dt, ts, span, y, 300);
    double bound = pow(w, 8) * 43.1 / 40320.0, worst = 0.0;
    for (size_t j = 0; j < 300; j++) {
        double u = (ts + span * (double)j / 300.0 - t0) / dt;
        double err = fabs(y[j] - sin(w * u + 0.4));
        worst = err > worst ? err : worst;
    }
    assert_true(worst <= bound);
    assert_true(worst > 0.0); /* points fall between samples: not a copy */
    /* at a sample position the interpolator returns the sample itself (up to the
     * rounding of (t - t0)/dt, ~1e-13 samples times a slope < 1) */
    ru_resample(x, n, t0, dt, t0 + 17.0 * dt, dt, y, 1);
    RU_ASSERT_NEAR(y[0], x[17], 1e-12);
}

static void test_bad_args(void **state)
{
    (void)state;
    double x[64] = {0}, amp[RU_HARMONICS];
    assert_int_equal(ru_harmonics(NULL, 64, 2, 10, amp, NULL), RU_EINPUT);
    assert_int_equal(ru_harmonics(x, 64, 0, 10, amp, NULL), RU_EINPUT);
    /* harmonic 10 of 4 periods is bin 40 >= 64/2: beyond Nyquist */
    assert_int_equal(ru_harmonics(x, 64, 4, 10, amp, NULL), RU_ERANGE);
    double thd = 0.0;
    assert_int_equal(ru_harmonics(x, 64, 3, 10, amp, &thd), RU_OK);
    assert_true(isnan(thd)); /* no fundamental: THD undefined */
}

/* Plans made and destroyed from several threads at once: FFTW's planner is shared
 * and needs the lock (without it such runs crashed, shared/notes/LIBRARIES.md).
 * Each thread checks its own result too. */
typedef struct job {
    size_t n;   /* samples */
    int ok;     /* 1: every iteration gave the expected fundamental */
} job;

static void *worker(void *arg)
{
    job *j = arg;
    double *x = malloc(j->n * sizeof *x), amp[RU_HARMONICS];
    j->ok = x != NULL;
    for (int it = 0; it < 50 && j->ok; it++) {
        for (size_t i = 0; i < j->n; i++)
            x[i] = 0.5 * cos(2.0 * M_PI * 3.0 * (double)i / (double)j->n);
        double thd;
        if (ru_harmonics(x, j->n, 3, RU_HARMONICS, amp, &thd) != RU_OK ||
            fabs(amp[0] - 0.5) > 1e-12)
            j->ok = 0;
    }
    free(x);
    return NULL;
}

static void test_parallel_plans(void **state)
{
    (void)state;
    pthread_t th[4];
    job jobs[4];
    for (int i = 0; i < 4; i++) {
        jobs[i].n = 300 + 64 * (size_t)i; /* different sizes: different plans */
        assert_int_equal(pthread_create(&th[i], NULL, worker, &jobs[i]), 0);
    }
    for (int i = 0; i < 4; i++) {
        pthread_join(th[i], NULL);
        assert_int_equal(jobs[i].ok, 1);
    }
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_against_direct_dft),
        cmocka_unit_test(test_sin3_exact_periods),
        cmocka_unit_test(test_sin3_through_measure),
        cmocka_unit_test(test_resample_bound),
        cmocka_unit_test(test_bad_args),
        cmocka_unit_test(test_parallel_plans),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
