/* test_transconductor.c: the transconductor part (src/parts/transconductor.c), a
 * part added through one descriptor and one table line: the loader (keys, units,
 * nodes, every error with its FILE:LINE:COL, found here by searching the test
 * text), PART.KEY, the check listing, the Jacobian against central differences,
 * the network response against the closed form of a transconductor driving a
 * resistor (Ohm's law and KCL, analytic), and the poles of a gyrator with two
 * capacitors against the roots of its characteristic polynomial (analytic). */
#include "ru_test.h"

#include "ringup/circuit.h"
#include "ringup/loader.h"
#include "ringup/params.h"
#include "ringup/smallsig.h"
#include "ringup/system.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define NAME "gm.yaml"
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

/* Loading text fails with RU_EINPUT at line:col of token, the message holding want. */
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

static const char amp_text[] = "title: transconductor into a resistor\n"
                               "stray: 1p\n"
                               "parts:\n"
                               "  RI: {type: resistor, nodes: [in, gnd], value: 10k}\n"
                               "  G1: {type: transconductor, nodes: [out, gnd], control: [in, gnd], gm: 10m}\n"
                               "  R1: {type: resistor, nodes: [out, gnd], value: 1k}\n";

/* Reference: README circuit-file format (transconductor: nodes [p, n], control
 * [cp, cn], gm in S; SI prefix m = 1e-3, BIPM SI Brochure Table 7). */
static void test_load(void **state)
{
    (void)state;
    ru_circuit *c = load_ok(amp_text);
    const ru_part *p = ru_circuit_part(c, (size_t)ru_circuit_find_part(c, "G1"));
    assert_int_equal(p->type, RU_PART_TRANSCONDUCTOR);
    assert_string_equal(ru_part_type_name(p->type), "transconductor");
    assert_string_equal(ru_circuit_node_name(c, p->node[0]), "out");
    assert_int_equal(p->node[1], 0);
    assert_string_equal(ru_circuit_node_name(c, p->node[2]), "in");
    assert_int_equal(p->node[3], 0);
    RU_ASSERT_REL(p->value, 10e-3, 1e-15);
    assert_int_equal(p->line, 5);
    assert_int_equal(p->col, 3);
    /* the check listing: every terminal by its key, gm with its unit */
    ru_terminal t[RU_PART_NODES];
    assert_int_equal(ru_part_terminals(p, t, RU_PART_NODES), 4);
    assert_string_equal(t[0].key, "nodes");
    assert_string_equal(t[2].key, "control");
    assert_int_equal(t[2].node, p->node[2]);
    char buf[64];
    ru_part_describe(p, buf, sizeof buf);
    assert_string_equal(buf, "10.00 mS");
    /* Reference: circuit.h find_floating_node: a controlled current source does
     * not conduct, but RI and R1 join in and out to ground. */
    int fl;
    assert_int_equal(ru_circuit_find_floating_node(c, &fl), 0);
    ru_circuit_destroy(c);
    /* 10mS with the unit, and a negative gm, are values too */
    c = load_ok("parts:\n  G1: {type: transconductor, nodes: [a, gnd], control: [a, b], "
                "gm: -2.5mS}\n  R1: {type: resistor, nodes: [a, b], value: 1k}\n"
                "  R2: {type: resistor, nodes: [b, gnd], value: 1k}\n");
    RU_ASSERT_REL(ru_circuit_part(c, 0)->value, -2.5e-3, 1e-15);
    ru_circuit_destroy(c);
}

