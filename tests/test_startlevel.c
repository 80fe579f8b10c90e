/* test_startlevel.c: the dominant mode's start level (engines/startlevel.h) on a
 * linear tank with a negative conductance, where the growing part of the response
 * has a closed form: a current source ramped into the tank, a step, and the
 * thermal noise of a resistor across it. Circuits are our own values. */
#include "base/cplx.h"
#include "ru_test.h"

#include "engines/startlevel.h"
#include "ringup/loader.h"
#include "ringup/smallsig.h"
#include "ringup/system.h"

#include <complex.h>
#include <stdio.h>

#define KB 1.380649e-23

static const double C = 100e-9 + 1e-12, G = -0.2e-3, I0 = 1e-3;

static ru_circuit *load(const char *text)
{
    ru_circuit *c = NULL;
    ru_error err;
    if (ru_circuit_load_string(text, "test.yaml", RU_MODELS_DIR, &c, &err) != RU_OK)
        fail_msg("load: %s", err.msg);
    return c;
}

/* The tank's start level for one file; the operating point and the dominant pole
 * from the small-signal engine. */
static ru_start_level level_of(const char *text, double *lam_re, double *lam_im)
{
    ru_circuit *c = load(text);
    ru_system *s = NULL;
    ru_error err;
    assert_int_equal(ru_system_create(c, &s, &err), RU_OK);
    size_t n = ru_system_size(s);
    double x[8] = {0};
    ru_pole p[8];
    assert_true(n <= 8);
    assert_int_equal(ru_oppoint_solve(s, x, 0, NULL, &err), RU_OK);
    assert_int_equal(ru_poles_compute(s, x, p, &err), RU_OK);
    int d = ru_poles_dominant(p, n);
    assert_true(d >= 0);
    *lam_re = p[d].re_per_s;
    *lam_im = p[d].im_rad_per_s;
    ru_start_level sl;
    if (ru_start_level_compute(s, x, p[d], ru_circuit_find_node(c, "t"), 0, 1.0, 27.0, &sl,
                               &err) != RU_OK)
        fail_msg("start level: %s", err.msg);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
    return sl;
}

/* Reference: Laplace transform of the tank, C v' + G v + i_L = I(t), L i_L' = v:
 * V(s) = s L I(s) / (s^2 L C + s L G + 1). A current that ramps from 0 to I0 over
 * T has I(s) = I0 (1 - e^{-sT}) / (s^2 T); the growing part of v(t) is the residue
 * pair at the pole lambda = sigma + j w, 2 Re[L I0 (1 - e^{-lambda T}) /
 * (T lambda L C (lambda - conj lambda)) e^{lambda t}], whose envelope at t = 0 is
 *   A = I0 |1 - e^{-lambda T}| / (T C |lambda| w)   (T -> 0: I0 / (C w)).
 * The engine integrates the same linear equations numerically (product rule,
 * refinement to 1e-10), so 1e-7 relative. */
static double ramp_level(double re, double im, double T)
{
    double complex lam = RU_CMPLX(re, im);
    if (T == 0)
        return I0 / (C * im);
    return I0 * cabs(1 - cexp(-lam * T)) / (T * C * cabs(lam) * im);
}

static void test_ramped_current(void **state)
{
    (void)state;
    const double rises[] = {0, 20e-6, 150e-6};
    for (int i = 0; i < 3; i++) {
        char text[600];
        snprintf(text, sizeof text,
                 "parts:\n"
                 "  L1: {type: inductor, nodes: [t, gnd], value: 1mH}\n"
                 "  C1: {type: capacitor, nodes: [t, gnd], value: 100n}\n"
                 "  G1: {type: poly-conductance, nodes: [t, gnd], coeffs: [0, -0.2m]}\n"
                 "  IS: {type: current, nodes: [gnd, t], value: 1m, rise: %g}\n",
                 rises[i]);
        double re, im;
        ru_start_level sl = level_of(text, &re, &im);
        /* Reference: the tank's pole, sigma = -G/(2C), w^2 = 1/(LC) - sigma^2 */
        RU_ASSERT_REL(re, -G / (2 * C), 1e-9);
        assert_int_equal(sl.kind, RU_START_POWER_ON);
        assert_false(sl.driven);
        RU_ASSERT_REL(sl.level_v, ramp_level(re, im, rises[i]), 1e-7);
        RU_ASSERT_REL(sl.det_v, sl.level_v, 1e-15);
        /* the step picture (the initial state against the end point) ignores the
         * ramp: Reference: the T -> 0 limit of the closed form above */
        RU_ASSERT_REL(sl.step_v, ramp_level(re, im, 0), 1e-7);
    }
}

