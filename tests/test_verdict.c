/* test_verdict.c: the verdict (ringup/verdict.h) on synthetic probe waveforms whose
 * history is known by construction: each case builds a signal, measures it with
 * ru_measure and judges it with the levels a run would give (seed, solver floor,
 * poles, drives, distance from the operating point). Reference for every case: the
 * constructed waveform read against the README's definition of the verdicts
 * ("Started, and the other verdicts"). */
#include "ru_test.h"

#include "ringup/measure.h"
#include "ringup/verdict.h"

#include <stdlib.h>
#include <string.h>

#define F_HZ 1000.0
#define SPP 64.0 /* samples per period */

typedef double (*env_fn)(double t);

/* Measures env(t) cos(w t) + dc(t) over [0, stop] into r. */
static void measure(env_fn env, double (*dc)(double), double stop, ru_measure_result *r)
{
    ru_measure_cfg cfg;
    ru_measure_cfg_default(&cfg, stop, 1.0 / (SPP * F_HZ));
    cfg.period_hint_s = 1.0 / F_HZ;
    ru_measure *m = NULL;
    assert_int_equal(ru_measure_create(&cfg, &m), RU_OK);
    size_t n = (size_t)llround(stop / cfg.sample_s);
    for (size_t i = 0; i <= n; i++) {
        double t = (double)i * cfg.sample_s;
        double v = env(t) * cos(2 * M_PI * F_HZ * t + 0.05) + (dc ? dc(t) : 0.0);
        assert_int_equal(ru_measure_push(m, t, v), RU_OK);
    }
    assert_int_equal(ru_measure_finish(m, r), RU_OK);
    ru_measure_destroy(m);
}

static ru_verdict_result judge(const ru_measure_result *r, const ru_verdict_input *base)
{
    ru_verdict_input in = *base;
    in.meas = r;
    ru_verdict_result v;
    ru_verdict_judge(&in, &v);
    return v;
}

/* Averaged van der Pol envelope from 1 uV (a thermal seed) to 2 V at sigma = 300 /s. */
static double env_vdp(double t)
{
    double a0 = 1e-6, A = 2.0, q = A * A / (a0 * a0) - 1.0;
    return A / sqrt(1.0 + q * exp(-2.0 * 300.0 * t));
}
/* A power-on transient leaves the tone at 0.3 V, from where it grows to 3 V: only
 * 10x from its first visible cycle (the case a fixed-factor rule got wrong). */
static double env_bias(double t)
{
    double a0 = 0.3, A = 3.0, q = A * A / (a0 * a0) - 1.0;
    return A / sqrt(1.0 + q * exp(-2.0 * 200.0 * t));
}
static double env_decay(double t) { return 0.5 * exp(-50.0 * t); }
static double env_flat(double t) { (void)t; return 0.8; }
static double env_none(double t) { (void)t; return 0.0; }
static double env_tiny(double t) { (void)t; return 2e-6; }
static double dc_rail(double t) { (void)t; return 13.4; }

static void test_started_from_noise(void **state)
{
    (void)state;
    ru_measure_result r;
    measure(env_vdp, NULL, 0.25, &r); /* window 25 ms: 25 cycles, flat to 1e-20 */
    ru_verdict_input in;
    ru_verdict_input_default(&in);
    in.seed_v = 1e-6;
    in.floor_v = 1e-9;
    in.growth_per_s = 300.0;
    ru_verdict_result v = judge(&r, &in);
    assert_int_equal(v.verdict, RU_VERDICT_STARTED);
    assert_true(v.settled && v.certain);
    /* cut at 35 ms, still growing (0.9 A is reached at ~51 ms): started, not
     * settled, not certain (run on) */
    measure(env_vdp, NULL, 0.035, &r);
    v = judge(&r, &in);
    assert_int_equal(v.verdict, RU_VERDICT_STARTED);
    assert_false(v.settled);
    assert_false(v.certain);
    /* the same signal judged against a solver floor of 10 mV: 2 V is not 100x
     * above it, and the decision falls to the quiet branch: not started */
    measure(env_vdp, NULL, 0.25, &r);
    in.floor_v = 0.05;
    v = judge(&r, &in);
    assert_int_not_equal(v.verdict, RU_VERDICT_STARTED);
}

static void test_started_after_bias_transient(void **state)
{
    (void)state;
    ru_measure_result r;
    measure(env_bias, NULL, 0.1, &r);
    ru_verdict_input in;
    ru_verdict_input_default(&in);
    in.seed_v = 2e-6; /* thermal level: the transient is not the seed */
    in.growth_per_s = 200.0;
    ru_verdict_result v = judge(&r, &in);
    assert_int_equal(v.verdict, RU_VERDICT_STARTED);
    assert_non_null(strstr(v.note, "grown from"));
}

