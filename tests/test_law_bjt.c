/* test_law_bjt.c: the bipolar laws' device keys (src/parts/law_diffpair.c,
 * law_exp.c). The long-tailed pair with both collector currents (out and out2)
 * against two Shockley junctions sharing a tail current, solved here by
 * bisection; its derivatives against central differences; a cross-coupled pair
 * of LC tanks: the system Jacobian and loop split, and the loop gain at the
 * tanks' resonance against the hand analysis (KCL at the two collectors). The
 * exp-stage's Early voltage against the output resistance (va + vce)/ic; with
 * rb, cje, cjc and tf its derivatives (the internal junction state included),
 * the describing function's small-signal limit against the rb-r_pi divider, a
 * common-emitter stage's response against the hybrid-pi model solved here by
 * nodal analysis, and the system Jacobian and loop split with the junction state
 * as the control. The loader's messages with FILE:LINE:COL. */
#include "ru_test.h"

#include "parts/laws.h"
#include "ringup/descfn.h"
#include "ringup/loader.h"
#include "ringup/smallsig.h"
#include "ringup/system.h"

#include <complex.h>
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
    /* An input voltage noise en enters along the law's every d/d vc: both
     * collectors, -+ itail/(4 vt) at balance, over each node's capacitance C +
     * stray (ringup/system.h's noise columns: sqrt(S) M^-1 b) */
    char text[1024];
    snprintf(text, sizeof text, "%.*s, en: 2n}\n", (int)(strlen(cross_pair) - 2), cross_pair);
    c = load_ok(text);
    s = compile(c);
    size_t m = ru_system_noise_count(s), kq = m;
    for (size_t k = 0; k < m; k++) {
        ru_noise_info info;
        assert_int_equal(ru_system_noise_info(s, k, &info), RU_OK);
        if (info.kind == RU_NOISE_INPUT_V)
            kq = k;
    }
    assert_true(kq < m);
    double B[4 * 16];
    assert_true(m <= 16);
    assert_int_equal(ru_system_noise_columns(s, x, 27.0, B), RU_OK);
    double gm1 = 1e-3 / (4 * vt);
    RU_ASSERT_REL(B[k1 * m + kq], -2e-9 * gm1 / 251e-12, 1e-9);
    RU_ASSERT_REL(B[k2 * m + kq], 2e-9 * gm1 / 251e-12, 1e-9);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

static ru_amp npn(void)
{
    ru_amp a;
    ru_amp_defaults(&a, RU_LAW_EXP_STAGE);
    a.is_a = 1e-15;
    a.beta = 120.0;
    a.n = 1.02;
    a.va_v = 40.0;
    a.cje_f = 2e-12;
    a.cjc_f = 0.8e-12;
    a.tf_s = 300e-12;
    a.rb_ohm = 60.0;
    return a;
}

