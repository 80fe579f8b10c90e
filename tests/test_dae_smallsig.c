/* test_dae_smallsig.c: the small-signal engines on circuits with ideal nodes
 * (`stray: 0`, a singular mass matrix): poles by elimination of the algebraic
 * states, the dominant mode's vectors, network response and loop gain, each
 * against the closed form of the circuit named beside it. */
#include "ru_test.h"

#include "ringup/circuit.h"
#include "ringup/smallsig.h"
#include "ringup/system.h"
#include "engines/modes.h"

#include <complex.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static ru_circuit *ideal_circuit(void)
{
    ru_circuit *c = NULL;
    assert_int_equal(ru_circuit_create("ideal", &c), RU_OK);
    assert_int_equal(ru_circuit_set_stray_f(c, 0.0), RU_OK);
    return c;
}

static void add2(ru_circuit *c, ru_part_type t, const char *name, const char *a,
                 const char *b, double value)
{
    ru_part p;
    ru_part_init(&p, t, name);
    p.node[0] = ru_circuit_node(c, a, 0, 0);
    p.node[1] = ru_circuit_node(c, b, 0, 0);
    p.value = value;
    ru_error e;
    if (ru_circuit_add_part(c, &p, &e) != RU_OK)
        fail_msg("add %s: %s", name, e.msg);
}

static ru_system *make(const ru_circuit *c)
{
    ru_system *s = NULL;
    ru_error e;
    if (ru_system_create(c, &s, &e) != RU_OK)
        fail_msg("system: %s", e.msg);
    return s;
}

