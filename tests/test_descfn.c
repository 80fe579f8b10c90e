/* test_descfn.c: the describing-function module against closed forms: the cubic
 * and ideal-saturation describing functions, and the amplitude and sigma(A) curve
 * of the van der Pol tank. Circuits are our own values. */
#include "ru_test.h"

#include "ringup/descfn.h"
#include "ringup/loader.h"
#include "ringup/smallsig.h"
#include "ringup/system.h"

#include <stdlib.h>

#define PI 3.14159265358979323846

typedef struct cubic {
    double c1, c3;
} cubic;

static double cubic_fn(void *user, double x)
{
    const cubic *c = user;
    return c->c1 * x + c->c3 * x * x * x;
}

static double sat_fn(void *user, double x)
{
    double d = *(const double *)user;
    return x > d ? d : (x < -d ? -d : x);
}

static void test_cubic_df(void **state)
{
    (void)state;
    cubic c = {-2e-3, 5e-4};
    const double amps[] = {0.01, 0.5, 2.0, 7.5};
    for (size_t i = 0; i < 4; i++) {
        double a = amps[i];
        /* Reference: describing function of y = c1 x + c3 x^3 (sin^3 identity,
         * sin^3 t = (3 sin t - sin 3t)/4): N = c1 + (3/4) c3 a^2. The trapezoid rule
         * over 64 points is exact for this polynomial: 1e-12 relative. */
        RU_ASSERT_REL(ru_df_gain(cubic_fn, &c, 0.0, a, 64), c.c1 + 0.75 * c.c3 * a * a,
                      1e-12);
    }
    /* around a bias x0 the cubic gains 3 c3 x0^2 (expand (x0 + a sin t)^3) */
    RU_ASSERT_REL(ru_df_gain(cubic_fn, &c, 0.3, 0.5, 64),
                  c.c1 + 3 * c.c3 * 0.09 + 0.75 * c.c3 * 0.25, 1e-12);
}

static void test_saturation_df(void **state)
{
    (void)state;
    double d = 1.0;
    const double amps[] = {0.5, 1.0, 1.5, 3.0, 10.0};
    for (size_t i = 0; i < 5; i++) {
        double a = amps[i];
        double want = 1.0;
        if (a > d) /* Reference: ideal saturation (unit slope, limit d), Gelb and
                    * Vander Velde, Multiple-Input Describing Functions (1968), from
                    * memory: N = (2/pi) (asin(d/a) + (d/a) sqrt(1 - (d/a)^2)). */
            want = 2 / PI * (asin(d / a) + d / a * sqrt(1 - d * d / (a * a)));
        /* the kinks make the trapezoid rule converge as 1/samples^2: 4096 samples
         * leave ~1e-6; 1e-5 relative */
        RU_ASSERT_REL(ru_df_gain(sat_fn, &d, 0.0, a, 4096), want, 1e-5);
    }
}

static void test_follower_small_signal(void **state)
{
    (void)state;
    ru_amp a;
    ru_amp_defaults(&a, RU_LAW_FOLLOWER_TANH);
    a.gain = 0.97;
    a.swing_v = 1.2;
    a.rout_ohm = 30;
    /* Reference: the small-amplitude limit of a describing function is the law's
     * slope: d/dvc of (gain swing tanh(vc/swing))/rout at 0 = gain/rout; at 1 uV
     * the cubic term of tanh changes it by (1e-6/1.2)^2/4: 1e-9 relative. */
    RU_ASSERT_REL(ru_df_amp_gain(&a, 0.0, 0.0, 1e-6), a.gain / a.rout_ohm, 1e-9);
    /* Reference: tanh x = x - x^3/3 + ..., so for small a the describing function
     * is gain/rout (1 - (a/swing)^2/4) (the cubic's 3/4 rule); the next term is
     * O((a/swing)^4) = 5e-8 at a = 0.02 swing: 1e-6 relative. */
    double am = 0.02 * a.swing_v;
    RU_ASSERT_REL(ru_df_amp_gain(&a, 0.0, 0.0, am),
                  a.gain / a.rout_ohm * (1 - 0.25 * 0.02 * 0.02), 1e-6);
}

