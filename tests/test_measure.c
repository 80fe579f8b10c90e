/* test_measure.c: envelope, start-up, growth, settling, frequency and DC figures of
 * ru_measure on synthetic waveforms whose figures are known in closed form.
 *
 * Main reference: the averaged van der Pol envelope (method of averaging),
 * a(t) = A / sqrt(1 + (A^2/a0^2 - 1) exp(-2 sigma t)), the solution of
 * da/dt = sigma a (1 - a^2/A^2); the probe is a(t) cos(omega t). Its start-up time to
 * a level L*A inverts in closed form: t_L = ln((A^2/a0^2 - 1)/(1/L^2 - 1))/(2 sigma). */
#include "ru_test.h"

#include "measure/measure_impl.h"
#include "ringup/measure.h"
#include "ringup/verdict.h"

#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

typedef struct sig {
    double amp_v;     /* A: settled amplitude (V) */
    double a0_v;      /* a0: envelope at t = 0 (V) */
    double sigma;     /* small-signal growth rate (1/s); < 0 with a0 = A: decay */
    double f_hz;      /* oscillation frequency */
    double dc_v;      /* added DC level (V) */
    double ramp_v_s;  /* added slow DC ramp (V/s) */
    double noise_v;   /* added pseudo-noise, uniform in +-noise_v */
    int decay;        /* 1: a0 exp(sigma t) instead of the van der Pol envelope */
    double die_s;     /* > 0: from this time on the envelope also decays ... */
    double die_rate;  /* ... as exp(-die_rate (t - die_s)) (1/s) */
    double settle_v;  /* added settling DC: settle_v (1 - exp(-t/settle_tau_s)) (V) */
    double settle_tau_s; /* its time constant (s) */
} sig;

/* Slope of the added DC level at t (V/s). */
static double dc_slope(const sig *s, double t)
{
    double k = s->ramp_v_s;
    if (s->settle_tau_s > 0.0)
        k += s->settle_v / s->settle_tau_s * exp(-t / s->settle_tau_s);
    return k;
}

/* Phase of the probe at t = 0: half a sample off the grid at 64 samples/period
 * (2 pi/64 = 0.098 rad), so peaks fall between samples and the parabola refinement
 * matters (raw sample maxima would read up to 1.2e-3 low). */
#define PHASE0 0.05

static double vdp_env(const sig *s, double t)
{
    double q = s->amp_v * s->amp_v / (s->a0_v * s->a0_v) - 1.0;
    return s->amp_v / sqrt(1.0 + q * exp(-2.0 * s->sigma * t));
}

static double t_level(const sig *s, double level)
{
    double q = s->amp_v * s->amp_v / (s->a0_v * s->a0_v) - 1.0;
    return log(q / (1.0 / (level * level) - 1.0)) / (2.0 * s->sigma);
}

/* Deterministic uniform pseudo-noise in [-1, 1) (64-bit LCG, Knuth's MMIX
 * constants, from memory; any fixed generator does here). */
static double lcg_uniform(uint64_t *state)
{
    *state = *state * 6364136223846793005ULL + 1442695040888963407ULL;
    return (double)(*state >> 11) / 4503599627370496.0 - 1.0;
}

/* The verdict (ringup/verdict.h) applied to res, with nothing known but the seed:
 * a preset kick of seed_v when it is above 0, else a power-on start from an unknown
 * level; no prediction, no solver floor, no drive. */
static ru_verdict judge(ru_measure_result *res, double seed_v, int is_kick)
{
    ru_verdict_input in;
    ru_verdict_input_default(&in);
    in.meas = res;
    in.seed_v = seed_v;
    in.seed_is_kick = is_kick;
    ru_verdict_result v;
    ru_verdict_judge(&in, &v);
    ru_verdict_apply(&v, res);
    return v.verdict;
}

/* Pushes the signal over [0, stop_s] at sample_s; returns the measure (caller
 * destroys) with res filled and judged (the configured kick level as the seed). */
static ru_measure *run(const sig *s, const ru_measure_cfg *cfg, double until_s,
                       ru_measure_result *res)
{
    ru_measure *m = NULL;
    assert_int_equal(ru_measure_create(cfg, &m), RU_OK);
    uint64_t st = 12345;
    size_t n = (size_t)llround(until_s / cfg->sample_s);
    double w = 2.0 * M_PI * s->f_hz;
    for (size_t i = 0; i <= n; i++) {
        double t = (double)i * cfg->sample_s;
        double a = s->decay ? s->a0_v * exp(s->sigma * t) : vdp_env(s, t);
        if (s->die_s > 0.0 && t > s->die_s)
            a *= exp(-s->die_rate * (t - s->die_s));
        double v = a * cos(w * t + PHASE0) + s->dc_v + s->ramp_v_s * t;
        if (s->settle_tau_s > 0.0)
            v += s->settle_v * (1.0 - exp(-t / s->settle_tau_s));
        if (s->noise_v > 0.0)
            v += s->noise_v * lcg_uniform(&st);
        assert_int_equal(ru_measure_push(m, t, v), RU_OK);
    }
    assert_int_equal(ru_measure_finish(m, res), RU_OK);
    judge(res, cfg->kick_level_v, cfg->kick_level_v > 0);
    return m;
}

/* Least-squares slope of exact ln a(t) at the given times: what the growth fit
 * would read on a perfect envelope (the nonlinearity's own bias). */
static double exact_fit_slope(const sig *s, const double *t, size_t n)
{
    double tm = 0.0, ym = 0.0, stt = 0.0, sty = 0.0;
    for (size_t i = 0; i < n; i++) {
        tm += t[i];
        ym += log(vdp_env(s, t[i]));
    }
    tm /= (double)n;
    ym /= (double)n;
    for (size_t i = 0; i < n; i++) {
        stt += (t[i] - tm) * (t[i] - tm);
        sty += (t[i] - tm) * (log(vdp_env(s, t[i])) - ym);
    }
    return sty / stt;
}

