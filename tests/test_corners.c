/* test_corners.c: corner plans (ringup/corners.h) and the `corners:` section.
 *
 * References: counting, the number of combinations of factors with n1, n2, ...
 * levels is their product (the rule of product), listed in mixed radix with the
 * first factor slowest; each corner's values are exactly nominal * (1 + level)
 * (the definition of a relative deviation), the temperature's tempco as in
 * test_temperature.c. Circuits are our own. */
#include "ru_test.h"

#include "ringup/corners.h"
#include "ringup/loader.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static ru_circuit *load_text(const char *text)
{
    ru_circuit *c = NULL;
    ru_error err;
    ru_error_clear(&err);
    if (ru_circuit_load_string(text, "corners.yaml", RU_MODELS_DIR, &c, &err) != RU_OK)
        fail_msg("load: %s", err.msg);
    return c;
}

static const ru_part *part_named(const ru_circuit *c, const char *name)
{
    int i = ru_circuit_find_part(c, name);
    assert_true(i >= 0);
    return ru_circuit_part(c, (size_t)i);
}

static const char *const tank =
    "parts:\n"
    "  L1: {type: inductor, nodes: [t, gnd], value: 10mH, tol: 5%}\n"
    "  C1: {type: capacitor, nodes: [t, gnd], value: 100n, tol: 10%}\n"
    "  RP: {type: resistor, nodes: [t, gnd], value: 5k}\n"
    "  A1: {type: amplifier, in: t, out: t, law: exp-stage, tol: {beta: 30%, is: 50%}}\n";

/* No corners: section: every toleranced quantity at -tol and +tol, 2^4 corners. */
static void test_default_plan(void **state)
{
    (void)state;
    ru_circuit *c = load_text(tank);
    ru_corners *k = NULL;
    ru_error err;
    assert_int_equal(ru_corners_create(c, &k, &err), RU_OK);
    assert_int_equal(ru_corners_factor_count(k), 4);
    assert_int_equal(ru_corners_unit_count(k), 1 + 16);
    assert_string_equal(ru_corners_factor(k, 0)->name, "L1");
    assert_string_equal(ru_corners_factor(k, 2)->name, "A1.beta");
    assert_string_equal(ru_corners_factor(k, 3)->name, "A1.is");
    const double tol[4] = {0.05, 0.10, 0.30, 0.50};
    int seen[16] = {0};
    for (size_t u = 1; u <= 16; u++) {
        int code = 0;
        for (size_t f = 0; f < 4; f++) { /* mixed radix, first factor slowest */
            int l = ru_corners_level(k, u, f);
            assert_int_equal(l, (int)(((u - 1) >> (3 - f)) & 1));
            code = 2 * code + l;
        }
        seen[code]++;
        ru_circuit *v = NULL;
        assert_int_equal(ru_corners_circuit(c, k, u, &v, &err), RU_OK);
        double d[4];
        for (size_t f = 0; f < 4; f++)
            d[f] = ru_corners_level(k, u, f) ? tol[f] : -tol[f];
        assert_true(part_named(v, "L1")->value == part_named(c, "L1")->value * (1 + d[0]));
        assert_true(part_named(v, "C1")->value == part_named(c, "C1")->value * (1 + d[1]));
        assert_true(part_named(v, "A1")->amp.beta == part_named(c, "A1")->amp.beta * (1 + d[2]));
        assert_true(part_named(v, "A1")->amp.is_a == part_named(c, "A1")->amp.is_a * (1 + d[3]));
        assert_true(part_named(v, "RP")->value == part_named(c, "RP")->value);
        ru_circuit_destroy(v);
    }
    for (int i = 0; i < 16; i++) /* every combination once */
        assert_int_equal(seen[i], 1);
    ru_circuit *v = NULL; /* unit 0: the nominal circuit */
    assert_int_equal(ru_corners_circuit(c, k, 0, &v, &err), RU_OK);
    assert_true(part_named(v, "C1")->value == part_named(c, "C1")->value);
    ru_circuit_destroy(v);
    assert_int_equal(ru_corners_circuit(c, k, 17, &v, &err), RU_ERANGE);
    char d[256];
    ru_corners_describe(k, 16, d, sizeof d);
    assert_string_equal(d, "L1 +5 %, C1 +10 %, A1.beta +30 %, A1.is +50 %");
    ru_corners_describe(k, 0, d, sizeof d);
    assert_string_equal(d, "nominal");
    ru_corners_destroy(k);
    ru_circuit_destroy(c);
}

