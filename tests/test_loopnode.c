/* test_loopnode.c: loop gain broken at a node (Middlebrook's double injection)
 * against closed forms, the poles and the amplifier's own return ratio.
 *
 * Circuits are built with the builder API (our own values). Each check names its
 * reference; tolerances are explained beside them. */
#include "base/cplx.h"
#include "ru_test.h"

#include "ringup/circuit.h"
#include "ringup/smallsig.h"
#include "ringup/system.h"

#include <complex.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define PI 3.14159265358979323846

/* ---- builders ---- */

static ru_circuit *new_circuit(double stray_f)
{
    ru_circuit *c = NULL;
    assert_int_equal(ru_circuit_create("loopnode test", &c), RU_OK);
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
    if (ru_circuit_add_part(c, p, &err) != RU_OK)
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

static void add_inductor(ru_circuit *c, const char *name, const char *a, double l_h)
{
    ru_part p;
    ru_part_init(&p, RU_PART_INDUCTOR, name);
    p.node[0] = node(c, a);
    p.node[1] = 0;
    p.value = l_h;
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

/* gm v(cp) flowing from ground into node `into` (nodes [gnd, into], control
 * [cp, gnd]). */
static void add_gm(ru_circuit *c, const char *name, const char *cp, const char *into,
                   double gm)
{
    ru_part p;
    ru_part_init(&p, RU_PART_TRANSCONDUCTOR, name);
    p.node[0] = 0;
    p.node[1] = node(c, into);
    p.node[2] = node(c, cp);
    p.node[3] = 0;
    p.value = gm;
    add_part(c, &p);
}

static void add_opamp(ru_circuit *c, const char *name, const char *in, const char *inv,
                      const char *out)
{
    ru_part p;
    ru_part_init(&p, RU_PART_AMPLIFIER, name);
    ru_amp_defaults(&p.amp, RU_LAW_OPAMP);
    p.node[0] = node(c, in);
    p.node[1] = node(c, out);
    p.node[2] = 0;
    p.node[3] = node(c, inv);
    p.amp.gain = 2e5; /* our own round figures for a general-purpose op-amp */
    p.amp.gbw_hz = 1e6;
    p.amp.rout_ohm = 75.0;
    add_part(c, &p);
}

static ru_system *compile(const ru_circuit *c)
{
    ru_system *s = NULL;
    ru_error err;
    if (ru_system_create(c, &s, &err) != RU_OK)
        fail_msg("system_create: %s", err.msg);
    return s;
}

static double *oppoint(const ru_system *s)
{
    double *x = calloc(ru_system_size(s) + 1, sizeof *x);
    ru_error err;
    assert_non_null(x);
    if (ru_oppoint_solve(s, x, 0, NULL, &err) != RU_OK)
        fail_msg("oppoint: %s", err.msg);
    return x;
}

/* The loop at node `at` with the load side named by `load` (NULL: the default). */
static ru_loop *at_node(const ru_system *s, const double *x, const char *at,
                        const char *load)
{
    ru_loop *l = NULL;
    ru_error err;
    if (ru_loop_create_named(s, x, NULL, at, load, &l, &err) != RU_OK)
        fail_msg("loop at %s: %s", at, err.msg);
    assert_non_null(l);
    return l;
}

static double complex eval(ru_loop *l, double f_hz)
{
    double re, im;
    ru_error err;
    if (ru_loop_eval(l, f_hz, &re, &im, &err) != RU_OK)
        fail_msg("eval: %s", err.msg);
    return RU_CMPLX(re, im);
}

/* ---- Wien bridge around an ideal buffer ---- */

static ru_circuit *wien_buffer(double r, double cap, double gain, double stray_f)
{
    ru_circuit *c = new_circuit(1e-18);
    if (stray_f == 0) /* no strays: ideal nodes, a DAE */
        assert_int_equal(ru_circuit_set_stray_f(c, 0.0), RU_OK);
    add_follower(c, "A1", "p", "o", gain, 1e-3);
    add2(c, RU_PART_RESISTOR, "RS", "o", "s", r);
    add2(c, RU_PART_CAPACITOR, "CS", "s", "p", cap);
    add2(c, RU_PART_RESISTOR, "RP", "p", "gnd", r);
    add2(c, RU_PART_CAPACITOR, "CP", "p", "gnd", cap);
    return c;
}

/* Reference: the Wien network's transfer Zp/(Zs + Zp), Zs = R + 1/(jwC),
 * Zp = R/(1 + jwRC), is 1/3 at 0 degrees at f0 = 1/(2 pi R C) (textbook Wien
 * bridge); an ideal amplifier of gain G closes the loop, L = G Zp/(Zs + Zp),
 * wherever the loop is broken between the amplifier and the network. The buffer
 * has rout = 1 mohm against 10 kohm and 1e-18 F strays against 10 nF: both move L
 * by ~1e-7, so 1e-6 relative. Broken at the buffer's input (default load side)
 * and at its output (load side RS): the double injection must agree at both; and
 * the same without strays at all (a DAE: the buffer's input node alone has no
 * capacitance). */
static void wien_ideal_buffer(double stray_f)
{
    const double r = 10e3, cap = 10e-9, f0 = 1.0 / (2.0 * PI * r * cap);
    ru_circuit *c = wien_buffer(r, cap, 1.0, stray_f);
    ru_system *s = compile(c);
    double *x = oppoint(s);
    const char *at[2] = {"p", "o"}, *load[2] = {NULL, "RS"};
    for (int b = 0; b < 2; b++) {
        ru_loop *l = at_node(s, x, at[b], load[b]);
        for (int q = 0; q < 5; q++) {
            double f = f0 * pow(3.0, q - 2), w = 2.0 * PI * f;
            double complex zs = r + 1.0 / (I * w * cap), zp = r / (1.0 + I * w * r * cap);
            double complex want = zp / (zs + zp), got = eval(l, f);
            RU_ASSERT_NEAR(cabs(got - want), 0.0, 1e-6 * cabs(want));
        }
        ru_loop_summary sum;
        ru_error err;
        assert_int_equal(ru_loop_sweep(l, f0 / 30, f0 * 30, 61, NULL, NULL, NULL, &sum, &err),
                         RU_OK);
        assert_int_equal(sum.found, 1);
        RU_ASSERT_REL(sum.gain, 1.0 / 3.0, 1e-6);
        RU_ASSERT_REL(sum.crossover_hz, f0, 1e-6);
        ru_loop_destroy(l);
    }
    free(x);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

static void test_wien_ideal_buffer(void **state)
{
    (void)state;
    wien_ideal_buffer(1e-18);
    wien_ideal_buffer(0.0);
}

/* ---- a transconductor feedback network ---- */

/* gm from node a into node b; RB b-gnd, RF b-a, RA a-gnd, CA a-gnd, stray CS on
 * both nodes. Reference: Kirchhoff's current law at b with a driven (the break at
 * the transconductor's control input): v_b = (gm v_x + GF v_a)/(YB + GF) and the
 * current the driver side draws at a gives, with Ya = 1/RA + jw(CA + CS),
 * Yb = 1/RB + jw CS,
 *   L = gm GF / (Ya Yb + Ya GF + Yb GF)
 * (at DC: gm RA RB/(RA + RB + RF), the voltage divider). The stray the split gives
 * the load side is taken out again: with CS = 1 pF against CA = 1 nF a leftover
 * stray would move L by 1e-3, so 1e-9 relative proves it is gone. */
static void test_transconductor_closed_form(void **state)
{
    (void)state;
    const double gm = 20e-3, ra = 4.7e3, rb = 2.2e3, rf = 15e3, ca = 1e-9, cs = 1e-12;
    ru_circuit *c = new_circuit(cs);
    add_gm(c, "G1", "a", "b", gm);
    add2(c, RU_PART_RESISTOR, "RB", "b", "gnd", rb);
    add2(c, RU_PART_RESISTOR, "RF", "b", "a", rf);
    add2(c, RU_PART_RESISTOR, "RA", "a", "gnd", ra);
    add2(c, RU_PART_CAPACITOR, "CA", "a", "gnd", ca);
    ru_system *s = compile(c);
    double *x = oppoint(s);
    ru_loop *l = at_node(s, x, "a", NULL);
    assert_string_equal(ru_loop_node(l), "a");
    assert_string_equal(ru_loop_load(l), "G1 control");
    const double fs[4] = {0.0, 1e3, 3e4, 1e6};
    for (int q = 0; q < 4; q++) {
        double w = 2.0 * PI * fs[q], gf = 1.0 / rf;
        double complex ya = 1.0 / ra + I * w * (ca + cs), yb = 1.0 / rb + I * w * cs;
        double complex want = gm * gf / (ya * yb + ya * gf + yb * gf);
        RU_ASSERT_NEAR(cabs(eval(l, fs[q]) - want), 0.0, 1e-9 * cabs(want));
    }
    RU_ASSERT_REL(creal(eval(l, 0.0)), gm * ra * rb / (ra + rb + rf), 1e-9);
    ru_loop_destroy(l);
    free(x);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* Reference: a network of resistors and capacitors alone is reciprocal (Y12 =
 * Y21), so its double-injection loop gain is 0 (Middlebrook 1975: no feedback
 * without a controlled source). An RC ladder broken at its middle node with one
 * capacitor on the load side: |L| at the rounding level of the two solves. */
static void test_passive_network_no_loop(void **state)
{
    (void)state;
    ru_circuit *c = new_circuit(1e-12);
    add2(c, RU_PART_RESISTOR, "R1", "a", "gnd", 1e3);
    add2(c, RU_PART_CAPACITOR, "C1", "a", "m", 10e-9);
    add2(c, RU_PART_RESISTOR, "R2", "m", "gnd", 3.3e3);
    add2(c, RU_PART_CAPACITOR, "C2", "m", "z", 4.7e-9);
    add2(c, RU_PART_RESISTOR, "R3", "z", "gnd", 10e3);
    ru_system *s = compile(c);
    double *x = oppoint(s);
    ru_loop *l = at_node(s, x, "m", "C2");
    for (double f = 10.0; f < 1e7; f *= 10.0)
        RU_ASSERT_NEAR(cabs(eval(l, f)), 0.0, 1e-12);
    ru_loop_destroy(l);
    free(x);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* Reference: Bode's return ratio of the amplifier (ru_loopgain_at, itself checked
 * against the matrix determinant lemma in test_smallsig.c). A follower's input
 * draws nothing, so breaking the node at that input alone (voltage injection
 * only: L = v_driver/v_load) is the same loop as breaking the amplifier's
 * control: the two agree to rounding (1e-9) on an LC Colpitts tank. */
static void test_node_at_input_is_return_ratio(void **state)
{
    (void)state;
    ru_circuit *c = new_circuit(1e-12);
    add_inductor(c, "L1", "a", 100e-6);
    add2(c, RU_PART_CAPACITOR, "C1", "a", "t", 10e-9);
    add2(c, RU_PART_CAPACITOR, "C2", "t", "gnd", 22e-9);
    add_follower(c, "A1", "a", "t", 0.95, 50.0);
    ru_system *s = compile(c);
    double *x = oppoint(s);
    ru_loop *l = at_node(s, x, "a", NULL);
    int part = ru_circuit_find_part(c, "A1");
    for (double f = 1e4; f < 1e7; f *= 3.0) {
        double re, im;
        ru_error err;
        assert_int_equal(ru_loopgain_at(s, part, x, f, &re, &im, &err), RU_OK);
        double complex want = RU_CMPLX(re, im);
        RU_ASSERT_NEAR(cabs(eval(l, f) - want), 0.0, 1e-9 * cabs(want));
    }
    ru_loop_destroy(l);
    free(x);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* ---- at the edge of oscillation: |L| = 1 where the poles cross the jw axis ---- */

static ru_circuit *wien_opamp(double rf)
{
    ru_circuit *c = new_circuit(1e-12);
    add_opamp(c, "A1", "p", "n", "o");
    add2(c, RU_PART_RESISTOR, "RS", "o", "s", 10e3);
    add2(c, RU_PART_CAPACITOR, "CS", "s", "p", 16e-9);
    add2(c, RU_PART_RESISTOR, "RP", "p", "gnd", 10e3);
    add2(c, RU_PART_CAPACITOR, "CP", "p", "gnd", 16e-9);
    add2(c, RU_PART_RESISTOR, "RF", "o", "n", rf);
    add2(c, RU_PART_RESISTOR, "RG", "n", "gnd", 1e3);
    return c;
}

/* Dominant pair of the op-amp Wien with feedback resistor rf. */
static ru_pole dominant(double rf)
{
    ru_circuit *c = wien_opamp(rf);
    ru_system *s = compile(c);
    double *x = oppoint(s);
    size_t n = ru_system_size(s);
    ru_pole *p = calloc(n, sizeof *p);
    ru_error err;
    assert_non_null(p);
    assert_int_equal(ru_poles_compute(s, x, p, &err), RU_OK);
    int d = ru_poles_dominant(p, n);
    assert_true(d >= 0);
    ru_pole out = p[d];
    free(p);
    free(x);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
    return out;
}

/* Reference: the closed circuit's poles (LAPACK dgeev through ru_poles_compute).
 * RF is bisected until the dominant pair sits on the jw axis (the op-amp's finite
 * gain-bandwidth moves it off 2 kohm and off 1/(2 pi R C)); there the loop gain,
 * broken at any node of the loop, must be 1 at 0 degrees at the poles' frequency
 * (1 + T vanishes exactly at a closed-loop pole). Breaks: the non-inverting input
 * (load: A1 in), the inverting input (load: A1 inv), the output (load: RS) and the
 * Wien midpoint (load: CS). Tolerances: the bisection leaves |re| below 1e-7 of
 * the pole's frequency, which moves |L| and f by about that; 1e-5 is far inside
 * the 0.5 % and 0.1 % a designer's check needs. */
static void test_crossing_at_the_poles(void **state)
{
    (void)state;
    double lo = 1.9e3, hi = 2.2e3; /* re < 0 at lo, re > 0 at hi */
    assert_true(dominant(lo).re_per_s < 0 && dominant(hi).re_per_s > 0);
    ru_pole pm = dominant(hi);
    for (int k = 0; k < 60 && fabs(pm.re_per_s) > 1e-7 * pm.im_rad_per_s; k++) {
        double mid = 0.5 * (lo + hi);
        pm = dominant(mid);
        if (pm.re_per_s < 0)
            lo = mid;
        else
            hi = mid;
    }
    assert_true(fabs(pm.re_per_s) <= 1e-7 * pm.im_rad_per_s);
    double rf = pm.re_per_s < 0 ? lo : hi, f_pole = pm.im_rad_per_s / (2.0 * PI);
    ru_circuit *c = wien_opamp(rf);
    ru_system *s = compile(c);
    double *x = oppoint(s);
    const char *at[4] = {"p", "n", "o", "s"}, *load[4] = {NULL, NULL, "RS", "CS"};
    for (int b = 0; b < 4; b++) {
        ru_loop *l = at_node(s, x, at[b], load[b]);
        ru_loop_summary sum;
        ru_error err;
        assert_int_equal(ru_loop_sweep(l, f_pole / 3, f_pole * 3, 201, NULL, NULL, NULL,
                                       &sum, &err),
                         RU_OK);
        assert_int_equal(sum.found, 1);
        RU_ASSERT_REL(sum.gain, 1.0, 1e-5);
        RU_ASSERT_REL(sum.crossover_hz, f_pole, 1e-5);
        ru_loop_destroy(l);
    }
    free(x);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* ---- the adaptive grid ---- */

/* The Colpitts loop of test_node_at_input_is_return_ratio with a follower of low
 * output resistance: the loop's phase turns by nearly 180 degrees within a small
 * fraction of a 201-point log grid step around the tank's resonance. Reference for
 * the crossing: the closed form of test_smallsig.c's Colpitts (strays included),
 * w^2 = (C1 + C2')/(L (C1' C2' + C1 Cs)), C' = C + Cs, independent of the follower's
 * gain and output resistance; bisection to 1e-13, so 1e-9. The grid's rules are the
 * response command's (common practice for a smooth Bode plot: no step above 1 dB
 * or 10 degrees), and 0.1 dB / 1 degree within 5 % of the crossing. */
static void test_adaptive_grid(void **state)
{
    (void)state;
    const double l_h = 100e-6, c1 = 10e-9, c2 = 22e-9, cs = 1e-12;
    ru_circuit *c = new_circuit(cs);
    add_inductor(c, "L1", "a", l_h);
    add2(c, RU_PART_CAPACITOR, "C1", "a", "t", c1);
    add2(c, RU_PART_CAPACITOR, "C2", "t", "gnd", c2);
    add_follower(c, "A1", "a", "t", 0.95, 0.5);
    ru_system *s = compile(c);
    double *x = oppoint(s);
    ru_loop *l = at_node(s, x, "a", NULL);
    double c1p = c1 + cs, c2p = c2 + cs;
    double f_book = sqrt((c1 + c2p) / (l_h * (c1p * c2p + c1 * cs))) / (2.0 * PI);
    enum { NB = 201, MAXP = 1201 };
    static double f[MAXP], mag[MAXP], ph[MAXP];
    ru_loop_summary sum;
    ru_error err;
    /* The plain grid misses the turn: some step is far above 10 degrees. */
    assert_int_equal(ru_loop_sweep(l, f_book / 30, f_book * 30, NB, f, mag, ph, &sum, &err),
                     RU_OK);
    double worst = 0;
    for (int k = 1; k < NB; k++)
        worst = fmax(worst, fabs(ph[k] - ph[k - 1]));
    assert_true(worst > 30.0);
    size_t n = 0;
    assert_int_equal(ru_loop_sweep_adaptive(l, f_book / 30, f_book * 30, NB, MAXP, f, mag,
                                            ph, &n, &sum, &err),
                     RU_OK);
    assert_true(n > NB && n <= MAXP);
    assert_int_equal(sum.found, 1);
    RU_ASSERT_REL(sum.crossover_hz, f_book, 1e-9);
    int at_x = 0;
    for (size_t k = 0; k < n; k++) {
        if (k > 0) {
            assert_true(f[k] > f[k - 1]);
            double ddb = fabs(20.0 * log10(mag[k] / mag[k - 1])), dp = fabs(ph[k] - ph[k - 1]);
            int near = f[k] > sum.crossover_hz / 1.05 && f[k - 1] < sum.crossover_hz * 1.05;
            if (ddb > (near ? 0.1 : 1.0) || dp > (near ? 1.0 : 10.0))
                fail_msg("step %zu (%g -> %g Hz): %.3g dB, %.3g deg", k, f[k - 1], f[k],
                         ddb, dp);
        }
        if (f[k] == sum.crossover_hz) {
            at_x = 1;
            RU_ASSERT_NEAR(remainder(ph[k], 360.0), 0.0, 1e-6);
            RU_ASSERT_REL(mag[k], sum.gain, 1e-12);
        }
    }
    assert_true(at_x);
    for (size_t k = 0; k < n; k += 97) { /* every point is L there */
        double complex lk = eval(l, f[k]);
        RU_ASSERT_REL(mag[k], cabs(lk), 1e-12);
    }
    /* Little room: the roughest steps first, the crossing still among the points. */
    assert_int_equal(ru_loop_sweep_adaptive(l, f_book / 30, f_book * 30, 21, 40, f, mag, ph,
                                            &n, &sum, &err),
                     RU_OK);
    assert_true(n <= 40);
    RU_ASSERT_REL(sum.crossover_hz, f_book, 1e-9);
    at_x = 0;
    for (size_t k = 0; k < n; k++)
        at_x |= f[k] == sum.crossover_hz;
    assert_true(at_x);
    assert_int_equal(ru_loop_sweep_adaptive(l, f_book / 30, f_book * 30, 21, 21, f, mag, ph,
                                            &n, &sum, &err),
                     RU_ERANGE);
    ru_loop_destroy(l);
    free(x);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* ---- refusals ---- */

static void test_bad_breaks(void **state)
{
    (void)state;
    ru_circuit *c = wien_buffer(10e3, 10e-9, 1.0, 1e-18);
    add_follower(c, "A2", "p", "q", 1.0, 1.0); /* a second input on p */
    add2(c, RU_PART_RESISTOR, "RQ", "q", "gnd", 1e3);
    ru_system *s = compile(c);
    double *x = oppoint(s);
    ru_loop *l = NULL;
    ru_error err;
    /* o holds no control input: the message asks for the load side and lists o's
     * terminals. */
    assert_int_equal(ru_loop_create_named(s, x, NULL, "o", NULL, &l, &err), RU_EINPUT);
    assert_non_null(strstr(err.msg, "loop-load"));
    assert_non_null(strstr(err.msg, "A1 out"));
    assert_null(l);
    /* Every terminal on the load side leaves no driver. */
    assert_int_equal(ru_loop_create_named(s, x, NULL, "q", "A2,RQ", &l, &err), RU_EINPUT);
    assert_non_null(strstr(err.msg, "driver side"));
    /* A named part away from the node. */
    assert_int_equal(ru_loop_create_named(s, x, NULL, "o", "CP", &l, &err), RU_EINPUT);
    assert_non_null(strstr(err.msg, "CP has no terminal"));
    /* Unknown names get the closest known one. */
    assert_int_equal(ru_loop_create_named(s, x, NULL, "oo", NULL, &l, &err), RU_EINPUT);
    assert_non_null(strstr(err.msg, "did you mean o?"));
    assert_int_equal(ru_loop_create_named(s, x, NULL, "o", "RSS", &l, &err), RU_EINPUT);
    assert_non_null(strstr(err.msg, "RS"));
    assert_int_equal(ru_loop_create_named(s, x, NULL, "gnd", NULL, &l, &err), RU_EINPUT);
    /* Two control inputs on p: both go to the load side by default. */
    assert_int_equal(ru_loop_create_named(s, x, NULL, "p", NULL, &l, &err), RU_OK);
    assert_string_equal(ru_loop_load(l), "A1 in, A2 in");
    ru_loop_destroy(l);
    /* Nothing named: no loop, no error. */
    assert_int_equal(ru_loop_create_named(s, x, NULL, NULL, NULL, &l, &err), RU_OK);
    assert_null(l);
    ru_loop_destroy(NULL);
    free(x);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_wien_ideal_buffer),
        cmocka_unit_test(test_transconductor_closed_form),
        cmocka_unit_test(test_passive_network_no_loop),
        cmocka_unit_test(test_node_at_input_is_return_ratio),
        cmocka_unit_test(test_crossing_at_the_poles),
        cmocka_unit_test(test_adaptive_grid),
        cmocka_unit_test(test_bad_breaks),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