/* A resistor across the tank: its noise current, two-sided density 2kT/R, drives
 * v(t) = integral h(t - tau) i_n(tau) dtau with h's growing part
 * Re[(lambda / (j w C)) e^{lambda t}] (residue of V/I at lambda), so the envelope
 * extrapolated to t = 0 is |lambda| / (w C) |W| with W = integral e^{-lambda tau}
 * i_n dtau, E|W|^2 = (2kT/R) / (2 sigma) (Reference: Ito isometry / white noise
 * through a first-order unstable mode, e.g. Gardiner, Handbook of Stochastic
 * Methods, the Ornstein-Uhlenbeck variance with the sign of the drift reversed).
 * W is a circular complex Gaussian, so |W|^2 is exponential and E ln|W| =
 * ln sqrt(E|W|^2) - gamma_E / 2, s.d. of ln|W| = pi / sqrt(24) (Reference: the
 * exponential distribution's log-moments, digamma(1) = -gamma_E, trigamma(1) =
 * pi^2/6). Exact for this linear circuit: 1e-9 relative. */
static void test_resistor_noise(void **state)
{
    (void)state;
    /* the noise kick, and power-on with its default noise: with no supply to ramp
     * the two starts are the same physics */
    const char *kicks[] = {"run: {kick: noise}\n", ""};
    for (int k = 0; k < 2; k++) {
        char text[600];
        snprintf(text, sizeof text, "parts:\n"
                                     "  L1: {type: inductor, nodes: [t, gnd], value: 1mH}\n"
                                     "  C1: {type: capacitor, nodes: [t, gnd], value: 100n}\n"
                                     "  G1: {type: poly-conductance, nodes: [t, gnd], "
                                     "coeffs: [0, -0.3m]}\n"
                                     "  R1: {type: resistor, nodes: [t, gnd], value: 10k}\n"
                                     "%s", kicks[k]);
        double re, im;
        ru_start_level sl = level_of(text, &re, &im);
        double kt = KB * 300.15, var = 2 * kt / 10e3 / (2 * re);
        double rms = hypot(re, im) / (im * C) * sqrt(var);
        assert_int_equal(sl.kind, k == 0 ? RU_START_NOISE : RU_START_POWER_ON);
        RU_ASSERT_REL(sl.noise_rms_v, rms, 1e-9);
        RU_ASSERT_REL(sl.level_v, rms * exp(-0.5 * 0.5772156649015329), 1e-9);
        RU_ASSERT_REL(sl.log_sd, 3.14159265358979323846 / sqrt(24.0), 1e-12);
        assert_true(sl.det_v == 0);
    }
}

/* A sine source keeps driving: there is no start level to speak of. */
static void test_driven(void **state)
{
    (void)state;
    double re, im;
    ru_start_level sl = level_of("parts:\n"
                                 "  L1: {type: inductor, nodes: [t, gnd], value: 1mH}\n"
                                 "  C1: {type: capacitor, nodes: [t, gnd], value: 100n}\n"
                                 "  G1: {type: poly-conductance, nodes: [t, gnd], "
                                 "coeffs: [0, -0.2m]}\n"
                                 "  IS: {type: current, nodes: [gnd, t], wave: sine, "
                                 "amplitude: 1u, freq: 3k}\n",
                                 &re, &im);
    assert_true(sl.driven);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_ramped_current),
        cmocka_unit_test(test_resistor_noise),
        cmocka_unit_test(test_driven),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