/* C at t, L from t to m, R from m to ground: m has no capacitance. */
static void test_rlc_poles(void **state)
{
    (void)state;
    const double L = 1e-3, C = 1e-6, R = 5.0;
    ru_circuit *c = ideal_circuit();
    add2(c, RU_PART_CAPACITOR, "C1", "t", "gnd", C);
    add2(c, RU_PART_INDUCTOR, "L1", "t", "m", L);
    add2(c, RU_PART_RESISTOR, "R1", "m", "gnd", R);
    ru_system *s = make(c);
    assert_int_equal(ru_system_size(s), 3);
    assert_int_equal(ru_poles_count(s), 2);
    double x[3] = {0};
    ru_pole p[3];
    ru_error e;
    assert_int_equal(ru_poles_compute(s, x, p, &e), RU_OK);
    /* Reference: series RLC, s = -R/(2L) +- j sqrt(1/(LC) - (R/2L)^2) (exact: no
     * stray). Tolerance 1e-10 relative: two small dense solves and an eigenvalue
     * problem of order 2. */
    double a = R / (2 * L), wd = sqrt(1 / (L * C) - a * a);
    RU_ASSERT_REL(p[0].re_per_s, -a, 1e-10);
    RU_ASSERT_REL(p[0].im_rad_per_s, wd, 1e-10);
    RU_ASSERT_REL(p[1].im_rad_per_s, -wd, 1e-10);
    assert_int_equal(ru_poles_dominant(p, 2), 0);
    /* The mode: (lambda M - A) v = 0 in the full state space, the algebraic state
     * included (v(m) = R i(L), Ohm's law), and u projects v on itself. */
    double vre[3], vim[3], ure[3], uim[3];
    ru_pole lam;
    assert_int_equal(ru_mode_near(s, x, p[0], &lam, vre, vim, ure, uim), RU_OK);
    RU_ASSERT_REL(lam.im_rad_per_s, wd, 1e-10);
    int km = ru_system_node_state(s, ru_circuit_find_node(c, "m"));
    int ki = ru_system_inductor_state(s, ru_circuit_find_part(c, "L1"));
    double complex vm = vre[km] + I * vim[km], vi = vre[ki] + I * vim[ki];
    RU_ASSERT_NEAR(cabs(vm - R * vi), 0.0, 1e-10 * cabs(vm));
    double complex uv = 0;
    for (int i = 0; i < 3; i++)
        uv += (ure[i] - I * uim[i]) * (vre[i] + I * vim[i]);
    assert_true(cabs(uv) > 1e-6);
    /* the conjugate mode projects to 0 on u (left and right vectors of distinct
     * eigenvalues are orthogonal) */
    double complex uvc = 0;
    for (int i = 0; i < 3; i++)
        uvc += (ure[i] - I * uim[i]) * (vre[i] - I * vim[i]);
    RU_ASSERT_NEAR(cabs(uvc) / cabs(uv), 0.0, 1e-9);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* R1 from a to ground, C from a to b, R2 from b to ground: a and b form a capacitor
 * group with no capacitance to ground. */
static void test_group_pole(void **state)
{
    (void)state;
    const double R1 = 1e3, R2 = 3e3, C = 10e-9;
    ru_circuit *c = ideal_circuit();
    add2(c, RU_PART_RESISTOR, "R1", "a", "gnd", R1);
    add2(c, RU_PART_CAPACITOR, "C1", "a", "b", C);
    add2(c, RU_PART_RESISTOR, "R2", "b", "gnd", R2);
    ru_system *s = make(c);
    assert_int_equal(ru_poles_count(s), 1);
    double x[2] = {0};
    ru_pole p[2];
    ru_error e;
    assert_int_equal(ru_poles_compute(s, x, p, &e), RU_OK);
    /* Reference: a series RC loop, one pole at -1/((R1 + R2) C). */
    RU_ASSERT_REL(p[0].re_per_s, -1.0 / ((R1 + R2) * C), 1e-12);
    RU_ASSERT_NEAR(p[0].im_rad_per_s, 0.0, 0.0);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* in - R1 - m - R2 - out, C from out to ground, stray 0: in and m are algebraic. */
static void test_response_ideal(void **state)
{
    (void)state;
    const double R1 = 1e3, R2 = 2e3, C = 100e-9;
    ru_circuit *c = ideal_circuit();
    add2(c, RU_PART_RESISTOR, "R1", "in", "m", R1);
    add2(c, RU_PART_RESISTOR, "R2", "m", "out", R2);
    add2(c, RU_PART_CAPACITOR, "C1", "out", "gnd", C);
    add2(c, RU_PART_RESISTOR, "R3", "in", "gnd", 1e6); /* a DC path for in */
    ru_system *s = make(c);
    double x[3] = {0};
    ru_error e;
    int kin = ru_circuit_find_node(c, "in"), kout = ru_circuit_find_node(c, "out");
    for (double f = 10; f < 1e6; f *= 10) {
        double mag, ph;
        assert_int_equal(ru_response_at(s, x, kin, kout, f, &mag, &ph, &e), RU_OK);
        /* Reference: RC low-pass with R = R1 + R2 (an ideal node between them):
         * H = 1/(1 + j w R C); |H| and its phase to 1e-12. */
        double complex h = 1.0 / (1.0 + I * 2 * M_PI * f * (R1 + R2) * C);
        RU_ASSERT_REL(mag, cabs(h), 1e-12);
        RU_ASSERT_NEAR(ph, carg(h) * 180 / M_PI, 1e-9);
    }
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* A follower (gain g, rout) drives R1 into node in, R2 from in to ground, and in
 * is the follower's input: no capacitance anywhere, so every state is algebraic. */
static void test_loop_gain_ideal(void **state)
{
    (void)state;
    const double R1 = 2e3, R2 = 1e3, g = 0.9;
    ru_circuit *c = ideal_circuit();
    ru_part p;
    ru_part_init(&p, RU_PART_AMPLIFIER, "A1");
    ru_amp_defaults(&p.amp, RU_LAW_FOLLOWER_TANH);
    p.amp.gain = g;
    p.node[0] = ru_circuit_node(c, "in", 0, 0);
    p.node[1] = ru_circuit_node(c, "out", 0, 0);
    p.node[2] = 0;
    ru_error e;
    assert_int_equal(ru_circuit_add_part(c, &p, &e), RU_OK);
    add2(c, RU_PART_RESISTOR, "R1", "out", "in", R1);
    add2(c, RU_PART_RESISTOR, "R2", "in", "gnd", R2);
    ru_system *s = make(c);
    assert_int_equal(ru_system_algebraic_count(s), 2);
    assert_int_equal(ru_poles_count(s), 0);
    double x[2] = {0}, re, im;
    /* Reference: voltage divider: the return ratio is g R2/(rout + R1 + R2) at
     * every frequency (rout 50 ohm, the law's default), phase 0. */
    double want = g * R2 / (p.amp.rout_ohm + R1 + R2);
    for (double f = 0; f < 1e6; f = f ? f * 100 : 1) {
        assert_int_equal(ru_loopgain_at(s, 0, x, f, &re, &im, &e), RU_OK);
        RU_ASSERT_REL(re, want, 1e-12);
        RU_ASSERT_NEAR(im, 0.0, 1e-15);
    }
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* Poles of a circuit with a node of capacitance eps tend to the ideal circuit's
 * finite poles as eps -> 0 (the extra pole runs off to -infinity). */
static void test_limit_of_small_stray(void **state)
{
    (void)state;
    ru_pole ideal[3], tiny[3];
    for (int k = 0; k < 2; k++) {
        ru_circuit *c = ideal_circuit();
        add2(c, RU_PART_CAPACITOR, "C1", "t", "gnd", 1e-6);
        add2(c, RU_PART_INDUCTOR, "L1", "t", "m", 1e-3);
        add2(c, RU_PART_RESISTOR, "R1", "m", "gnd", 5.0);
        if (k)
            assert_int_equal(ru_circuit_set_node_stray_f(c, ru_circuit_find_node(c, "m"),
                                                         1e-18),
                             RU_OK);
        ru_system *s = make(c);
        double x[3] = {0};
        ru_error e;
        assert_int_equal(ru_poles_count(s), k ? 3u : 2u);
        assert_int_equal(ru_poles_compute(s, x, k ? tiny : ideal, &e), RU_OK);
        ru_system_destroy(s);
        ru_circuit_destroy(c);
    }
    /* Reference: singular perturbation: with capacitance eps at m the third pole
     * sits near -1/(R eps) = -2e17 /s and the pair moves by O(R eps/L) = 5e-15. */
    RU_ASSERT_REL(tiny[0].re_per_s, ideal[0].re_per_s, 1e-6);
    RU_ASSERT_REL(tiny[0].im_rad_per_s, ideal[0].im_rad_per_s, 1e-9);
    assert_true(tiny[2].re_per_s < -1e16);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_rlc_poles),        cmocka_unit_test(test_group_pole),
        cmocka_unit_test(test_response_ideal),   cmocka_unit_test(test_loop_gain_ideal),
        cmocka_unit_test(test_limit_of_small_stray),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
