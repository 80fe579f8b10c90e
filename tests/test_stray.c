/* test_stray.c: the stray-capacitance check (src/engines/stray.c): the dominant
 * poles with the strays as given and at a tenth against closed forms, the warning
 * threshold (0.1 % of the pole), the node it names, and its text.
 *
 * References (analytic, written out here independently of the library):
 * - A crystal's motional arm (L_m, C_m) closed through a load capacitance C_L
 *   resonates at the load-resonance frequency
 *     f_L = f_s sqrt(1 + C_m / C_L),   f_s = 1 / (2 pi sqrt(L_m C_m)),
 *   the crystal pulling formula (with C_0 + C_L in place of C_L when the crystal's
 *   shunt capacitance is counted; E. A. Gerber and A. Ballato (eds.), Precision
 *   Frequency Control, vol. 1, Academic Press 1985, from memory; it is the series
 *   resonance of L_m with C_m in series with C_L). A stray C_s on the node between
 *   L_m and C_m adds to C_m; one on the other node adds to C_L.
 * - A series R-L-C loop has the poles -R/(2L) +- j sqrt(1/(L C) - (R/(2L))^2), and
 *   a parallel one -1/(2RC) +- j sqrt(1/(L C) - (1/(2RC))^2) (second-order ODE). */
#include "ru_test.h"

#include "ringup/circuit.h"
#include "ringup/loader.h"
#include "ringup/smallsig.h"
#include "ringup/stray.h"
#include "ringup/system.h"

#include <complex.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define NAME "stray.yaml"
#define PI 3.14159265358979323846

/* Loads text, compiles it, finds its operating point and runs the check. */
static void check_text(const char *text, ru_circuit **c_out, ru_stray_result *r)
{
    ru_circuit *c = NULL;
    ru_system *s = NULL;
    ru_error err;
    ru_error_clear(&err);
    if (ru_circuit_load_string(text, NAME, RU_MODELS_DIR, &c, &err) != RU_OK)
        fail_msg("load: %s:%d:%d: %s", err.file, err.line, err.col, err.msg);
    if (ru_system_create(c, &s, &err) != RU_OK)
        fail_msg("system: %s", err.msg);
    double *x = calloc(ru_system_size(s), sizeof *x);
    assert_int_equal(ru_oppoint_solve(s, x, 0, NULL, &err), RU_OK);
    assert_int_equal(ru_stray_check(c, s, x, r, &err), RU_OK);
    free(x);
    ru_system_destroy(s);
    *c_out = c;
}

/* Series-loop resonance (rad/s) of L with C1 in series with C2 (pulling formula). */
static double w_series(double l, double c1, double c2)
{
    return sqrt((1.0 / c1 + 1.0 / c2) / l);
}

/* A motional arm built from an inductor and a capacitor (8 MHz, 20 fF: L_m =
 * 19.79 mH) closed by 17 pF: the default 1 pF on the motional node m is 50 times
 * C_m and sets the frequency. The warning fires and names m; the frequencies are the
 * pulling formula's with C_m + C_s and C_L + C_s. Tolerance 1e-9: the 1 Gohm bias
 * resistor damps by 1/(2 R C) ~ 0.03 /s, which moves w by ~1e-16 relative. */
