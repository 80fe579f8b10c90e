/* test_jitter.c: phase noise by the perturbation projection vector against closed
 * forms (van der Pol's harmonic limit, the LC tank with a resistor's thermal
 * noise, Leeson's formula in its 1/f^2 region), the noise sources' densities, the
 * jitter integrals, and, independent of the PPV code, the project's own noise
 * transient: many seeded noise runs whose timing variance must grow as c t.
 * Circuits are our own values. The long version of the noise-run check is
 * tests/bench_jitter.c. */
#include "ru_test.h"

#include "ringup/loader.h"
#include "ringup/ppv.h"
#include "ringup/system.h"
#include "ringup/tone.h"
#include "ringup/transient.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define PI 3.14159265358979323846
#define KB 1.380649e-23 /* Boltzmann's constant, exact in the 2019 SI */
#define QE 1.602176634e-19

static ru_circuit *load(const char *text)
{
    ru_circuit *c = NULL;
    ru_error err;
    if (ru_circuit_load_string(text, "test.yaml", RU_MODELS_DIR, &c, &err) != RU_OK)
        fail_msg("load: %s", err.msg);
    return c;
}

/* A tank L || C || R with a noiseless cubic conductance i = -g1 v + g3 v^3 that
 * cancels 1/R and adds eps = (g1 - 1/R) sqrt(L/C) of net negative conductance:
 * the van der Pol oscillator (Rayleigh's form) of amplitude 2 sqrt((g1 - 1/R)/(3 g3)),
 * with the resistor as its only noise source. */
static ru_circuit *tank(double L, double C, double R, double g1, double g3)
{
    char text[640];
    snprintf(text, sizeof text,
             "parts:\n"
             "  L1: {type: inductor, nodes: [v, gnd], value: %.17g}\n"
             "  C1: {type: capacitor, nodes: [v, gnd], value: %.17g}\n"
             "  R1: {type: resistor, nodes: [v, gnd], value: %.17g}\n"
             "  G1: {type: poly-conductance, nodes: [v, gnd], coeffs: [0, %.17g, 0, %.17g]}\n"
             "measure: {probe: v}\n",
             L, C, R, -g1, g3);
    return load(text);
}

static ru_tone *jitter(const ru_circuit *c, double temp_c, ru_tone_noise *nv,
                       ru_steady_view *v)
{
    ru_tone_request rq;
    ru_tone_request_default(&rq);
    rq.jitter = 1;
    rq.temp_c = temp_c;
    rq.loop_part = "";
    ru_tone *t = NULL;
    ru_error err;
    if (ru_tone_run(c, &rq, &t, &err) != RU_OK)
        fail_msg("jitter: %s", err.msg);
    ru_tone_noise_get(t, nv);
    ru_tone_steady(t, v);
    assert_true(nv->have);
    return t;
}

/* van der Pol with white noise in the velocity equation: x = i_L, x' = v (L = C = 1),
 *   x'' - eps (1 - x'^2/... ) ... ,  v' = -x + eps (v - v^3/3) + xi(t),
 * xi of two-sided density D = 2kT/(R C^2) (the resistor's current noise 4kT/R,
 * one-sided, into C). Reference (derived here): for eps -> 0 the orbit is the
 * circle x = A cos t, v = -A sin t with A = 2, the isochrons are its radii, and a
 * kick dv turns the phase theta = atan2(-v, x) by -cos(theta) dv / A; so the phase
 * diffuses at D <cos^2> / A^2 = D / (2 A^2) per unit time, and with w0 = 1 the time
 * shift's diffusion constant is c = D / (2 A^2) = 0.125 D. This is the harmonic
 * limit of the Demir-Mehrotra-Roychowdhury theory (their phase diffusion of a
 * circular orbit). */
