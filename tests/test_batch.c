/* test_batch.c: parallel analyses give each item the result a lone run gives, and
 * a failing item does not stop the others. Circuits: van der Pol tanks with our own
 * values; reference for the amplitude: method of averaging, 2 sqrt(a/(3b)). */
#include "ru_test.h"

#include "ringup/batch.h"
#include "ringup/loader.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define NITEMS 6

static ru_circuit *vdp(double a_s, double stop_s)
{
    char text[512];
    snprintf(text, sizeof text,
             "parts:\n"
             "  L1: {type: inductor, nodes: [t, gnd], value: 1mH}\n"
             "  C1: {type: capacitor, nodes: [t, gnd], value: 1u}\n"
             "  G1: {type: poly-conductance, nodes: [t, gnd], coeffs: [0, %.17g, 0, %.17g]}\n"
             "run: {stop: %.17g, kick: {preset: {t: 1m}}, accuracy: draft}\n",
             -a_s, a_s / 3, stop_s);
    ru_circuit *c = NULL;
    ru_error err;
    if (ru_circuit_load_string(text, "batch.yaml", RU_MODELS_DIR, &c, &err) != RU_OK)
        fail_msg("load: %s", err.msg);
    return c;
}

static void test_parallel_equals_serial(void **state)
{
    (void)state;
    ru_batch_item *par = calloc(NITEMS, sizeof *par), *ser = calloc(NITEMS, sizeof *ser);
    ru_circuit *c[NITEMS];
    for (int i = 0; i < NITEMS; i++) {
        /* a from 1 mS to 2 mS: sigma = a/(2C) 500..1000 /s, 30 ms is enough */
        c[i] = vdp(1e-3 * (1.0 + 0.2 * i), 30e-3);
        par[i].circuit = ser[i].circuit = c[i];
        ru_run_request_default(&par[i].request);
        ru_run_request_default(&ser[i].request);
    }
    /* item 3 is made to fail: a run of a million seconds is refused */
    ru_circuit_destroy(c[3]);
    c[3] = vdp(1e-3, 1e6);
    par[3].circuit = ser[3].circuit = c[3];
    assert_int_equal(ru_batch_run(par, NITEMS, 4), RU_OK);
    assert_int_equal(ru_batch_run(ser, NITEMS, 1), RU_OK);
    for (int i = 0; i < NITEMS; i++) {
        if (i == 3) {
            assert_int_equal(par[i].status, RU_EINPUT);
            assert_true(strstr(par[i].error.msg, "cycles") != NULL ||
                        strstr(par[i].error.msg, "samples") != NULL);
            continue;
        }
        assert_int_equal(par[i].status, RU_OK);
        /* Reference: the same computation alone; runs share nothing, so the
         * figures are bit for bit those of the serial run */
        assert_true(par[i].report.meas.settled_amplitude_v ==
                    ser[i].report.meas.settled_amplitude_v);
        assert_true(par[i].report.meas.frequency_hz == ser[i].report.meas.frequency_hz);
        assert_true(par[i].report.solver.steps == ser[i].report.solver.steps);
        /* Reference: method of averaging, 2 sqrt(a/(3b)) = 2 V for b = a/3; eps up
         * to 0.063 gives O(eps^2) corrections below 0.4 %; draft accuracy: 1 % */
        RU_ASSERT_REL(par[i].report.meas.settled_amplitude_v, 2.0, 1e-2);
    }
    for (int i = 0; i < NITEMS; i++)
        ru_circuit_destroy(c[i]);
    free(par);
    free(ser);
}

/* An item with no circuit (a variant the caller could not make) is skipped and
 * keeps the status and error the caller gave it; the others run. */
static void test_skips_unmade(void **state)
{
    (void)state;
    ru_batch_item it[2];
    memset(it, 0, sizeof it);
    ru_circuit *c = vdp(1e-3, 30e-3);
    it[0].circuit = c;
    ru_run_request_default(&it[0].request);
    it[1].status = ru_error_set(&it[1].error, RU_EINPUT, "x.yaml", 3, 4, "no preset zz");
    assert_int_equal(ru_batch_run(it, 2, 2), RU_OK);
    assert_int_equal(it[0].status, RU_OK);
    assert_true(it[0].report.meas.started);
    assert_int_equal(it[1].status, RU_EINPUT);
    assert_string_equal(it[1].error.msg, "no preset zz");
    ru_circuit_destroy(c);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_parallel_equals_serial),
        cmocka_unit_test(test_skips_unmade),
    };
    return cmocka_run_group_tests_name("batch", tests, NULL, NULL);
}
