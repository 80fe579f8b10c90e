/* test_tolerance.c: tolerances on any numeric key (`tol: {beta: 30%}`, a source's
 * plain `tol`), read by the loader through the descriptors' key tables and drawn
 * by Monte Carlo.
 *
 * References: the moments of the uniform distribution on [-tol, tol] (mean 0,
 * variance tol^2/3, fourth moment tol^4/5) and independence of separate streams
 * (correlation 0, standard error 1/sqrt(n)); the method of averaging for a van der
 * Pol tank, settled amplitude 2 sqrt(a/(3b)) for i = -a v + b v^3 (van der Pol
 * 1926; any nonlinear-oscillations text), with each unit's own drawn gm in a.
 * Circuits are our own. */
#include "ru_test.h"

#include "ringup/loader.h"
#include "ringup/montecarlo.h"
#include "ringup/params.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static ru_circuit *load_text(const char *text)
{
    ru_circuit *c = NULL;
    ru_error err;
    ru_error_clear(&err);
    if (ru_circuit_load_string(text, "tol.yaml", RU_MODELS_DIR, &c, &err) != RU_OK)
        fail_msg("load: %s", err.msg);
    return c;
}

/* The error of a text that must not load, with its place. */
static void refused(const char *text, int line, int col, const char *part_of_msg)
{
    ru_circuit *c = NULL;
    ru_error err;
    ru_error_clear(&err);
    assert_int_equal(ru_circuit_load_string(text, "tol.yaml", RU_MODELS_DIR, &c, &err),
                     RU_EINPUT);
    assert_null(c);
    if (!strstr(err.msg, part_of_msg) || err.line != line || err.col != col)
        fail_msg("want %d:%d '%s', got %d:%d '%s'", line, col, part_of_msg, err.line, err.col,
                 err.msg);
}

static const ru_part *part_named(const ru_circuit *c, const char *name)
{
    int i = ru_circuit_find_part(c, name);
    assert_true(i >= 0);
    return ru_circuit_part(c, (size_t)i);
}

static const char *const demo =
    "parts:\n"
    "  V1: {type: supply, nodes: [vcc, gnd], wave: dc, value: 5, tol: 10%}\n"
    "  V2: {type: supply, nodes: [s, gnd], wave: sine, amplitude: 1, freq: 1k, tol: 2%}\n"
    "  R1: {type: resistor, nodes: [vcc, b], value: 1k, tol: {value: 5%}}\n"
    "  R2: {type: resistor, nodes: [s, b], value: 10k}\n"
    "  D1: {type: diode, nodes: [b, gnd], tol: {is: 50%, n: 2%}}\n"
    "  Q1: {type: amplifier, in: b, out: vcc, ref: gnd, model: small-signal-npn,\n"
    "       tol: {beta: 30%}}\n";

/* What the loader keeps: a source's plain tol on its level, a resistor's mapping
 * on its own tol field, every other key in the part's key tolerances. */
static void test_loader_keys(void **state)
{
    (void)state;
    ru_circuit *c = load_text(demo);
    const ru_part *v1 = part_named(c, "V1"), *v2 = part_named(c, "V2");
    const ru_part *r1 = part_named(c, "R1"), *d1 = part_named(c, "D1");
    const ru_part *q1 = part_named(c, "Q1");
    assert_int_equal(v1->nkey_tols, 1);
    assert_string_equal(v1->key_tol[0].key, "value");
    RU_ASSERT_REL(v1->key_tol[0].tol, 0.10, 1e-15);
    assert_int_equal(v2->nkey_tols, 1);
    assert_string_equal(v2->key_tol[0].key, "amplitude"); /* a sine's level */
    assert_int_equal(r1->nkey_tols, 0);
    RU_ASSERT_REL(r1->tol, 0.05, 1e-15);
    assert_int_equal(d1->nkey_tols, 2);
    assert_string_equal(d1->key_tol[0].key, "is");
    assert_string_equal(d1->key_tol[1].key, "n");
    RU_ASSERT_REL(d1->key_tol[0].tol, 0.5, 1e-15);
    assert_int_equal(q1->nkey_tols, 1);
    assert_string_equal(q1->key_tol[0].key, "beta");
    /* the slots are the keys PART.KEY reads */
    double beta = 0;
    ru_error err;
    assert_int_equal(ru_circuit_get_param(c, "Q1.beta", &beta, &err), RU_OK);
    assert_true(*ru_part_key_cptr(q1, "beta", NULL) == beta);
    assert_string_equal(ru_part_value_key(r1), "value");
    assert_null(ru_part_level_key(r1)); /* a resistor's plain tol is its own key */
    ru_circuit_destroy(c);
    c = load_text("parts:\n"
                  "  G1: {type: transconductor, nodes: [t, gnd], control: [t, gnd], gm: 1m,\n"
                  "       tol: 3%}\n"
                  "  R1: {type: resistor, nodes: [t, gnd], value: 1k}\n");
    assert_int_equal(part_named(c, "G1")->nkey_tols, 1); /* a plain tol is gm's */
    assert_string_equal(part_named(c, "G1")->key_tol[0].key, "gm");
    ru_circuit_destroy(c);
}