/* Each law's describing-function contribution (its descriptor's df_out). */
static void test_law_contributions(void **state)
{
    (void)state;
    ru_amp a;
    ru_amp_defaults(&a, RU_LAW_DIFF_PAIR_TANH);
    a.itail_a = 2e-3;
    double s = 2.0 * a.n * 8.617333262e-5 * (a.temp_c + 273.15); /* 2 n kT/q */
    /* Reference: small-signal limit = the slope itail/(2 n vt) of itail tanh(vc/(2 n
     * vt)) (the pair's transconductance); the cubic term moves it by (a/s)^2/4 =
     * 2.5e-11 at a = 1e-5 s: 1e-9 relative. */
    RU_ASSERT_REL(ru_df_amp_gain(&a, 0.0, 0.0, 1e-5 * s), a.itail_a / s, 1e-9);
    /* Reference: driven hard (a = 100 s) the pair is a limiter of level itail:
     * 4 itail/(pi a) (the ideal relay's describing function), less the rounded
     * corners, a factor 1 - pi^2/(24 (a/s)^2) (from the asymptotics of
     * integral (1 - tanh u) u du = pi^2/24; checked against scipy.integrate.quad,
     * which gives 0.999958873 at a/s = 100). The remainder is O((s/a)^4): 2e-8. */
    double k = 100.0, amp = k * s;
    RU_ASSERT_REL(ru_df_amp_gain(&a, 0.0, 0.0, amp),
                  4.0 * a.itail_a / (PI * amp) * (1.0 - PI * PI / (24.0 * k * k)), 1e-7);
    /* The opamp's output follows vc only through its integrator: it has no
     * memoryless describing function (NAN by definition, ringup/descfn.h). */
    ru_amp_defaults(&a, RU_LAW_OPAMP);
    assert_true(isnan(ru_df_amp_gain(&a, 0.0, 0.0, 0.1)));
    a.law = RU_LAW_COUNT;
    assert_true(isnan(ru_df_amp_gain(&a, 0.0, 0.0, 0.1)));
}

static ru_circuit *load(const char *text)
{
    ru_circuit *c = NULL;
    ru_error err;
    if (ru_circuit_load_string(text, "test.yaml", RU_MODELS_DIR, &c, &err) != RU_OK)
        fail_msg("load: %s", err.msg);
    return c;
}

/* van der Pol tank: i = -a v + b v^3 across L || C. The describing function of the
 * conductance is -a + (3/4) b A^2, so (Reference: second-order linear ODE with that
 * conductance; method of averaging, which coincides with the describing function
 * for a cubic) sigma(A) = (a - (3/4) b A^2)/(2 C), settled at A = 2 sqrt(a/(3b)),
 * and the frequency stays sqrt(1/(LC) - sigma^2). */
