/* test_steady.c: the periodic steady state (shooting Newton, Floquet multipliers)
 * against closed forms of the van der Pol oscillator, and its refusals and guards.
 * scipy's high-accuracy check of the period and amplitude at eps = 1 and 0.1 is
 * tests/ref_steady.py. Circuits are our own values. */
#include "ru_test.h"

#include "ringup/loader.h"
#include "ringup/smallsig.h"
#include "ringup/steady.h"
#include "ringup/system.h"
#include "ringup/tone.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define PI 3.14159265358979323846

static ru_circuit *load(const char *text)
{
    ru_circuit *c = NULL;
    ru_error err;
    if (ru_circuit_load_string(text, "test.yaml", RU_MODELS_DIR, &c, &err) != RU_OK)
        fail_msg("load: %s", err.msg);
    return c;
}

/* van der Pol in Rayleigh's form: L = C = 1, i = -eps v + (eps/3) v^3, so v obeys
 * v'' - eps (1 - v^2) v' + v = 0 (see tests/ref_steady.py). */
static ru_circuit *vdp(double eps)
{
    char text[512];
    snprintf(text, sizeof text,
             "parts:\n"
             "  L1: {type: inductor, nodes: [v, gnd], value: 1}\n"
             "  C1: {type: capacitor, nodes: [v, gnd], value: 1}\n"
             "  G1: {type: poly-conductance, nodes: [v, gnd], coeffs: [0, %.17g, 0, %.17g]}\n"
             "measure: {probe: v}\n",
             -eps, eps / 3.0);
    return load(text);
}

static ru_tone *solve(const ru_circuit *c, const ru_tone_request *rq, ru_steady_view *v)
{
    ru_tone *t = NULL;
    ru_error err;
    ru_error_clear(&err);
    if (ru_tone_run(c, rq, &t, &err) != RU_OK)
        fail_msg("steady: %s", err.msg);
    ru_tone_steady(t, v);
    return t;
}

static void test_floquet_weak_vdp(void **state)
{
    (void)state;
    const double eps[] = {0.01, 0.005};
    for (int i = 0; i < 2; i++) {
        ru_circuit *c = vdp(eps[i]);
        ru_tone_request rq;
        ru_tone_request_default(&rq);
        ru_steady_view v;
        ru_tone *t = solve(c, &rq, &v);
        assert_true(v.found);
        /* Reference: method of averaging (Krylov-Bogoliubov): the amplitude obeys
         * dA/dt = (eps/2) A (1 - A^2/4); linearised at A = 2 the disturbance decays
         * as exp(-eps t), so over the period 2 pi the multiplier is exp(-2 pi eps)
         * and the recovery time 1/eps. First-order averaging is exact up to a
         * relative O(eps^2) in that exponent; measured here the coefficient is
         * about 1/8, so 0.5 eps^2 relative bounds it with room. */
        double expo = -log(hypot(v.multipliers[1].re, v.multipliers[1].im)) / (2 * PI);
        RU_ASSERT_REL(expo, eps[i], 0.5 * eps[i] * eps[i]);
        RU_ASSERT_REL(v.multipliers[1].re, exp(-2 * PI * eps[i]),
                      0.5 * eps[i] * eps[i] * 2 * PI * eps[i]);
        RU_ASSERT_NEAR(v.multipliers[1].im, 0.0, 1e-12);
        RU_ASSERT_REL(v.recovery_time_s, 1.0 / eps[i], 0.5 * eps[i] * eps[i] + 1e-3 * eps[i]);
        /* Reference: one multiplier of an autonomous limit cycle is exactly 1 (the
         * flow's own direction); 1e-7 is ~100x the final tolerance 1e-10 (the
         * sensitivities' global error over a period) */
        RU_ASSERT_NEAR(v.multipliers[0].re, 1.0, 1e-7);
        RU_ASSERT_NEAR(v.phase_multiplier_error, 0.0, 1e-7);
        ru_tone_destroy(t);
        ru_circuit_destroy(c);
    }
}

static void test_lindstedt_period(void **state)
{
    (void)state;
    double eps = 0.05;
    ru_circuit *c = vdp(eps);
    ru_tone_request rq;
    ru_tone_request_default(&rq);
    ru_steady_view v;
    ru_tone *t = solve(c, &rq, &v);
    /* Reference: Lindstedt-Poincare series of van der Pol (from memory; checked
     * against scipy at eps = 0.1 to 4e-11 by tests/ref_steady.py's reference run):
     * w = 1 - eps^2/16 + 17 eps^4/3072 + O(eps^6); at eps = 0.05 the truncation is
     * ~6e-13, so the period must hold the promised 1e-9 relative. Amplitude:
     * averaging gives 2 + O(eps^2): 2 within eps^2 (the measured shift is 1e-5 at
     * eps = 0.1). */
    double w = 1 - eps * eps / 16 + 17 * pow(eps, 4) / 3072;
    RU_ASSERT_REL(v.period_s, 2 * PI / w, 1e-9);
    RU_ASSERT_REL(v.frequency_hz, w / (2 * PI), 1e-9);
    RU_ASSERT_NEAR(v.amplitude_v, 2.0, eps * eps);
    /* the period's own error estimate (one more integration at rtol/10) must be
     * below the promise, and the truth must be within a few times the estimate */
    assert_true(v.period_rel_error < 1e-9);
    /* Reference: van der Pol's limit cycle is odd-symmetric (x -> -x maps it onto
     * itself), so the DC level is 0 and even harmonics vanish; the grid mean
     * carries the integration error only */
    RU_ASSERT_NEAR(v.dc_level_v, 0.0, 1e-8);
    ru_tone_spectrum sp;
    ru_tone_spectrum_get(t, &sp);
    assert_true(sp.harmonics_dbc[0] < -150);
    /* Reference: the cubic's third harmonic for small eps: v ~ 2 cos t + (3 eps/4 -
     * ...) sin 3t ... to first order its amplitude is eps/4 of the fundamental's
     * 2 (Lindstedt, first order: -(eps/4) sin 3t with A = 2, from memory), i.e.
     * 20 log10(eps/8) dBc; within 0.2 dB at eps = 0.05 (O(eps) relative) */
    RU_ASSERT_NEAR(sp.harmonics_dbc[1], 20 * log10(eps / 8), 0.2);
    ru_tone_destroy(t);
    ru_circuit_destroy(c);
}