static void test_loader_errors(void **state)
{
    (void)state;
    refused("parts:\n"
            "  D1: {type: diode, nodes: [a, gnd], tol: {beta: 30%}}\n"
            "  R1: {type: resistor, nodes: [a, gnd], value: 1k}\n",
            2, 44, "part D1: tol: beta is not a value of the part (values: is, n, rs, temp)");
    refused("parts:\n"
            "  D1: {type: diode, nodes: [a, gnd], tol: {iss: 30%}}\n"
            "  R1: {type: resistor, nodes: [a, gnd], value: 1k}\n",
            2, 44, "did you mean is?");
    refused("parts:\n"
            "  D1: {type: diode, nodes: [a, gnd], tol: 30%}\n"
            "  R1: {type: resistor, nodes: [a, gnd], value: 1k}\n",
            2, 43, "tol on this part needs the keys it applies to, e.g. tol: {is: 10%}");
    refused("parts:\n"
            "  D1: {type: diode, nodes: [a, gnd], tol: {is: lots}}\n"
            "  R1: {type: resistor, nodes: [a, gnd], value: 1k}\n",
            2, 48, "part D1: tol: key is:");
    refused("parts:\n"
            "  D1: {type: diode, nodes: [a, gnd], tol: {is: 150%}}\n"
            "  R1: {type: resistor, nodes: [a, gnd], value: 1k}\n",
            2, 3, "tol of is must be from 0 up to (not including) 100%");
    refused("parts:\n"
            "  R1: {type: resistor, nodes: [a, gnd], value: 1k, tol: {value: 5%, tol: 1%}}\n"
            "  R2: {type: resistor, nodes: [a, gnd], value: 1k}\n",
            2, 69, "tol: tol is not a value of the part");
}

/* Draws of key tolerances: within the band, uniform moments, independent of each
 * other and of the value draws, which are those of before (stream = part index). */
#define NSAMP 4000
static void test_draws(void **state)
{
    (void)state;
    ru_circuit *c = load_text(demo);
    ru_error err;
    const ru_part *d1 = part_named(c, "D1"), *v1 = part_named(c, "V1");
    const ru_part *q1 = part_named(c, "Q1");
    size_t ir1 = (size_t)ru_circuit_find_part(c, "R1");
    double s_is = 0, s2_is = 0, s_n = 0, s_is_n = 0, s_is_v = 0, s2_v = 0, s_b = 0, s2_b = 0;
    double m_is = 0;
    for (size_t smp = 1; smp <= NSAMP; smp++) {
        ru_circuit *v = NULL;
        assert_int_equal(ru_mc_sample_circuit(c, 5, smp, RU_MC_UNIFORM, &v, &err), RU_OK);
        double dis = part_named(v, "D1")->diode.is_a / d1->diode.is_a - 1;
        double dn = part_named(v, "D1")->diode.n / d1->diode.n - 1;
        double dv = part_named(v, "V1")->wave.value / v1->wave.value - 1;
        double db = part_named(v, "Q1")->amp.beta / q1->amp.beta - 1;
        assert_true(fabs(dis) <= 0.5 * (1 + 1e-12) && fabs(dn) <= 0.02 * (1 + 1e-12));
        assert_true(fabs(dv) <= 0.1 * (1 + 1e-12) && fabs(db) <= 0.3 * (1 + 1e-12));
        /* the resistor's value: the same draw as ever, stream = its part index */
        RU_ASSERT_REL(ru_circuit_part(v, ir1)->value,
                      1e3 * (1 + ru_mc_deviation(5, smp, ir1, RU_MC_UNIFORM, 0.05)), 1e-15);
        s_is += dis;
        s2_is += dis * dis;
        m_is = fmax(m_is, fabs(dis));
        s_n += dn;
        s_is_n += (dis / 0.5) * (dn / 0.02);
        s_is_v += (dis / 0.5) * (dv / 0.1);
        s2_v += dv * dv;
        s_b += db;
        s2_b += db * db;
        ru_circuit_destroy(v);
    }
    double n = NSAMP, var = 0.25 / 3; /* uniform on [-0.5, 0.5] */
    RU_ASSERT_NEAR(s_is / n, 0.0, 4 * sqrt(var / n));
    RU_ASSERT_NEAR(s2_is / n, var, 4 * sqrt((pow(0.5, 4) / 5 - var * var) / n));
    RU_ASSERT_NEAR(s2_v / n, 0.01 / 3, 4 * sqrt((1e-4 / 5 - 1e-4 / 9) / n));
    RU_ASSERT_NEAR(s_b / n, 0.0, 4 * sqrt(0.09 / 3 / n));
    RU_ASSERT_NEAR(s2_b / n, 0.09 / 3, 4 * sqrt((pow(0.3, 4) / 5 - 0.0009) / n));
    RU_ASSERT_NEAR(s_n / n, 0.0, 4 * sqrt(4e-4 / 3 / n));
    /* scaled to [-1, 1] each has variance 1/3: the products' mean is 0 with standard
     * error (1/3)/sqrt(n) for independent streams */
    RU_ASSERT_NEAR(s_is_n / n, 0.0, 4 * (1.0 / 3) / sqrt(n));
    RU_ASSERT_NEAR(s_is_v / n, 0.0, 4 * (1.0 / 3) / sqrt(n));
    assert_true(m_is > 0.49); /* the band is used to its ends */
    ru_circuit_destroy(c);
}

