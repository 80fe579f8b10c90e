/* test_params.c: PART.KEY values and the LO:HI:N sweep.
 *
 * References: the loader itself (a value set by name must give exactly the part a
 * file with that value written gives: same key names, same units), hand arithmetic
 * for the sweep points, and the method of averaging for the end-to-end sweep of a
 * van der Pol tank (settled amplitude 2 sqrt(a/(3b))). Circuits are our own. */
#include "ru_test.h"

#include "ringup/batch.h"
#include "ringup/loader.h"
#include "ringup/params.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* One of every kind of key: R, C, L (series), supply (dc), current (sine), the
 * follower, exp-stage, diff-pair and opamp laws, a diode, a lamp and an NTC. */
static const char *const base_text =
    "parts:\n"
    "  VS: {type: supply, nodes: [vcc, gnd], value: 9V, rise: 10u}\n"
    "  IS: {type: current, nodes: [gnd, x], wave: sine, amplitude: 1m, freq: 1k}\n"
    "  R1: {type: resistor, nodes: [x, gnd], value: 10k, tol: 1%}\n"
    "  C1: {type: capacitor, nodes: [x, gnd], value: 15n, tol: 5%}\n"
    "  L1: {type: inductor, nodes: [x, y], value: 10mH, series: 2}\n"
    "  RY: {type: resistor, nodes: [y, gnd], value: 1k}\n"
    "  A1: {type: amplifier, in: x, out: o1, law: follower-tanh, gain: 0.98}\n"
    "  Q1: {type: amplifier, in: x, out: o2, law: exp-stage, is: 10f}\n"
    "  P1: {type: amplifier, in: x, out: o3, law: diff-pair-tanh, itail: 1m}\n"
    "  U1: {type: amplifier, in: x, inv: o4, out: o4, law: opamp, gbw: 1M}\n"
    "  D1: {type: diode, nodes: [o1, gnd], is: 1f}\n"
    "  LP: {type: thermal-resistor, nodes: [o2, gnd], kind: lamp, r0: 50}\n"
    "  NT: {type: thermal-resistor, nodes: [o3, gnd], kind: ntc, r0: 10k}\n"
    "  G1: {type: poly-conductance, nodes: [o4, gnd], coeffs: [0, 1m]}\n"
    "  RO: {type: resistor, nodes: [o2, vcc], value: 1k}\n";

static ru_circuit *load_text(const char *text)
{
    ru_circuit *c = NULL;
    ru_error err;
    ru_error_clear(&err);
    if (ru_circuit_load_string(text, "params.yaml", RU_MODELS_DIR, &c, &err) != RU_OK)
        fail_msg("load: %s", err.msg);
    return c;
}

/* base_text with the part line of `part` replaced by `line`. */
static ru_circuit *load_with(const char *part, const char *line)
{
    char text[4096], key[RU_NAME_MAX + 8];
    snprintf(key, sizeof key, "  %s: ", part);
    const char *at = strstr(base_text, key), *eol = at ? strchr(at, '\n') : NULL;
    assert_non_null(eol);
    snprintf(text, sizeof text, "%.*s  %s\n%s", (int)(at - base_text), base_text, line,
             eol + 1);
    return load_text(text);
}

typedef struct case_rec {
    const char *name;  /* PART.KEY */
    const char *value; /* value to set, as the command line writes it (key's unit) */
    const char *unit;  /* the unit of README's part tables */
    const char *line;  /* the same part written in a file with that value */
} case_rec;