static void test_vdp_harmonic_limit(void **state)
{
    (void)state;
    const double eps[] = {0.1, 0.01, 0.001};
    double dev[3];
    for (int i = 0; i < 3; i++) {
        ru_circuit *c = tank(1.0, 1.0, 1.0, 1.0 + eps[i], eps[i] / 3.0);
        ru_tone_noise nv;
        ru_steady_view v;
        ru_tone *t = jitter(c, 27.0, &nv, &v);
        double D = 2.0 * KB * 300.15 / 1.0; /* C = 1 F (+1 pF stray: 1e-12) */
        dev[i] = nv.ppv.c_s / D / 0.125 - 1.0;
        /* the PPV's own checks: v1 . x' = 1 along the orbit and v1 periodic, to
         * ~100x the integration tolerance 1e-10 */
        assert_true(nv.ppv.norm_error < 1e-7);
        assert_true(nv.ppv.periodicity_error < 1e-7);
        ru_tone_destroy(t);
        ru_circuit_destroy(c);
    }
    /* The limit is approached as O(eps^2) (the orbit's distortion and the amplitude
     * shift are both O(eps^2)); measured coefficient 0.34 to 0.38. Bound: 0.5 eps^2
     * plus the numerical error at the default tolerance 1e-10 (measured 6e-7 at
     * eps = 0.001 against a run at 1e-12), and the deviation must shrink by about
     * 100x per decade of eps. */
    for (int i = 0; i < 3; i++)
        RU_ASSERT_NEAR(dev[i], 0.0, 0.5 * eps[i] * eps[i] + 1e-6);
    assert_true(fabs(dev[1]) < 0.03 * fabs(dev[0]));
}

/* The LC tank with a resistor's thermal noise, the textbook case. Reference
 * (derived here as above, in circuit units): the noise current i_n (one-sided
 * 4kT/R) enters C v' = ... + i_n; a charge kick dq moves v by dq/C and shifts the
 * phase of v = A cos(w0 t) by -sin(w0 t) dq / (C A); averaged over the cycle
 *   c = (2kT/R) / (2 C^2 A^2 w0^2) = kT / (R C^2 A^2 w0^2),
 * so L(fm) = f0^2 c / fm^2 = kT / (4 pi^2 R C^2 A^2 fm^2) off the carrier. Leeson's
 * formula with F = 1, QL = w0 R C and Ps = A^2 / (2R) gives the same 1/f^2 term:
 * (2kT/Ps) (f0 / (2 QL fm))^2 = kT / (4 pi^2 R C^2 A^2 fm^2). */
static void test_lc_tank_closed_form(void **state)
{
    (void)state;
    double L = 10e-3, C = 100e-9, R = 100e3, g1 = 20e-6, g3 = 20e-6 / 6.0;
    ru_circuit *c = tank(L, C, R, g1, g3);
    ru_tone_noise nv;
    ru_steady_view v;
    ru_tone *t = jitter(c, 27.0, &nv, &v);
    double Ct = C + 1e-12; /* the stray capacitance on the tank node */
    double A = 2.0 * sqrt((g1 - 1.0 / R) / (3.0 * g3)), w0 = 1.0 / sqrt(L * Ct);
    double kt = KB * 300.15, want = kt / (R * Ct * Ct * A * A * w0 * w0);
    /* eps = (g1 - 1/R) sqrt(L/C) = 3.2e-3: the closed form holds to O(eps^2) = 1e-5 */
    RU_ASSERT_REL(v.amplitude_v, A, 1e-4);
    RU_ASSERT_REL(nv.ppv.c_s, want, 1e-4);
    assert_int_equal(nv.ppv.nsrc, 1);
    RU_ASSERT_REL(nv.ppv.src[0].c_s, nv.ppv.c_s, 1e-12);
    /* L(fm) at an offset far outside the Lorentzian's width (82 fHz) */
    double fm = 1000.0, lw = kt / (4 * PI * PI * R * Ct * Ct * A * A * fm * fm);
    RU_ASSERT_NEAR(ru_ppv_dbc(v.frequency_hz, nv.ppv.c_s, 0.0, fm), 10 * log10(lw), 1e-3);
    /* Leeson: QL from the poles with the cubic's slope removed: the parallel RLC's
     * pair has |s| = w0 and sigma = -1/(2RC), so Q = w0 R C exactly; Ps = A^2/(2R)
     * to O(eps^2) (harmonics) */
    assert_true(nv.have_leeson);
    assert_true(nv.q_from_poles);
    RU_ASSERT_REL(nv.q_loaded, w0 * R * Ct, 1e-6);
    RU_ASSERT_REL(nv.carrier_w, A * A / (2 * R), 1e-4);
    RU_ASSERT_REL(nv.effective_noise_factor, 1.0, 1e-3);
    /* Leeson's resonator term alone at fm << f0/(2QL): subtract its floor 2kT/Ps */
    double fl = 1e-2, floor_w = 2 * kt / nv.carrier_w;
    double le = pow(10.0, ru_leeson_dbc(v.frequency_hz, nv.q_loaded, nv.carrier_w, 1.0,
                                        27.0, 0.0, fl) / 10.0) - floor_w;
    RU_ASSERT_REL(le, kt / (4 * PI * PI * R * Ct * Ct * A * A * fl * fl), 1e-3);
    /* period jitter sqrt(c T) (Demir et al.: var of the time shift over one period) */
    RU_ASSERT_REL(nv.period_jitter_s, sqrt(nv.ppv.c_s * v.period_s), 1e-12);
    ru_tone_destroy(t);
    ru_circuit_destroy(c);
}