/* A draw does not move when another key gets a tolerance. */
static void test_streams_stable(void **state)
{
    (void)state;
    ru_circuit *a = load_text("parts:\n"
                              "  D1: {type: diode, nodes: [a, gnd], tol: {is: 50%}}\n"
                              "  R1: {type: resistor, nodes: [a, gnd], value: 1k}\n");
    ru_circuit *b = load_text("parts:\n"
                              "  D1: {type: diode, nodes: [a, gnd], tol: {n: 5%, is: 50%}}\n"
                              "  R1: {type: resistor, nodes: [a, gnd], value: 1k, tol: 1%}\n");
    ru_error err;
    for (size_t smp = 1; smp < 20; smp++) {
        ru_circuit *va = NULL, *vb = NULL;
        assert_int_equal(ru_mc_sample_circuit(a, 9, smp, RU_MC_NORMAL, &va, &err), RU_OK);
        assert_int_equal(ru_mc_sample_circuit(b, 9, smp, RU_MC_NORMAL, &vb, &err), RU_OK);
        assert_true(part_named(va, "D1")->diode.is_a == part_named(vb, "D1")->diode.is_a);
        assert_true(part_named(va, "D1")->diode.n == 1.0);
        assert_true(part_named(vb, "D1")->diode.n != 1.0);
        ru_circuit_destroy(va);
        ru_circuit_destroy(vb);
    }
    ru_circuit_destroy(a);
    ru_circuit_destroy(b);
}

/* The drawn key reaches the run: a van der Pol tank whose negative conductance
 * is partly a transconductor with tol: {gm: 40%}; every unit's settled amplitude
 * against averaging, 2 sqrt(a/(3b)) with a = 2 mS - 1/RP - gm (gm < 0 here),
 * b = 0.5 mA/V^3 (tolerance 0.3 %: O(eps^2), eps = a sqrt(L/C) < 0.08, draft). The
 * result lists the drawn gm as G2.gm with its PART.KEY. */
static void test_amplitude_follows_gm(void **state)
{
    (void)state;
    ru_circuit *c = load_text(
        "parts:\n"
        "  L1: {type: inductor, nodes: [t, gnd], value: 1mH}\n"
        "  C1: {type: capacitor, nodes: [t, gnd], value: 1u}\n"
        "  RP: {type: resistor, nodes: [t, gnd], value: 2k}\n"
        "  G1: {type: poly-conductance, nodes: [t, gnd], coeffs: [0, -2m, 0, 0.5m]}\n"
        "  G2: {type: transconductor, nodes: [t, gnd], control: [t, gnd], gm: -0.5m,\n"
        "       tol: {gm: 40%}}\n"
        "run: {stop: 40m, kick: {preset: {t: 1m}}, accuracy: draft}\n"
        "measure: {probe: t}\n");
    ru_mc_opts o;
    ru_mc_opts_default(&o);
    o.samples = 6;
    o.threads = 2;
    ru_mc_result *r = NULL;
    ru_error err;
    if (ru_mc_run(c, &o, &r, &err) != RU_OK)
        fail_msg("montecarlo: %s", err.msg);
    assert_int_equal(ru_mc_tol_count(r), 1);
    assert_string_equal(ru_mc_tol_name(r, 0), "G2.gm");
    assert_string_equal(ru_mc_tol_param(r, 0), "G2.gm");
    double spread = 0;
    for (size_t i = 0; i < 6; i++) {
        const ru_mc_unit *u = ru_mc_get_unit(r, i);
        double gm = ru_mc_value(r, i, 0), a = 2e-3 - 1.0 / 2e3 - gm;
        assert_true(u->started);
        RU_ASSERT_REL(u->fig[RU_MC_AMPLITUDE], 2.0 * sqrt(a / (3 * 0.5e-3)), 3e-3);
        spread = fmax(spread, fabs(gm / -0.5e-3 - 1));
    }
    assert_true(spread > 0.05); /* the draws moved gm */
    ru_mc_result_destroy(r);
    ru_circuit_destroy(c);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_loader_keys),    cmocka_unit_test(test_loader_errors),
        cmocka_unit_test(test_draws),          cmocka_unit_test(test_streams_stable),
        cmocka_unit_test(test_amplitude_follows_gm),
    };
    return cmocka_run_group_tests_name("tolerance", tests, NULL, NULL);
}