/* A corners: section: temp, supply, low/nom/high, explicit deviations: 2*2*3*2. */
static void test_section(void **state)
{
    (void)state;
    ru_circuit *c = load_text(
        "parts:\n"
        "  V1: {type: supply, nodes: [vcc, gnd], wave: dc, value: 5}\n"
        "  V2: {type: supply, nodes: [s, gnd], wave: sine, offset: 1, amplitude: 2, freq: 1k}\n"
        "  RB: {type: resistor, nodes: [vcc, t], value: 1M}\n"
        "  RS: {type: resistor, nodes: [s, t], value: 1M}\n"
        "  L1: {type: inductor, nodes: [t, gnd], value: 10mH, tol: 5%}\n"
        "  C1: {type: capacitor, nodes: [t, gnd], value: 100n, tempco: -500ppm}\n"
        "  RP: {type: resistor, nodes: [t, gnd], value: 5k}\n"
        "corners:\n"
        "  temp: [-40C, 85C]\n"
        "  supply: [-10%, +10%]\n"
        "  L1: [low, nom, high]\n"
        "  RP.value: [-20%, 20%]\n");
    assert_int_equal(ru_circuit_corner_count(c), 4);
    ru_corners *k = NULL;
    ru_error err;
    assert_int_equal(ru_corners_create(c, &k, &err), RU_OK);
    assert_int_equal(ru_corners_unit_count(k), 1 + 2 * 2 * 3 * 2);
    const ru_corner_factor *l1 = ru_corners_factor(k, 2);
    assert_int_equal(l1->kind, RU_CORNER_QUANTITY);
    assert_int_equal(l1->nlevels, 3);
    RU_ASSERT_REL(l1->level[0], -0.05, 1e-15);
    assert_true(l1->level[1] == 0);
    assert_int_equal(l1->line, 12);
    /* the last corner: 85 C, supply +10 %, L1 high, RP +20 % */
    size_t u = 24;
    ru_circuit *v = NULL;
    assert_int_equal(ru_corners_circuit(c, k, u, &v, &err), RU_OK);
    RU_ASSERT_REL(ru_circuit_temp_c(v), 85.0, 0);
    RU_ASSERT_REL(part_named(v, "V1")->wave.value, 5.0 * 1.1, 1e-15);
    RU_ASSERT_REL(part_named(v, "V2")->wave.offset, 1.0 * 1.1, 1e-15);
    RU_ASSERT_REL(part_named(v, "V2")->wave.amplitude, 2.0 * 1.1, 1e-15);
    RU_ASSERT_REL(part_named(v, "V2")->wave.freq_hz, 1e3, 0); /* not a level */
    RU_ASSERT_REL(part_named(v, "L1")->value, 10e-3 * 1.05, 1e-15);
    RU_ASSERT_REL(part_named(v, "RP")->value, 5e3 * 1.2, 1e-15);
    RU_ASSERT_REL(part_named(v, "C1")->value, 100e-9 * (1 - 500e-6 * 58), 1e-14);
    RU_ASSERT_REL(part_named(v, "RB")->value, 1e6, 0);
    ru_circuit_destroy(v);
    char d[256];
    ru_corners_describe(k, 1, d, sizeof d);
    assert_string_equal(d, "temp -40 C, supply -10 %, L1 -5 %, RP.value -20 %");
    ru_corners_destroy(k);
    ru_circuit_destroy(c);
}

static void refused(const char *corners, int line, int col, const char *part_of_msg)
{
    char text[1024];
    snprintf(text, sizeof text,
             "parts:\n"
             "  L1: {type: inductor, nodes: [t, gnd], value: 10mH}\n"
             "  C1: {type: capacitor, nodes: [t, gnd], value: 100n, tol: 5%%}\n"
             "corners:\n%s",
             corners);
    ru_circuit *c = NULL;
    ru_error err;
    ru_error_clear(&err);
    assert_int_equal(ru_circuit_load_string(text, "corners.yaml", RU_MODELS_DIR, &c, &err),
                     RU_EINPUT);
    if (!strstr(err.msg, part_of_msg) || err.line != line || err.col != col)
        fail_msg("want %d:%d '%s', got %d:%d '%s'", line, col, part_of_msg, err.line, err.col,
                 err.msg);
}

static void test_refusals(void **state)
{
    (void)state;
    refused("  X9: [low, high]\n", 5, 3, "corners: X9: no part X9 in the circuit");
    refused("  L1.gain: [low, high]\n", 5, 3, "corners: L1.gain: not a numeric key");
    refused("  L1: [low, high]\n", 5, 8, "corners: L1: low needs a tolerance on value");
    refused("  C1: [low, 5 ohm]\n", 5, 13, "corners: C1: '5 ohm'");
    refused("  temp: [-300C]\n", 5, 10, "corners: temp: '-300C' is not above absolute zero");
    refused("  supply: [-100%]\n", 5, 12, "would take it to 0 or below");
    refused("  temp: 85C\n", 5, 9, "corners: temp needs a list of 1 to 8 levels");
    refused("  C1: [1%, 2%, 3%, 4%, 5%, 6%, 7%, 8%, 9%]\n", 5, 7, "list of 1 to 8 levels");
    /* nothing to vary, too many corners */
    ru_circuit *c = load_text("parts:\n  L1: {type: inductor, nodes: [t, gnd], value: 1m}\n"
                              "  C1: {type: capacitor, nodes: [t, gnd], value: 1u}\n");
    ru_corners *k = NULL;
    ru_error err;
    assert_int_equal(ru_corners_create(c, &k, &err), RU_EINPUT);
    assert_non_null(strstr(err.msg, "nothing to vary"));
    ru_circuit_destroy(c);
    char text[2048] = "parts:\n";
    for (int i = 0; i < 13; i++) /* 2^13 corners */
        snprintf(text + strlen(text), sizeof text - strlen(text),
                 "  R%d: {type: resistor, nodes: [t, gnd], value: 1k, tol: 1%%}\n", i);
    strcat(text, "  C1: {type: capacitor, nodes: [t, gnd], value: 1u}\n");
    c = load_text(text);
    assert_int_equal(ru_corners_create(c, &k, &err), RU_EINPUT);
    assert_non_null(strstr(err.msg, "13 factors make 8192 corners, more than the 4096"));
    ru_circuit_destroy(c);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_default_plan),
        cmocka_unit_test(test_section),
        cmocka_unit_test(test_refusals),
    };
    return cmocka_run_group_tests_name("corners", tests, NULL, NULL);
}
