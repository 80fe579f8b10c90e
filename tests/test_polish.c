/* test_polish.c: a run's settled figures polished by the periodic steady state
 * (ru_run_request.polish): shooting Newton from the run's last state after a
 * settled self-sustained tone, against closed forms of the van der Pol oscillator;
 * no polishing when the run did not settle into a tone of its own. Circuits are our
 * own values. */
#include "ru_test.h"

#include "ringup/analysis.h"
#include "ringup/loader.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define PI 3.14159265358979323846

static ru_circuit *load(const char *text)
{
    ru_circuit *c = NULL;
    ru_error err;
    if (ru_circuit_load_string(text, "test.yaml", RU_MODELS_DIR, &c, &err) != RU_OK)
        fail_msg("load: %s", err.msg);
    return c;
}

static ru_run_report *run(const ru_circuit *c, int polish)
{
    ru_run_request rq;
    ru_run_request_default(&rq);
    rq.polish = polish;
    ru_run_report *r = calloc(1, sizeof *r);
    ru_error err;
    ru_error_clear(&err);
    assert_non_null(r);
    if (ru_analysis_run(c, &rq, r, &err) != RU_OK)
        fail_msg("run: %s", err.msg);
    return r;
}

/* van der Pol in Rayleigh's form, L = C = 1 and i = -eps v + (eps/3) v^3 (as in
 * tests/test_steady.c), started by a 10 mV kick. */
static void test_polish_vdp(void **state)
{
    (void)state;
    double eps = 0.05;
    char text[512];
    snprintf(text, sizeof text,
             "parts:\n"
             "  L1: {type: inductor, nodes: [v, gnd], value: 1}\n"
             "  C1: {type: capacitor, nodes: [v, gnd], value: 1}\n"
             "  G1: {type: poly-conductance, nodes: [v, gnd], coeffs: [0, %.17g, 0, %.17g]}\n"
             "run: {kick: {preset: {v: 10m}}}\n"
             "measure: {probe: v}\n",
             -eps, eps / 3.0);
    ru_circuit *c = load(text);
    ru_run_report *r = run(c, 1);
    assert_int_equal(r->verdict, RU_VERDICT_STARTED);
    assert_true(r->meas.settled);
    const ru_polish *p = &r->polish;
    assert_true(p->tried);
    assert_true(p->have);
    /* Reference: the Lindstedt-Poincare series, w = 1 - eps^2/16 + 17 eps^4/3072
     * (from memory, checked against scipy by tests/ref_steady.py's run; truncation
     * ~6e-13 at eps = 0.05): the polished period holds steady's 1e-9, which the
     * measured one (a window of the transient) does not need to */
    double w = 1 - eps * eps / 16 + 17 * pow(eps, 4) / 3072;
    RU_ASSERT_REL(p->period_s, 2 * PI / w, 1e-9);
    RU_ASSERT_REL(p->frequency_hz, w / (2 * PI), 1e-9);
    /* Reference: averaging, A = 2 + O(eps^2) (the O(eps^2) shift is ~1e-5 at eps =
     * 0.1, from test_steady.c's measurement); the measured amplitude agrees with
     * the polished one to the run's window error (0.1 % is the measurement's own
     * promise on a settled tone, common practice for a windowed estimate) */
    RU_ASSERT_NEAR(p->amplitude_v, 2.0, eps * eps);
    RU_ASSERT_REL(r->meas.settled_amplitude_v, p->amplitude_v, 1e-3);
    /* Reference: the third harmonic eps/8 of the fundamental to first order
     * (Lindstedt, from memory), within 0.2 dB at eps = 0.05 */
    RU_ASSERT_NEAR(p->harmonics_dbc[1], 20 * log10(eps / 8), 0.2);
    /* Reference: averaging's recovery time 1/eps to O(eps^2) relative (test_steady.c) */
    RU_ASSERT_REL(p->recovery_time_s, 1.0 / eps, 0.5 * eps * eps + 1e-3 * eps);
    assert_true(p->newton_iterations >= 1);
    /* without the request: nothing sought, the run's figures as they were */
    ru_run_report *r0 = run(c, 0);
    assert_false(r0->polish.tried);
    assert_false(r0->polish.have);
    RU_ASSERT_REL(r0->meas.settled_amplitude_v, r->meas.settled_amplitude_v, 1e-12);
    free(r0);
    free(r);
    ru_circuit_destroy(c);
}

/* A parallel RLC with no active part decays (Reference: sigma = -1/(2RC) < 0), and
 * a driven RC follows its source: neither is a self-sustained settled tone, so
 * neither is polished. */
static void test_no_polish(void **state)
{
    (void)state;
    const char *files[] = {
        "parts:\n"
        "  L1: {type: inductor, nodes: [v, gnd], value: 1m}\n"
        "  C1: {type: capacitor, nodes: [v, gnd], value: 1u}\n"
        "  R1: {type: resistor, nodes: [v, gnd], value: 100}\n"
        "run: {kick: {preset: {v: 1}}, stop: 10m}\n"
        "measure: {probe: v}\n",
        "parts:\n"
        "  V1: {type: supply, nodes: [s, gnd], wave: sine, amplitude: 1, freq: 1k}\n"
        "  R1: {type: resistor, nodes: [s, v], value: 1k}\n"
        "  C1: {type: capacitor, nodes: [v, gnd], value: 100n}\n"
        "run: {stop: 20m}\n"
        "measure: {probe: v}\n"};
    for (size_t i = 0; i < 2; i++) {
        ru_circuit *c = load(files[i]);
        ru_run_report *r = run(c, 1);
        assert_int_not_equal(r->verdict, RU_VERDICT_STARTED);
        assert_false(r->polish.tried);
        assert_false(r->polish.have);
        free(r);
        ru_circuit_destroy(c);
    }
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_polish_vdp),
        cmocka_unit_test(test_no_polish),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
