/* test_smallsig.c: the small-signal engine against analytic results.
 *
 * Circuits are built with the builder API (our own values). Each check names its
 * reference; tolerances are explained beside them. Networks that are linear are
 * linearised at x = 0 (their linearisation does not depend on x). */
#include "base/cplx.h"
#include "ru_test.h"

#include "ringup/circuit.h"
#include "ringup/smallsig.h"
#include "ringup/system.h"
#include "engines/smallsig_impl.h"

#include <complex.h>
#include <lapacke.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define PI 3.14159265358979323846

/* ---- builders ---- */

static ru_circuit *new_circuit(double stray_f)
{
    ru_circuit *c = NULL;
    assert_int_equal(ru_circuit_create("smallsig test", &c), RU_OK);
    assert_int_equal(ru_circuit_set_stray_f(c, stray_f), RU_OK);
    return c;
}

static int node(ru_circuit *c, const char *name)
{
    int k = ru_circuit_node(c, name, 0, 0);
    assert_true(k >= 0);
    return k;
}

static void add_part(ru_circuit *c, const ru_part *p)
{
    ru_error err;
    ru_status st = ru_circuit_add_part(c, p, &err);
    if (st != RU_OK)
        fail_msg("add_part %s: %s", p->name, err.msg);
}

static void add2(ru_circuit *c, ru_part_type t, const char *name, const char *a,
                 const char *b, double value)
{
    ru_part p;
    ru_part_init(&p, t, name);
    p.node[0] = node(c, a);
    p.node[1] = node(c, b);
    p.value = value;
    add_part(c, &p);
}

static void add_inductor(ru_circuit *c, const char *name, const char *a, const char *b,
                         double l_h, double series_ohm)
{
    ru_part p;
    ru_part_init(&p, RU_PART_INDUCTOR, name);
    p.node[0] = node(c, a);
    p.node[1] = node(c, b);
    p.value = l_h;
    p.series_ohm = series_ohm;
    add_part(c, &p);
}

static void add_supply(ru_circuit *c, const char *name, const char *a, double v)
{
    ru_part p;
    ru_part_init(&p, RU_PART_SUPPLY, name);
    p.node[0] = node(c, a);
    p.node[1] = 0;
    p.wave.kind = RU_WAVE_DC;
    p.wave.value = v;
    add_part(c, &p);
}

static void add_poly(ru_circuit *c, const char *name, const char *a, const double *k,
                     int nk)
{
    ru_part p;
    ru_part_init(&p, RU_PART_POLY, name);
    p.node[0] = node(c, a);
    p.node[1] = 0;
    p.ncoeffs = nk;
    memcpy(p.coeffs, k, (size_t)nk * sizeof *k);
    add_part(c, &p);
}

static void add_follower(ru_circuit *c, const char *name, const char *in,
                         const char *out, double gain, double rout_ohm)
{
    ru_part p;
    ru_part_init(&p, RU_PART_AMPLIFIER, name);
    ru_amp_defaults(&p.amp, RU_LAW_FOLLOWER_TANH);
    p.node[0] = node(c, in);
    p.node[1] = node(c, out);
    p.node[2] = 0;
    p.amp.gain = gain;
    p.amp.rout_ohm = rout_ohm;
    add_part(c, &p);
}

static void add_exp_stage(ru_circuit *c, const char *name, const char *in,
                          const char *out)
{
    ru_part p;
    ru_part_init(&p, RU_PART_AMPLIFIER, name);
    ru_amp_defaults(&p.amp, RU_LAW_EXP_STAGE);
    p.node[0] = node(c, in);
    p.node[1] = node(c, out);
    p.node[2] = 0;
    add_part(c, &p);
}

static ru_system *compile(const ru_circuit *c)
{
    ru_system *s = NULL;
    ru_error err;
    ru_status st = ru_system_create(c, &s, &err);
    if (st != RU_OK)
        fail_msg("system_create: %s", err.msg);
    return s;
}

static double *zeros(const ru_system *s)
{
    double *x = calloc(ru_system_size(s) + 1, sizeof *x);
    assert_non_null(x);
    return x;
}