static const case_rec cases[] = {
    {"R1.value", "12k", "ohm", "R1: {type: resistor, nodes: [x, gnd], value: 12kohm, tol: 1%}"},
    {"R1.tol", "2%", "%", "R1: {type: resistor, nodes: [x, gnd], value: 10k, tol: 2%}"},
    {"C1.value", "22n", "F", "C1: {type: capacitor, nodes: [x, gnd], value: 22nF, tol: 5%}"},
    {"L1.series", "3.5", "ohm", "L1: {type: inductor, nodes: [x, y], value: 10mH, series: 3.5ohm}"},
    {"VS.value", "12V", "V", "VS: {type: supply, nodes: [vcc, gnd], value: 12V, rise: 10u}"},
    {"VS.rise", "50u", "s", "VS: {type: supply, nodes: [vcc, gnd], value: 9V, rise: 50us}"},
    {"IS.freq", "2k", "Hz",
     "IS: {type: current, nodes: [gnd, x], wave: sine, amplitude: 1m, freq: 2kHz}"},
    {"IS.amplitude", "2m", "A",
     "IS: {type: current, nodes: [gnd, x], wave: sine, amplitude: 2mA, freq: 1k}"},
    {"A1.gain", "0.995", "", "A1: {type: amplifier, in: x, out: o1, law: follower-tanh, gain: 0.995}"},
    {"A1.swing", "2.5", "V",
     "A1: {type: amplifier, in: x, out: o1, law: follower-tanh, gain: 0.98, swing: 2.5V}"},
    {"Q1.is", "20f", "A", "Q1: {type: amplifier, in: x, out: o2, law: exp-stage, is: 20fA}"},
    {"Q1.temp", "50", "C",
     "Q1: {type: amplifier, in: x, out: o2, law: exp-stage, is: 10f, temp: 50C}"},
    {"P1.itail", "2m", "A",
     "P1: {type: amplifier, in: x, out: o3, law: diff-pair-tanh, itail: 2mA}"},
    {"U1.slew", "2M", "V/s",
     "U1: {type: amplifier, in: x, inv: o4, out: o4, law: opamp, gbw: 1M, slew: 2MV/s}"},
    {"U1.vmax", "5", "V",
     "U1: {type: amplifier, in: x, inv: o4, out: o4, law: opamp, gbw: 1M, vmax: 5V}"},
    {"D1.rs", "10", "ohm", "D1: {type: diode, nodes: [o1, gnd], is: 1f, rs: 10ohm}"},
    {"LP.rth", "30k", "K/W",
     "LP: {type: thermal-resistor, nodes: [o2, gnd], kind: lamp, r0: 50, rth: 30kK/W}"},
    {"NT.bth", "4000", "K",
     "NT: {type: thermal-resistor, nodes: [o3, gnd], kind: ntc, r0: 10k, bth: 4000K}"},
};

/* Reference: the loader. Setting PART.KEY gives the very part (byte for byte in
 * its values) that loading a file with that value gives; get reads it back; the
 * unit is the one the file's key takes. */
static void test_round_trip_against_loader(void **state)
{
    (void)state;
    for (size_t k = 0; k < sizeof cases / sizeof cases[0]; k++) {
        const case_rec *t = &cases[k];
        ru_circuit *c = load_text(base_text);
        char part[RU_NAME_MAX];
        snprintf(part, sizeof part, "%.*s", (int)(strchr(t->name, '.') - t->name), t->name);
        ru_circuit *ref = load_with(part, t->line);
        ru_error err;
        ru_error_clear(&err);
        const char *unit = NULL;
        assert_int_equal(ru_circuit_param_unit(c, t->name, &unit, &err), RU_OK);
        assert_string_equal(unit, t->unit);
        double value = NAN, got = NAN;
        assert_int_equal(ru_value_parse(t->value, unit[0] ? unit : NULL, &value, NULL, 0),
                         RU_OK);
        if (ru_circuit_set_param(c, t->name, value, &err) != RU_OK)
            fail_msg("%s: %s", t->name, err.msg);
        assert_int_equal(ru_circuit_get_param(c, t->name, &got, &err), RU_OK);
        assert_true(got == value);
        int i = ru_circuit_find_part(c, part);
        const ru_part *a = ru_circuit_part(c, (size_t)i), *b = ru_circuit_part(ref, (size_t)i);
        /* the value fields must agree exactly; line/col differ with the text */
        assert_memory_equal(&a->value, &b->value,
                            offsetof(ru_part, line) - offsetof(ru_part, value));
        ru_circuit_destroy(c);
        ru_circuit_destroy(ref);
    }
}

static void expect_refused(ru_circuit *c, const char *name, double v, const char *words)
{
    ru_error err;
    ru_error_clear(&err);
    ru_status s = ru_circuit_set_param(c, name, v, &err);
    if (s != RU_EINPUT || !strstr(err.msg, words))
        fail_msg("%s = %g: status %d, message '%s', want RU_EINPUT with '%s'", name, v, s,
                 err.msg, words);
}

/* Refusals (reference: README's part tables and value rules): unknown part or
 * key, a key of another type or law, lists, and values the loader refuses. The
 * circuit is unchanged after a refusal. */