static void test_given_start(void **state)
{
    (void)state;
    ru_circuit *c = vdp(0.3);
    ru_tone_request rq;
    ru_tone_request_default(&rq);
    ru_steady_view v;
    ru_tone *t = solve(c, &rq, &v);
    /* from a quarter period along the cycle, with a period 2 % off and the state
     * 5 % larger (as the end of a slightly unsettled run gives) */
    size_t n = v.n;
    double *x = malloc(n * sizeof *x);
    for (size_t i = 0; i < n; i++)
        x[i] = 1.05 * v.grid_x[(v.ngrid / 4) * n + i];
    ru_tone_request rq2 = rq;
    rq2.x_start = x;
    rq2.period_start_s = 1.02 * v.period_s;
    ru_steady_view v2;
    ru_tone *t2 = solve(c, &rq2, &v2);
    assert_string_equal(v2.start, "given state");
    /* Reference: the limit cycle is unique (Lienard's theorem for van der Pol), so
     * any start on its basin gives the same period and amplitude; within 1e-9 */
    RU_ASSERT_REL(v2.period_s, v.period_s, 1e-9);
    RU_ASSERT_REL(v2.amplitude_v, v.amplitude_v, 1e-8);
    free(x);
    ru_tone_destroy(t2);
    ru_tone_destroy(t);
    ru_circuit_destroy(c);
}

static void test_no_oscillation(void **state)
{
    (void)state;
    /* a lossy tank with a positive cubic conductance: every pole left of the jw
     * axis (Reference: sigma = -(1/R)/(2C) for the parallel RLC), no amplitude */
    ru_circuit *c = load("parts:\n"
                         "  L1: {type: inductor, nodes: [v, gnd], value: 1}\n"
                         "  C1: {type: capacitor, nodes: [v, gnd], value: 1}\n"
                         "  R1: {type: resistor, nodes: [v, gnd], value: 20}\n"
                         "  G1: {type: poly-conductance, nodes: [v, gnd], coeffs: [0, 0, 0, 1m]}\n"
                         "measure: {probe: v}\n");
    ru_tone_request rq;
    ru_tone_request_default(&rq);
    ru_steady_view v;
    ru_tone *t = solve(c, &rq, &v);
    assert_false(v.found);
    assert_non_null(strstr(v.note, "stable"));
    ru_tone_destroy(t);
    /* started by hand on a swing of 1 V: the tone dies out. It must never come
     * back as a periodic state at the operating point (the trivial solution) */
    ru_system *s = NULL;
    ru_error err;
    assert_int_equal(ru_system_create(c, &s, &err), RU_OK);
    double x[2] = {1.0, 0.0};
    rq.x_start = x;
    rq.period_start_s = 2 * PI;
    t = NULL;
    ru_status st = ru_tone_run(c, &rq, &t, &err);
    if (st == RU_OK) {
        ru_tone_steady(t, &v);
        assert_false(v.found);
    } else {
        assert_int_equal(st, RU_ENOCONVERGE);
        assert_non_null(strstr(err.msg, "operating point"));
    }
    ru_tone_destroy(t);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

static void test_refusals(void **state)
{
    (void)state;
    ru_circuit *c = load("parts:\n"
                         "  VS: {type: supply, nodes: [a, gnd], wave: sine, amplitude: 1, "
                         "freq: 1k}\n"
                         "  R1: {type: resistor, nodes: [a, b], value: 1k}\n"
                         "  C1: {type: capacitor, nodes: [b, gnd], value: 1u}\n"
                         "  L1: {type: inductor, nodes: [b, gnd], value: 1}\n"
                         "measure: {probe: b}\n");
    ru_tone_request rq;
    ru_tone_request_default(&rq);
    ru_tone *t = NULL;
    ru_error err;
    ru_error_clear(&err);
    assert_int_equal(ru_tone_run(c, &rq, &t, &err), RU_EINPUT);
    assert_null(t);
    assert_non_null(strstr(err.msg, "part VS"));
    assert_int_equal(err.line, 2);
    ru_circuit_destroy(c);
    /* a probe on a supply's node sees no state */
    c = load("parts:\n"
             "  VS: {type: supply, nodes: [a, gnd], value: 1}\n"
             "  R1: {type: resistor, nodes: [a, b], value: 1k}\n"
             "  C1: {type: capacitor, nodes: [b, gnd], value: 1u}\n"
             "measure: {probe: a}\n");
    assert_int_equal(ru_tone_run(c, &rq, &t, &err), RU_EINPUT);
    ru_circuit_destroy(c);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_floquet_weak_vdp),
        cmocka_unit_test(test_lindstedt_period),
        cmocka_unit_test(test_given_start),
        cmocka_unit_test(test_no_oscillation),
        cmocka_unit_test(test_refusals),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