/* The Lorentzian integrates to 1 over all offsets (both sides), which fixes the
 * closed form of the RMS jitter: the trapezoid rule on a fine log grid must agree. */
static void test_jitter_integral(void **state)
{
    (void)state;
    double f0 = 1e6, c = 1e-16, c1 = 2e-15, f1 = 10, f2 = 5e5;
    double sum = 0, prev_f = f1, prev_l = pow(10, ru_ppv_dbc(f0, c, c1, f1) / 10);
    for (int i = 1; i <= 200000; i++) {
        double f = f1 * pow(f2 / f1, i / 200000.0), l = pow(10, ru_ppv_dbc(f0, c, c1, f) / 10);
        sum += 0.5 * (l + prev_l) * (f - prev_f);
        prev_f = f, prev_l = l;
    }
    /* Reference: rms phase sqrt(2 integral L df) over 2 pi f0 (from memory, the usual
     * definition of integrated jitter); trapezoid error ~1e-9 at 200000 points */
    RU_ASSERT_REL(ru_ppv_rms_jitter(f0, c, c1, f1, f2), sqrt(2 * sum) / (2 * PI * f0), 1e-6);
    /* the whole Lorentzian (no flicker) holds all the power: L integrates to 1/2 per
     * side, so the jitter over (0, inf) is sqrt(1)/(2 pi f0) */
    RU_ASSERT_REL(ru_ppv_rms_jitter(f0, c, 0, 1e-30, 1e30), 1 / (2 * PI * f0), 1e-9);
}

/* Noise columns: a resistor's sqrt(4kT/R)/C on its node (Nyquist), a diode's
 * sqrt(2 q I)/C (Schottky) at its bias current. */
static void test_noise_densities(void **state)
{
    (void)state;
    ru_circuit *c = load("parts:\n"
                         "  VS: {type: supply, nodes: [s, gnd], value: 5}\n"
                         "  R1: {type: resistor, nodes: [s, a], value: 10k}\n"
                         "  C1: {type: capacitor, nodes: [a, gnd], value: 1u}\n"
                         "  D1: {type: diode, nodes: [a, gnd]}\n");
    ru_system *s = NULL;
    ru_error err;
    assert_int_equal(ru_system_create(c, &s, &err), RU_OK);
    assert_int_equal(ru_system_noise_count(s), 2);
    ru_noise_info info;
    assert_int_equal(ru_system_noise_info(s, 1, &info), RU_OK);
    assert_int_equal(info.kind, RU_NOISE_SHOT);
    assert_int_equal(ru_system_noise_info(s, 2, &info), RU_ERANGE);
    double x[1] = {0.6}, B[2], Ct = 1e-6 + 1e-12;
    assert_int_equal(ru_system_noise_columns(s, x, 27.0, B), RU_OK);
    RU_ASSERT_REL(fabs(B[0]), sqrt(4 * KB * 300.15 / 10e3) / Ct, 1e-12);
    double vt = KB * 300.15 / QE, id = 10e-15 * (exp(0.6 / vt) - 1); /* Shockley, is 10f */
    RU_ASSERT_REL(fabs(B[1]), sqrt(2 * QE * id) / Ct, 1e-9);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* The amplifier's input noise keys: en, inoise and fc on every law (the descriptor's
 * key table), 0 by default so a file without them has the noise it had; their
 * sources and flicker corner; bad values at FILE:LINE:COL. */
