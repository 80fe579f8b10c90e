/* test_law_bjt.c: the bipolar laws' device keys (src/parts/law_diffpair.c,
 * law_exp.c). The long-tailed pair with both collector currents (out and out2)
 * against two Shockley junctions sharing a tail current, solved here by
 * bisection; its derivatives against central differences; a cross-coupled pair
 * of LC tanks: the system Jacobian and loop split, and the loop gain at the
 * tanks' resonance against the hand analysis (KCL at the two collectors); the
 * loader's messages with FILE:LINE:COL. */
#include "ru_test.h"

#include "parts/laws.h"
#include "ringup/loader.h"
#include "ringup/smallsig.h"
#include "ringup/system.h"

#include <stdio.h>
#include <string.h>

#define NAME "bjt.yaml"

static ru_amp pair(void)
{
    ru_amp a;
    ru_amp_defaults(&a, RU_LAW_DIFF_PAIR_TANH);
    a.itail_a = 1.5e-3;
    a.n = 1.05;
    a.temp_c = 45.0;
    return a;
}

/* The collector currents of two matched junctions, ic = is e^((vb - ve)/(n vt))
 * each (Shockley's law in forward activity, alpha = 1; Ebers & Moll 1954 with
 * the reverse terms negligible), whose sum is the tail current: the emitter
 * voltage ve by bisection on the sum, then each current. */
static void shockley_pair(double itail, double nvt, double vb1, double vb2, double *ic1,
                          double *ic2)
{
    const double is = 1e-15;
    double lo = -5.0, hi = 5.0;
    for (int k = 0; k < 200; k++) {
        double ve = 0.5 * (lo + hi);
        double sum = is * exp((vb1 - ve) / nvt) + is * exp((vb2 - ve) / nvt);
        if (sum > itail)
            lo = ve;
        else
            hi = ve;
    }
    double ve = 0.5 * (lo + hi);
    *ic1 = is * exp((vb1 - ve) / nvt);
    *ic2 = is * exp((vb2 - ve) / nvt);
}

static void eval2(const ru_amp *a, double vc, double vo, double vo2, ru_law_eval *e)
{
    ru_law_at at = {vc, vo, vo2, 0.0, 0.0, 1};
    ru_law_eval_at(a, &at, e);
}

static void test_two_collectors(void **state)
{
    (void)state;
    ru_amp a = pair();
    double nvt = a.n * ru_law_thermal_voltage(a.temp_c);
    const double vds[] = {-0.4, -0.06, -0.01, 0.0, 0.003, 0.05, 0.2};
    for (int k = 0; k < 7; k++) {
        ru_law_eval e;
        eval2(&a, vds[k], 2.0, 3.0, &e);
        double ic1, ic2;
        shockley_pair(a.itail_a, nvt, 0.7 + vds[k], 0.7, &ic1, &ic2);
        /* Reference: the Shockley pair above; both outputs sink their collector's
         * current. 1e-12 of itail: the bisection stops at 1e-15 V of ve (2e-13
         * relative) and exp's rounding. */
        RU_ASSERT_NEAR(-e.i_out, ic1, 1e-12 * a.itail_a);
        RU_ASSERT_NEAR(-e.i_out2, ic2, 1e-12 * a.itail_a);
        /* the single-output form is their difference (an ideal mirror load) */
        ru_law_eval d;
        ru_law_eval_amp(&a, vds[k], 2.0, &d);
        RU_ASSERT_NEAR(d.i_out, ic1 - ic2, 1e-12 * a.itail_a);
    }
    /* Reference: each collector's transconductance at balance is itail/(4 n vt),
     * half the differential one (the pair's small-signal model, Gray, Hurst,
     * Lewis & Meyer, ch. 3; from memory). Exact to rounding. */
    ru_law_eval e;
    eval2(&a, 0.0, 1.0, 1.0, &e);
    RU_ASSERT_REL(e.di_out_dvc, -a.itail_a / (4 * nvt), 1e-14);
    RU_ASSERT_REL(e.di_out2_dvc, a.itail_a / (4 * nvt), 1e-14);
    /* the output resistance on each collector, to ref (Ohm's law) */
    ru_amp b = pair();
    a.rout_ohm = 20e3;
    ru_law_eval r;
    eval2(&a, 0.01, 4.0, 6.0, &r);
    eval2(&b, 0.01, 4.0, 6.0, &e);
    RU_ASSERT_REL(r.i_out - e.i_out, -4.0 / 20e3, 1e-12);
    RU_ASSERT_REL(r.i_out2 - e.i_out2, -6.0 / 20e3, 1e-12);
    /* central differences of every derivative, h = 1 uV on the scale 2 n vt =
     * 58 mV: truncation ~ (h/2nvt)^2 ~ 3e-10 relative, rounding 4 eps itail/h */
    const double vcs[] = {-0.2, -0.03, 0.0, 0.01, 0.15};
    for (int k = 0; k < 5; k++) {
        ru_law_at at = {vcs[k], 3.0, 2.5, 0.0, 0.0, 1};
        double h = 1e-6, *port[3] = {&at.vc, &at.vo, &at.vo2};
        ru_law_eval c, p, m;
        ru_law_eval_at(&a, &at, &c);
        const double an_out[3] = {c.di_out_dvc, c.di_out_dvo, 0.0};
        const double an_out2[3] = {c.di_out2_dvc, 0.0, c.di_out2_dvo2};
        for (int w = 0; w < 3; w++) {
            double keep = *port[w];
            *port[w] = keep + h;
            ru_law_eval_at(&a, &at, &p);
            *port[w] = keep - h;
            ru_law_eval_at(&a, &at, &m);
            *port[w] = keep;
            double tol = 1e-6 * a.itail_a / (2 * nvt) + 8.9e-16 * a.itail_a / h;
            RU_ASSERT_NEAR(an_out[w], (p.i_out - m.i_out) / (2 * h), tol);
            RU_ASSERT_NEAR(an_out2[w], (p.i_out2 - m.i_out2) / (2 * h), tol);
        }
        RU_ASSERT_NEAR(c.i_in, 0.0, 0.0); /* the bases draw nothing */
    }
}

