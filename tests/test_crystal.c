/* test_crystal.c: the crystal part (src/parts/crystal.c): its keys, units and
 * FILE:LINE:COL errors, PART.KEY, its states (two per motional arm, no node of
 * their own), the Jacobian against central differences, its impedance against the
 * Butterworth-Van Dyke formula (main arm and overtone arms), the margin analysis
 * with c0 counted in the rest against the three-point oscillator's closed form,
 * and Monte Carlo's draws of fs (tol in ppm) and esr (esr-tol).
 *
 * Reference for the impedance: the Butterworth-Van Dyke equivalent circuit of a
 * quartz resonator, a shunt capacitance C0 in parallel with one series R-L-C arm
 * per mode (S. Butterworth, Proc. Phys. Soc. London 27 (1915) 410; K. S. Van Dyke,
 * Proc. IRE 16 (1928) 742; from memory), written out again here independently of
 * the library:
 *   Z(jw) = 1 / (jw C0 + sum_k 1 / (R_k + jw L_k + 1/(jw C_k))),
 *   L_k = 1 / ((2 pi f_k)^2 C_k). */
#include "ru_test.h"

#include "ringup/circuit.h"
#include "ringup/loader.h"
#include "ringup/margin.h"
#include "ringup/montecarlo.h"
#include "ringup/params.h"
#include "ringup/smallsig.h"
#include "ringup/system.h"

#include <complex.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define NAME "xtal.yaml"
#define PI 3.14159265358979323846

static ru_circuit *load_ok(const char *text)
{
    ru_circuit *c = NULL;
    ru_error err;
    if (ru_circuit_load_string(text, NAME, RU_MODELS_DIR, &c, &err) != RU_OK)
        fail_msg("load: %s:%d:%d: %s", err.file, err.line, err.col, err.msg);
    return c;
}

/* 1-based column of the first `token` on 1-based `line` of text. */
static int col_of(const char *text, int line, const char *token)
{
    const char *p = text;
    for (int l = 1; l < line && p; l++)
        p = strchr(p, '\n') ? strchr(p, '\n') + 1 : NULL;
    const char *hit = p ? strstr(p, token) : NULL;
    const char *end = p ? strchr(p, '\n') : NULL;
    if (!hit || (end && hit > end))
        fail_msg("test text has no '%s' on line %d", token, line);
    return (int)(hit - p) + 1;
}

static void load_bad(const char *text, int line, const char *token, const char *want)
{
    ru_circuit *c = NULL;
    ru_error err;
    assert_int_equal(ru_circuit_load_string(text, NAME, RU_MODELS_DIR, &c, &err), RU_EINPUT);
    assert_null(c);
    assert_string_equal(err.file, NAME);
    assert_int_equal(err.line, line);
    assert_int_equal(err.col, col_of(text, line, token));
    if (!strstr(err.msg, want))
        fail_msg("message '%s' lacks '%s'", err.msg, want);
}

static ru_system *compile(const ru_circuit *c)
{
    ru_system *s = NULL;
    ru_error err;
    if (ru_system_create(c, &s, &err) != RU_OK)
        fail_msg("system: %s", err.msg);
    return s;
}

/* The Butterworth-Van Dyke impedance, written out (see the head comment). */
typedef struct bvd {
    double c0;
    int n;
    double f[4], r[4], cm[4];
} bvd;

static double complex bvd_z(const bvd *b, double w)
{
    double complex y = I * w * b->c0;
    for (int k = 0; k < b->n; k++) {
        double l = 1.0 / (pow(2 * PI * b->f[k], 2) * b->cm[k]);
        y += 1.0 / (b->r[k] + I * w * l + 1.0 / (I * w * b->cm[k]));
    }
    return 1.0 / y;
}