static void test_refusals(void **state)
{
    (void)state;
    ru_circuit *c = load_text(base_text);
    expect_refused(c, "RX.value", 1, "no part RX");
    expect_refused(c, "R1.gain", 1, "values: value, tol");
    expect_refused(c, "R1.series", 1, "not a value of type resistor");
    expect_refused(c, "A1.is", 1, "law follower-tanh");
    expect_refused(c, "G1.coeffs", 1, "lists such as coeffs");
    expect_refused(c, "R1", 1, "not PART.KEY");
    expect_refused(c, "R1.", 1, "not PART.KEY");
    expect_refused(c, "R1.value", -1e3, "value must be positive");
    expect_refused(c, "R1.value", 0, "value must be positive");
    expect_refused(c, "R1.value", NAN, "must be finite");
    expect_refused(c, "R1.tol", 1.0, "tol must be from 0");
    expect_refused(c, "L1.series", -1, "series resistance must not be negative");
    expect_refused(c, "U1.vmax", -20, "U1");   /* below vmin (-12 V) */
    expect_refused(c, "D1.is", 0, "D1");
    expect_refused(c, "LP.cth", -1e-6, "LP");
    double v = 0;
    ru_error err;
    assert_int_equal(ru_circuit_get_param(c, "R1.value", &v, &err), RU_OK);
    RU_ASSERT_NEAR(v, 10e3, 0);
    assert_int_equal(ru_circuit_get_param(c, "U1.vmax", &v, &err), RU_OK);
    RU_ASSERT_NEAR(v, 12.0, 0); /* README: opamp default vmax 12 V */
    ru_circuit_destroy(c);
}

static ru_sweep_spec parse_ok(const ru_circuit *c, const char *text, int log)
{
    ru_sweep_spec s;
    ru_error err;
    ru_error_clear(&err);
    if (ru_sweep_parse(c, text, log, &s, &err) != RU_OK)
        fail_msg("%s: %s", text, err.msg);
    return s;
}

/* Reference: hand arithmetic. lin: lo + (hi - lo) i/(n - 1); log: lo (hi/lo)^(i/(n-1)). */
static void test_sweep_parse(void **state)
{
    (void)state;
    ru_circuit *c = load_text(base_text);
    ru_sweep_spec s = parse_ok(c, "R1.value=8k:12k:5", 0);
    assert_string_equal(s.param, "R1.value");
    assert_string_equal(s.unit, "ohm");
    assert_int_equal(s.n, 5);
    const double lin[5] = {8000, 9000, 10000, 11000, 12000};
    for (size_t i = 0; i < 5; i++)
        RU_ASSERT_REL(ru_sweep_value(&s, i), lin[i], 1e-15);
    s = parse_ok(c, "A1.gain=0.95:0.999:6", 0); /* step 0.0098 */
    const double g[6] = {0.95, 0.9598, 0.9696, 0.9794, 0.9892, 0.999};
    for (size_t i = 0; i < 6; i++)
        RU_ASSERT_REL(ru_sweep_value(&s, i), g[i], 1e-14);
    s = parse_ok(c, "C1.value=1nF:100n:3", 1);
    const double lg[3] = {1e-9, 1e-8, 1e-7};
    for (size_t i = 0; i < 3; i++)
        RU_ASSERT_REL(ru_sweep_value(&s, i), lg[i], 1e-14);
    s = parse_ok(c, "R1.value=1k:1M:4", 1); /* decades: 1k, 10k, 100k, 1M */
    RU_ASSERT_REL(ru_sweep_value(&s, 1), 1e4, 1e-14);
    RU_ASSERT_REL(ru_sweep_value(&s, 2), 1e5, 1e-14);
    s = parse_ok(c, "R1.tol=1%:5%:3", 0); /* % read as a fraction, as in a file */
    RU_ASSERT_REL(ru_sweep_value(&s, 1), 0.03, 1e-15);
    s = parse_ok(c, "Q1.temp=-20:80C:6", 0);
    RU_ASSERT_REL(ru_sweep_value(&s, 3), 40.0, 1e-15);
    s = parse_ok(c, "R1.value=10k:20k:1", 0);
    RU_ASSERT_REL(ru_sweep_value(&s, 0), 1e4, 0);
    static const char *const bad[][2] = {
        {"R1.value=8kF:12k:5", "unit F does not fit"}, {"R1.value=8k:12k:0", "whole number"},
        {"R1.value=8k:12k:x", "whole number"},        {"R1.value=8k:12k", "LO:HI:N"},
        {"R1.value=8k:12k:5:6", "LO:HI:N"},           {"R1.value", "PART.KEY=LO:HI:N"},
        {"RX.value=1:2:3", "no part RX"},             {"R1.gain=1:2:3", "values: value, tol"},
        {"R1.value=8k:12k:1001", "1 to 1000"}};
    for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++) {
        ru_error err;
        ru_error_clear(&err);
        if (ru_sweep_parse(c, bad[i][0], 0, &s, &err) != RU_EINPUT ||
            !strstr(err.msg, bad[i][1]))
            fail_msg("%s: message '%s', want '%s'", bad[i][0], err.msg, bad[i][1]);
    }
    ru_error err;
    assert_int_equal(ru_sweep_parse(c, "A1.center=-1:1:3", 1, &s, &err), RU_EINPUT);
    assert_non_null(strstr(err.msg, "--log"));
    ru_circuit_destroy(c);
}

