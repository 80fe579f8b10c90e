/* test_run_paths.c: whole runs (ru_analysis_run) on the integrator the run chooses
 * and on the one asked for (ru_run_request.integrator), with the tolerances the run
 * sets itself (error weights relative to the operating point, atol from the start
 * level, down to 2e-14 of a state's scale): a van der Pol tank loaded by an ideal
 * divider started by its resistors' thermal noise (a DAE: the consistent start by
 * IDACalcIC at those tolerances), the same tank on both integrators with a tiny
 * capacitance in place of the ideal node, a 14-state op-amp ladder (an ODE the run
 * puts on IDA), the refusal of CVODE for a DAE, and the stability-limit detection
 * chosen from the poles. */
#include "ru_test.h"

#include "ringup/analysis.h"
#include "ringup/circuit.h"
#include "ringup/loader.h"
#include "ringup/transient.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static ru_circuit *load(const char *text)
{
    ru_circuit *c = NULL;
    ru_error err;
    if (ru_circuit_load_string(text, "paths.yaml", RU_MODELS_DIR, &c, &err) != RU_OK)
        fail_msg("load: %s:%d:%d: %s", err.file, err.line, err.col, err.msg);
    return c;
}

static void run(const ru_circuit *c, int integrator, int stab, ru_run_report *rep)
{
    ru_run_request rq;
    ru_run_request_default(&rq);
    rq.integrator = integrator;
    rq.stab_limit = stab;
    ru_error err;
    if (ru_analysis_run(c, &rq, rep, &err) != RU_OK)
        fail_msg("run: %s", err.msg);
}

/* G1 = -a v + b v^3 with C and L at t, R1 from t to m, R2 from m to ground; m has
 * capacitance cm (0: an ideal node), the default power-on start with thermal noise. */
static char *vdp_divider(const char *cm)
{
    char *t = malloc(1024);
    snprintf(t, 1024,
             "stray: {default: 0, nodes: {m: %s}}\n"
             "parts:\n"
             "  C1: {type: capacitor, nodes: [t, gnd], value: 1u}\n"
             "  L1: {type: inductor, nodes: [t, gnd], value: 1m}\n"
             "  G1: {type: poly-conductance, nodes: [t, gnd], coeffs: [0, -4m, 0, 1m]}\n"
             "  R1: {type: resistor, nodes: [t, m], value: 1k}\n"
             "  R2: {type: resistor, nodes: [m, gnd], value: 1k}\n"
             "run: {stop: 40m}\n"
             "measure: {probe: t}\n",
             cm);
    return t;
}

/* Reference: the divider loads the tank with 1/(R1 + R2) = 0.5 mS, so a = 3.5 mS and
 * the method of averaging settles at 2 sqrt(a/(3b)); the O(eps^2) correction of the
 * peak at eps = a sqrt(L/C) = 0.11 is about 6e-5 (as test_dae.c derives), 2e-4 allows
 * the envelope measurement and the solver. */
static void test_noise_start_ideal_node(void **state)
{
    (void)state;
    const double want = 2 * sqrt(3.5e-3 / 3e-3);
    char *t = vdp_divider("0");
    ru_circuit *c = load(t);
    ru_run_report rep;
    run(c, RU_INTEGRATOR_AUTO, RU_STAB_AUTO, &rep);
    assert_int_equal(rep.solver.integrator, RU_INTEGRATOR_IDA);
    assert_true(rep.meas.started);
    RU_ASSERT_REL(rep.meas.settled_amplitude_v, want, 2e-4);
    print_message("ideal node, noise start: %.7g V (averaging %.7g V), %s\n",
                  rep.meas.settled_amplitude_v, want, ru_transient_engine_name(&rep.solver));
    ru_error err;
    ru_run_request rq;
    ru_run_request_default(&rq);
    rq.integrator = RU_INTEGRATOR_CVODE; /* CVODE cannot run a DAE: refused, named */
    assert_int_equal(ru_analysis_run(c, &rq, &rep, &err), RU_EINPUT);
    if (!strstr(err.msg, "node m"))
        fail_msg("message '%s' does not name node m", err.msg);
    ru_circuit_destroy(c);
    free(t);
}

/* The same tank with 1 fF at m (an ODE; its pole at -1/(500 ohm * 1 fF) is far off
 * and moves the tank's mode by O(R C_m / (L/R))), on CVODE and on IDA: both settle
 * at averaging's amplitude (reference as above). */
static void test_both_integrators(void **state)
{
    (void)state;
    const double want = 2 * sqrt(3.5e-3 / 3e-3);
    char *t = vdp_divider("1f");
    ru_circuit *c = load(t);
    const int ways[2] = {RU_INTEGRATOR_CVODE, RU_INTEGRATOR_IDA};
    for (int w = 0; w < 2; w++) {
        ru_run_report rep;
        run(c, ways[w], RU_STAB_AUTO, &rep);
        assert_int_equal(rep.solver.integrator, ways[w]);
        assert_true(rep.meas.started);
        print_message("1 fF at m: %.7g V on %s\n", rep.meas.settled_amplitude_v,
                      ru_transient_engine_name(&rep.solver));
        RU_ASSERT_REL(rep.meas.settled_amplitude_v, want, 2e-4);
    }
    ru_circuit_destroy(c);
    free(t);
}