static void test_decay_is_no_start(void **state)
{
    (void)state;
    ru_measure_result r;
    measure(env_decay, NULL, 0.1, &r); /* window 10 ms: falls by 1 - e^-0.5 = 39 % */
    ru_verdict_input in;
    ru_verdict_input_default(&in);
    in.growth_per_s = -50.0;
    ru_verdict_result v = judge(&r, &in);
    assert_int_equal(v.verdict, RU_VERDICT_NO_START);
    assert_true(v.certain);
    /* the same decay while the poles say it grows, before 3x the predicted
     * start-up: undecided, not certain (the auto length runs on) */
    in.growth_per_s = 100.0;
    in.t_expect_s = 0.2;
    v = judge(&r, &in);
    assert_int_equal(v.verdict, RU_VERDICT_UNDECIDED);
    assert_false(v.certain);
    /* ... and once 3x the predicted start-up has passed: no-start */
    in.t_expect_s = 0.03;
    v = judge(&r, &in);
    assert_int_equal(v.verdict, RU_VERDICT_NO_START);
}

static void test_slow_ringdown_window_too_short(void **state)
{
    (void)state;
    /* a flat-looking tone whose poles decay at 2 /s: the 10 ms window is far shorter
     * than 1/2 s, so a held tone cannot be told from a slow ring-down */
    ru_measure_result r;
    measure(env_bias, NULL, 0.1, &r);
    ru_verdict_input in;
    ru_verdict_input_default(&in);
    in.growth_per_s = -2.0;
    ru_verdict_result v = judge(&r, &in);
    assert_int_equal(v.verdict, RU_VERDICT_UNDECIDED);
    assert_false(v.certain);
}

static void test_driven(void **state)
{
    (void)state;
    ru_measure_result r;
    measure(env_flat, NULL, 0.05, &r);
    ru_verdict_input in;
    ru_verdict_input_default(&in);
    in.ndrive = 1;
    in.drive_hz[0] = F_HZ / 3.0; /* the tone is the drive's third harmonic */
    ru_verdict_result v = judge(&r, &in);
    assert_int_equal(v.verdict, RU_VERDICT_DRIVEN);
    assert_true(v.tone_figures);
    /* a drive far from the tone (1.37 kHz against 1 kHz, no harmonic within 1 %):
     * the flat tone is judged as such (never grew: no start) */
    in.drive_hz[0] = 1370.0;
    v = judge(&r, &in);
    assert_int_equal(v.verdict, RU_VERDICT_NO_START);
}

static void test_latched(void **state)
{
    (void)state;
    ru_measure_result r;
    measure(env_none, dc_rail, 0.05, &r); /* sits at 13.4 V, no tone */
    ru_verdict_input in;
    ru_verdict_input_default(&in);
    in.dc_scale_v = 13.5;
    in.op_distance = 13.4 / 13.5; /* the operating point is at 0 V */
    in.growth_per_s = NAN;
    ru_verdict_result v = judge(&r, &in);
    assert_int_equal(v.verdict, RU_VERDICT_LATCHED);
    /* at its operating point instead: a quiet circuit, no start */
    in.op_distance = 0.0;
    v = judge(&r, &in);
    assert_int_equal(v.verdict, RU_VERDICT_NO_START);
}

static void test_too_small_to_tell(void **state)
{
    (void)state;
    ru_measure_result r;
    measure(env_tiny, NULL, 0.05, &r); /* 2 uV steady */
    ru_verdict_input in;
    ru_verdict_input_default(&in);
    in.floor_v = 1e-7; /* 2 uV is only 20x the floor */
    ru_verdict_result v = judge(&r, &in);
    assert_int_equal(v.verdict, RU_VERDICT_UNDECIDED);
    assert_non_null(strstr(v.note, "noise floor"));
}

static void test_names(void **state)
{
    (void)state;
    assert_string_equal(ru_verdict_name(RU_VERDICT_STARTED), "started");
    assert_string_equal(ru_verdict_name(RU_VERDICT_NO_START), "no-start");
    assert_string_equal(ru_verdict_name(RU_VERDICT_LATCHED), "latched");
    assert_string_equal(ru_verdict_name(RU_VERDICT_UNDECIDED), "undecided");
    assert_string_equal(ru_verdict_name(RU_VERDICT_DRIVEN), "driven");
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_started_from_noise),
        cmocka_unit_test(test_started_after_bias_transient),
        cmocka_unit_test(test_decay_is_no_start),
        cmocka_unit_test(test_slow_ringdown_window_too_short),
        cmocka_unit_test(test_driven),
        cmocka_unit_test(test_latched),
        cmocka_unit_test(test_too_small_to_tell),
        cmocka_unit_test(test_names),
    };
    return cmocka_run_group_tests_name("verdict", tests, NULL, NULL);
}
