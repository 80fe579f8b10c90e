/* test_margin.c: the negative-resistance analysis (ringup/margin.h) against the
 * textbook Pierce result, the poles, and the describing function of a cubic.
 *
 * Pierce stage with an ideal transconductance: an inverting transconductor gm
 * (the diff-pair-tanh law with no output resistance: gm = itail / (2 n vt)) from
 * node x1 to node x2, C1 and C2 to ground, the resonator between x1 and x2. The
 * impedance the rest presents to the resonator is
 *   Z = 1/(jw C1) + 1/(jw C2) + gm / ((jw C1)(jw C2)),  Re Z = -gm / (w^2 C1 C2)
 * (Source: E. Vittoz, M. Degrauwe, S. Bitz, "High-performance crystal oscillator
 * circuits: theory and application", IEEE J. Solid-State Circuits 23 (1988)
 * 774-783, the negative resistance of the three-point oscillator with C0 and losses
 * neglected; from memory). */
#include "ru_test.h"

#include "ringup/circuit.h"
#include "ringup/loader.h"
#include "ringup/margin.h"
#include "ringup/smallsig.h"
#include "ringup/system.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define PI 3.14159265358979323846
#define VT (1.380649e-23 * (27 + 273.15) / 1.602176634e-19) /* kT/q at 27 C */

static ru_circuit *load(const char *y)
{
    ru_circuit *c = NULL;
    ru_error e;
    ru_error_clear(&e);
    if (ru_circuit_load_string(y, "margin.yaml", NULL, &c, &e) != RU_OK)
        fail_msg("load: %s", e.msg);
    return c;
}

static ru_margin *margin_of(const ru_circuit *c, const char *part)
{
    ru_margin *m = NULL;
    ru_error e;
    ru_error_clear(&e);
    if (ru_margin_create(c, ru_circuit_find_part(c, part), &m, &e) != RU_OK)
        fail_msg("margin: %s", e.msg);
    return m;
}

/* A Pierce stage around a motional arm L (series R) + Cm, with gm from itail.
 * Stray 1e-21 F: the stray at the arm's inner node m forms a divider with Cm that
 * changes Re Z by about 2 stray/Cm (4e-3 at 1e-16 F, measured), which is why the
 * crystal part keeps its motional arm free of nodes. */
static ru_circuit *pierce(double itail, double r_ohm)
{
    char y[1024];
    snprintf(y, sizeof y,
             "stray: 1e-21\n"
             "parts:\n"
             "  G1: {type: amplifier, in: x1, out: x2, law: diff-pair-tanh, itail: %.17g, "
             "sign: -1}\n"
             "  C1: {type: capacitor, nodes: [x1, gnd], value: 20p}\n"
             "  C2: {type: capacitor, nodes: [x2, gnd], value: 30p}\n"
             "  RB1: {type: resistor, nodes: [x1, gnd], value: 1e12}\n"
             "  RB2: {type: resistor, nodes: [x2, gnd], value: 1e12}\n"
             "  LM: {type: inductor, nodes: [x1, m], value: 10m, series: %.17g}\n"
             "  CM: {type: capacitor, nodes: [m, x2], value: 25.33f}\n",
             itail, r_ohm);
    return load(y);
}

static void test_pierce_textbook(void **state)
{
    (void)state;
    double gm = 2e-3, itail = gm * 2 * VT;
    ru_circuit *c = pierce(itail, 20);
    ru_margin *m = margin_of(c, "LM");
    ru_error e;
    double fs[3] = {5e6, 10e6, 20e6};
    for (int i = 0; i < 3; i++) {
        double w = 2 * PI * fs[i], re, im;
        assert_int_equal(ru_margin_rest_z(m, fs[i], &re, &im, &e), RU_OK);
        /* the textbook formula; the bias resistors and strays change it by ~1e-7 */
        RU_ASSERT_REL(re, -gm / (w * w * 20e-12 * 30e-12), 1e-6);
        /* Im: C1 and C2 in series plus CM (in the rest: only LM is the part) */
        RU_ASSERT_REL(im, -(1 / 20e-12 + 1 / 30e-12 + 1 / 25.33e-15) / w, 1e-6);
    }
    ru_margin_destroy(m);
    ru_circuit_destroy(c);
}