static void test_vdp_curve(void **state)
{
    (void)state;
    ru_circuit *c = load("stray: 1p\n"
                         "parts:\n"
                         "  L1: {type: inductor, nodes: [t, gnd], value: 2.2mH}\n"
                         "  C1: {type: capacitor, nodes: [t, gnd], value: 47n}\n"
                         "  G1: {type: poly-conductance, nodes: [t, gnd], "
                         "coeffs: [0, -0.8m, 0, 0.05m]}\n");
    ru_system *s = NULL;
    ru_error err;
    assert_int_equal(ru_system_create(c, &s, &err), RU_OK);
    double x[2] = {0, 0};
    ru_df_point curve[200];
    size_t n = 0;
    ru_df_result res;
    assert_int_equal(ru_df_analyse(s, x, ru_circuit_find_node(c, "t"), 0, 0, curve, 200,
                                   &n, &res, &err),
                     RU_OK);
    const double a = 0.8e-3, b = 0.05e-3, cap = 47e-9 + 1e-12, l = 2.2e-3;
    assert_true(res.found);
    RU_ASSERT_REL(res.settled_amplitude_v, 2 * sqrt(a / (3 * b)), 1e-9);
    RU_ASSERT_REL(res.frequency_hz, 1 / (2 * PI * sqrt(l * cap)), 1e-9);
    assert_true(n > 20);
    for (size_t i = 0; i < n; i++) {
        double A = curve[i].amplitude_v;
        double sg = (a - 0.75 * b * A * A) / (2 * cap);
        RU_ASSERT_NEAR(curve[i].growth_rate_per_s, sg, 1e-9 * a / (2 * cap));
        double w2 = 1 / (l * cap) - sg * sg;
        RU_ASSERT_REL(curve[i].frequency_hz, sqrt(w2) / (2 * PI), 1e-9);
    }
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* The handle on the same tank: sigma at amplitudes off the sweep's grid, and the
 * start-up time. Reference: with sigma(A) = s0 (1 - A^2/A*^2) the envelope
 * equation dA/dt = sigma(A) A integrates to the averaged van der Pol envelope,
 * t(a0 -> a1) = ln[(a1^2/a0^2) (A*^2 - a0^2) / (A*^2 - a1^2)] / (2 s0)
 * (method of averaging, e.g. Strogatz, Nonlinear Dynamics and Chaos, sec. 7.6,
 * from memory). The adaptive Simpson rule runs to 1e-7 relative; 1e-6. */
static void test_vdp_startup_integral(void **state)
{
    (void)state;
    ru_circuit *c = load("stray: 1p\n"
                         "parts:\n"
                         "  L1: {type: inductor, nodes: [t, gnd], value: 2.2mH}\n"
                         "  C1: {type: capacitor, nodes: [t, gnd], value: 47n}\n"
                         "  G1: {type: poly-conductance, nodes: [t, gnd], "
                         "coeffs: [0, -0.8m, 0, 0.05m]}\n");
    ru_system *s = NULL;
    ru_error err;
    assert_int_equal(ru_system_create(c, &s, &err), RU_OK);
    double x[2] = {0, 0};
    ru_df *d = NULL;
    assert_int_equal(ru_df_create(s, x, ru_circuit_find_node(c, "t"), 0, &d, &err), RU_OK);
    const double a = 0.8e-3, b = 0.05e-3, cap = 47e-9 + 1e-12, s0 = a / (2 * cap);
    const double amax = 2 * sqrt(a / (3 * b));
    const double amps[] = {3.3e-4, 0.71, 2.9, 4.05};
    for (int i = 0; i < 4; i++) {
        ru_df_point p;
        assert_int_equal(ru_df_at(d, amps[i], &p, &err), RU_OK);
        RU_ASSERT_NEAR(p.growth_rate_per_s, s0 * (1 - amps[i] * amps[i] / (amax * amax)),
                       1e-9 * s0);
    }
    const double from[] = {1e-9, 1e-4, 0.5}, to[] = {0.9, 0.5, 0.99};
    for (int i = 0; i < 3; i++) {
        double t, a0 = from[i] * amax, a1 = to[i] * amax;
        assert_int_equal(ru_df_startup_time(d, a0, a1, &t, &err), RU_OK);
        double want = log(a1 * a1 / (a0 * a0) * (amax * amax - a0 * a0) /
                          (amax * amax - a1 * a1)) / (2 * s0);
        RU_ASSERT_REL(t, want, 1e-6);
    }
    /* above the settled amplitude sigma < 0: the envelope never gets there */
    double t;
    assert_int_equal(ru_df_startup_time(d, 0.1, 1.2 * amax, &t, &err), RU_ERANGE);
    assert_true(isnan(t));
    ru_df_destroy(d);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* A lossy tank has no amplitude to settle at: not found, with a note. */
static void test_no_start(void **state)
{
    (void)state;
    ru_circuit *c = load("parts:\n"
                         "  L1: {type: inductor, nodes: [t, gnd], value: 1mH}\n"
                         "  C1: {type: capacitor, nodes: [t, gnd], value: 1u}\n"
                         "  R1: {type: resistor, nodes: [t, gnd], value: 1k}\n");
    ru_system *s = NULL;
    ru_error err;
    assert_int_equal(ru_system_create(c, &s, &err), RU_OK);
    double x[2] = {0, 0};
    size_t n = 0;
    ru_df_result res;
    assert_int_equal(ru_df_analyse(s, x, 1, 0, 10.0, NULL, 0, &n, &res, &err), RU_OK);
    assert_false(res.found);
    assert_true(isnan(res.settled_amplitude_v));
    assert_true(res.note[0] != '\0');
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_cubic_df),
        cmocka_unit_test(test_saturation_df),
        cmocka_unit_test(test_follower_small_signal),
        cmocka_unit_test(test_law_contributions),
        cmocka_unit_test(test_vdp_curve),
        cmocka_unit_test(test_vdp_startup_integral),
        cmocka_unit_test(test_no_start),
    };
    return cmocka_run_group_tests_name("descfn", tests, NULL, NULL);
}