static void test_motional_node(void **state)
{
    (void)state;
    const double lm = 1.0 / (pow(2 * PI * 8e6, 2) * 20e-15), cm = 20e-15, cl = 17e-12;
    char text[512];
    snprintf(text, sizeof text,
             "parts:\n"
             "  LM: {type: inductor, nodes: [a, m], value: %.17g}\n"
             "  CM: {type: capacitor, nodes: [m, gnd], value: 20f}\n"
             "  CL: {type: capacitor, nodes: [a, gnd], value: 17p}\n"
             "  RA: {type: resistor, nodes: [a, gnd], value: 1G}\n",
             lm);
    ru_circuit *c;
    ru_stray_result r;
    check_text(text, &c, &r);
    assert_true(r.checked && r.warn);
    RU_ASSERT_REL(r.pole.im_rad_per_s, w_series(lm, cm + 1e-12, cl + 1e-12), 1e-9);
    RU_ASSERT_REL(r.pole_tenth.im_rad_per_s, w_series(lm, cm + 0.1e-12, cl + 0.1e-12), 1e-9);
    /* 1.15 MHz with the strays against 3.28 MHz at a tenth: far from the 8 MHz
     * series resonance, and a move far above 0.1 % */
    RU_ASSERT_REL(r.pole.im_rad_per_s / (2 * PI), 1.1515e6, 1e-4);
    double w1 = r.pole.im_rad_per_s, w2 = r.pole_tenth.im_rad_per_s;
    RU_ASSERT_REL(r.move_rel, fabs(w2 - w1) / hypot(r.pole.re_per_s, w1), 1e-9);
    assert_int_equal(r.node, ru_circuit_find_node(c, "m"));
    RU_ASSERT_REL(r.node_stray_f, 1e-12, 1e-15);
    assert_true(r.node_share > 0.9);
    /* m alone at a tenth: C_m + 0.1 pF against C_L + 1 pF */
    RU_ASSERT_REL(r.pole_node.im_rad_per_s, w_series(lm, cm + 0.1e-12, cl + 1e-12), 1e-9);
    char buf[1024];
    ru_stray_warning(c, &r, buf, sizeof buf);
    if (!strstr(buf, "stray.yaml:2:") || !strstr(buf, ": warning: the stray capacitance moves") ||
        !strstr(buf, "most of it at node m (1.00 pF;") ||
        !strstr(buf, "`stray: {nodes: {m: ...}}`"))
        fail_msg("warning text: %s", buf);
    ru_circuit_destroy(c);
    /* With no stray on m (`nodes: {m: 0}`; C_m still holds its voltage) the load
     * side's 1 pF alone moves the pole, by the pulling formula's (C_L + 1p) against
     * (C_L + 0.1p): under 0.1 %. */
    snprintf(text, sizeof text,
             "stray: {default: 1p, nodes: {m: 0}}\n"
             "parts:\n"
             "  LM: {type: inductor, nodes: [a, m], value: %.17g}\n"
             "  CM: {type: capacitor, nodes: [m, gnd], value: 20f}\n"
             "  CL: {type: capacitor, nodes: [a, gnd], value: 17p}\n"
             "  RA: {type: resistor, nodes: [a, gnd], value: 1G}\n",
             lm);
    check_text(text, &c, &r);
    assert_true(r.checked);
    assert_false(r.warn);
    double want = fabs(w_series(lm, cm, cl + 0.1e-12) / w_series(lm, cm, cl + 1e-12) - 1);
    RU_ASSERT_REL(r.move_rel, want, 1e-6);
    assert_true(want < 1e-3 && want > 1e-5); /* the pulling: about 2.6e-5 */
    ru_circuit_destroy(c);
}

/* The same crystal as a crystal part (its arm has no node, so no stray on it),
 * c0 = 5 pF, esr 30 ohm, load 12 pF on node a: the only stray is a's, which pulls
 * the frequency by the formula with C_0 + C_L + C_s; the series R-L-C loop's poles
 * -R/(2 L_m) +- j sqrt(w^2 - (R/(2 L_m))^2) give the exact move. No warning. */