/* Start-up of the averaged van der Pol envelope at sigma/omega = ratio. */
static void check_vdp(double ratio, double startup_rel_tol)
{
    sig s = {.amp_v = 1.5, .a0_v = 1.5e-3, .f_hz = 1000.0};
    s.sigma = ratio * 2.0 * M_PI * s.f_hz;
    /* stop where the envelope is within ~1e-7 of A through the last 10 %:
     * A - a ~ A/2 (A/a0)^2 exp(-2 sigma t) <= 1e-7 A at 0.9 stop */
    double stop = (log(0.5e7 * 1e6) / (2.0 * s.sigma)) / 0.9;
    double T = 1.0 / s.f_hz;
    stop = ceil(stop / T) * T;
    ru_measure_cfg cfg;
    ru_measure_cfg_default(&cfg, stop, T / 64.0);
    cfg.kick_level_v = s.a0_v;
    ru_measure_result r;
    ru_measure *m = run(&s, &cfg, stop, &r);

    assert_int_equal(r.started, 1);
    assert_int_equal(r.settled, 1);
    /* Tolerance 1e-4: parabola vertex error at 64 samples/period is O((w dt)^4)
     * ~ 1e-5 (common practice bound), the envelope is within 1e-7 of A. */
    RU_ASSERT_REL(r.settled_amplitude_v, s.amp_v, 1e-4);
    /* Reference: closed-form inverse of a(t) at 0.9 A (head comment). */
    RU_ASSERT_REL(r.startup_time_s, t_level(&s, 0.9), startup_rel_tol);
    /* Reference: same closed form at 0.99 A (settle band 1 %, approached from
     * below). Same interpolation error class as the start-up time. */
    RU_ASSERT_REL(r.settling_time_s, t_level(&s, 0.99), startup_rel_tol);
    /* Frequency from mean crossings at an integer 64 samples/period: crossings
     * repeat exactly, so only rounding remains (1e-6 per the contract). */
    RU_ASSERT_REL(r.frequency_hz, s.f_hz, 1e-6);
    RU_ASSERT_NEAR(r.dc_level_v, 0.0, 1e-6 * s.amp_v);

    /* Growth: the fit window's points, and the fit on exact ln a(t) at them. */
    const double *et, *ea;
    size_t n;
    ru_measure_envelope(m, &et, &ea, &n);
    assert_int_equal(n, r.cycles);
    assert_true(r.growth_fit_points >= 3);
    size_t i0 = 0;
    while (i0 < n && et[i0] < r.growth_fit_t0_s)
        i0++;
    assert_true(i0 + (size_t)r.growth_fit_points <= n);
    RU_ASSERT_NEAR(et[i0 + (size_t)r.growth_fit_points - 1], r.growth_fit_t1_s, 0.0);
    double sig_ref = exact_fit_slope(&s, et + i0, (size_t)r.growth_fit_points);
    /* Reference: the 1 %..10 % window of the exact envelope reads low because
     * d ln a/dt = sigma (1 - a^2/A^2); bound 0.3 % (brief), ~0.2 % expected. */
    assert_true(sig_ref < s.sigma);
    RU_ASSERT_REL(sig_ref, s.sigma, 3e-3);
    /* The measured envelope's fit follows the exact one to 1e-3 relative: each
     * point has a constant relative bias (cosh of a quarter period's growth,
     * cancels in a log slope) and ~1e-5 vertex error. */
    RU_ASSERT_REL(r.growth_rate_per_s, sig_ref, 1e-3);
    RU_ASSERT_REL(r.growth_rate_per_s, s.sigma, 3e-3);
    assert_true(r.growth_fit_rms < 1e-2);
    ru_measure_destroy(m);
}

/* Tolerance for the start-up time: linear interpolation between envelope points one
 * period apart errs by ~ |a''| T^2 / (8 a') at 0.9 A, which for the averaged
 * equation is 0.18 sigma T^2 (derived from da/dt = sigma a (1 - a^2/A^2)); relative
 * to t90 = 5.3/sigma that is 0.034 (sigma T)^2, i.e. 4e-5, 1.3e-4 and 3.4e-3 at
 * sigma/omega = 0.005, 0.01, 0.05. Tolerances: 1e-3 and, at 0.05, 5e-3. */
static void test_vdp_slow(void **state)
{
    (void)state;
    check_vdp(0.005, 1e-3);
}

static void test_vdp_mid(void **state)
{
    (void)state;
    check_vdp(0.01, 1e-3);
}

static void test_vdp_fast(void **state)
{
    (void)state;
    check_vdp(0.05, 5e-3);
}

/* A symmetric tone with no DC movement is measured by the plain envelope: each point
 * (maximum - following minimum)/2 of the samples, each extremum the vertex of the
 * parabola through its sample and two neighbours. Reference: that naive model,
 * written out here over the same samples (STYLE: check a fast routine against a
 * naive one). The growth slows near the top, where a DC slope read from plain
 * midpoints would move (a'' T/4 with no DC at all) and made the start-up read
 * 0.1-0.2 % early; the start-up time by the plain points, interpolated linearly at
 * 0.9 of the same settled amplitude, must agree to 1e-6 (the interpolation is the
 * same; only rounding differs). */
