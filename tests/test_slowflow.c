/* test_slowflow.c: the method of averaging's slow flow (ringup/descfn.h,
 * src/engines/slowflow.c) against closed forms: the van der Pol tank at
 * eps = 1e-4 through the describing function, a logistic growth law given as a
 * callback, and the refusals. No transient is run: the slow flow is the
 * prediction. Circuits are our own values. */
#include "ru_test.h"

#include "ringup/descfn.h"
#include "ringup/loader.h"
#include "ringup/system.h"

#include <math.h>
#include <stdlib.h>

#define NPTS 161

/* van der Pol tank at eps = 1e-4: i = -a v + b v^3 across L || C. With
 * w0 = 1/sqrt(L C), tau = w0 t and x = v sqrt(3b/a) it is
 *   x'' - eps (1 - x^2) x' + x = 0,  eps = a / (w0 C) = a sqrt(L / C).
 * L = 1 mH, C = 1 uF (+ 1 pF stray): a = 1e-4 / sqrt(L/C); b = 4a/3 puts the
 * settled amplitude 2/sqrt(3b/a) at 1 V. */
static const char vdp_text[] = "stray: 1p\n"
                               "parts:\n"
                               "  L1: {type: inductor, nodes: [t, gnd], value: 1mH}\n"
                               "  C1: {type: capacitor, nodes: [t, gnd], value: 1u}\n"
                               "  G1: {type: poly-conductance, nodes: [t, gnd], "
                               "coeffs: [0, -3.16227766e-6, 0, 4.21637021e-6]}\n";

/* The averaged van der Pol envelope in scaled units (method of averaging,
 * Guckenheimer & Holmes, Nonlinear Oscillations, sec. 4.1, from memory):
 *   A(tau) = 2 / sqrt(1 + (4 / A0^2 - 1) exp(-eps tau)). */
static double vdp_envelope(double a0_x, double eps, double tau)
{
    return 2 / sqrt(1 + (4 / (a0_x * a0_x) - 1) * exp(-eps * tau));
}