static void test_amp_noise_keys(void **state)
{
    (void)state;
    const char *base = "parts:\n"
                       "  L1: {type: inductor, nodes: [v, gnd], value: 10m}\n"
                       "  C1: {type: capacitor, nodes: [v, gnd], value: 100n}\n"
                       "  R1: {type: resistor, nodes: [v, gnd], value: 1k}\n"
                       "  A1: {type: amplifier, in: v, out: v, law: %s, %s}\n";
    const char *laws[] = {"follower-tanh", "opamp", "exp-stage", "diff-pair-tanh"};
    char text[512];
    for (size_t i = 0; i < sizeof laws / sizeof laws[0]; i++) {
        for (int with = 0; with < 2; with++) {
            snprintf(text, sizeof text, base, laws[i],
                     with ? "en: 4nV/rtHz, inoise: 1pA/rtHz, fc: 2k" : "rout: 100");
            ru_circuit *c = NULL;
            ru_error err;
            if (ru_circuit_load_string(text, "t.yaml", RU_MODELS_DIR, &c, &err) != RU_OK) {
                /* a law may refuse in == out; the keys must not be the reason */
                assert_null(strstr(err.msg, "en"));
                continue;
            }
            ru_system *s = NULL;
            assert_int_equal(ru_system_create(c, &s, &err), RU_OK);
            size_t shot = strcmp(laws[i], "exp-stage") == 0; /* its own shot noise */
            assert_int_equal(ru_system_noise_count(s), 1 + shot + (with ? 2 : 0));
            if (with) {
                ru_noise_info a, b;
                assert_int_equal(ru_system_noise_info(s, 1 + shot, &a), RU_OK);
                assert_int_equal(ru_system_noise_info(s, 2 + shot, &b), RU_OK);
                assert_int_equal(a.kind, RU_NOISE_INPUT_V);
                assert_int_equal(b.kind, RU_NOISE_INPUT_I);
                RU_ASSERT_REL(a.flicker_corner_hz, 2e3, 1e-15);
                RU_ASSERT_REL(b.flicker_corner_hz, 2e3, 1e-15);
                /* inoise flows from inv (gnd) into in (v): its column is the
                 * density over the node's capacitance (KCL), C1 plus the stray */
                double x[4] = {0.1, 0.0, 0.0, 0.0}, B[32];
                size_t m = ru_system_noise_count(s), n = ru_system_size(s);
                assert_true(n <= 4 && n * m <= 32);
                assert_int_equal(ru_system_noise_columns(s, x, 27.0, B), RU_OK);
                int r = ru_system_node_state(s, ru_circuit_find_node(c, "v"));
                assert_true(r >= 0);
                RU_ASSERT_REL(fabs(B[(size_t)r * m + 2 + shot]), 1e-12 / (100e-9 + 1e-12),
                              1e-12);
            }
            ru_system_destroy(s);
            ru_circuit_destroy(c);
        }
    }
    const struct {
        const char *keys, *msg;
        int col;
    } bad[] = {{"en: -4n", "en must not be negative", 3},
               {"inoise: -1p", "inoise must not be negative", 3},
               {"fc: -1", "fc must not be negative", 3},
               {"en: 4nV", "unit V does not fit, expected V/rtHz", 0}};
    for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++) {
        snprintf(text, sizeof text, base, "follower-tanh", bad[i].keys);
        ru_circuit *c = NULL;
        ru_error err;
        assert_int_equal(ru_circuit_load_string(text, "t.yaml", RU_MODELS_DIR, &c, &err),
                         RU_EINPUT);
        assert_non_null(strstr(err.msg, bad[i].msg));
        assert_int_equal(err.line, 5);
        if (bad[i].col)
            assert_int_equal(err.col, bad[i].col);
        else
            assert_true(err.col > 40); /* at the value */
    }
}