static void check_plain(double ratio)
{
    sig s = {.amp_v = 1.5, .a0_v = 1.5e-3, .f_hz = 1000.0};
    s.sigma = ratio * 2.0 * M_PI * s.f_hz;
    double T = 1.0 / s.f_hz, dt = T / 64.0;
    double stop = ceil((log(0.5e7 * 1e6) / (2.0 * s.sigma)) / 0.9 / T) * T;
    ru_measure_cfg cfg;
    ru_measure_cfg_default(&cfg, stop, dt);
    cfg.kick_level_v = s.a0_v;
    ru_measure_result r;
    ru_measure *m = run(&s, &cfg, stop, &r);
    assert_int_equal(r.settled, 1);
    size_t n = (size_t)llround(stop / dt);
    double w = 2.0 * M_PI * s.f_hz, vmax = 0.0, tmax = 0.0, t_prev = NAN, a_prev = NAN;
    double t_up = NAN, level = 0.9 * r.settled_amplitude_v;
    int have_max = 0;
    for (size_t i = 1; i < n; i++) {
        double v[3];
        for (int k = 0; k < 3; k++) {
            double t = (double)(i + k - 1) * dt;
            v[k] = vdp_env(&s, t) * cos(w * t + PHASE0);
        }
        int is_max = v[1] > v[0] && v[1] >= v[2], is_min = v[1] < v[0] && v[1] <= v[2];
        if (!is_max && !is_min)
            continue;
        double d = 0.5 * (v[0] - v[2]) / (v[0] - 2.0 * v[1] + v[2]);
        double tv = ((double)i + d) * dt, vv = v[1] - 0.25 * (v[0] - v[2]) * d;
        if (is_max) {
            vmax = vv;
            tmax = tv;
            have_max = 1;
        } else if (have_max) {
            double a = 0.5 * (vmax - vv), tm = 0.5 * (tmax + tv);
            if (isnan(t_up) && a >= level && a_prev < level)
                t_up = t_prev + (level - a_prev) / (a - a_prev) * (tm - t_prev);
            t_prev = tm;
            a_prev = a;
            have_max = 0;
        }
    }
    RU_ASSERT_REL(r.startup_time_s, t_up, 1e-6);
    ru_measure_destroy(m);
}

static void test_plain_envelope(void **state)
{
    (void)state;
    check_plain(0.01);
    check_plain(0.05);
}

/* Frequency at a non-integer number of samples per period, so crossing positions
 * vary from period to period. Reference: the generated frequency. Linear crossing
 * interpolation of a sine errs by <= (w dt)^2 dt / 100 per crossing (cubic term of
 * the Taylor series at the inflection, common practice estimate): 2.4e-6 T here, over
 * >= 60 periods that is < 1e-7; tolerance 1e-6 (contract). */
static void test_frequency_incommensurate(void **state)
{
    (void)state;
    sig s = {.amp_v = 0.8, .a0_v = 8e-3, .f_hz = 1234.5};
    s.sigma = 0.02 * 2.0 * M_PI * s.f_hz;
    double stop = 0.6;
    ru_measure_cfg cfg;
    ru_measure_cfg_default(&cfg, stop, 1.0 / (s.f_hz * 61.7));
    ru_measure_result r;
    ru_measure *m = run(&s, &cfg, stop, &r);
    assert_int_equal(r.started, 1);
    RU_ASSERT_REL(r.frequency_hz, s.f_hz, 1e-6);
    RU_ASSERT_REL(r.settled_amplitude_v, s.amp_v, 1e-4);
    /* a pure cosine: every harmonic far below the fundamental (resampler error of
     * order 1e-8, see test_harmonics.c) */
    assert_true(r.thd_percent < 1e-4);
    ru_measure_destroy(m);
}

/* A decaying sine never starts: started = 0, figures NAN, notes say why. */
static void test_decaying(void **state)
{
    (void)state;
    sig s = {.amp_v = 1.0, .a0_v = 1.0, .f_hz = 500.0, .decay = 1};
    s.sigma = -0.01 * 2.0 * M_PI * s.f_hz;
    ru_measure_cfg cfg;
    ru_measure_cfg_default(&cfg, 0.2, 1.0 / (500.0 * 64.0));
    ru_measure_result r;
    ru_measure *m = run(&s, &cfg, 0.2, &r);
    assert_true(r.cycles > 90); /* 100 periods, all found */
    assert_int_equal(r.started, 0);
    assert_int_equal(r.settled, 0);
    assert_true(isnan(r.startup_time_s) && isnan(r.growth_rate_per_s));
    assert_true(isnan(r.settled_amplitude_v) && isnan(r.thd_percent));
    assert_true(isnan(r.settling_time_s) && isnan(r.frequency_hz));
    /* the verdict's reason goes into the notes of the figures it removes */
    assert_non_null(strstr(r.growth_note, "decays"));
    assert_non_null(strstr(r.thd_note, "decays"));
    /* the window's envelope falls by 1 - exp(sigma * 0.02 s) ~ 47 % */
    assert_true(r.envelope_drift < -0.3);
    ru_measure_destroy(m);
}

/* Started from above: a power-on shock three times the limit cycle decays onto it,
 * as a(t) = A (1 + 2 exp(-t/tau)) (the constructed signal), and holds flat: a
 * sustained tone, so started (a limiter holds it: the descent's rate of 1/tau has
 * fallen below a tenth in the window); a passive ring-down a0 exp(-t/tau) with the
 * same tau keeps its rate and a steady sine never came down: neither is started.
 * The same from-above envelope after a preset kick of 3 V shows a held tone but no
 * start (the kick put it there): undecided. Reference: the constructed envelopes
 * (held: 1.2x and a rate below 1/10; settled: drift 0.5 %; seed ratio 10x). */
static double env_from_above(double t) { return 1.0 + 2.0 * exp(-t / 0.02); }
static double env_ringdown(double t) { return 3.0 * exp(-t / 0.5); }
static double env_steady(double t) { (void)t; return 1.0; }

static ru_verdict verdict_with(double (*env)(double), double kick_v, int is_kick)
{
    const double f = 500.0, dt = 1.0 / (64 * f), stop = 0.3;
    ru_measure_cfg cfg;
    ru_measure_cfg_default(&cfg, stop, dt);
    cfg.kick_level_v = kick_v;
    ru_measure *m = NULL;
    assert_int_equal(ru_measure_create(&cfg, &m), RU_OK);
    for (size_t i = 0; i <= (size_t)llround(stop / dt); i++) {
        double t = (double)i * dt;
        assert_int_equal(ru_measure_push(m, t, env(t) * cos(2 * M_PI * f * t + PHASE0)),
                         RU_OK);
    }
    ru_measure_result r;
    assert_int_equal(ru_measure_finish(m, &r), RU_OK);
    ru_verdict v = judge(&r, is_kick ? kick_v : 0.0, is_kick);
    if (r.started) /* the settled figures are those of the held tone */
        RU_ASSERT_REL(r.settled_amplitude_v, env(stop), 1e-3);
    ru_measure_destroy(m);
    return v;
}