static void test_vdp_eps_1e4(void **state)
{
    (void)state;
    ru_circuit *c = NULL;
    ru_error err;
    if (ru_circuit_load_string(vdp_text, "test.yaml", RU_MODELS_DIR, &c, &err) != RU_OK)
        fail_msg("load: %s", err.msg);
    ru_system *s = NULL;
    assert_int_equal(ru_system_create(c, &s, &err), RU_OK);
    double x[2] = {0, 0};
    ru_df *d = NULL;
    assert_int_equal(ru_df_create(s, x, ru_circuit_find_node(c, "t"), 0, &d, &err), RU_OK);
    const double l = 1e-3, cap = 1e-6 + 1e-12, a = 3.16227766e-6, b = 4.21637021e-6;
    const double w0 = 1 / sqrt(l * cap), eps = a / (w0 * cap);
    const double xs = sqrt(3 * b / a); /* volts to the scaled x */
    assert_true(fabs(eps / 1e-4 - 1) < 1e-3);
    const double a0_v = 1e-3, x0 = a0_v * xs;
    /* to 4x the time to 90 % of the settled amplitude (the closed form solved for
     * A = 1.8: A^2 follows the logistic equation) */
    double tau90 = log(3.24 / (x0 * x0) * (4 - x0 * x0) / (4 - 3.24)) / eps;
    double t_stop = 4 * tau90 / w0, t[NPTS], amp[NPTS];
    size_t n = 0;
    assert_int_equal(ru_df_slow_flow(d, a0_v, t_stop, NPTS, t, amp, &n, &err), RU_OK);
    assert_int_equal(n, NPTS);
    /* Reference: the closed form above at every point; RK4 with steps of 0.02 / rate
     * is accurate to about 1e-8, the describing function to 1e-9 (test_descfn.c):
     * 1e-6 relative */
    for (size_t k = 0; k < NPTS; k++) {
        RU_ASSERT_REL(t[k], t_stop * (double)k / (NPTS - 1), 1e-12);
        RU_ASSERT_REL(amp[k] * xs, vdp_envelope(x0, eps, w0 * t[k]), 1e-6);
    }
    RU_ASSERT_REL(amp[NPTS - 1] * xs, 2.0, 1e-6); /* settled at x = 2 */
    /* the start-up time (README: to the start-up level, 0.9 of the settled
     * amplitude by default) by the integral, against the closed form's tau90 */
    double t90;
    assert_int_equal(ru_df_startup_time(d, a0_v, 0.9 * 2 / xs, &t90, &err), RU_OK);
    RU_ASSERT_REL(t90 * w0, tau90, 1e-6);
    /* and the slow flow, run to tau90, ends at 0.9 of the settled amplitude */
    assert_int_equal(ru_df_slow_flow(d, a0_v, tau90 / w0, 2, t, amp, &n, &err), RU_OK);
    RU_ASSERT_REL(amp[1] * xs, 1.8, 1e-6);
    ru_df_destroy(d);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* A law that is not van der Pol: sigma(A) = s0 (1 - A / Am). Then
 * dA/dt = s0 A (1 - A/Am) is the logistic equation (Reference: its closed form
 * A(t) = Am / (1 + (Am / A0 - 1) exp(-s0 t)), any ODE text). */
typedef struct logistic {
    double s0_per_s, am_v;
    int calls;
} logistic;

static ru_status logistic_sigma(void *user, double a, double *sg, ru_error *err)
{
    (void)err;
    logistic *g = user;
    g->calls++;
    *sg = g->s0_per_s * (1 - a / g->am_v);
    return RU_OK;
}

static void test_logistic(void **state)
{
    (void)state;
    logistic g = {2.5e4, 3.3, 0};
    double t[NPTS], amp[NPTS];
    size_t n = 0;
    ru_error err;
    const double a0 = 2e-7, t_stop = 1.5e-3;
    assert_int_equal(ru_slowflow_run(logistic_sigma, &g, a0, t_stop, NPTS, t, amp, &n,
                                     &err),
                     RU_OK);
    assert_int_equal(n, NPTS);
    for (size_t k = 0; k < NPTS; k++) {
        double want = g.am_v / (1 + (g.am_v / a0 - 1) * exp(-g.s0_per_s * t[k]));
        RU_ASSERT_REL(amp[k], want, 1e-6); /* RK4 at 0.02 / rate: about 1e-8 */
    }
    /* started above the settled amplitude the flow decays to it */
    assert_int_equal(ru_slowflow_run(logistic_sigma, &g, 5.0, t_stop, NPTS, t, amp, &n,
                                     &err),
                     RU_OK);
    double want = g.am_v / (1 + (g.am_v / 5.0 - 1) * exp(-g.s0_per_s * t[NPTS / 4]));
    RU_ASSERT_REL(amp[NPTS / 4], want, 1e-6);
    RU_ASSERT_REL(amp[NPTS - 1], g.am_v, 1e-6);
}

/* A law that fails stops the flow: its status, and the points before it. */
static ru_status failing_sigma(void *user, double a, double *sg, ru_error *err)
{
    int *left = user;
    if ((*left)-- <= 0)
        return ru_error_set(err, RU_ENOCONVERGE, NULL, 0, 0, "no balance at %g V", a);
    *sg = 1e3;
    return RU_OK;
}

static void test_refusals(void **state)
{
    (void)state;
    double t[4], amp[4];
    size_t n = 9;
    ru_error err;
    logistic g = {1e3, 1, 0};
    assert_int_equal(ru_slowflow_run(logistic_sigma, &g, 0, 1, 4, t, amp, &n, &err),
                     RU_ERANGE);
    assert_int_equal(n, 0);
    assert_int_equal(ru_slowflow_run(logistic_sigma, &g, 1e-3, -1, 4, t, amp, &n, &err),
                     RU_ERANGE);
    assert_int_equal(ru_slowflow_run(logistic_sigma, &g, 1e-3, 1, 1, t, amp, &n, &err),
                     RU_ERANGE);
    int left = 1;
    assert_int_equal(ru_slowflow_run(failing_sigma, &left, 1e-3, 1e-3, 4, t, amp, &n,
                                     &err),
                     RU_ENOCONVERGE);
    assert_int_equal(n, 1);
    assert_true(err.msg[0] != '\0');
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_vdp_eps_1e4),
        cmocka_unit_test(test_logistic),
        cmocka_unit_test(test_refusals),
    };
    return cmocka_run_group_tests_name("slowflow", tests, NULL, NULL);
}