static void response(const ru_system *s, const double *x, const ru_circuit *c,
                     const char *in, const char *out, double f_hz, double *mag,
                     double *ph)
{
    ru_error err;
    ru_status st = ru_response_at(s, x, ru_circuit_find_node(c, in),
                                  ru_circuit_find_node(c, out), f_hz, mag, ph, &err);
    if (st != RU_OK)
        fail_msg("response: %s", err.msg);
}

/* ---- network responses ---- */

/* Three equal sections of series C, shunt R, driven by an ideal source, the last
 * node unloaded. Reference: standard electronics textbooks, RC phase-shift
 * oscillator analysis: |H| = 1/29 with phase 180 deg at f = 1/(2 pi sqrt(6) R C).
 * Stray is set to 1e-18 F so the textbook network is what is solved (its effect,
 * w*Cs*R ~ 4e-11, is far below the tolerance); 1e-9 relative allows for rounding
 * in the complex LU (condition number of this 4x4 system is small). */
static void test_rc_phase_shift(void **state)
{
    (void)state;
    const double r = 10e3, cap = 10e-9;
    ru_circuit *c = new_circuit(1e-18);
    add2(c, RU_PART_CAPACITOR, "C1", "in", "n1", cap);
    add2(c, RU_PART_RESISTOR, "R1", "n1", "gnd", r);
    add2(c, RU_PART_CAPACITOR, "C2", "n1", "n2", cap);
    add2(c, RU_PART_RESISTOR, "R2", "n2", "gnd", r);
    add2(c, RU_PART_CAPACITOR, "C3", "n2", "out", cap);
    add2(c, RU_PART_RESISTOR, "R3", "out", "gnd", r);
    ru_system *s = compile(c);
    double *x = zeros(s), mag, ph;
    double f = 1.0 / (2.0 * PI * sqrt(6.0) * r * cap);
    response(s, x, c, "in", "out", f, &mag, &ph);
    RU_ASSERT_REL(mag, 1.0 / 29.0, 1e-9);
    RU_ASSERT_NEAR(fabs(ph), 180.0, 1e-6);
    /* Away from f the phase is not 180: the check above can fail. */
    response(s, x, c, "in", "out", 2.0 * f, &mag, &ph);
    assert_true(fabs(fabs(ph) - 180.0) > 10.0);
    free(x);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* Wien network: series R-C from the source to out, parallel R || C from out to
 * ground. Reference: standard electronics textbooks, Wien bridge: |H| = 1/3 and
 * phase 0 at f = 1/(2 pi R C). Stray and tolerance as in the phase-shift test. */
static void test_wien(void **state)
{
    (void)state;
    const double r = 22e3, cap = 4.7e-9;
    ru_circuit *c = new_circuit(1e-18);
    add2(c, RU_PART_RESISTOR, "RS", "in", "m", r);
    add2(c, RU_PART_CAPACITOR, "CS", "m", "out", cap);
    add2(c, RU_PART_RESISTOR, "RP", "out", "gnd", r);
    add2(c, RU_PART_CAPACITOR, "CP", "out", "gnd", cap);
    ru_system *s = compile(c);
    double *x = zeros(s), mag, ph;
    double f = 1.0 / (2.0 * PI * r * cap);
    response(s, x, c, "in", "out", f, &mag, &ph);
    RU_ASSERT_REL(mag, 1.0 / 3.0, 1e-9);
    RU_ASSERT_NEAR(ph, 0.0, 1e-6);
    /* The peak of |H| is at the same frequency (same reference). */
    double fp, mp;
    ru_error err;
    assert_int_equal(ru_response_peak(s, x, ru_circuit_find_node(c, "in"),
                                      ru_circuit_find_node(c, "out"), 10.0, 1e6, 200,
                                      &fp, &mp, &err),
                     RU_OK);
    RU_ASSERT_REL(mp, 1.0 / 3.0, 1e-9);
    RU_ASSERT_REL(fp, f, 1e-4); /* flat top: |H| - 1/3 ~ (df/f)^2, so f only to ~1e-4 */
    free(x);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* A passive network with voltage gain: series L (with winding resistance R), shunt
 * C to ground, output across C. Common practice: a resonant network can raise the
 * voltage above the drive. Reference: second-order low-pass, exact:
 * H = 1/(1 - w^2 L C + j w R C); at w0 = 1/sqrt(LC), |H| = sqrt(L/C)/R = Q with
 * phase -90 deg; the peak is Q/sqrt(1 - 1/(4 Q^2)). C includes the 1 pF stray of
 * the output node (the input's stray is shorted by the ideal source). */
static void test_lc_voltage_gain(void **state)
{
    (void)state;
    const double l = 10e-3, r = 10.0, cap = 100e-9, stray = 1e-12;
    ru_circuit *c = new_circuit(stray);
    add_inductor(c, "L1", "in", "out", l, r);
    add2(c, RU_PART_CAPACITOR, "C1", "out", "gnd", cap);
    ru_system *s = compile(c);
    double *x = zeros(s), mag, ph;
    double ct = cap + stray, q = sqrt(l / ct) / r;
    double f0 = 1.0 / (2.0 * PI * sqrt(l * ct));
    response(s, x, c, "in", "out", f0, &mag, &ph);
    RU_ASSERT_REL(mag, q, 1e-9);
    RU_ASSERT_NEAR(ph, -90.0, 1e-6);
    double fp, mp;
    ru_error err;
    assert_int_equal(ru_response_peak(s, x, ru_circuit_find_node(c, "in"),
                                      ru_circuit_find_node(c, "out"), 100.0, 1e6, 300,
                                      &fp, &mp, &err),
                     RU_OK);
    assert_true(mp > 1.0); /* common practice: the resonant network steps up */
    RU_ASSERT_REL(mp, q / sqrt(1.0 - 1.0 / (4.0 * q * q)), 1e-8);
    free(x);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* Bad response arguments: ground or a supply-driven input is refused. */
static void test_response_bad_input(void **state)
{
    (void)state;
    ru_circuit *c = new_circuit(1e-12);
    add_supply(c, "VS", "vcc", 5.0);
    add2(c, RU_PART_RESISTOR, "R1", "vcc", "out", 1e3);
    add2(c, RU_PART_RESISTOR, "R2", "out", "gnd", 1e3);
    ru_system *s = compile(c);
    double *x = zeros(s), mag, ph;
    ru_error err;
    int out = ru_circuit_find_node(c, "out"), vcc = ru_circuit_find_node(c, "vcc");
    assert_int_equal(ru_response_at(s, x, 0, out, 1e3, &mag, &ph, &err), RU_EINPUT);
    assert_int_equal(ru_response_at(s, x, vcc, out, 1e3, &mag, &ph, &err), RU_EINPUT);
    assert_non_null(strstr(err.msg, "vcc"));
    /* A driven output carries no small signal. */
    assert_int_equal(ru_response_at(s, x, out, vcc, 1e3, &mag, &ph, &err), RU_OK);
    RU_ASSERT_NEAR(mag, 0.0, 0.0);
    free(x);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* ---- poles ---- */

/* van der Pol tank: L and C from t to ground, i(v) = -a v + b v^3. Reference:
 * second-order linear ODE, exact: C v'' - a v' + v/L = 0 gives
 * s = a/(2C) +- j sqrt(1/(LC) - (a/2C)^2), with C including the 1 pF stray.
 * Tolerance 1e-9 relative: dgeev on a 2x2 is accurate to ~eps * |J| = 1e-16 * 1e7,
 * i.e. 1e-9 absolute against 5e3 1/s and 3e4 rad/s. */
static void test_van_der_pol_poles(void **state)
{
    (void)state;
    const double l = 10e-3, cap = 100e-9, stray = 1e-12, a = 1e-3, b = 0.33e-3;
    ru_circuit *c = new_circuit(stray);
    add_inductor(c, "L1", "t", "gnd", l, 0.0);
    add2(c, RU_PART_CAPACITOR, "C1", "t", "gnd", cap);
    const double k[] = {0.0, -a, 0.0, b};
    add_poly(c, "G1", "t", k, 4);
    ru_system *s = compile(c);
    size_t n = ru_system_size(s);
    assert_int_equal(n, 2);
    double x[2] = {0.3, 1e-3}; /* a poor guess: Newton must find the origin */
    ru_oppoint_stats stats;
    ru_error err;
    assert_int_equal(ru_oppoint_solve(s, x, 1, &stats, &err), RU_OK);
    RU_ASSERT_NEAR(x[0], 0.0, 1e-12); /* v = 0, i = 0 solve i(v) = 0 with v = 0 on L */
    RU_ASSERT_NEAR(x[1], 0.0, 1e-12);
    ru_pole poles[2];
    assert_int_equal(ru_poles_compute(s, x, poles, &err), RU_OK);
    double ct = cap + stray;
    double sigma = a / (2.0 * ct), wd = sqrt(1.0 / (l * ct) - sigma * sigma);
    int d = ru_poles_dominant(poles, n);
    assert_int_equal(d, 0); /* sorted: the im > 0 member first */
    RU_ASSERT_REL(poles[d].re_per_s, sigma, 1e-9);
    RU_ASSERT_REL(poles[d].im_rad_per_s / (2.0 * PI), wd / (2.0 * PI), 1e-9);
    RU_ASSERT_REL(poles[1].re_per_s, sigma, 1e-9);
    RU_ASSERT_REL(poles[1].im_rad_per_s, -wd, 1e-9);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* Sorting and the dominant pick on a hand-made list (largest real part first,
 * ties by |im|; dominant = complex pole with im > 0 and the largest real part). */
static void test_dominant_pick(void **state)
{
    (void)state;
    ru_pole p[5] = {{5.0, 0.0}, {1.0, 3.0}, {1.0, -3.0}, {-2.0, 9.0}, {-2.0, -9.0}};
    assert_int_equal(ru_poles_dominant(p, 5), 1);
    ru_pole q[2] = {{-1.0, 0.0}, {-3.0, 0.0}};
    assert_int_equal(ru_poles_dominant(q, 2), -1);
}

/* ---- loop gain ---- */

/* Colpitts: L from a to ground, C1 from a to the tap t, C2 from t to ground; a
 * follower (gain g, rout) senses a and drives t. Lossless tank, so the phase of L
 * is zero exactly where the admittance at t vanishes:
 *   w^2 = (C1 + C2') / (L (C1' C2' + C1 Csa)),  C1' = C1 + Csa, C2' = C2 + Cst,
 * and there |L| = g w^2 L C1 / (w^2 L C1' - 1) (own derivation, exact with the
 * strays Csa = Cst = 1 pF). Without strays these are the Colpitts formulas
 * f = 1/(2 pi sqrt(L C1 C2/(C1+C2))) and |L| = g (C1+C2)/C1 (Reference: Colpitts
 * oscillator frequency and tap ratio, standard textbooks); the 1 pF strays move
 * them by ~Cs/C = 1e-4, hence 5e-4 against the textbook figures. */
static ru_circuit *colpitts(double gain)
{
    ru_circuit *c = new_circuit(1e-12);
    add_inductor(c, "L1", "a", "gnd", 100e-6, 0.0);
    add2(c, RU_PART_CAPACITOR, "C1", "a", "t", 10e-9);
    add2(c, RU_PART_CAPACITOR, "C2", "t", "gnd", 22e-9);
    add_follower(c, "A1", "a", "t", gain, 50.0);
    return c;
}

static void sweep_loop(const ru_system *s, const ru_circuit *c, const double *x,
                       ru_loop_summary *sum)
{
    ru_error err;
    ru_status st = ru_loopgain_sweep(s, ru_circuit_find_part(c, "A1"), x, 1e3, 1e8, 500,
                                     NULL, NULL, NULL, sum, &err);
    if (st != RU_OK)
        fail_msg("sweep: %s", err.msg);
}

static void test_colpitts_crossover(void **state)
{
    (void)state;
    const double l = 100e-6, c1 = 10e-9, c2 = 22e-9, cs = 1e-12, g = 0.95;
    ru_circuit *c = colpitts(g);
    ru_system *s = compile(c);
    double *x = zeros(s);
    ru_oppoint_stats stats;
    ru_error err;
    assert_int_equal(ru_oppoint_solve(s, x, 0, &stats, &err), RU_OK);
    ru_loop_summary sum;
    sweep_loop(s, c, x, &sum);
    assert_int_equal(sum.found, 1);
    double f_book = 1.0 / (2.0 * PI * sqrt(l * c1 * c2 / (c1 + c2)));
    RU_ASSERT_REL(sum.crossover_hz, f_book, 5e-4);
    RU_ASSERT_REL(sum.gain, g * (c1 + c2) / c1, 5e-4);
    double c1p = c1 + cs, c2p = c2 + cs;
    double w2 = (c1 + c2p) / (l * (c1p * c2p + c1 * cs));
    RU_ASSERT_REL(sum.crossover_hz, sqrt(w2) / (2.0 * PI), 1e-9);
    RU_ASSERT_REL(sum.gain, g * w2 * l * c1 / (w2 * l * c1p - 1.0), 1e-9);
    RU_ASSERT_REL(sum.margin_db, 20.0 * log10(sum.gain), 1e-12);
    /* The sweep's arrays: log-spaced from fmin to fmax, |L| as ru_loopgain_at
     * gives it, phase unwrapped (steps below 180 deg between neighbours). */
    enum { NPTS = 41 };
    double f[NPTS], mag[NPTS], ph[NPTS], re, im;
    int part = ru_circuit_find_part(c, "A1");
    assert_int_equal(ru_loopgain_sweep(s, part, x, 1e4, 1e6, NPTS, f, mag, ph, &sum,
                                       &err),
                     RU_OK);
    RU_ASSERT_REL(f[0], 1e4, 1e-15);
    RU_ASSERT_REL(f[NPTS - 1], 1e6, 1e-15);
    RU_ASSERT_REL(f[20], 1e5, 1e-12);
    assert_int_equal(ru_loopgain_at(s, part, x, f[20], &re, &im, &err), RU_OK);
    RU_ASSERT_REL(mag[20], hypot(re, im), 1e-12);
    for (int k = 1; k < NPTS; k++)
        assert_true(fabs(ph[k] - ph[k - 1]) < 180.0);
    RU_ASSERT_REL(sum.crossover_hz, sqrt(w2) / (2.0 * PI), 1e-9); /* same crossing */
    free(x);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* Return-ratio identity: dr/dx = A0 + b g^T, so by the matrix determinant lemma
 * det(sM - dr/dx) = det(sM - A0) (1 - L(s)) (Reference: matrix determinant lemma;
 * Bode's return ratio). With the follower gain scaled to make |L| = 1 at the
 * crossover, the closed loop must have a pole pair on the jw axis at that
 * frequency, found here independently by dgeev. Tolerances: the crossover is
 * bisected to 1e-13 relative; eigenvalues carry ~eps*|J| ~ 1e-16 * 1e9 absolute
 * against w ~ 1.4e6 rad/s, so 1e-7 relative is ample and still tight. */
static void test_loop_identity(void **state)
{
    (void)state;
    ru_circuit *c = colpitts(0.95);
    ru_system *s = compile(c);
    double *x = zeros(s);
    ru_loop_summary sum;
    sweep_loop(s, c, x, &sum);
    double g_crit = 0.95 / sum.gain;
    ru_system_destroy(s);
    ru_circuit_destroy(c);
    free(x);

    const double scale[3] = {1.0, 1.1, 0.9};
    for (int k = 0; k < 3; k++) {
        c = colpitts(g_crit * scale[k]);
        s = compile(c);
        x = zeros(s);
        size_t n = ru_system_size(s);
        ru_pole *p = calloc(n, sizeof *p);
        ru_error err;
        assert_int_equal(ru_poles_compute(s, x, p, &err), RU_OK);
        int d = ru_poles_dominant(p, n);
        assert_true(d >= 0);
        double w = p[d].im_rad_per_s;
        if (k == 0) {
            RU_ASSERT_NEAR(p[d].re_per_s, 0.0, 1e-7 * w);
            RU_ASSERT_REL(w / (2.0 * PI), sum.crossover_hz, 1e-7);
            double re, im;
            assert_int_equal(ru_loopgain_at(s, ru_circuit_find_part(c, "A1"), x,
                                            w / (2.0 * PI), &re, &im, &err),
                             RU_OK);
            RU_ASSERT_NEAR(hypot(1.0 - re, im), 0.0, 1e-6);
        } else {
            /* More gain than critical: growth and margin > 0; less: both < 0. */
            ru_loop_summary s2;
            sweep_loop(s, c, x, &s2);
            double sign = scale[k] > 1.0 ? 1.0 : -1.0;
            assert_true(sign * p[d].re_per_s > 0.0);
            assert_true(sign * s2.margin_db > 0.0);
            RU_ASSERT_REL(s2.margin_db, 20.0 * log10(scale[k]), 1e-6);
        }
        free(p);
        free(x);
        ru_system_destroy(s);
        ru_circuit_destroy(c);
    }
}

/* log |det K| and arg det K of a complex n*n matrix (destroyed) by LU. */
static double complex log_det(lapack_complex_double *k, size_t n)
{
    lapack_int *piv = calloc(n, sizeof *piv);
    assert_non_null(piv);
    assert_int_equal(LAPACKE_zgetrf(LAPACK_ROW_MAJOR, (lapack_int)n, (lapack_int)n, k,
                                    (lapack_int)n, piv),
                     0);
    double complex sum = 0;
    for (size_t i = 0; i < n; i++) {
        sum += clog(k[i * n + i]);
        if (piv[i] != (lapack_int)i + 1)
            sum += RU_CMPLX(0.0, PI);
    }
    free(piv);
    return sum;
}

/* Common-emitter exp-stage with collector-to-base feedback (RB, CF) and a base
 * capacitor. Reference: matrix determinant lemma, det(jwM - A0 - b g^T) =
 * det(jwM - A0) (1 - g^T (jwM - A0)^{-1} b): 1 - L from the loop-gain solve must
 * equal the ratio of two determinants computed here by LU (zgetrf), at the
 * operating point found by Newton. 1e-9 relative: both sides are LU products of
 * 3x3 matrices with modest condition numbers. */
static void test_loop_determinant_identity(void **state)
{
    (void)state;
    ru_circuit *c = new_circuit(1e-12);
    add_supply(c, "VS", "vcc", 5.0);
    add2(c, RU_PART_RESISTOR, "RC", "vcc", "col", 2.2e3);
    add2(c, RU_PART_RESISTOR, "RB", "col", "b", 100e3);
    add2(c, RU_PART_CAPACITOR, "CF", "col", "b", 100e-12);
    add2(c, RU_PART_CAPACITOR, "CB", "b", "gnd", 1e-9);
    add_exp_stage(c, "Q1", "b", "col");
    ru_system *s = compile(c);
    size_t n = ru_system_size(s);
    double *x = zeros(s);
    ru_error err;
    assert_int_equal(ru_oppoint_solve(s, x, 0, NULL, &err), RU_OK);
    double *dr = calloc(n * n, sizeof *dr), *a0 = calloc(n * n, sizeof *a0);
    double *m = calloc(n * n, sizeof *m), *b = calloc(n, sizeof *b);
    double *g = calloc(n, sizeof *g);
    lapack_complex_double *k1 = calloc(n * n, sizeof *k1), *k2 = calloc(n * n, sizeof *k2);
    assert_true(dr && a0 && m && b && g && k1 && k2);
    int part = ru_circuit_find_part(c, "Q1");
    assert_int_equal(ru_ss_linearize(s, x, dr, m, &err), RU_OK);
    assert_int_equal(ru_system_loop_split(s, part, x, a0, b, g, &err), RU_OK);
    const double fs[3] = {1e3, 3e5, 2e7};
    for (int q = 0; q < 3; q++) {
        double w = 2.0 * PI * fs[q], re, im;
        for (size_t i = 0; i < n * n; i++) {
            k1[i] = RU_CMPLX(-dr[i], w * m[i]);
            k2[i] = RU_CMPLX(-a0[i], w * m[i]);
        }
        double complex ratio = cexp(log_det(k1, n) - log_det(k2, n));
        assert_int_equal(ru_loopgain_at(s, part, x, fs[q], &re, &im, &err), RU_OK);
        double complex one_minus_l = 1.0 - RU_CMPLX(re, im);
        RU_ASSERT_NEAR(cabs(one_minus_l - ratio), 0.0, 1e-9 * cabs(ratio));
    }
    /* The stage inverts: at low frequency L is real and negative, |L| > 1. */
    double re, im;
    assert_int_equal(ru_loopgain_at(s, part, x, 1.0, &re, &im, &err), RU_OK);
    assert_true(re < -1.0);
    free(dr), free(a0), free(m), free(b), free(g), free(k1), free(k2), free(x);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

static void test_loop_bad_args(void **state)
{
    (void)state;
    ru_circuit *c = colpitts(0.95);
    ru_system *s = compile(c);
    double *x = zeros(s), re, im;
    ru_error err;
    ru_loop_summary sum;
    assert_int_equal(ru_loopgain_at(s, ru_circuit_find_part(c, "L1"), x, 1e5, &re, &im,
                                    &err),
                     RU_EINPUT);
    assert_non_null(strstr(err.msg, "L1"));
    assert_int_equal(ru_loopgain_sweep(s, ru_circuit_find_part(c, "A1"), x, 1e6, 1e3,
                                       10, NULL, NULL, NULL, &sum, &err),
                     RU_ERANGE);
    free(x);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* ---- operating point ---- */

/* Resistor network from a 12 V supply. Reference: Ohm's and Kirchhoff's laws by
 * hand (series/parallel reduction). Linear, so Newton lands in one step: 1e-12
 * relative leaves room for rounding only. */
static void test_oppoint_divider(void **state)
{
    (void)state;
    const double r1 = 10e3, r2 = 4.7e3, r3 = 2.2e3, r4 = 33e3, vs = 12.0;
    ru_circuit *c = new_circuit(1e-12);
    add_supply(c, "VS", "vcc", vs);
    add2(c, RU_PART_RESISTOR, "R1", "vcc", "m", r1);
    add2(c, RU_PART_RESISTOR, "R2", "m", "n", r2);
    add2(c, RU_PART_RESISTOR, "R3", "n", "gnd", r3);
    add2(c, RU_PART_RESISTOR, "R4", "m", "gnd", r4);
    ru_system *s = compile(c);
    double *x = zeros(s);
    ru_oppoint_stats stats;
    ru_error err;
    assert_int_equal(ru_oppoint_solve(s, x, 0, &stats, &err), RU_OK);
    double rl = r4 * (r2 + r3) / (r4 + r2 + r3);
    double vm = vs * rl / (r1 + rl), vn = vm * r3 / (r2 + r3);
    RU_ASSERT_REL(ru_system_node_voltage(s, ru_circuit_find_node(c, "m"), 0.0, x), vm,
                  1e-12);
    RU_ASSERT_REL(ru_system_node_voltage(s, ru_circuit_find_node(c, "n"), 0.0, x), vn,
                  1e-12);
    assert_int_equal(stats.source_steps, 0);
    assert_true(stats.iterations <= 8); /* 2 V step cap: a few steps to 4.6 V */
    assert_true(stats.residual <= 1e-12);
    free(x);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* Independent reference for the biased exp-stage: the base draws the junction
 * current over beta, ib = (Vcc - vb)/RB = is (exp(vb/(n vt)) - 1)/beta, so
 * h(vb) = is (e^{vb/vt} - 1) - beta (Vcc - vb)/RB increases with vb; solved by
 * bisection on [0, Vcc]. Then ic = beta ib tanh(vc/vsat) with vc = Vcc - RC ic,
 * solved by bisection too. Reference: Shockley law (the exp-stage definition),
 * vt = k T / q with the exact 2019 SI constants. */
static double exp_stage_vb(double vcc, double rb, const ru_amp *a)
{
    double vt = a->n * 1.380649e-23 * (a->temp_c + 273.15) / 1.602176634e-19;
    double lo = 0.0, hi = vcc;
    for (int k = 0; k < 200; k++) {
        double vb = 0.5 * (lo + hi);
        double h = a->is_a * (exp(vb / vt) - 1.0) - a->beta * (vcc - vb) / rb;
        if (h > 0)
            hi = vb;
        else
            lo = vb;
    }
    return 0.5 * (lo + hi);
}

static void test_oppoint_exp_stage(void **state)
{
    (void)state;
    const double vcc = 5.0, rb = 470e3, rc = 2.2e3;
    ru_circuit *c = new_circuit(1e-12);
    add_supply(c, "VS", "vcc", vcc);
    add2(c, RU_PART_RESISTOR, "RB", "vcc", "b", rb);
    add2(c, RU_PART_RESISTOR, "RC", "vcc", "col", rc);
    add_exp_stage(c, "Q1", "b", "col");
    const ru_amp *amp = &ru_circuit_part(c, (size_t)ru_circuit_find_part(c, "Q1"))->amp;
    double vb = exp_stage_vb(vcc, rb, amp);
    double ij = amp->beta * (vcc - vb) / rb; /* junction current before saturation */
    double vlo = 0.0, vhi = vcc;             /* vc = Vcc - RC ij tanh(vc/vsat) */
    for (int k = 0; k < 200; k++) {
        double vm = 0.5 * (vlo + vhi);
        if (vm - (vcc - rc * ij * tanh(vm / amp->vsat_v)) > 0)
            vhi = vm;
        else
            vlo = vm;
    }
    double vc = 0.5 * (vlo + vhi);
    ru_system *s = compile(c);
    int nb = ru_circuit_find_node(c, "b"), ncol = ru_circuit_find_node(c, "col");
    for (int force = 0; force <= 1; force++) {
        double *x = zeros(s);
        ru_oppoint_stats stats;
        ru_error err;
        ru_status st = ru_oppoint_solve_ex(s, x, 0, force, &stats, &err);
        if (st != RU_OK)
            fail_msg("oppoint (force %d): %s", force, err.msg);
        /* vb to 1e-9 V (Newton converges quadratically past the 1e-9 V step test);
         * vc from the scalar equation above is less sensitive, 1e-8 V. */
        RU_ASSERT_NEAR(ru_system_node_voltage(s, nb, 0.0, x), vb, 1e-9);
        RU_ASSERT_NEAR(ru_system_node_voltage(s, ncol, 0.0, x), vc, 1e-8);
        assert_true(stats.residual <= 1e-12);
        if (force)
            assert_true(stats.source_steps > 0); /* the stepping path ran */
        else
            assert_int_equal(stats.source_steps, 0);
        free(x);
    }
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* A node reached only through a capacitor has no DC solution: RU_EINPUT naming it. */
static void test_oppoint_no_dc_path(void **state)
{
    (void)state;
    ru_circuit *c = new_circuit(1e-12);
    add_supply(c, "VS", "vcc", 5.0);
    add2(c, RU_PART_RESISTOR, "R1", "vcc", "m", 1e3);
    add2(c, RU_PART_RESISTOR, "R2", "m", "gnd", 1e3);
    add2(c, RU_PART_CAPACITOR, "C1", "m", "lonely", 1e-9);
    ru_system *s = compile(c);
    double *x = zeros(s);
    ru_error err;
    assert_int_equal(ru_oppoint_solve(s, x, 0, NULL, &err), RU_EINPUT);
    assert_non_null(strstr(err.msg, "lonely"));
    free(x);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* i(v) = 1 + 0.5 v + v^2 > 0 for every v: KCL at p has no solution, so Newton
 * and source stepping must both give up with RU_ENOCONVERGE naming node p. */
static void test_oppoint_no_solution(void **state)
{
    (void)state;
    ru_circuit *c = new_circuit(1e-12);
    const double k[] = {1.0, 0.5, 1.0};
    add_poly(c, "G1", "p", k, 3);
    ru_system *s = compile(c);
    double *x = zeros(s);
    ru_oppoint_stats stats;
    ru_error err;
    assert_int_equal(ru_oppoint_solve(s, x, 0, &stats, &err), RU_ENOCONVERGE);
    assert_non_null(strstr(err.msg, " p"));
    assert_true(stats.residual >= 0.9375); /* the minimum of 1 + 0.5 v + v^2 */
    free(x);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_rc_phase_shift),
        cmocka_unit_test(test_wien),
        cmocka_unit_test(test_lc_voltage_gain),
        cmocka_unit_test(test_response_bad_input),
        cmocka_unit_test(test_van_der_pol_poles),
        cmocka_unit_test(test_dominant_pick),
        cmocka_unit_test(test_colpitts_crossover),
        cmocka_unit_test(test_loop_identity),
        cmocka_unit_test(test_loop_determinant_identity),
        cmocka_unit_test(test_loop_bad_args),
        cmocka_unit_test(test_oppoint_divider),
        cmocka_unit_test(test_oppoint_exp_stage),
        cmocka_unit_test(test_oppoint_no_dc_path),
        cmocka_unit_test(test_oppoint_no_solution),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