/* Thevenin's equivalent as the outside reference: a resistor Rx in series with an
 * amplifier's input adds the voltage noise 4kT Rx there (Nyquist), so an input
 * noise en = sqrt(4kT Rx) must give the same share of c as Rx itself (the input
 * draws nothing; the node between has only its 1 pF stray, a 1 ps time constant
 * against a 206 us period; that stray also loads the tank through Rx, so the
 * circuit with en gets the same 1 pF across its tank). */
static void test_en_thevenin(void **state)
{
    (void)state;
    double rx = 1.0, en = sqrt(4 * KB * 300.15 * rx);
    char a[512], b[512];
    const char *fmt = "parts:\n"
                      "  L1: {type: inductor, nodes: [v, gnd], value: 10m}\n"
                      "  C1: {type: capacitor, nodes: [v, gnd], value: 100n}\n"
                      "  R1: {type: resistor, nodes: [v, gnd], value: 1k}\n"
                      "  A1: {type: amplifier, in: %s, out: v, law: follower-tanh, gain: 1.3,"
                      " swing: 0.5, center: 0.1, rout: 100%s}\n"
                      "%s"
                      "measure: {probe: v}\n";
    char enkey[64];
    snprintf(enkey, sizeof enkey, ", en: %.17g", en);
    snprintf(a, sizeof a, fmt, "v", enkey,
             "  CX: {type: capacitor, nodes: [v, gnd], value: 1p}\n");
    snprintf(b, sizeof b, fmt, "w", "", "  RX: {type: resistor, nodes: [v, w], value: 1}\n");
    ru_circuit *ca = load(a), *cb = load(b);
    ru_tone_noise na, nb;
    ru_steady_view va, vb;
    ru_tone *ta = jitter(ca, 27.0, &na, &va), *tb = jitter(cb, 27.0, &nb, &vb);
    assert_int_equal(na.ppv.nsrc, 2); /* R1, A1 en (the noise sources in part order) */
    assert_int_equal(nb.ppv.nsrc, 2); /* R1, RX */
    assert_int_equal(na.ppv.src[1].info.kind, RU_NOISE_INPUT_V);
    /* the circuits differ by the input's lag Rx Cs: O(w0 Rx Cs) = 3e-8 relative
     * (measured 5e-8 on the period); both integrate at rtol 1e-10; 1e-6 holds both */
    RU_ASSERT_REL(na.ppv.src[1].c_s, nb.ppv.src[1].c_s, 1e-6);
    RU_ASSERT_REL(na.ppv.src[0].c_s, nb.ppv.src[0].c_s, 1e-6);
    RU_ASSERT_REL(va.period_s, vb.period_s, 1e-6);
    ru_tone_destroy(ta);
    ru_tone_destroy(tb);
    ru_circuit_destroy(ca);
    ru_circuit_destroy(cb);
}

/* Leeson's form with a flicker corner. Reference: Leeson, Proc. IEEE 54 (1966) 329,
 *   L(fm) = (2FkT/Ps) (1 + (f0/(2 QL fm))^2) (1 + fc/fm),
 * written out here with F = 1 and the closed forms of its inputs for the parallel
 * RLC (QL = w0 R C from the pole pair, Ps = A^2/(2R) dissipated in R, f0/(2QL) =
 * 1/(4 pi R C)) and fc the amplifier's: three regions, 1/f^3 below fc, 1/f^2 up to
 * f0/(2QL), flat above. The amplifier is a follower of gain 1 with a wide swing
 * (a negligible conductance) whose only role is its input current noise with fc
 * into the tank. The PPV, by contrast, gets no 1/f^3 region from it: the orbit is
 * odd-symmetric, so the projection's mean (the only part 1/f noise reaches)
 * vanishes; Leeson's fc is a fitted corner, not a prediction. */