/* Ten RC sections (series 10 nF, shunt 10 kohm) from an op-amp's output back to its
 * inverting input: 14 states, so the run takes IDA; the start is consistent without
 * IDACalcIC (an ODE's rates are exact), which stalled at the run's tolerances.
 * Reference: the same run on CVODE (test_transient.c checks that path against
 * closed forms): the clipped tone's amplitude and frequency agree. */
static void test_ladder_on_ida(void **state)
{
    (void)state;
    char text[4096];
    int len = snprintf(text, sizeof text,
                       "parts:\n"
                       "  A1: {type: amplifier, in: p, inv: m, out: o, model: general-opamp}\n"
                       "  RB: {type: resistor, nodes: [p, gnd], value: 1k}\n"
                       "  RF: {type: resistor, nodes: [o, m], value: 200k}\n"
                       "  RI: {type: resistor, nodes: [s10, m], value: 10k}\n");
    for (int i = 1; i <= 10; i++) {
        char prev[8];
        snprintf(prev, sizeof prev, i == 1 ? "o" : "s%d", i - 1);
        len += snprintf(text + len, sizeof text - (size_t)len,
                        "  C%d: {type: capacitor, nodes: [%s, s%d], value: 10n}\n"
                        "  R%d: {type: resistor, nodes: [s%d, gnd], value: 10k}\n",
                        i, prev, i, i, i);
    }
    snprintf(text + len, sizeof text - (size_t)len,
             "run: {stop: 10m, kick: {preset: {s1: 1m}}}\nmeasure: {probe: o}\n");
    ru_circuit *c = load(text);
    ru_run_report ida, cv;
    run(c, RU_INTEGRATOR_AUTO, RU_STAB_AUTO, &ida);
    run(c, RU_INTEGRATOR_CVODE, RU_STAB_AUTO, &cv);
    assert_int_equal(ida.solver.integrator, RU_INTEGRATOR_IDA);
    assert_int_equal(cv.solver.integrator, RU_INTEGRATOR_CVODE);
    assert_true(ida.meas.started && cv.meas.started);
    print_message("ladder: IDA %.7g V %.7g Hz, CVODE %.7g V %.7g Hz\n",
                  ida.meas.settled_amplitude_v, ida.meas.frequency_hz,
                  cv.meas.settled_amplitude_v, cv.meas.frequency_hz);
    RU_ASSERT_REL(ida.meas.settled_amplitude_v, cv.meas.settled_amplitude_v, 1e-3);
    RU_ASSERT_REL(ida.meas.frequency_hz, cv.meas.frequency_hz, 1e-4);
    ru_circuit_destroy(c);
}

/* Stability-limit detection from the poles: off for a lone tank (its only pair is
 * the tone), on when a stiff lightly damped pair sits far above it: a second tank
 * of 1 uH and 100 pF (15.9 MHz, Q = 100 with 1 ohm) hung on the first through 10
 * kohm. Reference for the rule: BDF5's stability angle 51.84 degrees (Hairer and
 * Wanner, from memory; predict.c). Asked on or off, the run does so. */
static void test_stability_limit_choice(void **state)
{
    (void)state;
    const char *base = "parts:\n"
                       "  C1: {type: capacitor, nodes: [t, gnd], value: 100n}\n"
                       "  L1: {type: inductor, nodes: [t, gnd], value: 10m}\n"
                       "  G1: {type: poly-conductance, nodes: [t, gnd], "
                       "coeffs: [0, -0.5m, 0, 0.1667m]}\n";
    char text[2048];
    snprintf(text, sizeof text, "%srun: {stop: 2m, kick: {preset: {t: 1m}}}\n", base);
    ru_circuit *c = load(text);
    ru_run_report rep;
    run(c, RU_INTEGRATOR_AUTO, RU_STAB_AUTO, &rep);
    assert_int_equal(rep.pred.stiff_oscillatory, 0);
    assert_int_equal(rep.solver.stab_lim_det, 0);
    run(c, RU_INTEGRATOR_AUTO, RU_STAB_ON, &rep);
    assert_int_equal(rep.solver.stab_lim_det, 1);
    ru_circuit_destroy(c);
    snprintf(text, sizeof text,
             "%s  R2: {type: resistor, nodes: [t, u], value: 10k}\n"
             "  C2: {type: capacitor, nodes: [u, gnd], value: 100p}\n"
             "  L2: {type: inductor, nodes: [u, gnd], value: 1u, series: 1}\n"
             "run: {stop: 2m, kick: {preset: {t: 1m}}}\n",
             base);
    c = load(text);
    run(c, RU_INTEGRATOR_CVODE, RU_STAB_AUTO, &rep);
    assert_int_equal(rep.pred.stiff_oscillatory, 1);
    assert_int_equal(rep.solver.stab_lim_det, 1);
    run(c, RU_INTEGRATOR_CVODE, RU_STAB_OFF, &rep);
    assert_int_equal(rep.solver.stab_lim_det, 0);
    ru_circuit_destroy(c);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_noise_start_ideal_node),
        cmocka_unit_test(test_both_integrators),
        cmocka_unit_test(test_ladder_on_ida),
        cmocka_unit_test(test_stability_limit_choice),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