static void test_crystal_part(void **state)
{
    (void)state;
    ru_circuit *c;
    ru_stray_result r;
    check_text("parts:\n"
               "  X1: {type: crystal, nodes: [a, gnd], freq: 8MHz, esr: 30, cm: 20f, c0: 5p}\n"
               "  CL: {type: capacitor, nodes: [a, gnd], value: 12p}\n"
               "  RA: {type: resistor, nodes: [a, gnd], value: 1T}\n",
               &c, &r);
    const double lm = 1.0 / (pow(2 * PI * 8e6, 2) * 20e-15), cm = 20e-15, sig = 30 / (2 * lm);
    double w1 = sqrt(pow(w_series(lm, cm, 17e-12 + 1e-12), 2) - sig * sig);
    double w2 = sqrt(pow(w_series(lm, cm, 17e-12 + 0.1e-12), 2) - sig * sig);
    assert_true(r.checked);
    assert_false(r.warn);
    /* 1e-9 on the poles: the 1 Tohm resistor's damping is ~1e-4 of the arm's */
    RU_ASSERT_REL(r.pole.im_rad_per_s, w1, 1e-9);
    RU_ASSERT_REL(r.pole.re_per_s, -sig, 1e-3);
    RU_ASSERT_REL(r.pole_tenth.im_rad_per_s, w2, 1e-9);
    /* the move (3.2e-5 of |pole|) to 1e-4 of itself: the poles' 1e-9 errors */
    RU_ASSERT_REL(r.move_rel, fabs(w2 - w1) / hypot(sig, w1), 1e-4);
    char buf[256];
    ru_stray_warning(c, &r, buf, sizeof buf);
    assert_string_equal(buf, "");
    ru_circuit_destroy(c);
}

/* The threshold: a parallel R-L-C tank whose own capacitance is 224 pF moves by
 * about 0.2 % when its 1 pF stray drops to 0.1 pF (warned), one of 1 nF by about
 * 0.045 % (not warned); both moves against the parallel tank's poles. */
static void tank(double c_f, ru_stray_result *r)
{
    char text[256];
    snprintf(text, sizeof text,
             "parts:\n"
             "  L1: {type: inductor, nodes: [a, gnd], value: 10u}\n"
             "  C1: {type: capacitor, nodes: [a, gnd], value: %.17g}\n"
             "  R1: {type: resistor, nodes: [a, gnd], value: 10k}\n",
             c_f);
    ru_circuit *c;
    check_text(text, &c, r);
    double complex p[2];
    for (int k = 0; k < 2; k++) {
        double ct = c_f + (k ? 0.1e-12 : 1e-12), s = 1 / (2 * 10e3 * ct);
        p[k] = -s + I * sqrt(1 / (10e-6 * ct) - s * s);
    }
    RU_ASSERT_REL(r->pole.im_rad_per_s, cimag(p[0]), 1e-9);
    RU_ASSERT_REL(r->pole.re_per_s, creal(p[0]), 1e-9);
    RU_ASSERT_REL(r->move_rel, cabs(p[1] - p[0]) / cabs(p[0]), 1e-5);
    assert_int_equal(r->node, r->warn ? ru_circuit_find_node(c, "a") : -1);
    ru_circuit_destroy(c);
}

static void test_threshold(void **state)
{
    (void)state;
    ru_stray_result r;
    tank(224e-12, &r);
    assert_true(r.checked && r.warn);
    assert_true(r.move_rel > 1.9e-3 && r.move_rel < 2.1e-3);
    RU_ASSERT_REL(r.node_share, 1.0, 1e-12); /* the only free node */
    RU_ASSERT_REL(r.node_move_rel, r.move_rel, 1e-12);
    tank(1e-9, &r);
    assert_true(r.checked);
    assert_false(r.warn);
    assert_true(r.move_rel > 4e-4 && r.move_rel < 5e-4);
}

/* Nothing to compare: no stray anywhere (every node's capacitance its parts'). */
static void test_no_stray(void **state)
{
    (void)state;
    ru_circuit *c;
    ru_stray_result r;
    check_text("stray: 0\nparts:\n"
               "  L1: {type: inductor, nodes: [a, gnd], value: 10u}\n"
               "  C1: {type: capacitor, nodes: [a, gnd], value: 1n}\n"
               "  R1: {type: resistor, nodes: [a, gnd], value: 10k}\n",
               &c, &r);
    assert_false(r.checked);
    assert_false(r.warn);
    ru_circuit_destroy(c);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_motional_node),
        cmocka_unit_test(test_crystal_part),
        cmocka_unit_test(test_threshold),
        cmocka_unit_test(test_no_stray),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