static void test_started_from_above(void **state)
{
    (void)state;
    assert_int_equal(verdict_with(env_from_above, 3.0, 0), RU_VERDICT_STARTED);
    assert_int_equal(verdict_with(env_from_above, 3.0, 1), RU_VERDICT_UNDECIDED);
    assert_int_equal(verdict_with(env_ringdown, 3.0, 0), RU_VERDICT_NO_START);
    assert_int_equal(verdict_with(env_steady, 1.0, 0), RU_VERDICT_NO_START);
    assert_int_equal(verdict_with(env_steady, 1.0, 1), RU_VERDICT_UNDECIDED);
}

/* A steady sine with no growth never "starts" either (grew 1x). */
static void test_constant_not_started(void **state)
{
    (void)state;
    sig s = {.amp_v = 1.0, .a0_v = 1.0, .f_hz = 500.0, .decay = 1, .sigma = 0.0};
    ru_measure_cfg cfg;
    ru_measure_cfg_default(&cfg, 0.1, 1.0 / (500.0 * 64.0));
    ru_measure_result r;
    ru_measure *m = run(&s, &cfg, 0.1, &r);
    assert_int_equal(r.started, 0);
    assert_non_null(strstr(r.growth_note, "never grew"));
    /* not a start-up, but a steady tone: its figures are measured all the same
     * (Reference: the constructed 1 V, 500 Hz sine; tolerances as test_vdp_*) */
    assert_true(isnan(r.startup_time_s) && isnan(r.growth_rate_per_s));
    assert_int_equal(r.settled, 1);
    RU_ASSERT_REL(r.settled_amplitude_v, 1.0, 1e-4);
    RU_ASSERT_REL(r.frequency_hz, 500.0, 1e-6);
    assert_true(r.thd_percent < 1e-3);
    ru_measure_destroy(m);
}

/* A DC offset leaves the envelope unchanged (max - min and the hysteresis are both
 * shift invariant) and is read back as dc_level_v. Reference: the added offset. */
static void test_dc_offset(void **state)
{
    (void)state;
    sig s = {.amp_v = 1.0, .a0_v = 1e-2, .f_hz = 2000.0};
    s.sigma = 0.02 * 2.0 * M_PI * s.f_hz;
    double stop = 0.15;
    ru_measure_cfg cfg;
    ru_measure_cfg_default(&cfg, stop, 1.0 / (s.f_hz * 64.0));
    ru_measure_result r0, r1;
    ru_measure *m0 = run(&s, &cfg, stop, &r0);
    s.dc_v = 2.5;
    ru_measure *m1 = run(&s, &cfg, stop, &r1);
    const double *t0, *a0, *t1, *a1;
    size_t n0, n1;
    ru_measure_envelope(m0, &t0, &a0, &n0);
    ru_measure_envelope(m1, &t1, &a1, &n1);
    assert_int_equal(n0, n1);
    /* same points up to rounding of 2.5 V + signal (ulp ~ 4e-16 * 2.5) */
    for (size_t i = 0; i < n0; i++) {
        RU_ASSERT_NEAR(a1[i], a0[i], 1e-12);
        RU_ASSERT_NEAR(t1[i], t0[i], 1e-12);
    }
    RU_ASSERT_REL(r1.settled_amplitude_v, r0.settled_amplitude_v, 1e-12);
    /* mean over whole periods of a settled cosine: exact up to the linear
     * interpolant's O((w dt)^2) ripple integral, far below 1e-6 */
    RU_ASSERT_NEAR(r1.dc_level_v, 2.5, 1e-6);
    RU_ASSERT_REL(r1.frequency_hz, s.f_hz, 1e-6);
    ru_measure_destroy(m0);
    ru_measure_destroy(m1);
}

/* A slowly moving DC level (0.5 V over the run, against a 1 V amplitude) and
 * -80 dB pseudo-noise do not add or lose cycles. */
static void test_drift_and_noise(void **state)
{
    (void)state;
    sig s = {.amp_v = 1.0, .a0_v = 3e-3, .f_hz = 2000.0};
    s.sigma = 0.02 * 2.0 * M_PI * s.f_hz;
    double stop = 0.15;
    ru_measure_cfg cfg;
    ru_measure_cfg_default(&cfg, stop, 1.0 / (s.f_hz * 64.0));
    cfg.kick_level_v = s.a0_v;
    ru_measure_result r0, r1, r2;
    ru_measure *m0 = run(&s, &cfg, stop, &r0);
    s.ramp_v_s = 0.5 / stop;
    ru_measure *m1 = run(&s, &cfg, stop, &r1);
    s.ramp_v_s = 0.0;
    s.noise_v = 1e-4 * s.amp_v; /* -80 dB of the settled amplitude */
    ru_measure *m2 = run(&s, &cfg, stop, &r2);
    /* without a declared kick level only the relative hysteresis guards */
    ru_measure_result r3;
    cfg.kick_level_v = 0.0;
    ru_measure *m3 = run(&s, &cfg, stop, &r3);
    /* The first sample is never taken as an extremum: the noise-free cosine peaks
     * there (PHASE0), so that half cycle is not counted, while the noise can put
     * sample 1 above sample 0 and so count it: one point more at most. */
    assert_true(r3.cycles >= r0.cycles && r3.cycles <= r0.cycles + 1);
    ru_measure_destroy(m3);
    /* one envelope point per period: 300 periods, the last may be incomplete */
    assert_true(r0.cycles >= 299 && r0.cycles <= 300);
    /* the rising ramp moves the first peak off sample 0, as the noise does (r3);
     * and the (at most two) cycles located before the DC slope is known are
     * dropped when the ramp made > 1 % of them (3.3 V/s * T/4 = 0.4 mV on 3 mV) */
    assert_true(r1.cycles + 2 >= r0.cycles && r1.cycles <= r0.cycles + 1);
    assert_true(r2.cycles >= r0.cycles && r2.cycles <= r0.cycles + 1);
    /* ramp: raw max - min of a ramped cosine would pick up slope * T/2 (1.7e-3 V
     * here); the envelope removes the ramp with a slope read from extrema midpoints,
     * exact for a linear ramp, so the ramped run reads as the flat one (1e-6: what
     * is left is the growth's share of the midpoints, ~(sigma T)^2/16 ~ 2.5e-4 of the
     * amplitude in the exponential phase and ~0 once settled);
     * noise: +-1e-4 V per extremum, averaged over 30 cycles */
    RU_ASSERT_REL(r1.settled_amplitude_v, r0.settled_amplitude_v, 1e-6);
    RU_ASSERT_REL(r1.settled_amplitude_v, s.amp_v, 1e-4);
    RU_ASSERT_REL(r2.settled_amplitude_v, s.amp_v, 1e-4);
    RU_ASSERT_REL(r2.startup_time_s, r0.startup_time_s, 1e-3);
    RU_ASSERT_REL(r2.frequency_hz, s.f_hz, 1e-5);
    ru_measure_destroy(m0);
    ru_measure_destroy(m1);
    ru_measure_destroy(m2);
}