static void test_leeson_flicker(void **state)
{
    (void)state;
    /* f0 = 503 kHz, QL = 10, so f0/(2QL) = 25 kHz sits between fc and f0/2 */
    double L = 10e-6, C = 10e-9, R = 316.0, g1 = 1.02 / 316.0, g3 = 0.02 / 316.0 / 3.0;
    double fc = 100.0;
    char text[768];
    snprintf(text, sizeof text,
             "parts:\n"
             "  L1: {type: inductor, nodes: [v, gnd], value: %.17g}\n"
             "  C1: {type: capacitor, nodes: [v, gnd], value: %.17g}\n"
             "  R1: {type: resistor, nodes: [v, gnd], value: %.17g}\n"
             "  G1: {type: poly-conductance, nodes: [v, gnd], coeffs: [0, %.17g, 0, %.17g]}\n"
             "  A1: {type: amplifier, in: v, out: v, law: follower-tanh, gain: 1, swing: 10k,"
             " rout: 1k, inoise: 3pA/rtHz, fc: %.17g}\n"
             "measure: {probe: v}\n",
             L, C, R, -g1, g3, fc);
    ru_circuit *c = load(text);
    ru_tone_noise nv;
    ru_steady_view v;
    ru_tone *t = jitter(c, 27.0, &nv, &v);
    double Ct = C + 1e-12, A = 2.0 * sqrt((g1 - 1.0 / R) / (3.0 * g3));
    double w0 = 1.0 / sqrt(L * Ct), f0 = w0 / (2 * PI), kt = KB * 300.15;
    assert_true(nv.have_leeson);
    assert_true(nv.q_from_poles);
    /* eps = (g1 - 1/R) sqrt(L/C) = 2e-3: A and Ps to O(eps^2); the follower's own
     * cubic, v^3/(3 swing^2 rout), moves A by 2e-7 */
    RU_ASSERT_REL(v.amplitude_v, A, 1e-4);
    RU_ASSERT_REL(nv.q_loaded, w0 * R * Ct, 1e-6);
    RU_ASSERT_REL(nv.carrier_w, A * A / (2 * R), 1e-4);
    RU_ASSERT_REL(nv.leeson_corner_hz, 1.0 / (4 * PI * R * Ct), 1e-6);
    RU_ASSERT_REL(nv.leeson_flicker_hz, fc, 1e-15);
    double ql = w0 * R * Ct, ps = A * A / (2 * R);
    int low = 0, mid = 0, high = 0;
    for (size_t i = 0; i < nv.npts; i++) {
        double fm = nv.offset_hz[i], r = f0 / (2 * ql * fm);
        double want = 10 * log10(2 * kt / ps * (1 + r * r) * (1 + fc / fm));
        RU_ASSERT_NEAR(nv.leeson_dbc[i], want, 1e-3); /* Ps to 1e-4: 4e-4 dB */
        low += fm < 0.3 * fc, mid += fm > 3 * fc && fm < 0.3 * f0 / (2 * ql);
        high += fm > 5 * f0 / (2 * ql);
    }
    assert_true(low > 0 && mid > 0 && high > 0); /* the grid spans all three regions */
    /* the PPV: no 1/f^3 region from this source (the orbit's symmetry) */
    assert_true(nv.ppv.c1_s_hz < 1e-9 * fc * nv.ppv.c_s);
    ru_tone_destroy(t);
    ru_circuit_destroy(c);
}

/* ---- the noise transient: timing variance of seeded noise runs ---- */

typedef struct zc_sink {
    double t_prev, v_prev, t_cross; /* last upward zero crossing */
    double window_s;                /* only crossings after this time count */
} zc_sink;