static const char xtal_text[] =
    "title: crystal keys\n"
    "parts:\n"
    "  X1: {type: crystal, nodes: [a, b], freq: 8MHz, esr: 30, cm: 20f, c0: 5p, load: 12p,\n"
    "       drive-limit: 100uW, tol: 20ppm, esr-tol: 10%,\n"
    "       arms: [{freq: 24.01MHz, esr: 90, cm: 2.2f}, {freq: 8.3MHz, esr: 400, cm: 0.1f}]}\n"
    "  R1: {type: resistor, nodes: [a, gnd], value: 1k}\n"
    "  R2: {type: resistor, nodes: [b, gnd], value: 1k}\n";

/* Reference: README circuit-file format (crystal keys; SI prefixes f = 1e-15,
 * p = 1e-12, u = 1e-6, M = 1e6, BIPM SI Brochure Table 7; 1 ppm = 1e-6). */
static void test_load(void **state)
{
    (void)state;
    ru_circuit *c = load_ok(xtal_text);
    const ru_part *p = ru_circuit_part(c, (size_t)ru_circuit_find_part(c, "X1"));
    assert_int_equal(p->type, RU_PART_CRYSTAL);
    assert_string_equal(ru_part_type_name(p->type), "crystal");
    RU_ASSERT_REL(p->value, 8e6, 1e-15);
    RU_ASSERT_REL(p->tol, 20e-6, 1e-12);
    RU_ASSERT_REL(p->crystal.esr_ohm, 30, 1e-15);
    RU_ASSERT_REL(p->crystal.cm_f, 20e-15, 1e-12);
    RU_ASSERT_REL(p->crystal.c0_f, 5e-12, 1e-12);
    RU_ASSERT_REL(p->crystal.load_f, 12e-12, 1e-12);
    RU_ASSERT_REL(p->crystal.drive_limit_w, 100e-6, 1e-12);
    RU_ASSERT_REL(p->crystal.esr_tol, 0.1, 1e-15);
    assert_int_equal(p->crystal.narms, 2);
    RU_ASSERT_REL(p->crystal.arm_freq_hz[0], 24.01e6, 1e-15);
    RU_ASSERT_REL(p->crystal.arm_esr_ohm[1], 400, 1e-15);
    RU_ASSERT_REL(p->crystal.arm_cm_f[1], 0.1e-15, 1e-12);
    assert_int_equal(p->line, 3);
    /* Reference: L = 1/((2 pi fs)^2 Cm) (series resonance of L and Cm, analytic):
     * 1/((2 pi 8e6)^2 20e-15) = 19.79 mH. */
    double r, l, cm;
    assert_true(ru_crystal_arm(p, 0, &r, &l, &cm));
    RU_ASSERT_REL(l, 1.0 / (pow(2 * PI * 8e6, 2) * 20e-15), 1e-14);
    assert_true(ru_crystal_arm(p, 2, &r, &l, &cm));
    RU_ASSERT_REL(r, 400, 0);
    assert_false(ru_crystal_arm(p, 3, &r, &l, &cm));
    /* Reference: the load-resonance frequency of the arm with C0 + CL in series,
     * fL = fs sqrt(1 + Cm/(C0 + CL)) (analytic, from the series L, Cm, C0 + CL). */
    RU_ASSERT_REL(ru_crystal_load_freq_hz(p), 8e6 * sqrt(1 + 20e-15 / 17e-12), 1e-15);
    char buf[160];
    ru_part_describe(p, buf, sizeof buf);
    assert_string_equal(buf, "fs 8.000000 MHz, esr 30.0 ohm, cm 20.00 fF (Lm 19.79 mH), "
                             "c0 5.00 pF, 2 more arms");
    /* Reference: the part's states: two per arm, no node of its own (states: the
     * two free nodes, then i and vm of each arm). */
    ru_system *s = compile(c);
    assert_int_equal(ru_system_size(s), 2 + 2 * 3);
    assert_int_equal(ru_system_free_nodes(s), 2);
    assert_string_equal(ru_system_state_name(s, 2), "i(X1)");
    assert_string_equal(ru_system_state_name(s, 3), "X1.vm");
    assert_string_equal(ru_system_state_name(s, 4), "i(X1.arm1)");
    assert_string_equal(ru_system_state_name(s, 7), "X1.arm2.vm");
    assert_int_equal(ru_system_part_state(s, ru_circuit_find_part(c, "X1")), 2);
    ru_system_destroy(s);
    /* Reference: circuit.h find_floating_node: the crystal blocks DC (c0 and the
     * motional capacitors), so a node joined only through it floats. */
    int fl;
    assert_int_equal(ru_circuit_find_floating_node(c, &fl), 0);
    ru_circuit_destroy(c);
    c = load_ok("parts:\n  X1: {type: crystal, nodes: [a, gnd], freq: 32.768kHz, q: 50k, "
                "cm: 2f, c0: 1.2p}\n  R1: {type: resistor, nodes: [a, b], value: 1k}\n");
    assert_int_equal(ru_circuit_find_floating_node(c, &fl), 1);
    p = ru_circuit_part(c, 0);
    /* Reference: R = 2 pi fs L / q, i.e. 1 / (2 pi fs Cm q) (analytic). */
    assert_true(ru_crystal_arm(p, 0, &r, &l, &cm));
    RU_ASSERT_REL(r, 1.0 / (2 * PI * 32768 * 2e-15 * 50e3), 1e-13);
    ru_circuit_destroy(c);
}

