/* test_montecarlo.c: Monte Carlo draws and runs.
 *
 * References: the moments of the uniform distribution (variance tol^2/3, E d^4 =
 * tol^4/5) and of the standard normal truncated at +-3 (variance 0.9733369,
 * fourth moment 2.6800431, P(|z| > 2) = 0.0429163; computed with Debian's
 * python3-scipy: scipy.stats.truncnorm(-3, 3).var(), .moment(4), 2*.sf(2));
 * numpy.percentile's default (linear) and numpy.std(ddof=1) for the statistics;
 * the method of averaging for each unit's van der Pol amplitude; the Wien-bridge
 * start condition 1 + RF/RG > 1 + RS/RP + CP/CS (the bridge's gain at zero phase,
 * hand analysis) for the units that must or must not start. Circuits are our own. */
#include "ru_test.h"

#include "ringup/loader.h"
#include "ringup/montecarlo.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define NDRAW 20000

static ru_circuit *load_text(const char *text)
{
    ru_circuit *c = NULL;
    ru_error err;
    ru_error_clear(&err);
    if (ru_circuit_load_string(text, "mc.yaml", RU_MODELS_DIR, &c, &err) != RU_OK)
        fail_msg("load: %s", err.msg);
    return c;
}

/* Moments of NDRAW draws of part 3 (and part 4, for the correlation). The
 * statistical tolerances are 4 standard errors of each estimator (a false alarm
 * about 1 in 16000 per check; the draws are fixed by the seed anyway). */
static void check_moments(ru_mc_dist dist, double tol, double var_want, double m4_want,
                          double p_beyond, double beyond)
{
    double s1 = 0, s2 = 0, s12 = 0, m = 0;
    size_t nbeyond = 0;
    for (uint64_t i = 1; i <= NDRAW; i++) {
        double d = ru_mc_deviation(7, i, 3, dist, tol), e = ru_mc_deviation(7, i, 4, dist, tol);
        assert_true(fabs(d) <= tol);
        s1 += d;
        s2 += d * d;
        s12 += d * e;
        nbeyond += fabs(d) > beyond;
        m = fmax(m, fabs(d));
    }
    double n = NDRAW, mean = s1 / n, var = s2 / n - mean * mean;
    RU_ASSERT_NEAR(mean, 0.0, 4.0 * sqrt(var_want / n));
    RU_ASSERT_NEAR(var, var_want, 4.0 * sqrt((m4_want - var_want * var_want) / n));
    RU_ASSERT_NEAR(s12 / n, 0.0, 4.0 * var_want / sqrt(n)); /* parts independent */
    RU_ASSERT_NEAR(nbeyond / n, p_beyond, 4.0 * sqrt(p_beyond * (1 - p_beyond) / n));
    assert_true(m > 0.95 * tol); /* the band is used to its ends */
    print_message("%s: mean %.3g, var %.6g (want %.6g), beyond %.4f (want %.4f)\n",
                  dist == RU_MC_NORMAL ? "normal" : "uniform", mean, var, var_want,
                  nbeyond / n, p_beyond);
}

static void test_deviation_moments(void **state)
{
    (void)state;
    const double tol = 0.05, s = tol / 3;
    /* uniform on [-tol, tol]: var tol^2/3, E d^4 tol^4/5, P(|d| > 2 tol/3) = 1/3 */
    check_moments(RU_MC_UNIFORM, tol, tol * tol / 3, pow(tol, 4) / 5, 1.0 / 3, 2 * tol / 3);
    /* normal, sigma tol/3, truncated at 3 sigma (scipy values in the head comment) */
    check_moments(RU_MC_NORMAL, tol, 0.9733369246625415 * s * s,
                  2.6800430959504977 * pow(s, 4), 0.04291633318046844, 2 * s);
    assert_true(ru_mc_deviation(7, 1, 3, RU_MC_UNIFORM, 0) == 0);
}

static const char *const vdp_text =
    "parts:\n"
    "  L1: {type: inductor, nodes: [t, gnd], value: 1mH, tol: 5%}\n"
    "  C1: {type: capacitor, nodes: [t, gnd], value: 1u, tol: 2%}\n"
    "  RP: {type: resistor, nodes: [t, gnd], value: 2k, tol: 10%}\n"
    "  G1: {type: poly-conductance, nodes: [t, gnd], coeffs: [0, -2m, 0, 0.5m]}\n"
    "run: {stop: 40m, kick: {preset: {t: 1m}}, accuracy: draft}\n"
    "measure: {probe: t}\n";

/* Drawn values: within tolerance, value*(1 + d) with d of (seed, sample, part
 * index), sample 0 nominal, the same for the same seed, different for another. */
