/* test_temperature.c: the circuit's temperature (`temp:` in the file, --temp,
 * ru_circuit_set_temp): parts' temperature keys follow it unless they give their
 * own, tempco moves values from 27 C.
 *
 * References: the Shockley diode equation v = n VT ln(I/Is + 1), VT = k T / q with
 * the exact SI 2019 constants k = 1.380649e-23 J/K and q = 1.602176634e-19 C; the
 * single pole -1/(R C) of a parallel RC (first-order circuit, any circuits text);
 * a linear temperature coefficient, value (1 + tc (T - 27 C)) (common practice on
 * resistor and capacitor datasheets, here referred to 27 C). Circuits are our own. */
#include "ru_test.h"

#include "ringup/loader.h"
#include "ringup/smallsig.h"
#include "ringup/system.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static ru_circuit *load_text(const char *text)
{
    ru_circuit *c = NULL;
    ru_error err;
    ru_error_clear(&err);
    if (ru_circuit_load_string(text, "temp.yaml", RU_MODELS_DIR, &c, &err) != RU_OK)
        fail_msg("load: %s", err.msg);
    return c;
}

static const ru_part *part_named(const ru_circuit *c, const char *name)
{
    int i = ru_circuit_find_part(c, name);
    assert_true(i >= 0);
    return ru_circuit_part(c, (size_t)i);
}

static const char *const mixed =
    "temp: 85C\n"
    "parts:\n"
    "  I1: {type: current, nodes: [gnd, a], wave: dc, value: 1m}\n"
    "  D1: {type: diode, nodes: [a, gnd], is: 1e-14, n: 1.2}\n"
    "  D2: {type: diode, nodes: [a, b], temp: 40}\n"
    "  R1: {type: resistor, nodes: [b, gnd], value: 1k, tempco: 100ppm}\n"
    "  C1: {type: capacitor, nodes: [b, gnd], value: 1u, tempco: -0.0005}\n"
    "  L1: {type: inductor, nodes: [b, gnd], value: 1m}\n"
    "  T1: {type: thermal-resistor, nodes: [a, gnd], kind: ntc}\n"
    "  T2: {type: thermal-resistor, nodes: [a, gnd], kind: ntc, tamb: 30}\n"
    "  A1: {type: amplifier, in: a, out: b, model: small-signal-npn}\n";

/* Who follows: parts without their own temp (and presets' temps), tempco'd values;
 * a part's own temp or tamb stays; back at 27 C everything is as in the file. */
static void test_follow_and_return(void **state)
{
    (void)state;
    ru_circuit *c = load_text(mixed);
    RU_ASSERT_REL(ru_circuit_temp_c(c), 85.0, 0);
    RU_ASSERT_REL(part_named(c, "D1")->diode.temp_c, 85.0, 0);
    RU_ASSERT_REL(part_named(c, "D2")->diode.temp_c, 40.0, 0);
    RU_ASSERT_REL(part_named(c, "A1")->amp.temp_c, 85.0, 0);
    RU_ASSERT_REL(part_named(c, "T1")->thermal.tamb_c, 85.0, 0);
    RU_ASSERT_REL(part_named(c, "T2")->thermal.tamb_c, 30.0, 0);
    RU_ASSERT_REL(part_named(c, "R1")->value, 1e3 * (1 + 100e-6 * 58), 1e-15);
    RU_ASSERT_REL(part_named(c, "C1")->value, 1e-6 * (1 - 5e-4 * 58), 1e-15);
    RU_ASSERT_REL(part_named(c, "L1")->value, 1e-3, 0); /* no tempco */
    ru_error err;
    assert_int_equal(ru_circuit_set_temp(c, -40, &err), RU_OK);
    RU_ASSERT_REL(part_named(c, "R1")->value, 1e3 * (1 - 100e-6 * 67), 1e-14);
    RU_ASSERT_REL(part_named(c, "D1")->diode.temp_c, -40.0, 0);
    assert_int_equal(ru_circuit_set_temp(c, 27, &err), RU_OK);
    RU_ASSERT_REL(part_named(c, "R1")->value, 1e3, 1e-14);
    RU_ASSERT_REL(part_named(c, "C1")->value, 1e-6, 1e-14);
    /* a clone keeps the temperature */
    ru_circuit *k = NULL;
    assert_int_equal(ru_circuit_set_temp(c, 60, &err), RU_OK);
    assert_int_equal(ru_circuit_clone(c, &k), RU_OK);
    RU_ASSERT_REL(ru_circuit_temp_c(k), 60.0, 0);
    ru_circuit_destroy(k);
    ru_circuit_destroy(c);
    /* a file without temp is at 27 C and every part keeps its own */
    c = load_text("parts:\n"
                  "  I1: {type: current, nodes: [gnd, a], wave: dc, value: 1m}\n"
                  "  D1: {type: diode, nodes: [a, gnd], temp: 50}\n");
    RU_ASSERT_REL(ru_circuit_temp_c(c), RU_TEMP_REF_C, 0);
    RU_ASSERT_REL(part_named(c, "D1")->diode.temp_c, 50.0, 0);
    ru_circuit_destroy(c);
}