static void test_early(void **state)
{
    (void)state;
    ru_amp a = npn(), b = npn();
    a.rb_ohm = a.tf_s = 0.0; /* no state: vc is the junction voltage */
    b.rb_ohm = b.tf_s = b.va_v = 0.0;
    const double vces[] = {3.0, 5.0, 8.0};
    for (int k = 0; k < 3; k++) {
        ru_law_eval e, f;
        ru_law_eval_amp(&a, 0.7, vces[k], &e);
        ru_law_eval_amp(&b, 0.7, vces[k], &f);
        /* Reference: the Early effect, ic = ic0 (1 + vce/va), and its output
         * resistance ro = (va + vce)/ic (Early 1952; Gray, Hurst, Lewis & Meyer
         * ch. 1, from memory). Far above vsat: the saturation factor's slope
         * at 3 V, 4 e^(-30)/vsat = 2e-12 /V against 1/va, leaves 1e-10: 1e-8. */
        RU_ASSERT_REL(e.i_out, f.i_out * (1.0 + vces[k] / a.va_v), 1e-12);
        RU_ASSERT_REL(-1.0 / e.di_out_dvo, (a.va_v + vces[k]) / -e.i_out, 1e-8);
        /* the base current is not modulated: ib = ie/beta as before */
        RU_ASSERT_REL(e.i_in, f.i_in, 1e-15);
    }
    /* below vce = 0 the factor stays 1: the reverse region as without va */
    ru_law_eval e, f;
    ru_law_eval_amp(&a, 0.7, -0.05, &e);
    ru_law_eval_amp(&b, 0.7, -0.05, &f);
    RU_ASSERT_REL(e.i_out, f.i_out, 1e-15);
    /* the constant capacitances: cjc in-out, cje in-inv without rb */
    ru_law_cap c[RU_PART_CAPS_MAX];
    const ru_law_desc *d = ru_law_get(RU_LAW_EXP_STAGE);
    assert_int_equal(d->caps(&a, c), 2);
    assert_true(c[0].a == RU_AMP_IN && c[0].b == RU_AMP_OUT && c[0].c_f == a.cjc_f);
    assert_true(c[1].a == RU_AMP_IN && c[1].b == RU_AMP_INV && c[1].c_f == a.cje_f);
    ru_amp r = npn(); /* with rb, cje is the junction's, behind rb */
    d->caps(&r, c);
    RU_ASSERT_NEAR(c[1].c_f, 0.0, 0.0);
    assert_int_equal(ru_law_nstates(&a), 0);
    assert_int_equal(ru_law_nstates(&r), 1);
}

/* Central differences of i_out, i_in and the junction rate in vc, vo and vj. */
static void test_exp_derivatives(void **state)
{
    (void)state;
    ru_amp a = npn();
    double nvt = a.n * ru_law_thermal_voltage(a.temp_c);
    const double vcs[] = {-0.5, 0.3, 0.72, 0.9};
    const double vos[] = {-0.1, 0.05, 0.3, 4.0};
    const double vjs[] = {-0.2, 0.5, 0.7, 0.78, 1.2 /* limiting, u > 40 */};
    for (int i = 0; i < 4; i++)
        for (int j = 0; j < 4; j++)
            for (int k = 0; k < 5; k++) {
                double x[3] = {vcs[i], vos[j], vjs[k]}, h = 1e-7;
                ru_law_eval c, p, m;
                ru_law_eval_state(&a, x[0], x[1], x[2], &c);
                const double an[3][3] = {{c.di_out_dvc, c.di_out_dvo, c.di_out_dxs},
                                         {c.di_in_dvc, c.di_in_dvo, c.di_in_dxs},
                                         {c.ddxs_dvc, c.ddxs_dvo, c.ddxs_dxs}};
                for (int w = 0; w < 3; w++) {
                    double keep = x[w];
                    x[w] = keep + h;
                    ru_law_eval_state(&a, x[0], x[1], x[2], &p);
                    x[w] = keep - h;
                    ru_law_eval_state(&a, x[0], x[1], x[2], &m);
                    x[w] = keep;
                    const double fd[3] = {(p.i_out - m.i_out) / (2 * h),
                                          (p.i_in - m.i_in) / (2 * h),
                                          (p.dxs - m.dxs) / (2 * h)};
                    const double val[3] = {fabs(c.i_out), fabs(c.i_in), fabs(c.dxs)};
                    for (int q = 0; q < 3; q++) {
                        /* Reference: central differences, h = 0.1 uV: truncation
                         * (h/nvt)^2 ~ 1e-11 relative, rounding 4 eps of the value
                         * (and of the rate's two terms) over h; 1e-7 of the entry */
                        double tol = 1e-7 * fabs(fd[q]) + 8.9e-16 * (val[q] + 1e-2) / h *
                                                              (q == 2 ? 1.0 / a.cje_f : 1.0);
                        if (!(fabs(an[q][w] - fd[q]) <= tol))
                            fail_msg("vc %g vo %g vj %g: d%d/d%d analytic %.10g fd %.10g", x[0],
                                     x[1], x[2], q, w, an[q][w], fd[q]);
                    }
                }
            }
    /* The describing function at a small amplitude is the stage's static
     * transconductance with the junction behind rb: the rb - r_pi divider,
     * -gm r_pi/(r_pi + rb), r_pi = beta/gm (the hybrid-pi model at DC, from
     * memory; Taylor: a = 10 uV leaves (a/nvt)^2/8 ~ 2e-8), at vo = 5 V where
     * the output factor is 1 + 5/va. */
    double vc0 = 0.75, xs = 0.0;
    {
        double lo = 0.0, hi = vc0; /* the static junction voltage, by bisection */
        for (int it = 0; it < 100; it++) {
            double mid = 0.5 * (lo + hi);
            double ib = a.is_a * (exp(mid / nvt) - 1.0) / a.beta;
            if ((vc0 - mid) / a.rb_ohm > ib)
                lo = mid;
            else
                hi = mid;
        }
        xs = 0.5 * (lo + hi);
    }
    double gm = a.is_a * exp(xs / nvt) / nvt * (1.0 + 5.0 / a.va_v);
    double rpi = a.beta / (a.is_a * exp(xs / nvt) / nvt);
    RU_ASSERT_REL(ru_df_amp_gain(&a, vc0, 5.0, 1e-5), -gm * rpi / (rpi + a.rb_ohm), 1e-6);
}