static void test_sample_circuits(void **state)
{
    (void)state;
    ru_circuit *c = load_text(vdp_text);
    ru_error err;
    for (size_t smp = 0; smp < 50; smp++) {
        ru_circuit *a = NULL, *b = NULL, *o = NULL;
        assert_int_equal(ru_mc_sample_circuit(c, 11, smp, RU_MC_NORMAL, &a, &err), RU_OK);
        assert_int_equal(ru_mc_sample_circuit(c, 11, smp, RU_MC_NORMAL, &b, &err), RU_OK);
        assert_int_equal(ru_mc_sample_circuit(c, 12, smp, RU_MC_NORMAL, &o, &err), RU_OK);
        for (size_t i = 0; i < ru_circuit_part_count(c); i++) {
            const ru_part *n = ru_circuit_part(c, i), *pa = ru_circuit_part(a, i);
            double d = smp ? ru_mc_deviation(11, smp, i, RU_MC_NORMAL, n->tol) : 0.0;
            assert_true(pa->value == n->value * (1.0 + d));
            if (n->tol > 0) /* G1 (no tol, no value) is left as it is */
                assert_true(fabs(pa->value / n->value - 1.0) <= n->tol * (1 + 1e-12));
            assert_true(ru_circuit_part(b, i)->value == pa->value);
            if (smp > 0 && n->tol > 0)
                assert_true(ru_circuit_part(o, i)->value != pa->value);
            assert_true(pa->tol == n->tol && pa->series_ohm == n->series_ohm);
        }
        ru_circuit_destroy(a);
        ru_circuit_destroy(b);
        ru_circuit_destroy(o);
    }
    ru_circuit_destroy(c);
}

/* Reference: numpy on 1..20 with a NAN among them (skipped): mean 10.5,
 * std(ddof=1) 5.916079783099616, percentile 5 -> 1.95, 95 -> 19.05. */
static void test_stats(void **state)
{
    (void)state;
    double x[21];
    for (int i = 0; i < 20; i++)
        x[i] = 20 - i;
    x[20] = NAN;
    ru_mc_stats s;
    ru_mc_stats_of(x, 21, &s);
    assert_int_equal(s.n, 20);
    RU_ASSERT_NEAR(s.mean, 10.5, 1e-12);
    RU_ASSERT_NEAR(s.std, 5.916079783099616, 1e-12);
    RU_ASSERT_NEAR(s.p05, 1.95, 1e-12);
    RU_ASSERT_NEAR(s.p95, 19.05, 1e-12);
    RU_ASSERT_NEAR(s.min, 1, 0);
    RU_ASSERT_NEAR(s.max, 20, 0);
}

static ru_mc_result *run_mc(const ru_circuit *c, size_t n, int threads, double stop_s,
                            int accuracy)
{
    ru_mc_opts o;
    ru_mc_opts_default(&o);
    o.samples = n;
    o.seed = 5;
    o.threads = threads;
    o.request.stop_s = stop_s;
    o.request.accuracy = accuracy;
    ru_mc_result *r = NULL;
    ru_error err;
    ru_error_clear(&err);
    if (ru_mc_run(c, &o, &r, &err) != RU_OK)
        fail_msg("montecarlo: %s", err.msg);
    return r;
}

/* One thread or four: every unit's figures and values identical (bit for bit);
 * each unit's amplitude follows the method of averaging for its own drawn RP:
 * 2 sqrt(a/(3b)), a = 2 mS - 1/RP, b = 0.5 mA/V^3 (tolerance 0.3 %: O(eps^2),
 * eps = a sqrt(L/C) < 0.07, at draft accuracy). */
static void test_threads_and_averaging(void **state)
{
    (void)state;
    ru_circuit *c = load_text(vdp_text);
    ru_mc_result *r1 = run_mc(c, 10, 1, 0, -1), *r4 = run_mc(c, 10, 4, 0, -1);
    assert_int_equal(ru_mc_tol_count(r1), 3); /* L1, C1, RP; G1 has no tol */
    assert_string_equal(ru_mc_tol_name(r1, 2), "RP");
    assert_int_equal(ru_mc_started_count(r1), 10);
    for (size_t i = 0; i < 10; i++) {
        const ru_mc_unit *a = ru_mc_get_unit(r1, i), *b = ru_mc_get_unit(r4, i);
        assert_memory_equal(a, b, sizeof *a);
        for (size_t k = 0; k < 3; k++)
            assert_true(ru_mc_value(r1, i, k) == ru_mc_value(r4, i, k));
        double rp = ru_mc_value(r1, i, 2), aa = 2e-3 - 1.0 / rp;
        RU_ASSERT_REL(a->fig[RU_MC_AMPLITUDE], 2.0 * sqrt(aa / (3 * 0.5e-3)), 3e-3);
    }
    RU_ASSERT_REL(ru_mc_value(r1, 0, 2), 2e3, 0); /* unit 0 nominal */
    for (int f = 0; f < RU_MC_NFIG; f++)
        assert_memory_equal(ru_mc_get_stats(r1, f), ru_mc_get_stats(r4, f), sizeof(ru_mc_stats));
    size_t idx[3];
    assert_int_equal(ru_mc_latest(r1, idx, 3), 3);
    for (size_t i = 0; i < 10; i++) /* nothing outside the three starts later */
        if (i != idx[0] && i != idx[1] && i != idx[2])
            assert_true(ru_mc_get_unit(r1, i)->fig[RU_MC_STARTUP] <=
                        ru_mc_get_unit(r1, idx[2])->fig[RU_MC_STARTUP]);
    ru_mc_result_destroy(r1);
    ru_mc_result_destroy(r4);
    ru_circuit_destroy(c);
}