/* A run cut short just after start-up: the last 10 % still rises, so settled = 0
 * with a hint to run longer. */
static void test_not_settled(void **state)
{
    (void)state;
    sig s = {.amp_v = 1.0, .a0_v = 1e-3, .f_hz = 1000.0};
    s.sigma = 0.01 * 2.0 * M_PI * s.f_hz;
    double stop = 1.05 * t_level(&s, 0.9);
    ru_measure_cfg cfg;
    ru_measure_cfg_default(&cfg, stop, 1.0 / (s.f_hz * 64.0));
    ru_measure_result r;
    ru_measure *m = run(&s, &cfg, stop, &r);
    assert_int_equal(r.started, 1);
    assert_int_equal(r.settled, 0);
    assert_true(r.envelope_drift > 0.005);
    assert_non_null(strstr(r.settle_note, "longer"));
    /* The hint is an estimate from the drift's decay across the window. Reference:
     * the stop at which the exact envelope moves < 0.5 % over its last 10 %, found
     * by scanning the closed form; the hint must land within 50 % of the extra time
     * needed (common practice for an advisory figure). */
    const char *about = strstr(r.settle_note, "about ");
    assert_non_null(about);
    double more = 0.0;
    assert_int_equal(sscanf(about, "about %lf", &more), 1);
    double need = stop;
    while ((vdp_env(&s, need) - vdp_env(&s, 0.9 * need)) / vdp_env(&s, need) >= 0.005)
        need *= 1.001;
    RU_ASSERT_REL(more, need - stop, 0.5);
    ru_measure_destroy(m);
}

/* The design notes say a 1 %..30 % growth window reads about 0.9 % low on an exact
 * van der Pol envelope, which is why the default stops at 10 %. Reference: the same
 * least squares on exact ln a(t) at the fitted points; its bias is checked against
 * that statement (0.6 %..1.2 %), and the measured rate against the exact fit. */
static void test_growth_window_30(void **state)
{
    (void)state;
    sig s = {.amp_v = 1.0, .a0_v = 1e-3, .f_hz = 1000.0};
    s.sigma = 0.01 * 2.0 * M_PI * s.f_hz;
    ru_measure_cfg cfg;
    ru_measure_cfg_default(&cfg, 0.3, 1.0 / (s.f_hz * 64.0));
    cfg.growth_hi = 0.30;
    ru_measure_result r;
    ru_measure *m = run(&s, &cfg, 0.3, &r);
    const double *t, *a;
    size_t n, i0 = 0;
    ru_measure_envelope(m, &t, &a, &n);
    while (i0 < n && t[i0] < r.growth_fit_t0_s)
        i0++;
    double ref = exact_fit_slope(&s, t + i0, (size_t)r.growth_fit_points);
    double bias = ref / s.sigma - 1.0;
    assert_true(bias < -0.006 && bias > -0.012);
    RU_ASSERT_REL(r.growth_rate_per_s, ref, 1e-3);
    ru_measure_destroy(m);
}

/* A kick at 20 % of the settled amplitude leaves no cycle between 1 % and 10 %:
 * growth is NAN with the note the README promises. */
static void test_growth_kick_too_high(void **state)
{
    (void)state;
    sig s = {.amp_v = 1.0, .a0_v = 0.2, .f_hz = 1000.0};
    s.sigma = 0.01 * 2.0 * M_PI * s.f_hz;
    ru_measure_cfg cfg;
    ru_measure_cfg_default(&cfg, 0.3, 1.0 / (s.f_hz * 64.0));
    ru_measure_result r;
    ru_measure *m = run(&s, &cfg, 0.3, &r);
    /* from an unknown start (power-on) it grew 5x from its lowest point: started,
     * however small the factor (the verdict has no fixed factor) */
    assert_int_equal(r.started, 1);
    ru_measure_destroy(m);
    /* declared as a preset kick of 0.2 V: the tone is only 5x the kick, so the run
     * cannot show that it starts (undecided) */
    cfg.kick_level_v = 0.2;
    m = run(&s, &cfg, 0.3, &r);
    assert_int_equal(r.started, 0);
    ru_measure_destroy(m);
    /* the same start declared as a 0.02 V kick: started, growth still NAN */
    cfg.kick_level_v = 0.02;
    m = run(&s, &cfg, 0.3, &r);
    assert_int_equal(r.started, 1);
    assert_true(isnan(r.growth_rate_per_s));
    assert_true(r.growth_fit_points < 3);
    assert_non_null(strstr(r.growth_note, "fewer than 3 cycles between 1% and 10%"));
    RU_ASSERT_REL(r.settled_amplitude_v, 1.0, 1e-4);
    ru_measure_destroy(m);
}

/* The growth fit skips points up to twice the kick level: with a kick at 0.8 % of
 * the settled amplitude the fit starts above 1.6 %. */