static void test_load_errors(void **state)
{
    (void)state;
    const char *head = "parts:\n";
    char text[512];
#define BAD(body, line, token, want)                                               \
    do {                                                                           \
        snprintf(text, sizeof text, "%s%s", head, body);                           \
        load_bad(text, line, token, want);                                         \
    } while (0)
    BAD("  G1: {type: transconductor, nodes: [o, gnd], control: [i, gnd]}\n", 2, "G1",
        "part G1: missing required key gm");
    BAD("  G1: {type: transconductor, nodes: [o, gnd], gm: 1m}\n", 2, "G1",
        "part G1: missing required key control");
    BAD("  G1: {type: transconductor, control: [i, gnd], gm: 1m}\n", 2, "G1",
        "part G1: missing required key nodes");
    BAD("  G1: {type: transconductor, nodes: [o, gnd], control: i, gm: 1m}\n", 2, "i,",
        "key control needs a list of 2 nodes");
    BAD("  G1: {type: transconductor, nodes: [o, gnd], control: [i], gm: 1m}\n", 2, "[i]",
        "key control needs 2 nodes, got 1");
    BAD("  G1: {type: transconductor, nodes: [o, gnd], control: [i, 'x y'], gm: 1m}\n", 2,
        "'x y'", "key control: 'x y' is not a node name");
    BAD("  G1: {type: transconductor, nodes: [o, gnd], control: [i, gnd], gm: 1mF}\n", 2,
        "1mF", "unit F does not fit, expected S");
    BAD("  G1: {type: transconductor, nodes: [o, gnd], control: [i, gnd], gm: 1m, tol: {gain: 1%}}\n",
        2, "gain", "tol: gain is not a value of the part (values: gm)");
    BAD("  G1: {type: transconductor, nodes: [o, gnd], control: [i, gnd], gm: 1m, gain: 2}\n",
        2, "gain", "key gain does not apply to type transconductor");
    BAD("  G1: {type: transconductor, nodes: [o, gnd], control: [i, gnd], gm: 1m, gmm: 2}\n",
        2, "gmm", "unknown key gmm");
    BAD("  G1: {type: transconductor, nodes: [o, gnd], control: [i, gnd], gm: 1m, model: x}\n",
        2, "model", "key model does not apply to type transconductor");
    BAD("  G1: {type: transconductor, nodes: [o, o], control: [i, gnd], gm: 1m}\n", 2, "G1",
        "part G1: both terminals are on node o");
    BAD("  G1: {type: transconductor, nodes: [o, gnd], control: [i, i], gm: 1m}\n", 2, "G1",
        "part G1: both control terminals are on node i");
    BAD("  G1: {type: transconductr, nodes: [o, gnd], control: [i, gnd], gm: 1m}\n", 2,
        "transconductr", "(did you mean transconductor? ");
    /* control keys belong to this type only */
    BAD("  R1: {type: resistor, nodes: [o, gnd], value: 1k, control: [i, gnd]}\n", 2,
        "control", "key control does not apply to type resistor");
#undef BAD
}

/* PART.KEY: G1.gm in siemens, through the same checks as a file. */
static void test_param(void **state)
{
    (void)state;
    ru_circuit *c = load_ok(amp_text);
    ru_error err;
    const char *unit;
    double v;
    assert_int_equal(ru_circuit_param_unit(c, "G1.gm", &unit, &err), RU_OK);
    assert_string_equal(unit, "S");
    assert_int_equal(ru_circuit_set_param(c, "G1.gm", 4e-3, &err), RU_OK);
    assert_int_equal(ru_circuit_get_param(c, "G1.gm", &v, &err), RU_OK);
    RU_ASSERT_REL(v, 4e-3, 0.0);
    assert_int_equal(ru_circuit_get_param(c, "G1.value", &v, &err), RU_EINPUT);
    assert_non_null(strstr(err.msg, "value is not a value of type transconductor (values: gm)"));
    ru_sweep_spec sp;
    assert_int_equal(ru_sweep_parse(c, "G1.gm=1mS:5m:3", 0, &sp, &err), RU_OK);
    RU_ASSERT_REL(ru_sweep_value(&sp, 1), 3e-3, 1e-15);
    ru_circuit_destroy(c);
}