/* A Wien bridge on an op-amp with a 2 % gain margin (1 + 20.6k/10k = 3.06 against
 * 3), capacitors of 10 %: some units cannot start. Each unit is checked against
 * the hand start condition K = 1 + RF/RG > Kreq = 1 + RS/RP + CP/CS: clearly
 * below (by 0.005, far beyond the op-amp's finite-gain and bandwidth effects of
 * about 1e-4 here) it must not start and its poles must decay; clearly above (by
 * 0.03: growth >= about 100 /s, so 1 mV reaches the rails within 100 ms) it must. */
static void test_wien_small_margin(void **state)
{
    (void)state;
    ru_circuit *c = load_text(
        "parts:\n"
        "  A1: {type: amplifier, in: p, inv: n, out: o, model: general-opamp}\n"
        "  RS: {type: resistor, nodes: [o, s], value: 15k, tol: 1%}\n"
        "  CS: {type: capacitor, nodes: [s, p], value: 10n, tol: 10%}\n"
        "  RP: {type: resistor, nodes: [p, gnd], value: 15k, tol: 1%}\n"
        "  CP: {type: capacitor, nodes: [p, gnd], value: 10n, tol: 10%}\n"
        "  RF: {type: resistor, nodes: [o, n], value: 20.6k, tol: 1%}\n"
        "  RG: {type: resistor, nodes: [n, gnd], value: 10k, tol: 1%}\n"
        "run: {stop: 150m, kick: {preset: {p: 1m}}}\n"
        "measure: {probe: o}\n");
    enum { N = 24 };
    ru_mc_result *r = run_mc(c, N, 2, 0, RU_ACCURACY_NORMAL);
    size_t below = 0, above = 0;
    for (size_t i = 0; i < N; i++) {
        const ru_mc_unit *u = ru_mc_get_unit(r, i);
        double v[6]; /* RS CS RP CP RF RG */
        for (size_t k = 0; k < 6; k++)
            v[k] = ru_mc_value(r, i, k);
        double margin = (1 + v[4] / v[5]) - (1 + v[0] / v[2] + v[3] / v[1]);
        assert_int_equal(u->status, RU_OK);
        if (margin < -0.005) {
            below++;
            assert_false(u->started);
            assert_true(u->predicted_growth_per_s < 0);
        } else if (margin > 0.03) {
            above++;
            assert_true(u->started);
            assert_true(u->predicted_growth_per_s > 0);
        }
    }
    print_message("wien: %zu of %d started; %zu clearly below the start condition, %zu "
                  "clearly above\n",
                  ru_mc_started_count(r), N, below, above);
    assert_true(ru_mc_get_unit(r, 0)->started); /* nominal: 2 % margin */
    assert_true(below > 0 && above > 0);        /* both kinds present in this draw */
    assert_true(ru_mc_started_count(r) < N);
    ru_mc_result_destroy(r);
    ru_circuit_destroy(c);
}

/* Refusals: too many samples, no tolerance anywhere. */
static void test_refusals(void **state)
{
    (void)state;
    ru_circuit *c = load_text(vdp_text);
    ru_mc_opts o;
    ru_mc_opts_default(&o);
    o.samples = RU_MC_MAX_SAMPLES + 1;
    ru_mc_result *r = NULL;
    ru_error err;
    assert_int_equal(ru_mc_run(c, &o, &r, &err), RU_ERANGE);
    assert_null(r);
    assert_non_null(strstr(err.msg, "10000"));
    ru_circuit_destroy(c);
    c = load_text("parts:\n  L1: {type: inductor, nodes: [t, gnd], value: 1mH}\n"
                  "  C1: {type: capacitor, nodes: [t, gnd], value: 1u}\n");
    o.samples = 3;
    assert_int_equal(ru_mc_run(c, &o, &r, &err), RU_EINPUT);
    assert_non_null(strstr(err.msg, "no part has a tolerance"));
    ru_circuit_destroy(c);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_deviation_moments), cmocka_unit_test(test_sample_circuits),
        cmocka_unit_test(test_stats),             cmocka_unit_test(test_threads_and_averaging),
        cmocka_unit_test(test_wien_small_margin), cmocka_unit_test(test_refusals),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