static void test_growth_above_kick(void **state)
{
    (void)state;
    sig s = {.amp_v = 1.0, .a0_v = 8e-3, .f_hz = 1000.0};
    s.sigma = 0.01 * 2.0 * M_PI * s.f_hz;
    ru_measure_cfg cfg;
    ru_measure_cfg_default(&cfg, 0.3, 1.0 / (s.f_hz * 64.0));
    cfg.kick_level_v = s.a0_v;
    ru_measure_result r;
    ru_measure *m = run(&s, &cfg, 0.3, &r);
    const double *t, *a;
    size_t n, i = 0;
    ru_measure_envelope(m, &t, &a, &n);
    while (i < n && t[i] < r.growth_fit_t0_s)
        i++;
    assert_true(i > 0 && i < n);
    assert_true(a[i] > 2.0 * s.a0_v);
    assert_true(a[i - 1] <= 2.0 * s.a0_v);
    assert_true(r.growth_fit_points >= 3);
    ru_measure_destroy(m);
}

/* Grows 1000x, then dies away (as when the loop gain collapses): the last 10 %
 * clearly decays, so started = 0. */
static void test_grows_then_dies(void **state)
{
    (void)state;
    sig s = {.amp_v = 1.0, .a0_v = 1e-3, .f_hz = 1000.0, .die_s = 0.15,
             .die_rate = 20.0};
    s.sigma = 0.01 * 2.0 * M_PI * s.f_hz;
    ru_measure_cfg cfg;
    ru_measure_cfg_default(&cfg, 0.3, 1.0 / (s.f_hz * 64.0));
    ru_measure_result r;
    ru_measure *m = run(&s, &cfg, 0.3, &r);
    assert_int_equal(r.started, 0);
    assert_non_null(strstr(r.growth_note, "decays"));
    /* ln a falls by 20/s * 0.03 s = 0.6 over the window: line-fit drift ~ -0.6 */
    assert_true(r.envelope_drift < -0.3);
    ru_measure_destroy(m);
}

/* Memory is O(cycles) + a ring fixed at create: pushing 10x more samples than the
 * configured run leaves the ring capacity unchanged and the envelope storage within
 * a factor 2 of the points held (doubling growth). */
static void test_memory_bounded(void **state)
{
    (void)state;
    sig s = {.amp_v = 1.0, .a0_v = 1e-2, .f_hz = 1000.0};
    s.sigma = 0.02 * 2.0 * M_PI * s.f_hz;
    double dt = 1.0 / (s.f_hz * 64.0), stop = 0.2;
    ru_measure_cfg cfg;
    ru_measure_cfg_default(&cfg, stop, dt);
    ru_measure_result r1, r10;
    ru_measure *m1 = run(&s, &cfg, stop, &r1);
    ru_measure *m10 = run(&s, &cfg, 10.0 * stop, &r10);
    size_t ring = ru_measure_ring_capacity(m1);
    assert_true(ring <= (size_t)(0.1 * stop / dt) + 64 + 1);
    assert_int_equal(ru_measure_ring_capacity(m10), ring);
    const double *t, *a;
    size_t n;
    ru_measure_envelope(m10, &t, &a, &n);
    assert_int_equal(n, r10.cycles);
    assert_true(r10.cycles >= 1999 && r10.cycles <= 2000); /* 2000 periods */
    assert_true(ru_measure_envelope_capacity(m10) <= 2 * n + 64);
    assert_true(ru_measure_envelope_capacity(m1) <= 2 * r1.cycles + 64);
    /* the settled window follows the pushed run: still a steady 1 V */
    assert_int_equal(r10.settled, 1);
    RU_ASSERT_REL(r10.settled_amplitude_v, 1.0, 1e-4);
    ru_measure_destroy(m1);
    ru_measure_destroy(m10);
    /* a very long run at a fine step: the ring is capped */
    ru_measure *big = NULL;
    ru_measure_cfg_default(&cfg, 10.0, 1e-9);
    assert_int_equal(ru_measure_create(&cfg, &big), RU_OK);
    assert_int_equal(ru_measure_ring_capacity(big), RU_RING_MAX);
    ru_measure_destroy(big);
}

/* Start-up riding on a moving DC level (a bias settling after power-on): the van der
 * Pol envelope from 1 mV to 1 V at 500 Hz, sigma/omega = 0.01, on top of a 20 V/s
 * ramp or of a settling DC 0.6 V (1 - exp(-t/30 ms)) (20 V/s at t = 0).
 * Where extrema exist: v = a cos(wt) + k t has v' = 0 only while a w > k; below that
 * level the waveform is monotonic and no extremum-based detector can see a cycle
 * (6.4 mV at 20 V/s). With the hint, before the DC slope is known the raw extremum
 * must also hold 0.3 T, which a sine plus ramp does while k < 0.8 a w (numerical
 * check of cos(x) + r x: the next pass comes 0.31 T after the maximum at r = 0.8),
 * so the first cycle is expected where a(t) w 0.8 >= k(t) (8 mV on the ramp);
 * after four extrema the slope is known and every cycle is found.
 * Checks (references beside each): growth rate, cycles, start-up time, amplitude. */