/* Operating frequency: LM against CM in series with C1, C2 (reactances cancel);
 * margin -Re Z / ESR; and the growth rate against the poles. */
static void test_pierce_frequency_and_poles(void **state)
{
    (void)state;
    double gm = 2e-3, itail = gm * 2 * VT;
    double cs = 1 / (1 / 20e-12 + 1 / 30e-12 + 1 / 25.33e-15);
    double w = 1 / sqrt(10e-3 * cs), rneg = gm / (w * w * 20e-12 * 30e-12);
    double esr = rneg / 5;
    ru_circuit *c = pierce(itail, esr);
    ru_margin *m = margin_of(c, "LM");
    ru_margin_result r;
    ru_error e;
    double dre, dim;
    ru_margin_dominant(m, &dre, &dim);
    assert_int_equal(ru_margin_analyse(m, dim / (2 * PI), 9e6, 11e6, &r, &e), RU_OK);
    assert_true(r.found);
    /* series resonance of LM with the rest's series capacitance (exact for ideal gm;
     * the 1e-21 F stray at m moves it by about stray / (2 Cm) = 2e-8) */
    RU_ASSERT_REL(r.frequency_hz, w / (2 * PI), 1e-7);
    RU_ASSERT_REL(r.margin, 5.0, 1e-6);
    RU_ASSERT_REL(r.esr_ohm, esr, 1e-12);
    /* the series loop's X' is 2 LM at resonance to within Cm/C (the rest's slope is
     * that of CM and C1, C2 in series) */
    RU_ASSERT_REL(r.reactance_slope_ohm_s, 2 * 10e-3, 1e-6);
    /* growth (|R_neg| - ESR) / X' against the dominant poles' real part: the
     * first-order expansion of Z_loop(s) around jw; error of order 1/Q ~ 1e-4 */
    RU_ASSERT_REL(r.growth_rate_per_s, dre, 1e-3);
    RU_ASSERT_REL(dim, w, 1e-4);
    ru_margin_destroy(m);
    ru_circuit_destroy(c);
}

/* Margin 1 <=> dominant poles on the jw axis: the ESR set to the computed |Re Z|
 * puts the poles on the axis; 10 % more or less moves them to either side. */
static void test_margin_one_on_axis(void **state)
{
    (void)state;
    double gm = 2e-3, itail = gm * 2 * VT;
    ru_circuit *c0 = pierce(itail, 20);
    ru_margin *m0 = margin_of(c0, "LM");
    ru_margin_result r0;
    ru_error e;
    double dre, dim;
    ru_margin_dominant(m0, &dre, &dim);
    assert_int_equal(ru_margin_analyse(m0, dim / (2 * PI), 9e6, 11e6, &r0, &e), RU_OK);
    double rneg = -r0.negative_resistance_ohm;
    ru_margin_destroy(m0);
    ru_circuit_destroy(c0);
    double k[3] = {1.0, 1.1, 0.9}; /* ESR over |Re Z| */
    for (int i = 0; i < 3; i++) {
        ru_circuit *c = pierce(itail, k[i] * rneg);
        ru_margin *m = margin_of(c, "LM");
        ru_margin_result r;
        ru_margin_dominant(m, &dre, &dim);
        assert_int_equal(ru_margin_analyse(m, dim / (2 * PI), 9e6, 11e6, &r, &e), RU_OK);
        RU_ASSERT_REL(r.margin, 1 / k[i], 1e-6);
        if (i == 0) /* on the axis: |re| against the growth rate of margin 5 (~4e3 /s) */
            RU_ASSERT_NEAR(dre, 0.0, 1e-6 * dim * 1e-3);
        else if (k[i] > 1)
            assert_true(dre < 0);
        else
            assert_true(dre > 0);
        ru_margin_destroy(m);
        ru_circuit_destroy(c);
    }
}

/* An LC tank's inductor (a two-terminal part with DC current through it) driven by
 * a cubic conductance: the settled current by the describing function against the
 * van der Pol balance G_cubic(V) = -Re Y_L with V = 2 sqrt((g1 - G_L)/(3b)),
 * G_L = Rs/(Rs^2 + w^2 L^2), w^2 = 1/(LC) - Rs^2/L^2 (Source: the cubic's describing
 * function -g1 + 3 b V^2 / 4, e.g. Nayfeh & Mook, "Nonlinear Oscillations"; from
 * memory), current V / |Rs + jwL|, drive power Rs I^2 / 2. */