static ru_status zc_sample(void *user, double t, const double *x, size_t n)
{
    (void)n;
    zc_sink *z = user;
    double v = x[0];
    if (t > z->window_s && z->v_prev < 0 && v >= 0)
        z->t_cross = z->t_prev + (t - z->t_prev) * (-z->v_prev) / (v - z->v_prev);
    z->t_prev = t;
    z->v_prev = v;
    return RU_OK;
}

/* Time of the last upward crossing of v in the final period of a run from x0 over
 * `periods` periods, with the resistors' noise at temp_c from seed (noise off when
 * seed is 0). */
static double last_crossing(const ru_circuit *c, const double *x0, double period,
                            double periods, double temp_c, unsigned long seed)
{
    ru_system *s = NULL;
    ru_error err;
    assert_int_equal(ru_system_create(c, &s, &err), RU_OK);
    if (seed)
        assert_int_equal(ru_system_set_noise(s, seed, 20.0 / period, temp_c), RU_OK);
    ru_transient_opts o;
    ru_transient_opts_for(RU_ACCURACY_NORMAL, &o);
    o.stop_s = periods * period;
    o.sample_s = period / 64.0;
    zc_sink z = {0, 1, NAN, (periods - 1.5) * period};
    assert_int_equal(ru_transient_run(s, &o, x0, zc_sample, &z, NULL, &err), RU_OK);
    ru_system_destroy(s);
    return z.t_cross;
}

/* Reference: the phase-diffusion law itself, var alpha(t) = c t (Demir et al.
 * 2000, Theorem on the asymptotic phase), checked here with the project's own
 * time-domain noise (ru_system_set_noise: the resistor's 4kT/R as band-limited
 * knots, independent of the PPV code) and N seeded runs. The statistical bound:
 * the sample variance of N Gaussian values has relative standard deviation
 * sqrt(2/(N-1)) (chi-square, from memory); 3.5 of those is the tolerance. The
 * noise is flat to 0.4 % at the tone (sinc^4 of the knot spacing T/40), and the
 * temperature is raised so that the phase spreads by ~0.05 rad over the run (the
 * diffusion is linear in kT, and the transient's own error stays far below it). */
static void test_noise_runs_diffuse(void **state)
{
    (void)state;
    double eps = 0.2, temp_c = 4e18;
    ru_circuit *c = tank(1.0, 1.0, 1.0, 1.0 + eps, eps / 3.0);
    ru_tone_noise nv;
    ru_steady_view v;
    ru_tone *t = jitter(c, temp_c, &nv, &v);
    double T = v.period_s, periods = 12.0;
    double clean = last_crossing(c, v.x0, T, periods, temp_c, 0);
    enum { N = 160 };
    double sum = 0, sq = 0;
    for (unsigned long k = 1; k <= N; k++) {
        double d = last_crossing(c, v.x0, T, periods, temp_c, k) - clean;
        if (d > 0.5 * T)
            d -= T;
        if (d < -0.5 * T)
            d += T;
        sum += d;
        sq += d * d;
    }
    double var = (sq - sum * sum / N) / (N - 1), tc = clean; /* time of the crossing */
    double want = nv.ppv.c_s * tc, tol = 3.5 * sqrt(2.0 / (N - 1));
    print_message("noise runs: var %.4g s^2, c t %.4g s^2 (ratio %.3f, bound %.2f)\n", var,
                  want, var / want, tol);
    RU_ASSERT_REL(var, want, tol);
    ru_tone_destroy(t);
    ru_circuit_destroy(c);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_vdp_harmonic_limit),
        cmocka_unit_test(test_lc_tank_closed_form),
        cmocka_unit_test(test_jitter_integral),
        cmocka_unit_test(test_noise_densities),
        cmocka_unit_test(test_amp_noise_keys),
        cmocka_unit_test(test_en_thevenin),
        cmocka_unit_test(test_leeson_flicker),
        cmocka_unit_test(test_noise_runs_diffuse),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