static ru_system *compile(const ru_circuit *c)
{
    ru_system *s = NULL;
    ru_error err;
    if (ru_system_create(c, &s, &err) != RU_OK)
        fail_msg("system: %s", err.msg);
    return s;
}

/* Reference: central differences of the residual; the residual is linear in the
 * node voltages here except for the diode, so truncation is ~h^2 f''' and rounding
 * ~eps |r| / h: 1e-6 relative of the column's scale. Two transconductors: one
 * controlled across a supply-driven node (its column does not exist), one whose
 * output sits on a driven node (its row does not exist). */
static void test_jacobian(void **state)
{
    (void)state;
    ru_circuit *c = load_ok("parts:\n"
                            "  VS: {type: supply, nodes: [v, gnd], value: 2}\n"
                            "  G1: {type: transconductor, nodes: [a, b], control: [v, c], gm: 3m}\n"
                            "  G2: {type: transconductor, nodes: [v, c], control: [b, a], gm: -7m}\n"
                            "  G3: {type: transconductor, nodes: [gnd, c], control: [a, gnd], gm: 1m}\n"
                            "  R1: {type: resistor, nodes: [a, gnd], value: 1k}\n"
                            "  R2: {type: resistor, nodes: [b, gnd], value: 2k}\n"
                            "  R3: {type: resistor, nodes: [c, v], value: 3k}\n"
                            "  D1: {type: diode, nodes: [b, c]}\n"
                            "  C1: {type: capacitor, nodes: [a, c], value: 1n}\n");
    ru_system *s = compile(c);
    size_t n = ru_system_size(s);
    assert_int_equal(n, 3);
    double x[3] = {0.31, -0.42, 0.55}, r[3], rp[3], rm[3], J[9];
    ru_eval_point ep = {1e-6, 0, 1.0};
    assert_int_equal(ru_system_residual(s, &ep, x, r, J), RU_OK);
    for (size_t j = 0; j < n; j++) {
        double h = 1e-6, keep = x[j];
        x[j] = keep + h;
        assert_int_equal(ru_system_residual(s, &ep, x, rp, NULL), RU_OK);
        x[j] = keep - h;
        assert_int_equal(ru_system_residual(s, &ep, x, rm, NULL), RU_OK);
        x[j] = keep;
        for (size_t i = 0; i < n; i++) {
            double fd = (rp[i] - rm[i]) / (2 * h);
            RU_ASSERT_NEAR(J[i * n + j], fd, 1e-6 * (fabs(fd) + 1e-3));
        }
    }
    /* Reference: KCL at b with the hand-computed terms: G1's current 3m (v(v) -
     * v(c)) flows a -> b (into b), G2 adds nothing at b (its output is v, c), R2
     * draws v(b)/2k, the diode draws is (exp((v(b) - v(c))/vt) - 1) toward c. */
    double vt = 1.380649e-23 * 300.15 / 1.602176634e-19;
    double vb = x[1], vc = x[2];
    double want = 3e-3 * (2.0 - vc) - vb / 2e3 - 1e-14 * (exp((vb - vc) / vt) - 1.0);
    RU_ASSERT_NEAR(r[1], want, 1e-15);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* Reference: Ohm's law and KCL at out (analytic): the current gm v(in) leaves out
 * through the part, so (1/R + j w Cs) v(out) = -gm v(in) with Cs the stray from
 * out to ground: H = -gm R/(1 + j w R Cs). Flipping nodes to [gnd, out] gives
 * +gm R/(1 + j w R Cs). 1e-12 relative: a complex solve of 2 unknowns. */
static void test_response(void **state)
{
    (void)state;
    const double gm = 10e-3, R = 1e3, cs = 1e-12;
    for (int flip = 0; flip < 2; flip++) {
        ru_circuit *c = load_ok(flip ? "stray: 1p\nparts:\n"
                                       "  RI: {type: resistor, nodes: [in, gnd], value: 10k}\n"
                                       "  G1: {type: transconductor, nodes: [gnd, out], control: [in, gnd], gm: 10m}\n"
                                       "  R1: {type: resistor, nodes: [out, gnd], value: 1k}\n"
                                     : amp_text);
        ru_system *s = compile(c);
        double x[2] = {0, 0};
        const double freqs[] = {1e3, 1e6, 159.15494309189535e6};
        for (int k = 0; k < 3; k++) {
            double w = 2 * PI * freqs[k], mag, ph;
            ru_error err;
            assert_int_equal(ru_response_at(s, x, ru_circuit_find_node(c, "in"),
                                            ru_circuit_find_node(c, "out"), freqs[k], &mag,
                                            &ph, &err),
                             RU_OK);
            double wrc = w * R * cs;
            RU_ASSERT_REL(mag, gm * R / sqrt(1 + wrc * wrc), 1e-12);
            double want_ph = (flip ? 0.0 : 180.0) - atan(wrc) * 180.0 / PI;
            RU_ASSERT_NEAR(ph, want_ph, 1e-9);
        }
        ru_system_destroy(s);
        ru_circuit_destroy(c);
    }
}

/* A gyrator: G1 pushes gm1 v(a) into b, G2 pulls gm2 v(b) out of a, each node with
 * a capacitor (plus the stray) and a resistor to ground. Reference: KCL gives
 * (s C1 + G1)(s C2 + G2) + gm1 gm2 = 0 (analytic), so
 * s = -(G1/C1 + G2/C2)/2 +- j sqrt(gm1 gm2/(C1 C2) - ((G1/C1 - G2/C2)/2)^2);
 * without the resistors the known resonance sqrt(gm1 gm2/(C1 C2)). 1e-10 relative
 * of |s|: LAPACK's eigenvalues of a 2x2 to rounding. */
static void test_gyrator_poles(void **state)
{
    (void)state;
    ru_circuit *c = load_ok("stray: 1p\nparts:\n"
                            "  G1: {type: transconductor, nodes: [gnd, b], control: [a, gnd], gm: 1m}\n"
                            "  G2: {type: transconductor, nodes: [a, gnd], control: [b, gnd], gm: 2m}\n"
                            "  C1: {type: capacitor, nodes: [a, gnd], value: 1n}\n"
                            "  C2: {type: capacitor, nodes: [b, gnd], value: 2.2n}\n"
                            "  R1: {type: resistor, nodes: [a, gnd], value: 1M}\n"
                            "  R2: {type: resistor, nodes: [b, gnd], value: 470k}\n");
    ru_system *s = compile(c);
    double x[2] = {0, 0};
    ru_error err;
    assert_int_equal(ru_oppoint_solve(s, x, 0, NULL, &err), RU_OK);
    RU_ASSERT_NEAR(x[0], 0.0, 1e-15); /* no source: the operating point is 0 */
    ru_pole p[2];
    assert_int_equal(ru_poles_compute(s, x, p, &err), RU_OK);
    double c1 = 1e-9 + 1e-12, c2 = 2.2e-9 + 1e-12, g1 = 1e-6, g2 = 1.0 / 470e3;
    double re = -(g1 / c1 + g2 / c2) / 2, d = (g1 / c1 - g2 / c2) / 2;
    double im = sqrt(1e-3 * 2e-3 / (c1 * c2) - d * d), mod = hypot(re, im);
    int k = ru_poles_dominant(p, 2);
    assert_true(k >= 0);
    RU_ASSERT_NEAR(p[k].re_per_s, re, 1e-10 * mod);
    RU_ASSERT_NEAR(p[k].im_rad_per_s, im, 1e-10 * mod);
    RU_ASSERT_NEAR(p[1 - k].im_rad_per_s, -im, 1e-10 * mod);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_load),     cmocka_unit_test(test_load_errors),
        cmocka_unit_test(test_param),    cmocka_unit_test(test_jacobian),
        cmocka_unit_test(test_response), cmocka_unit_test(test_gyrator_poles),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