/* End to end: a van der Pol tank (L 1 mH, C 1 uF, our own values) whose cubic
 * conductance G1 = -g1 v + b v^3 sits beside a resistor RP; sweeping RP sweeps the
 * net negative conductance a = g1 - 1/RP (coeffs are a list and are not varied
 * directly). Reference: method of averaging, settled amplitude 2 sqrt(a/(3b)).
 * Tolerance 0.2 %: averaging is exact to O(eps^2) with eps = a sqrt(L/C) <= 0.06,
 * so about 0.3 % at most (measured: within 2e-5 at every point).
 * Point 0 (RP = -1k) is impossible: that variant alone must fail. */
static void test_vdp_sweep_end_to_end(void **state)
{
    (void)state;
    const double g1 = 2e-3, b = 0.5e-3;
    char text[768];
    snprintf(text, sizeof text,
             "parts:\n"
             "  L1: {type: inductor, nodes: [t, gnd], value: 1mH}\n"
             "  C1: {type: capacitor, nodes: [t, gnd], value: 1u}\n"
             "  RP: {type: resistor, nodes: [t, gnd], value: 2k}\n"
             "  G1: {type: poly-conductance, nodes: [t, gnd], coeffs: [0, %.17g, 0, %.17g]}\n"
             "run: {stop: 60m, kick: {preset: {t: 1m}}}\n"
             "measure: {probe: t}\n",
             -g1, b);
    ru_circuit *c = load_text(text);
    ru_sweep_spec s = parse_ok(c, "RP.value=-1k:4k:6", 0); /* -1k, 0, 1k, 2k, 3k, 4k */
    enum { N = 6 };
    ru_batch_item items[N];
    ru_circuit *v[N];
    memset(items, 0, sizeof items);
    size_t nrun = 0;
    ru_batch_item run[N];
    for (size_t i = 0; i < N; i++) {
        ru_run_request_default(&items[i].request);
        items[i].status = ru_sweep_variant(c, &s, i, &v[i], &items[i].error);
        if (i < 2) { /* -1k and 0 ohm are refused by the part checks */
            assert_int_equal(items[i].status, RU_EINPUT);
            assert_null(v[i]);
            assert_non_null(strstr(items[i].error.msg, "value must be positive"));
            continue;
        }
        assert_int_equal(items[i].status, RU_OK);
        items[i].circuit = v[i];
        run[nrun++] = items[i];
    }
    ru_batch_run(run, nrun, 2);
    for (size_t k = 0; k < nrun; k++) {
        double rp = ru_sweep_value(&s, k + 2), a = g1 - 1.0 / rp;
        double want = 2.0 * sqrt(a / (3.0 * b));
        assert_int_equal(run[k].status, RU_OK);
        assert_true(run[k].report.meas.started);
        print_message("RP %g ohm: a %g S, amplitude %.5f V, averaging %.5f V\n", rp, a,
                      run[k].report.meas.settled_amplitude_v, want);
        RU_ASSERT_REL(run[k].report.meas.settled_amplitude_v, want, 2e-3);
        /* the describing function (= averaging for a cubic) predicts the same */
        RU_ASSERT_REL(run[k].report.pred.settled_amplitude_v, want, 1e-3);
        ru_circuit_destroy(v[k + 2]);
    }
    ru_circuit_destroy(c);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_round_trip_against_loader),
        cmocka_unit_test(test_refusals),
        cmocka_unit_test(test_sweep_parse),
        cmocka_unit_test(test_vdp_sweep_end_to_end),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