static void test_load_errors(void **state)
{
    (void)state;
    const char *head = "parts:\n";
    char text[640];
#define BAD(body, line, token, want)                                               \
    do {                                                                           \
        snprintf(text, sizeof text, "%s%s", head, body);                           \
        load_bad(text, line, token, want);                                         \
    } while (0)
    BAD("  X1: {type: crystal, nodes: [a, b], esr: 30, cm: 20f, c0: 5p}\n", 2, "X1",
        "part X1: missing required key freq");
    BAD("  X1: {type: crystal, nodes: [a, b], freq: 8M, esr: 30, c0: 5p}\n", 2, "X1",
        "part X1: missing required key cm");
    BAD("  X1: {type: crystal, nodes: [a, b], freq: 8M, esr: 30, cm: 20f}\n", 2, "X1",
        "part X1: missing required key c0");
    BAD("  X1: {type: crystal, nodes: [a, b], freq: 8M, cm: 20f, c0: 5p}\n", 2, "X1",
        "part X1: needs esr (the motional resistance) or q");
    BAD("  X1: {type: crystal, nodes: [a, b], freq: 8M, esr: 30, q: 1e5, cm: 20f, c0: 5p}\n",
        2, "X1", "part X1: give esr or q, not both");
    BAD("  X1: {type: crystal, nodes: [a, b], freq: 8MF, esr: 30, cm: 20f, c0: 5p}\n", 2,
        "8MF", "unit F does not fit, expected Hz");
    BAD("  X1: {type: crystal, nodes: [a, b], freq: 8M, esr: 30, cm: 20f, c0: 5p, "
        "drive-limit: 1mA}\n",
        2, "1mA", "unit A does not fit, expected W");
    BAD("  X1: {type: crystal, nodes: [a, b], freq: 8M, esr: 30, cm: -20f, c0: 5p}\n", 2,
        "X1", "part X1: cm (the motional capacitance) must be positive");
    BAD("  X1: {type: crystal, nodes: [a, b], freq: 8M, esr: 30, cm: 20f, c0: 5p, "
        "arms: [3]}\n",
        2, "3]", "key arms, item 1: needs a mapping {freq, esr, cm}");
    BAD("  X1: {type: crystal, nodes: [a, b], freq: 8M, esr: 30, cm: 20f, c0: 5p, "
        "arms: [{freq: 24M, esr: 90}]}\n",
        2, "{freq: 24M", "key arms, item 1: missing required key cm");
    BAD("  X1: {type: crystal, nodes: [a, b], freq: 8M, esr: 30, cm: 20f, c0: 5p, "
        "arms: [{freq: 24M, esr: 90, cm: 2f, c0: 1p}]}\n",
        2, "c0: 1p}", "key arms, item 1: unknown key c0");
    BAD("  X1: {type: crystal, nodes: [a, b], freq: 8M, esr: 30, cm: 20f, c0: 5p, "
        "arms: [{freq: 24M, esr: 90, cm: 2H}]}\n",
        2, "2H", "unit H does not fit, expected F");
    BAD("  X1: {type: crystal, nodes: [a, b], freq: 8M, esr: 30, cm: 20f, c0: 5p, "
        "arms: [{freq: 24M, esr: 0, cm: 2f}]}\n",
        2, "X1", "arms, item 1: freq, esr and cm must be positive");
    BAD("  X1: {type: crystal, nodes: [a, a], freq: 8M, esr: 30, cm: 20f, c0: 5p}\n", 2,
        "X1", "part X1: both terminals are on node a");
    BAD("  X1: {type: crystal, nodes: [a, b], freq: 8M, esr: 30, cm: 20f, c0: 5p, "
        "series: 3}\n",
        2, "series", "key series does not apply to type crystal");
    BAD("  R1: {type: resistor, nodes: [a, gnd], value: 1k, esr: 3}\n", 2, "esr",
        "key esr does not apply to type resistor");
#undef BAD
}