static void check_moving_dc(const sig *s, double hint_s)
{
    double T = 1.0 / s->f_hz, w = 2.0 * M_PI * s->f_hz, stop = 0.4;
    ru_measure_cfg cfg;
    ru_measure_cfg_default(&cfg, stop, T / 64.0);
    cfg.period_hint_s = hint_s;
    ru_measure_result r;
    ru_measure *m = run(s, &cfg, stop, &r);
    const double *et, *ea;
    size_t n;
    ru_measure_envelope(m, &et, &ea, &n);
    double t_det = 0.0; /* first time a(t) w 0.8 >= k(t), by scanning (derived above) */
    while (vdp_env(s, t_det) * w * 0.8 < dc_slope(s, t_det))
        t_det += T / 64.0;
    assert_true(n > 10);
    /* the first cycle comes within 2 periods of the derived level (growth during
     * the hold and the cycle phase move it by up to one period), plus the two
     * cycles located before the DC slope is known, which are dropped on a ramp */
    assert_true(et[0] > t_det - 2.0 * T && et[0] < t_det + 4.0 * T);
    /* Reference: the constructed frequency: one point per period from the first on,
     * none missed (gap < 1.5 T) or doubled (gap > 0.5 T); the count is the number of
     * periods from the first point to the end, less the last incomplete one. */
    for (size_t i = 1; i < n; i++)
        assert_true(et[i] - et[i - 1] > 0.5 * T && et[i] - et[i - 1] < 1.5 * T);
    double periods = (stop - et[0]) / T;
    assert_true((double)n >= floor(periods) && (double)n <= floor(periods) + 1.0);
    assert_int_equal(r.started, 1);
    /* Reference: the constructed amplitude (settled 1 V; parabola error 1e-5 and
     * a slope error of the settled DC of 1e-12 V/s: 1e-4 as test_vdp_*). */
    RU_ASSERT_REL(r.settled_amplitude_v, s->amp_v, 1e-4);
    /* Reference: closed-form start-up time (head comment), 1e-3 as test_vdp_mid. */
    RU_ASSERT_REL(r.startup_time_s, t_level(s, 0.9), 1e-3);
    /* Reference: the constructed sigma. The 1 %..10 % window of the exact envelope
     * reads ~0.2 % low (test_vdp_mid), the ramp correction leaves a slope error of
     * (growth share of the midpoints) ~ a sigma^2 T/4: tolerance 0.5 % (brief). */
    assert_true(r.growth_fit_points >= 10);
    RU_ASSERT_REL(r.growth_rate_per_s, s->sigma, 5e-3);
    ru_measure_destroy(m);
}

static const sig RAMP_SIG = {.amp_v = 1.0, .a0_v = 1e-3, .f_hz = 500.0,
                             .sigma = 0.01 * 2.0 * M_PI * 500.0, .ramp_v_s = 20.0};
static const sig SETTLE_SIG = {.amp_v = 1.0, .a0_v = 1e-3, .f_hz = 500.0,
                               .sigma = 0.01 * 2.0 * M_PI * 500.0, .settle_v = 0.6,
                               .settle_tau_s = 0.03};

static void test_ramp_hint(void **state)
{
    (void)state;
    check_moving_dc(&RAMP_SIG, 1.0 / 500.0);
    /* the true frequency 15 % off the hint either way: the hold 0.3 P stays
     * between ~0.26 T and ~0.35 T, below the 0.31..0.5 T an extremum holds */
    check_moving_dc(&RAMP_SIG, 1.15 / 500.0);
    check_moving_dc(&RAMP_SIG, 0.85 / 500.0);
}

static void test_settling_dc_hint(void **state)
{
    (void)state;
    check_moving_dc(&SETTLE_SIG, 1.0 / 500.0);
}

/* Without a hint the detector cannot see cycles as early: before the first extremum
 * it has no scale but the swing that led to a candidate (cos x + r x: rise
 * 2(sqrt(1-r^2) + r(pi/2 + asin r)), fall back 2(sqrt(1-r^2) - r(pi/2 - asin r)),
 * hysteresis 20 % of the rise, admitted for r below ~0.5, numerically), and the
 * first two cycles, located before the DC slope is known, are dropped. What it can
 * do: from then on the same cycles, amplitude and start-up as with the hint.
 * Checks: the first point lies later than with the hint but below 2.5 % of the
 * settled amplitude (so the 1 %..10 % window still holds >= 10 points on this
 * 20 V/s ramp), one point per period after it, growth within 0.5 % (reference:
 * constructed sigma), start-up within 1e-3 (reference: closed form). */
static void test_ramp_no_hint(void **state)
{
    (void)state;
    double T = 1.0 / RAMP_SIG.f_hz, stop = 0.4;
    ru_measure_cfg cfg;
    ru_measure_cfg_default(&cfg, stop, T / 64.0);
    ru_measure_result r;
    ru_measure *m = run(&RAMP_SIG, &cfg, stop, &r);
    const double *et, *ea;
    size_t n;
    ru_measure_envelope(m, &et, &ea, &n);
    assert_true(n > 10);
    /* later than the hinted detector's first cycle (~0.070 s, test_ramp_hint) */
    assert_true(et[0] > 0.075);
    assert_true(vdp_env(&RAMP_SIG, et[0]) < 0.025 * RAMP_SIG.amp_v);
    for (size_t i = 1; i < n; i++)
        assert_true(et[i] - et[i - 1] > 0.5 * T && et[i] - et[i - 1] < 1.5 * T);
    assert_int_equal(r.started, 1);
    RU_ASSERT_REL(r.settled_amplitude_v, RAMP_SIG.amp_v, 1e-4);
    RU_ASSERT_REL(r.startup_time_s, t_level(&RAMP_SIG, 0.9), 1e-3);
    assert_true(r.growth_fit_points >= 10);
    RU_ASSERT_REL(r.growth_rate_per_s, RAMP_SIG.sigma, 5e-3);
    ru_measure_destroy(m);
}

/* A power-on transient followed by a small start (the stall the restart rule
 * handles): a 0.5 V ring-down (tau 2 ms) at 500 Hz on a DC rising 1 V with tau 5 ms
 * gives the first extrema and a DC slope of ~100 V/s; then the DC is flat and the
 * oscillation grows from 1 mV (van der Pol envelope, sigma = 31.4 /s). With the
 * stale slope the detrended signal falls at ~100 V/s, far faster than the small
 * oscillation's a w (3 V/s at 1 mV), so without a restart no extremum would ever
 * be confirmed again. Reference: the constructed signal (its sigma, its 1 V). */