/* A common-emitter stage (our own values): base b biased from VBB through RB,
 * collector c through RC from VCC, emitter on ground. */
static const char *ce_stage = "stray: 1p\nparts:\n"
                              "  VCC: {type: supply, nodes: [vcc, gnd], value: 5V}\n"
                              "  VBB: {type: supply, nodes: [vbb, gnd], value: 5V}\n"
                              "  RB: {type: resistor, nodes: [vbb, b], value: 430k}\n"
                              "  RC: {type: resistor, nodes: [vcc, c], value: 2k}\n"
                              "  Q: {type: amplifier, law: exp-stage, in: b, out: c, is: 1f,"
                              " beta: 120, n: 1.02, va: 40, cje: 2p, cjc: 0.8p, tf: 300p,"
                              " rb: 60}\n";

static void test_hybrid_pi(void **state)
{
    (void)state;
    ru_circuit *c = load_ok(ce_stage);
    ru_system *s = compile(c);
    assert_int_equal(ru_system_size(s), 3); /* b, c, Q.vbe */
    assert_string_equal(ru_system_state_name(s, 2), "Q.vbe");
    double x[3] = {0};
    ru_error err;
    assert_int_equal(ru_oppoint_solve(s, x, 0, NULL, &err), RU_OK);
    int nb = ru_circuit_find_node(c, "b"), nc = ru_circuit_find_node(c, "c");
    double vb = x[ru_system_node_state(s, nb)], vc = x[ru_system_node_state(s, nc)];
    double ib = (5.0 - vb) / 430e3, ic = (5.0 - vc) / 2e3;
    double nvt = 1.02 * ru_law_thermal_voltage(27.0);
    assert_true(ic > 1e-3 && ic < 1.5e-3 && vc > 2.0); /* forward active */
    /* KVL through rb: the junction state is vb - ib rb (Ohm's law) */
    RU_ASSERT_NEAR(x[2], vb - ib * 60.0, 1e-9);
    /* Reference: the hybrid-pi model (Giacoletto 1969; Gray, Hurst, Lewis & Meyer
     * ch. 1, from memory) with hand values from the operating point: gm = ic/(n
     * vt), g_pi = ib/(n vt), c_pi = cje + tf beta ib/(n vt) (the diffusion charge
     * tf times the forward current beta ib, charge control), c_mu = cjc, g_o =
     * ic/(va + vce), rbb' = rb; b driven by 1 V: KCL at b' and at c gives
     *   v(b') = g_b/(g_b + g_pi + jw c_pi),
     *   v(c) = (jw c_mu - gm v(b'))/(g_o + 1/RC + jw (c_mu + stray)).
     * 1e-6: the is terms dropped from gm and g_pi (1e-12) and Newton's tolerance
     * on the operating point. */
    double gm = ic / nvt, gpi = ib / nvt, cpi = 2e-12 + 300e-12 * 120.0 * ib / nvt;
    double go = ic / (40.0 + vc), gb = 1.0 / 60.0, cmu = 0.8e-12;
    const double fs[] = {1e5, 1e7, 1e8, 5e8, 2e9};
    for (int k = 0; k < 5; k++) {
        double w = 2 * RU_PI_LAW * fs[k];
        double complex vbi = gb / (gb + gpi + I * w * cpi);
        double complex want = (I * w * cmu - gm * vbi) / (go + 1.0 / 2e3 + I * w * (cmu + 1e-12));
        double mag, ph;
        assert_int_equal(ru_response_at(s, x, nb, nc, fs[k], &mag, &ph, &err), RU_OK);
        RU_ASSERT_REL(mag, cabs(want), 1e-6);
        RU_ASSERT_NEAR(ph, carg(want) * 180.0 / RU_PI_LAW, 1e-4);
    }
    /* The system Jacobian against central differences at off-bias points, and
     * the loop split with the junction state as the control: dr/dx = A0 + b g^T
     * (its definition, ringup/system.h), b on the collector's row, g = e_vbe. */
    const double xs[2][3] = {{0.78, 2.0, 0.74}, {0.5, 4.5, 0.7}};
    for (int t = 0; t < 2; t++) {
        double y[3], r[3], rp[3], rm[3], J[9], A0[9], b[3], g[3];
        memcpy(y, xs[t], sizeof y);
        ru_eval_point ep = {0.0, 1, 1.0};
        assert_int_equal(ru_system_residual(s, &ep, y, r, J), RU_OK);
        for (size_t j = 0; j < 3; j++) {
            double h = 1e-6, keep = y[j];
            y[j] = keep + h;
            assert_int_equal(ru_system_residual(s, &ep, y, rp, NULL), RU_OK);
            y[j] = keep - h;
            assert_int_equal(ru_system_residual(s, &ep, y, rm, NULL), RU_OK);
            y[j] = keep;
            for (size_t i = 0; i < 3; i++) {
                double fd = (rp[i] - rm[i]) / (2 * h);
                /* truncation (h/nvt)^2 ~ 1e-9, rounding 4 eps |r|/h */
                RU_ASSERT_NEAR(J[i * 3 + j], fd,
                               1e-6 * fabs(fd) + 8.9e-16 * (fabs(r[i]) + 1e-2) / h);
            }
        }
        assert_int_equal(ru_system_loop_split(s, ru_circuit_find_part(c, "Q"), y, A0, b, g,
                                              &err),
                         RU_OK);
        RU_ASSERT_NEAR(g[2], 1.0, 0.0);
        RU_ASSERT_NEAR(g[0] + g[1], 0.0, 0.0);
        assert_true(b[ru_system_node_state(s, nc)] < 0); /* the collector sinks */
        for (size_t i = 0; i < 9; i++)
            RU_ASSERT_NEAR(A0[i] + b[i / 3] * g[i % 3], J[i], 1e-12 * (fabs(J[i]) + 1.0));
    }
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
    load_bad("  Q: {type: amplifier, law: exp-stage, in: a, out: c, tf: 100p}\n", "Q:",
             "part Q: tf needs rb > 0");
    load_bad("  Q: {type: amplifier, law: exp-stage, in: a, out: c, rb: 50}\n", "Q:",
             "part Q: rb needs cje or tf");
    load_bad("  Q: {type: amplifier, law: exp-stage, in: a, out: c, cjc: -1p}\n", "Q:",
             "part Q: cjc must not be negative");
    load_bad("  Q: {type: amplifier, law: exp-stage, in: a, out: c, tf: 2pF, rb: 9}\n", "2pF",
             "unit F does not fit");
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
        cmocka_unit_test(test_early),
        cmocka_unit_test(test_exp_derivatives),
        cmocka_unit_test(test_hybrid_pi),
        cmocka_unit_test(test_loader_errors),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