/* PART.KEY: X1.freq in Hz, X1.esr in ohm, through the same checks as the file. */
static void test_param(void **state)
{
    (void)state;
    ru_circuit *c = load_ok(xtal_text);
    ru_error err;
    const char *unit;
    double v;
    assert_int_equal(ru_circuit_param_unit(c, "X1.freq", &unit, &err), RU_OK);
    assert_string_equal(unit, "Hz");
    assert_int_equal(ru_circuit_set_param(c, "X1.esr", 45, &err), RU_OK);
    assert_int_equal(ru_circuit_get_param(c, "X1.esr", &v, &err), RU_OK);
    RU_ASSERT_REL(v, 45, 0.0);
    assert_int_equal(ru_circuit_set_param(c, "X1.cm", -1e-15, &err), RU_EINPUT);
    assert_non_null(strstr(err.msg, "cm (the motional capacitance) must be positive"));
    ru_circuit_destroy(c);
}

/* Reference: central differences of the residual (the crystal is linear, so the
 * difference is exact to rounding: 1e-7 relative of the column's scale), with one
 * terminal on a supply whose slope couples through c0. */
static void test_jacobian(void **state)
{
    (void)state;
    ru_circuit *c = load_ok("parts:\n"
                            "  VS: {type: supply, nodes: [v, gnd], value: 2, rise: 1u}\n"
                            "  X1: {type: crystal, nodes: [a, v], freq: 1MHz, esr: 50, "
                            "cm: 10f, c0: 3p, arms: [{freq: 3.01MHz, esr: 150, cm: 1f}]}\n"
                            "  X2: {type: crystal, nodes: [a, b], freq: 2MHz, q: 1e4, cm: 5f, "
                            "c0: 2p}\n"
                            "  R1: {type: resistor, nodes: [a, gnd], value: 1k}\n"
                            "  R2: {type: resistor, nodes: [b, gnd], value: 2k}\n");
    ru_system *s = compile(c);
    size_t n = ru_system_size(s);
    assert_int_equal(n, 2 + 4 + 2);
    double x[8] = {0.31, -0.42, 1e-3, 40.0, -2e-4, 7.0, 3e-3, -12.0}, r[8], rp[8], rm[8],
           J[64];
    ru_eval_point ep = {0.5e-6, 0, 1.0};
    assert_int_equal(ru_system_residual(s, &ep, x, r, J), RU_OK);
    for (size_t j = 0; j < n; j++) {
        double h = 1e-6 * fmax(fabs(x[j]), 1e-3), keep = x[j];
        x[j] = keep + h;
        assert_int_equal(ru_system_residual(s, &ep, x, rp, NULL), RU_OK);
        x[j] = keep - h;
        assert_int_equal(ru_system_residual(s, &ep, x, rm, NULL), RU_OK);
        x[j] = keep;
        for (size_t i = 0; i < n; i++) {
            double fd = (rp[i] - rm[i]) / (2 * h);
            RU_ASSERT_NEAR(J[i * n + j], fd, 1e-7 * (fabs(fd) + fabs(J[i * n + j])) + 1e-12);
        }
    }
    /* Reference: the main arm's rate by hand, di/dt = (v(a) - v(v) - R i - vm) / L
     * with v(v) = 2 V * t / rise on the ramp (analytic). */
    double l = 1.0 / (pow(2 * PI * 1e6, 2) * 10e-15), vv = 2.0 * 0.5;
    RU_ASSERT_REL(r[2], (x[0] - vv - 50 * x[2] - x[3]) / l, 1e-12);
    RU_ASSERT_REL(r[3], x[2] / 10e-15, 1e-12);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* The impedance from the network response: a source on node in, RS from in to a,
 * the crystal from a to ground: H = v(a)/v(in) = Za/(Za + RS), so Za = RS H/(1 - H),
 * Za the crystal in parallel with a's stray (1e-18 F, put in the formula too).
 * Tolerance 1e-8 relative: the solve is to rounding, 1/(1 - H) amplifies it by at
 * most |Za|/RS ~ 1e3 near the parallel resonance. */
static void check_z(const char *text, const bvd *b, const double *freqs, int nf)
{
    ru_circuit *c = load_ok(text);
    ru_system *s = compile(c);
    const ru_part *p = ru_circuit_part(c, (size_t)ru_circuit_find_part(c, "X1"));
    double *x = calloc(ru_system_size(s), sizeof *x);
    const double rs = 1e3, cs = 1e-18;
    for (int k = 0; k < nf; k++) {
        double w = 2 * PI * freqs[k], mag, ph;
        ru_error err;
        assert_int_equal(ru_response_at(s, x, ru_circuit_find_node(c, "in"),
                                        ru_circuit_find_node(c, "a"), freqs[k], &mag, &ph,
                                        &err),
                         RU_OK);
        double complex h = mag * cexp(I * ph * PI / 180), za = rs * h / (1 - h);
        double complex zx = bvd_z(b, w), want = 1.0 / (1.0 / zx + I * w * cs);
        if (!(cabs(za - want) <= 1e-8 * cabs(want)))
            fail_msg("at %.9g Hz: Z = %.9g%+.9gj, Butterworth-Van Dyke %.9g%+.9gj",
                     freqs[k], creal(za), cimag(za), creal(want), cimag(want));
        /* the part's own formula against the one written here: 1e-9, as the arm's
         * reactances w L and 1/(w C) (~1e6 ohm) cancel to |Z| (~30 ohm) at fs */
        double re, im;
        ru_crystal_impedance(p, w, &re, &im);
        if (!(cabs(re + I * im - zx) <= 1e-9 * cabs(zx)))
            fail_msg("at %.9g Hz: ru_crystal_impedance %.12g%+.12gj, want %.12g%+.12gj",
                     freqs[k], re, im, creal(zx), cimag(zx));
    }
    free(x);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* One arm: at fs, between fs and fp = fs sqrt(1 + Cm/C0) (inductive), at fp (the
 * parallel resonance, |Z| largest) and far off it. */
static void test_impedance_bvd(void **state)
{
    (void)state;
    bvd b = {5e-12, 1, {8e6}, {30}, {20e-15}};
    double fp = 8e6 * sqrt(1 + 20e-15 / 5e-12);
    double f[] = {1e6, 7.99e6, 8e6, 8.0001e6, 8.008e6, fp, 8.05e6, 30e6};
    check_z("stray: 1e-18\nparts:\n"
            "  RS: {type: resistor, nodes: [in, a], value: 1k}\n"
            "  X1: {type: crystal, nodes: [a, gnd], freq: 8MHz, esr: 30, cm: 20f, c0: 5p}\n",
            &b, f, 8);
    /* Reference: at fs the arm's reactance vanishes, so Z = R || 1/(jw C0):
     * |Z| within R (30 ohm) to (w C0 R)^2 ~ 6e-5 (analytic). */
    double complex z = bvd_z(&b, 2 * PI * 8e6);
    RU_ASSERT_REL(cabs(z), 30, 1e-4);
}

/* Overtone and spurious arms: the third overtone near 3 fs and a spurious mode just
 * above fs, each at its own series resonance, where |Z| dips to about its R. */
static void test_impedance_arms(void **state)
{
    (void)state;
    bvd b = {5e-12, 3, {8e6, 24.01e6, 8.3e6}, {30, 90, 400}, {20e-15, 2.2e-15, 0.1e-15}};
    double f[] = {8e6, 8.3e6, 8.29999e6, 24.01e6, 24.0e6, 24.02e6, 16e6, 50e6};
    check_z("stray: 1e-18\nparts:\n"
            "  RS: {type: resistor, nodes: [in, a], value: 1k}\n"
            "  X1: {type: crystal, nodes: [a, gnd], freq: 8MHz, esr: 30, cm: 20f, c0: 5p,\n"
            "       arms: [{freq: 24.01MHz, esr: 90, cm: 2.2f}, {freq: 8.3MHz, esr: 400, "
            "cm: 0.1f}]}\n",
            &b, f, 8);
    /* Reference: at an arm's series resonance its own branch is R_k, the others and
     * C0 shunt it: |Z| lies between R_k (1 - 3 %) and R_k (analytic bound here: the
     * shunt admittance |jw C0 + other arms| R_k < 0.03 at 24.01 MHz). */
    double az = cabs(bvd_z(&b, 2 * PI * 24.01e6));
    assert_true(az < 90 && az > 0.97 * 90);
}

/* The margin analysis of a crystal: its main arm against the rest, c0 counted in
 * the rest. Pierce stage with an ideal inverting transconductor gm from x1 to x2,
 * C1 and C2 to ground and no other loss. Reference: KCL at x1 and x2 with a unit
 * current into x1 and out of x2 gives
 *   Z = (gm + jw (C1 + C2)) / (-w^2 S + jw gm C0),  S = C1 C2 + C0 (C1 + C2),
 *   Re Z = -gm C1 C2 / (gm^2 C0^2 + w^2 S^2)
 * (derived by hand for this test; the same negative resistance of the three-point
 * oscillator with C0 as in E. Vittoz, M. Degrauwe, S. Bitz, IEEE J. Solid-State
 * Circuits 23 (1988) 774, from memory). C1 and C2 include the strays (1p each). */
static void test_margin_c0(void **state)
{
    (void)state;
    ru_circuit *c = load_ok("stray: 1p\nparts:\n"
                            "  X1: {type: crystal, nodes: [x1, x2], freq: 8MHz, esr: 30, "
                            "cm: 20f, c0: 5p}\n"
                            "  C1: {type: capacitor, nodes: [x1, gnd], value: 21p}\n"
                            "  C2: {type: capacitor, nodes: [x2, gnd], value: 33p}\n"
                            "  G1: {type: transconductor, nodes: [x2, gnd], control: [x1, gnd], "
                            "gm: 5m}\n"
                            "  RB: {type: resistor, nodes: [x1, gnd], value: 1e15}\n"
                            "  RC: {type: resistor, nodes: [x2, gnd], value: 1e15}\n");
    ru_margin *m = NULL;
    ru_error err;
    assert_int_equal(ru_margin_create(c, ru_circuit_find_part(c, "X1"), &m, &err), RU_OK);
    double c1 = 22e-12, c2 = 34e-12, c0 = 5e-12, gm = 5e-3;
    double S = c1 * c2 + c0 * (c1 + c2);
    const double f[] = {7.9e6, 8.004e6, 8.2e6};
    for (int k = 0; k < 3; k++) {
        double w = 2 * PI * f[k], re, im;
        assert_int_equal(ru_margin_rest_z(m, f[k], &re, &im, &err), RU_OK);
        double complex want = (gm + I * w * (c1 + c2)) / (-w * w * S + I * w * gm * c0);
        /* 1e-9: the two 1e15 ohm bias resistors move Re Z by ~1e-12 relative. */
        RU_ASSERT_REL(re, creal(want), 1e-9);
        RU_ASSERT_REL(im, cimag(want), 1e-9);
        RU_ASSERT_REL(re, -gm * c1 * c2 / (gm * gm * c0 * c0 + w * w * S * S), 1e-9);
    }
    /* The part is the main arm: R + j (w L - 1/(w Cm)) (the arm's formula). */
    double pr, pi;
    assert_int_equal(ru_margin_part_z(m, 8.01e6, &pr, &pi, &err), RU_OK);
    double lm = 1.0 / (pow(2 * PI * 8e6, 2) * 20e-15), w = 2 * PI * 8.01e6;
    RU_ASSERT_REL(pr, 30, 1e-15);
    RU_ASSERT_REL(pi, w * lm - 1 / (w * 20e-15), 1e-12);
    RU_ASSERT_REL(ru_margin_part_inductance(m), lm, 1e-15);
    /* Operating point: X_arm + Im Z = 0; growth (-Re Z - R) / X' against the poles
     * (the series loop of the arm and the rest; 1e-3: X' is the arm's 2 L plus the
     * rest's slope, and the poles carry the loop's second-order terms). */
    ru_margin_result r;
    double dre, dim;
    ru_margin_dominant(m, &dre, &dim);
    assert_int_equal(ru_margin_analyse(m, dim / (2 * PI), 1e6, 20e6, &r, &err), RU_OK);
    assert_true(r.found);
    double re, im;
    assert_int_equal(ru_margin_rest_z(m, r.frequency_hz, &re, &im, &err), RU_OK);
    w = 2 * PI * r.frequency_hz;
    RU_ASSERT_NEAR(w * lm - 1 / (w * 20e-15) + im, 0, 1e-6 * fabs(im));
    RU_ASSERT_REL(r.margin, -re / 30, 1e-12);
    RU_ASSERT_REL(r.frequency_hz, dim / (2 * PI), 1e-6);
    RU_ASSERT_REL(r.growth_rate_per_s, dre, 1e-3);
    ru_margin_destroy(m);
    ru_circuit_destroy(c);
}

/* Margin 1 is the start threshold: with gm chosen (bisection) so that -Re Z = ESR
 * at the operating frequency, the dominant poles sit on the jw axis (Reference: a
 * pole at jw means the series loop of arm and rest has Z_arm + Z = 0, analytic;
 * 1e-3 of the growth a margin of 2 gives). */
static void test_margin_one(void **state)
{
    (void)state;
    ru_circuit *c = load_ok("stray: 1p\nparts:\n"
                            "  X1: {type: crystal, nodes: [x1, x2], freq: 12MHz, esr: 40, "
                            "cm: 15f, c0: 4p}\n"
                            "  C1: {type: capacitor, nodes: [x1, gnd], value: 18p}\n"
                            "  C2: {type: capacitor, nodes: [x2, gnd], value: 18p}\n"
                            "  G1: {type: transconductor, nodes: [x2, gnd], control: [x1, gnd], "
                            "gm: 1m}\n"
                            "  RF: {type: resistor, nodes: [x1, x2], value: 1M}\n"
                            "  RO: {type: resistor, nodes: [x2, gnd], value: 20k}\n");
    ru_error err;
    double lo = 1e-5, hi = 50e-3, sigma2 = NAN;
    for (int it = 0; it < 60; it++) {
        double g = sqrt(lo * hi);
        assert_int_equal(ru_circuit_set_param(c, "G1.gm", g, &err), RU_OK);
        ru_margin *m = NULL;
        assert_int_equal(ru_margin_create(c, 0, &m, &err), RU_OK);
        ru_margin_result r;
        double dre, dim;
        ru_margin_dominant(m, &dre, &dim);
        assert_int_equal(ru_margin_analyse(m, dim / (2 * PI), 1e6, 40e6, &r, &err), RU_OK);
        assert_true(r.found);
        if (r.margin > 2 && isnan(sigma2))
            sigma2 = dre;
        if (r.margin > 1)
            hi = g;
        else
            lo = g;
        ru_margin_destroy(m);
    }
    assert_true(sigma2 > 0);
    assert_int_equal(ru_circuit_set_param(c, "G1.gm", sqrt(lo * hi), &err), RU_OK);
    ru_margin *m = NULL;
    assert_int_equal(ru_margin_create(c, 0, &m, &err), RU_OK);
    double dre, dim;
    ru_margin_dominant(m, &dre, &dim);
    RU_ASSERT_NEAR(dre, 0, 1e-3 * sigma2);
    ru_margin_destroy(m);
    ru_circuit_destroy(c);
}

/* Monte Carlo: fs drawn with tol (20 ppm, uniform: every draw within +-20 ppm and
 * the spread near 20/sqrt(3) ppm), esr with esr-tol independently (Reference: the
 * uniform distribution's standard deviation a/sqrt(3), analytic; 400 draws put
 * the sample's within 15 % of it at the 3-sigma level). */
static void test_montecarlo_draws(void **state)
{
    (void)state;
    ru_circuit *c = load_ok(xtal_text);
    int xi = ru_circuit_find_part(c, "X1");
    double sf = 0, sf2 = 0, se = 0, se2 = 0, sfe = 0;
    const int n = 400;
    for (int k = 1; k <= n; k++) {
        ru_circuit *v = NULL;
        ru_error err;
        assert_int_equal(ru_mc_sample_circuit(c, 7, (size_t)k, RU_MC_UNIFORM, &v, &err),
                         RU_OK);
        const ru_part *p = ru_circuit_part(v, (size_t)xi);
        double df = p->value / 8e6 - 1, de = p->crystal.esr_ohm / 30 - 1;
        assert_true(fabs(df) <= 20e-6 * (1 + 1e-12));
        assert_true(fabs(de) <= 0.1 * (1 + 1e-12));
        RU_ASSERT_REL(p->crystal.arm_esr_ohm[0] / 90, 1 + de, 1e-12); /* every arm alike */
        sf += df;
        sf2 += df * df;
        se += de;
        se2 += de * de;
        sfe += df * de;
        ru_circuit_destroy(v);
    }
    double sdf = sqrt(sf2 / n - pow(sf / n, 2)), sde = sqrt(se2 / n - pow(se / n, 2));
    RU_ASSERT_REL(sdf, 20e-6 / sqrt(3), 0.15);
    RU_ASSERT_REL(sde, 0.1 / sqrt(3), 0.15);
    /* independent draws: correlation within 3/sqrt(n) = 0.15 of 0 */
    double corr = (sfe / n - sf / n * se / n) / (sdf * sde);
    RU_ASSERT_NEAR(corr, 0, 0.15);
    ru_circuit_destroy(c);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_load),          cmocka_unit_test(test_load_errors),
        cmocka_unit_test(test_param),         cmocka_unit_test(test_jacobian),
        cmocka_unit_test(test_impedance_bvd), cmocka_unit_test(test_impedance_arms),
        cmocka_unit_test(test_margin_c0),     cmocka_unit_test(test_margin_one),
        cmocka_unit_test(test_montecarlo_draws),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