static void test_stall_after_transient(void **state)
{
    (void)state;
    const double f = 500.0, w = 2.0 * M_PI * f, T = 1.0 / f, stop = 0.4;
    const sig g = {.amp_v = 1.0, .a0_v = 1e-3, .f_hz = f, .sigma = 0.01 * w};
    for (int hinted = 0; hinted <= 1; hinted++) {
        ru_measure_cfg cfg;
        ru_measure_cfg_default(&cfg, stop, T / 64.0);
        cfg.period_hint_s = hinted ? T : 0.0;
        ru_measure *m = NULL;
        assert_int_equal(ru_measure_create(&cfg, &m), RU_OK);
        size_t n = (size_t)llround(stop / cfg.sample_s);
        for (size_t i = 0; i <= n; i++) {
            double t = (double)i * cfg.sample_s;
            double v = (1.0 - exp(-t / 5e-3)) + 0.5 * exp(-t / 2e-3) * cos(w * t) +
                       vdp_env(&g, t) * cos(w * t + PHASE0);
            assert_int_equal(ru_measure_push(m, t, v), RU_OK);
        }
        ru_measure_result r;
        assert_int_equal(ru_measure_finish(m, &r), RU_OK);
        judge(&r, 0.0, 0);
        assert_int_equal(r.started, 1);
        /* the ring-down's share at 40 ms is 0.5 e^-20 = 1e-9 V: 1e-4 as above */
        RU_ASSERT_REL(r.settled_amplitude_v, 1.0, 1e-4);
        RU_ASSERT_REL(r.startup_time_s, t_level(&g, 0.9), 1e-3);
        /* the 1 %..10 % window (10..100 mV) lies well after the transient; the
         * window's own bias is ~0.2 % (test_vdp_mid): 0.5 % */
        assert_true(r.growth_fit_points >= 10);
        RU_ASSERT_REL(r.growth_rate_per_s, g.sigma, 5e-3);
        ru_measure_destroy(m);
    }
}

/* However long the run, the envelope keeps at most RU_ENV_KEEP points: the older half
 * is thinned, the newest half (the settled window) stays whole. 2.2 x RU_ENV_KEEP
 * cycles of a steady 1 V tone at 10 samples per period. Reference: the constructed
 * tone (one point per period, amplitude 1 V; parabola error at 10 samples/period is
 * (2 pi/10)^4/24 ~ 6e-3 at most, as in the harmonics budget). */
static void test_envelope_thinned(void **state)
{
    (void)state;
    const double f = 1000.0, dt = 1.0 / (10.0 * f);
    const size_t cycles = (size_t)(2.2 * (double)RU_ENV_KEEP);
    const double stop = (double)cycles / f;
    ru_measure_cfg cfg;
    ru_measure_cfg_default(&cfg, stop, dt);
    ru_measure *m = NULL;
    assert_int_equal(ru_measure_create(&cfg, &m), RU_OK);
    for (size_t i = 0; i <= cycles * 10; i++) {
        double t = (double)i * dt;
        assert_int_equal(ru_measure_push(m, t, cos(2 * M_PI * f * t + PHASE0)), RU_OK);
    }
    const double *t, *a;
    size_t n;
    ru_measure_envelope(m, &t, &a, &n);
    assert_true(n <= RU_ENV_KEEP);
    assert_true(ru_measure_envelope_capacity(m) <= RU_ENV_KEEP + 1);
    for (size_t i = 1; i < n; i++)
        assert_true(t[i] > t[i - 1]);
    /* the last 10 % of the run: one point per period, none lost */
    size_t k = n;
    while (k > 0 && t[k - 1] >= 0.9 * stop)
        k--;
    RU_ASSERT_NEAR((double)(n - k), 0.1 * (double)cycles, 2.0);
    ru_measure_result r;
    assert_int_equal(ru_measure_finish(m, &r), RU_OK);
    assert_int_equal(r.settled, 1);
    RU_ASSERT_REL(r.settled_amplitude_v, 1.0, 6e-3);
    ru_measure_destroy(m);
}

static void test_bad_input(void **state)
{
    (void)state;
    ru_measure_cfg cfg;
    ru_measure *m = NULL;
    ru_measure_cfg_default(&cfg, 1.0, 0.0);
    assert_int_equal(ru_measure_create(&cfg, &m), RU_ERANGE);
    assert_null(m);
    ru_measure_cfg_default(&cfg, 1.0, 1e-3);
    cfg.growth_hi = cfg.growth_lo;
    assert_int_equal(ru_measure_create(&cfg, &m), RU_ERANGE);
    ru_measure_cfg_default(&cfg, 1.0, 1e-3);
    assert_int_equal(ru_measure_create(NULL, &m), RU_EINPUT);
    assert_int_equal(ru_measure_create(&cfg, &m), RU_OK);
    assert_int_equal(ru_measure_push(m, 0.0, 1.0), RU_OK);
    assert_int_equal(ru_measure_push(m, 0.0, 1.0), RU_EINPUT);
    assert_int_equal(ru_measure_push(m, 1e-3, NAN), RU_EINPUT);
    ru_measure_result r;
    assert_int_equal(ru_measure_finish(m, &r), RU_OK);
    assert_int_equal(r.started, 0);
    assert_int_equal(r.cycles, 0);
    ru_measure_destroy(m);
    ru_measure_destroy(NULL);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_vdp_slow),
        cmocka_unit_test(test_vdp_mid),
        cmocka_unit_test(test_vdp_fast),
        cmocka_unit_test(test_plain_envelope),
        cmocka_unit_test(test_frequency_incommensurate),
        cmocka_unit_test(test_decaying),
        cmocka_unit_test(test_started_from_above),
        cmocka_unit_test(test_constant_not_started),
        cmocka_unit_test(test_dc_offset),
        cmocka_unit_test(test_drift_and_noise),
        cmocka_unit_test(test_not_settled),
        cmocka_unit_test(test_growth_kick_too_high),
        cmocka_unit_test(test_growth_above_kick),
        cmocka_unit_test(test_growth_window_30),
        cmocka_unit_test(test_grows_then_dies),
        cmocka_unit_test(test_memory_bounded),
        cmocka_unit_test(test_envelope_thinned),
        cmocka_unit_test(test_ramp_hint),
        cmocka_unit_test(test_settling_dc_hint),
        cmocka_unit_test(test_ramp_no_hint),
        cmocka_unit_test(test_stall_after_transient),
        cmocka_unit_test(test_bad_input),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