static ru_circuit *load_ok(const char *text)
{
    ru_circuit *c = NULL;
    ru_error err;
    if (ru_circuit_load_string(text, NAME, RU_MODELS_DIR, &c, &err) != RU_OK)
        fail_msg("load: %s:%d:%d: %s", err.file, err.line, err.col, err.msg);
    return c;
}

static ru_system *compile(const ru_circuit *c)
{
    ru_system *s = NULL;
    ru_error err;
    if (ru_system_create(c, &s, &err) != RU_OK)
        fail_msg("system: %s", err.msg);
    return s;
}

/* A cross-coupled pair (our own values): each collector a parallel tank L, C,
 * Rp to the supply; the in side's base on c2, its collector c1. */
static const char *cross_pair = "stray: 1p\nparts:\n"
                                "  VCC: {type: supply, nodes: [vcc, gnd], value: 5V}\n"
                                "  L1: {type: inductor, nodes: [vcc, c1], value: 1u}\n"
                                "  C1: {type: capacitor, nodes: [c1, vcc], value: 250p}\n"
                                "  R1: {type: resistor, nodes: [c1, vcc], value: 2k}\n"
                                "  L2: {type: inductor, nodes: [vcc, c2], value: 1u}\n"
                                "  C2: {type: capacitor, nodes: [c2, vcc], value: 250p}\n"
                                "  R2: {type: resistor, nodes: [c2, vcc], value: 2k}\n"
                                "  Q: {type: amplifier, law: diff-pair-tanh, in: c2, inv: c1,"
                                " out: c1, out2: c2, itail: 1m, rout: 100k}\n";