static void test_tank_inductor_amplitude(void **state)
{
    (void)state;
    const char *y = "parts:\n"
                    "  L1: {type: inductor, nodes: [tank, gnd], value: 10m, series: 2}\n"
                    "  C1: {type: capacitor, nodes: [tank, gnd], value: 100n}\n"
                    "  G1: {type: poly-conductance, nodes: [tank, gnd], "
                    "coeffs: [0, -0.05m, 0, 0.01667m]}\n";
    ru_circuit *c = load(y);
    ru_margin *m = margin_of(c, "L1");
    ru_margin_result r;
    ru_error e;
    double dre, dim;
    ru_margin_dominant(m, &dre, &dim);
    assert_int_equal(ru_margin_analyse(m, dim / (2 * PI), 1e3, 20e3, &r, &e), RU_OK);
    assert_true(r.found);
    double L = 10e-3, C = 100e-9 + 1e-12, rs = 2, g1 = 0.05e-3, b = 0.01667e-3;
    /* linear: wL = -Im 1/(jwC - g1), so w^2 = 1/(LC) - g1^2/C^2 */
    RU_ASSERT_REL(r.frequency_hz, sqrt(1 / (L * C) - g1 * g1 / (C * C)) / (2 * PI), 1e-9);
    /* growth against the poles (sigma/w ~ 4e-3: first-order expansion, 1e-2) */
    RU_ASSERT_REL(r.growth_rate_per_s, dre, 1e-2);
    double w = sqrt(1 / (L * C) - rs * rs / (L * L)); /* settled: G_cubic = -G_L */
    ru_margin_point pts[200];
    size_t np = 0;
    ru_margin_amp a;
    assert_int_equal(ru_margin_amplitude(m, r.frequency_hz, pts, 200, &np, &a, &e), RU_OK);
    if (!a.found)
        fail_msg("no settled current: %s", a.note);
    assert_true(np > 10);
    double gl = rs / (rs * rs + w * w * L * L);
    double v = 2 * sqrt((g1 - gl) / (3 * b)), cur = v / hypot(rs, w * L);
    /* the balance is exact for a sinusoidal node voltage; the cubic's harmonics
     * (3rd at -40 dBc on this tank) shift it at the 1e-4 level */
    RU_ASSERT_REL(a.current_a, cur, 1e-3);
    RU_ASSERT_REL(a.frequency_hz, w / (2 * PI), 1e-6);
    RU_ASSERT_REL(a.drive_power_w, 0.5 * rs * a.current_a * a.current_a, 1e-9);
    /* -Re Z falls with current: the first point is the linear value */
    RU_ASSERT_REL(pts[0].re_ohm, r.negative_resistance_ohm, 1e-6);
    for (size_t i = 1; i < np; i++)
        assert_true(pts[i].re_ohm > pts[i - 1].re_ohm);
    ru_margin_destroy(m);
    ru_circuit_destroy(c);
}

static void test_refusals(void **state)
{
    (void)state;
    ru_circuit *c = pierce(1e-4, 20);
    ru_margin *m = NULL;
    ru_error e;
    ru_error_clear(&e);
    assert_int_equal(ru_margin_create(c, ru_circuit_find_part(c, "G1"), &m, &e), RU_EINPUT);
    assert_null(m);
    assert_non_null(strstr(e.msg, "two-terminal"));
    ru_circuit_destroy(c);
    const char *y = "parts:\n"
                    "  V1: {type: supply, nodes: [a, gnd], value: 1}\n"
                    "  R1: {type: resistor, nodes: [a, gnd], value: 1k}\n";
    c = load(y);
    assert_int_equal(ru_margin_create(c, ru_circuit_find_part(c, "R1"), &m, &e), RU_EINPUT);
    assert_non_null(strstr(e.msg, "held"));
    ru_circuit_destroy(c);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_pierce_textbook),
        cmocka_unit_test(test_pierce_frequency_and_poles),
        cmocka_unit_test(test_margin_one_on_axis),
        cmocka_unit_test(test_tank_inductor_amplitude),
        cmocka_unit_test(test_refusals),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
