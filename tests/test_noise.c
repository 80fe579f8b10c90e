/* test_noise.c: the thermal-noise kick against the kT/C result and the noise
 * generator's own statistics. Circuits are our own values. */
#include "ru_test.h"

#include "ringup/circuit.h"
#include "ringup/system.h"
#include "ringup/transient.h"
#include "system/noise.h"

#include <stdlib.h>

#define K_BOLTZMANN 1.380649e-23 /* J/K, exact in the 2019 SI */

/* Knots are unit-variance Gaussians: mean 0 and variance 1 over 200000 knots within
 * 5 standard errors (Reference: sampling distribution of the mean, 1/sqrt(N), and
 * of the variance, sqrt(2/N), for a normal population). */
static void test_knots(void **state)
{
    (void)state;
    ru_noise nz = {1, 42, 1e-6, 0};
    const int n = 200000;
    double s = 0, s2 = 0, c1 = 0;
    double prev = ru_noise_unit(&nz, 3, 0.0);
    for (int k = 1; k <= n; k++) {
        double v = ru_noise_unit(&nz, 3, k * 1e-6); /* on the knots */
        s += v;
        s2 += v * v;
        c1 += v * prev;
        prev = v;
    }
    double mean = s / n, var = s2 / n - mean * mean;
    RU_ASSERT_NEAR(mean, 0.0, 5.0 / sqrt(n));
    RU_ASSERT_NEAR(var, 1.0, 5.0 * sqrt(2.0 / n));
    /* neighbouring knots are independent: lag-1 correlation within 5/sqrt(N) */
    RU_ASSERT_NEAR(c1 / n, 0.0, 5.0 / sqrt(n));
    /* a pure function of (seed, source, t): the same value again */
    assert_true(ru_noise_unit(&nz, 3, 0.37e-3) == ru_noise_unit(&nz, 3, 0.37e-3));
    ru_noise other = nz;
    other.seed = 43;
    assert_true(ru_noise_unit(&nz, 3, 0.5e-6) != ru_noise_unit(&other, 3, 0.5e-6));
}

typedef struct var_sink {
    double t_from_s;  /* skip the first settling */
    double s, s2;     /* sums of v and v^2 */
    long n;
} var_sink;

static ru_status accumulate(void *user, double t_s, const double *x, size_t n)
{
    (void)n;
    var_sink *k = user;
    if (t_s >= k->t_from_s) {
        k->s += x[0];
        k->s2 += x[0] * x[0];
        k->n++;
    }
    return RU_OK;
}

/* A lone resistor R across a capacitor C: the noise voltage on the node has the
 * variance kT/C whatever R is (Reference: the kT/C result, equipartition of the
 * capacitor's energy, C <v^2>/2 = kT/2; Johnson 1928, Nyquist 1928). R = 10 kohm,
 * C = 1 nF (stray 1 pF added to C in the expectation), tau = RC = 10 us; the noise
 * band is 2 MHz, 126x the corner fc = 1/(2 pi tau): the part of the variance above
 * the band edge, 2 fc/(pi B) = 0.5 %, is all the shaping can take. Statistics: 40 ms hold about
 * 40 ms / (2 tau) = 2000 independent values of v^2, so the variance has a relative
 * standard error sqrt(2/2000) = 3.2 %; the check allows 4 standard errors. */
static void test_kt_over_c(void **state)
{
    (void)state;
    ru_circuit *c = NULL;
    ru_error err;
    assert_int_equal(ru_circuit_create("kT/C", &c), RU_OK);
    ru_part r, cap;
    ru_part_init(&r, RU_PART_RESISTOR, "R1");
    r.node[0] = ru_circuit_node(c, "a", 0, 0);
    r.value = 10e3;
    assert_int_equal(ru_circuit_add_part(c, &r, &err), RU_OK);
    ru_part_init(&cap, RU_PART_CAPACITOR, "C1");
    cap.node[0] = r.node[0];
    cap.value = 1e-9;
    assert_int_equal(ru_circuit_add_part(c, &cap, &err), RU_OK);
    ru_system *s = NULL;
    assert_int_equal(ru_system_create(c, &s, &err), RU_OK);
    const double temp_c = 27.0;
    assert_int_equal(ru_system_set_noise(s, 7, 2e6, temp_c), RU_OK);
    ru_transient_opts o;
    ru_transient_opts_for(RU_ACCURACY_NORMAL, &o);
    o.stop_s = 40e-3;
    o.sample_s = 2e-6;
    double x0[1] = {0};
    var_sink k = {.t_from_s = 100e-6};
    ru_solver_stats st;
    ru_status rs = ru_transient_run(s, &o, x0, accumulate, &k, &st, &err);
    if (rs != RU_OK)
        fail_msg("transient: %s", err.msg);
    double mean = k.s / k.n, var = k.s2 / k.n - mean * mean;
    double want = K_BOLTZMANN * (temp_c + 273.15) / (1e-9 + 1e-12);
    print_message("kT/C: measured %.5g V^2, expected %.5g V^2 (ratio %.4f, %ld samples)\n",
                  var, want, var / want, k.n);
    RU_ASSERT_REL(var, want, 4 * 0.032);
    /* the mean of an RC-filtered zero-mean noise: within 4 standard errors */
    RU_ASSERT_NEAR(mean, 0.0, 4 * sqrt(want / 2000.0));
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_knots),
        cmocka_unit_test(test_kt_over_c),
    };
    return cmocka_run_group_tests_name("noise", tests, NULL, NULL);
}