static void test_cross_coupled(void **state)
{
    (void)state;
    ru_circuit *c = load_ok(cross_pair);
    ru_system *s = compile(c);
    size_t n = ru_system_size(s);
    assert_int_equal(n, 4); /* c1, c2, two inductor currents */
    double x[4] = {0};
    ru_error err;
    assert_int_equal(ru_oppoint_solve(s, x, 0, NULL, &err), RU_OK);
    /* balance: each collector sinks itail/2 through its inductor (DC: the tanks'
     * inductors short c1 and c2 to vcc, less the rout current) */
    int k1 = ru_system_node_state(s, ru_circuit_find_node(c, "c1"));
    int k2 = ru_system_node_state(s, ru_circuit_find_node(c, "c2"));
    RU_ASSERT_NEAR(x[k1], 5.0, 1e-9);
    RU_ASSERT_NEAR(x[k2], 5.0, 1e-9);
    /* Reference: central differences of the residual, h = 10 uV (as
     * test_system.c), and the loop split dr/dx = A0 + b g^T exactly (its
     * definition, ringup/system.h), away from balance */
    const double xs[2][4] = {{4.9, 5.05, 1e-4, -2e-4}, {5.3, 4.6, 0.0, 3e-4}};
    for (int t = 0; t < 2; t++) {
        double y[4], r[4], rp[4], rm[4], J[16], A0[16], b[4], g[4];
        memcpy(y, xs[t], sizeof y);
        ru_eval_point ep = {0.0, 1, 1.0};
        assert_int_equal(ru_system_residual(s, &ep, y, r, J), RU_OK);
        for (size_t j = 0; j < n; j++) {
            double h = 1e-5, keep = y[j];
            y[j] = keep + h;
            assert_int_equal(ru_system_residual(s, &ep, y, rp, NULL), RU_OK);
            y[j] = keep - h;
            assert_int_equal(ru_system_residual(s, &ep, y, rm, NULL), RU_OK);
            y[j] = keep;
            for (size_t i = 0; i < n; i++) {
                double fd = (rp[i] - rm[i]) / (2 * h);
                /* truncation (h/2nvt)^2 ~ 1e-7 of the pair's gm (19 mS), rounding
                 * 4 eps of 5 V / 2 kohm over h */
                RU_ASSERT_NEAR(J[i * n + j], fd, 1e-6 * fabs(fd) + 1e-7 * 0.02 + 1e-11 / h);
            }
        }
        assert_int_equal(ru_system_loop_split(s, ru_circuit_find_part(c, "Q"), y, A0, b, g,
                                              &err),
                         RU_OK);
        assert_true(fabs(b[k1]) > 0 && fabs(b[k2]) > 0); /* both collectors */
        for (size_t i = 0; i < n * n; i++)
            RU_ASSERT_NEAR(A0[i] + b[i / n] * g[i % n], J[i], 1e-15);
    }
    /* Reference: hand analysis (KCL at each collector): with vc = v(c2) - v(c1)
     * broken, out takes -gm1 vc and out2 +gm1 vc, gm1 = itail/(4 n vt); at the
     * tanks' resonance each collector sees Rp || rout, so the returned v(c2) -
     * v(c1) is 2 gm1 (Rp || rout) vc: L = itail (Rp || rout)/(2 n vt), real.
     * Resonance: 1/(2 pi sqrt(L (C + stray))), the stray 1 pF on each node. */
    double vt = ru_law_thermal_voltage(27.0), rp = 1.0 / (1.0 / 2e3 + 1.0 / 100e3);
    double f0 = 1.0 / (2 * RU_PI_LAW * sqrt(1e-6 * 251e-12)), re, im;
    assert_int_equal(ru_loopgain_at(s, ru_circuit_find_part(c, "Q"), x, f0, &re, &im, &err),
                     RU_OK);
    RU_ASSERT_REL(re, 1e-3 * rp / (2 * vt), 1e-9);
    RU_ASSERT_NEAR(im, 0.0, 1e-9 * re);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
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

static void load_bad(const char *body, const char *token, const char *want)
{
    char text[512];
    snprintf(text, sizeof text,
             "parts:\n  VCC: {type: supply, nodes: [vcc, gnd], value: 5V}\n%s", body);
    ru_circuit *c = NULL;
    ru_error err;
    assert_int_equal(ru_circuit_load_string(text, NAME, RU_MODELS_DIR, &c, &err), RU_EINPUT);
    assert_null(c);
    assert_string_equal(err.file, NAME);
    assert_int_equal(err.line, 3);
    assert_int_equal(err.col, col_of(text, 3, token));
    if (!strstr(err.msg, want))
        fail_msg("message '%s' lacks '%s'", err.msg, want);
}

/* Reference: README's amplifier keys and messages. */
static void test_loader_errors(void **state)
{
    (void)state;
    load_bad("  Q: {type: amplifier, law: diff-pair-tanh, in: a, inv: b, out: c, out2: d,"
             " sign: -1}\n",
             "Q:", "part Q: sign does not apply with out2 (swap out and out2 instead) (got -1)");
    load_bad("  Q: {type: amplifier, law: exp-stage, in: a, out: c, out2: d}\n", "Q:",
             "part Q: key out2 does not apply to law exp-stage");
    load_bad("  Q: {type: amplifier, law: diff-pair-tanh, in: a, inv: b, out: c, out2: c}\n",
             "Q:", "part Q: out2 must differ from out and ref");
    /* out2 optional: the one-output form still loads, and out2 is listed */
    ru_circuit *c = load_ok(cross_pair);
    const ru_part *p = ru_circuit_part(c, (size_t)ru_circuit_find_part(c, "Q"));
    ru_terminal t[RU_PART_NODES];
    int nt = ru_part_terminals(p, t, RU_PART_NODES);
    assert_int_equal(nt, 5); /* in, out, ref, inv, out2 */
    assert_string_equal(t[4].key, "out2");
    ru_circuit_destroy(c);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_two_collectors),
        cmocka_unit_test(test_cross_coupled),
        cmocka_unit_test(test_loader_errors),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