static double op_voltage(const ru_circuit *c, const char *node)
{
    ru_system *s = NULL;
    ru_error err;
    if (ru_system_create(c, &s, &err) != RU_OK)
        fail_msg("system: %s", err.msg);
    double *x = calloc(ru_system_size(s), sizeof *x);
    assert_non_null(x);
    if (ru_oppoint_solve(s, x, 0, NULL, &err) != RU_OK)
        fail_msg("oppoint: %s", err.msg);
    double v = x[ru_system_node_state(s, ru_circuit_find_node(c, node))];
    free(x);
    ru_system_destroy(s);
    return v;
}

/* A diode fed 1 mA: its voltage at three temperatures against Shockley's equation
 * with VT = kT/q (the Newton residual is far below the 1e-9 asked). */
static void test_diode_voltage(void **state)
{
    (void)state;
    ru_circuit *c = load_text("temp: 85C\n"
                              "parts:\n"
                              "  I1: {type: current, nodes: [gnd, a], wave: dc, value: 1m}\n"
                              "  D1: {type: diode, nodes: [a, gnd], is: 1e-14, n: 1.2}\n");
    const double temps[] = {85, -40, 125};
    ru_error err;
    for (int k = 0; k < 3; k++) {
        if (k > 0)
            assert_int_equal(ru_circuit_set_temp(c, temps[k], &err), RU_OK);
        double vt = 1.380649e-23 * (temps[k] + 273.15) / 1.602176634e-19;
        double want = 1.2 * vt * log(1e-3 / 1e-14 + 1);
        double got = op_voltage(c, "a");
        print_message("T = %g C: v = %.9f V (Shockley %.9f V)\n", temps[k], got, want);
        RU_ASSERT_REL(got, want, 1e-9);
    }
    ru_circuit_destroy(c);
}

/* A parallel RC with tempcos on both: its one pole at 125 C is -1/(R(T) C(T)),
 * C counting the node's 1 pF stray. */
static void test_rc_pole(void **state)
{
    (void)state;
    ru_circuit *c = load_text("temp: 125\n"
                              "parts:\n"
                              "  R1: {type: resistor, nodes: [a, gnd], value: 1k, tempco: 200ppm}\n"
                              "  C1: {type: capacitor, nodes: [a, gnd], value: 1u, "
                              "tempco: -500ppm}\n");
    ru_system *s = NULL;
    ru_error err;
    assert_int_equal(ru_system_create(c, &s, &err), RU_OK);
    double x[4] = {0};
    ru_pole poles[4];
    assert_int_equal(ru_system_size(s), 1);
    assert_int_equal(ru_poles_compute(s, x, poles, &err), RU_OK);
    double r = 1e3 * (1 + 200e-6 * 98), cf = 1e-6 * (1 - 500e-6 * 98) + 1e-12;
    RU_ASSERT_REL(poles[0].re_per_s, -1.0 / (r * cf), 1e-12);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

static void refused(const char *text, int line, int col, const char *part_of_msg)
{
    ru_circuit *c = NULL;
    ru_error err;
    ru_error_clear(&err);
    assert_int_equal(ru_circuit_load_string(text, "temp.yaml", RU_MODELS_DIR, &c, &err),
                     RU_EINPUT);
    if (!strstr(err.msg, part_of_msg) || err.line != line || err.col != col)
        fail_msg("want %d:%d '%s', got %d:%d '%s'", line, col, part_of_msg, err.line, err.col,
                 err.msg);
}

static void test_refusals(void **state)
{
    (void)state;
    refused("temp: -300C\nparts:\n  R1: {type: resistor, nodes: [a, gnd], value: 1k}\n", 1, 7,
            "key temp: temp -300 C is not above absolute zero");
    refused("temp: 85 V\nparts:\n  R1: {type: resistor, nodes: [a, gnd], value: 1k}\n", 1, 7,
            "temp");
    refused("temp: 85\nparts:\n  R1: {type: resistor, nodes: [a, gnd], value: 1k, "
            "tempco: -2%}\n", 1, 7,
            "part R1: tempco -20000 ppm/K at 85 C would take its value to 0 or below");
    /* --temp on a circuit: refused, nothing changed */
    ru_circuit *c = load_text("parts:\n  R1: {type: resistor, nodes: [a, gnd], value: 1k, "
                              "tempco: -1%}\n");
    ru_error err;
    assert_int_equal(ru_circuit_set_temp(c, 200, &err), RU_EINPUT);
    RU_ASSERT_REL(part_named(c, "R1")->value, 1e3, 0);
    RU_ASSERT_REL(ru_circuit_temp_c(c), RU_TEMP_REF_C, 0);
    assert_int_equal(ru_circuit_set_temp(c, NAN, &err), RU_EINPUT);
    ru_circuit_destroy(c);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_follow_and_return),
        cmocka_unit_test(test_diode_voltage),
        cmocka_unit_test(test_rc_pole),
        cmocka_unit_test(test_refusals),
    };
    return cmocka_run_group_tests_name("temperature", tests, NULL, NULL);
}
