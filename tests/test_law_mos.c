/* test_law_mos.c: the MOS laws (src/parts/law_mos.c, law_inverter.c).
 * mos-ekv against the published EKV equations (Enz, Krummenacher & Vittoz,
 * "An analytical MOS transistor model valid in all regions of operation and
 * dedicated to low-voltage and low-current applications", Analog Integrated
 * Circuits and Signal Processing 8 (1995) 83-114): the specific current at the
 * boundary of moderate inversion, the weak-inversion exponential law, the
 * strong-inversion square laws in saturation and in the linear region, the
 * transconductance-to-current ratio; its derivatives against central
 * differences; its describing function against the closed forms of a square law
 * and of an exponential (modified Bessel function). cmos-inverter: derivatives
 * in every port, the switching threshold and the small-signal gain against the
 * long-channel inverter formulas, the self-biased operating point of an inverter
 * with a feedback resistor, its capacitances in the mass matrix, the system
 * Jacobian and loop split, and the loader's messages with FILE:LINE:COL. */
#include "ru_test.h"

#include "parts/laws.h"
#include "ringup/descfn.h"
#include "ringup/loader.h"
#include "ringup/smallsig.h"
#include "ringup/system.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define NAME "mos.yaml"

static ru_amp mos(double pol)
{
    ru_amp a;
    ru_amp_defaults(&a, RU_LAW_MOS_EKV);
    a.polarity = pol;
    a.vth_v = 0.45;
    a.kmos_a_per_v2 = 2e-3;
    a.n = 1.25;
    a.temp_c = 40.0;
    return a;
}

static double ut_of(const ru_amp *a) { return ru_law_thermal_voltage(a->temp_c); }

/* Drain current of the n device (flowing drain -> source), from the law. */
static double id_of(const ru_amp *a, double vgs, double vds)
{
    ru_law_eval e;
    ru_law_eval_amp(a, vgs, vds, &e);
    return -e.i_out;
}

/* The gate voltage at which vp/ut = u. */
static double vg_at(const ru_amp *a, double u) { return a->vth_v + a->n * ut_of(a) * u; }

static void test_ekv_regions(void **state)
{
    (void)state;
    ru_amp a = mos(1.0);
    double ut = ut_of(&a), n = a.n, beta = a.kmos_a_per_v2;
    double is = 2.0 * n * beta * ut * ut; /* Source: EKV 1995, specific current */
    /* Moderate inversion, F = 1: ln(1 + e^(u/2)) = 1 at u = 2 ln(e - 1) (Source:
     * EKV 1995's F(v) = ln^2(1 + e^(v/2)), solved by hand), drain far in
     * saturation (the reverse term e^(-38) ~ 3e-17): id = is to rounding. */
    double u1 = 2.0 * log(exp(1.0) - 1.0);
    RU_ASSERT_REL(id_of(&a, vg_at(&a, u1), 1.0), is, 1e-12);
    /* Weak inversion: id = is e^(vp/ut) (1 - e^(-vds/ut)) (Source: EKV 1995's
     * weak-inversion limit, Vittoz's subthreshold law). F(u) = e^u (1 - e^(u/2)
     * + ...) so the relative error is e^(u/2) = 6e-6 at u = -24: 2e-5 allowed. */
    for (int k = 0; k < 3; k++) {
        double vds = (k == 0 ? 0.5 : k == 1 ? 2.0 : 5.0) * ut;
        double want = is * exp(-24.0) * (1.0 - exp(-vds / ut));
        RU_ASSERT_REL(id_of(&a, vg_at(&a, -24.0), vds), want, 2e-5);
    }
    /* Subthreshold slope: d ln id / d vgs = 1/(n ut) (same source), error
     * ~ e^(u/2) as above. */
    ru_law_eval e;
    ru_law_eval_amp(&a, vg_at(&a, -24.0), 1.0, &e);
    RU_ASSERT_REL(e.di_out_dvc / e.i_out, 1.0 / (n * ut), 2e-5);
    /* Strong inversion, saturation: id = beta/(2n) (vgs - vth)^2 (Source: EKV 1995's
     * strong-inversion limit F(u) -> u^2/4). With vgs - vth = 1 V, u = 30:
     * F = (u/2 + ln(1 + e^(-u/2)))^2, relative error 4 e^(-u/2)/u ~ 4e-8. */
    RU_ASSERT_REL(id_of(&a, a.vth_v + 1.0, 3.0), beta / (2 * n) * 1.0, 1e-6);
    /* Strong inversion, linear region: id = beta ((vgs - vth) vds - n vds^2/2)
     * (Source: EKV 1995, nbeta/2 ((vp - vs)^2 - (vp - vd)^2) with vs = 0). At vds =
     * 0.2 V the reverse term's u = 24: error ~ 4 e^(-12)/24 of each term, and the
     * difference of the two squares loses a factor ~3: 1e-5. */
    double vov = 1.0, vds = 0.2;
    RU_ASSERT_REL(id_of(&a, a.vth_v + vov, vds), beta * (vov * vds - n * vds * vds / 2), 1e-5);
    /* The transconductance-to-current ratio in saturation, gm n ut / id =
     * (1 - e^(-sqrt(if)))/sqrt(if) (Source: EKV 1995's F, derived by hand: F' =
     * sqrt(F)(1 - e^(-sqrt F))): 1 in weak inversion, 1/sqrt(if) in strong,
     * 1 - 1/e at if = 1. The reverse term is e^(-30) or less here. */
    const double us[] = {-10.0, u1, 5.0, 30.0};
    for (int k = 0; k < 4; k++) {
        ru_law_eval_amp(&a, vg_at(&a, us[k]), 3.0, &e);
        double iff = -e.i_out / is, q = sqrt(iff);
        RU_ASSERT_REL(e.di_out_dvc / e.i_out * n * ut, (1.0 - exp(-q)) / q, 1e-9);
    }
    /* Channel-length modulation: the factor (1 + |vds|/va) exactly (common
     * practice: the first-order output conductance, not part of EKV 1995). */
    ru_amp b = a;
    b.va_v = 20.0;
    RU_ASSERT_REL(id_of(&b, 1.2, 2.5), id_of(&a, 1.2, 2.5) * (1.0 + 2.5 / 20.0), 1e-14);
    RU_ASSERT_REL(id_of(&b, 1.2, -0.5), id_of(&a, 1.2, -0.5) * (1.0 + 0.5 / 20.0), 1e-14);
    /* A p-channel device is the n-channel one with every voltage and current
     * reversed (common practice): same values, opposite signs. */
    ru_amp p = mos(-1.0);
    ru_law_eval en, ep;
    ru_law_eval_amp(&a, 1.3, 0.7, &en);
    ru_law_eval_amp(&p, -1.3, -0.7, &ep);
    RU_ASSERT_REL(ep.i_out, -en.i_out, 1e-15);
    RU_ASSERT_REL(ep.di_out_dvc, en.di_out_dvc, 1e-15);
    RU_ASSERT_REL(ep.di_out_dvo, en.di_out_dvo, 1e-15);
    /* the gate draws nothing */
    RU_ASSERT_NEAR(en.i_in, 0.0, 0.0);
}

/* Central differences of every port derivative of a law at `at`. */
static void check_ports(const ru_amp *a, ru_law_at at)
{
    ru_law_eval e, p, m;
    ru_law_eval_at(a, &at, &e);
    const double an[9] = {e.di_out_dvc, e.di_out_dvo, e.di_out_dvs, e.di_sup_dvc, e.di_sup_dvo,
                          e.di_sup_dvs, e.di_out2_dvc, e.di_out2_dvo2, e.di_in_dvc};
    double num[9] = {0};
    double h = 1e-6;
    double *port[4] = {&at.vc, &at.vo, &at.vo2, &at.vs};
    for (int w = 0; w < 4; w++) {
        double keep = *port[w];
        *port[w] = keep + h;
        ru_law_eval_at(a, &at, &p);
        *port[w] = keep - h;
        ru_law_eval_at(a, &at, &m);
        *port[w] = keep;
        double dout = (p.i_out - m.i_out) / (2 * h), dsup = (p.i_sup - m.i_sup) / (2 * h);
        double dout2 = (p.i_out2 - m.i_out2) / (2 * h), din = (p.i_in - m.i_in) / (2 * h);
        if (w == 0) {
            num[0] = dout, num[3] = dsup, num[6] = dout2, num[8] = din;
        } else if (w == 1) {
            num[1] = dout, num[4] = dsup;
        } else if (w == 2) {
            num[7] = dout2;
        } else {
            num[2] = dout, num[5] = dsup;
        }
    }
    double big = 0.0;
    for (int k = 0; k < 9; k++)
        big = fmax(big, fabs(an[k]));
    /* the size of the EKV terms whose difference a current is: far larger than
     * the current in strong inversion near vds = 0 (a wild gate voltage) */
    double kmax = fmax(fmax(a->kmos_a_per_v2, a->kn_a_per_v2), a->kp_a_per_v2);
    double vg = fabs(at.vc) + fabs(at.vs) + 1.0; /* above any gate overdrive here */
    double terms = 2.0 * kmax / (2.0 * a->n) * vg * vg; /* both square-law terms */
    for (int k = 0; k < 9; k++) {
        /* Reference: central differences, truncation h^2/6 f''' with h = 1 uV on
         * the scale n ut = 34 mV (~1e-9 relative), rounding 4 eps |terms|/h; 1e-6
         * of the entry plus 1e-9 of the largest entry plus the rounding. */
        double tol = 1e-6 * fabs(num[k]) + 1e-9 * big + 8.9e-16 * terms / h + 1e-18;
        if (!(fabs(an[k] - num[k]) <= tol))
            fail_msg("law %d at vc=%g vo=%g vo2=%g vs=%g deriv %d: analytic %.10g fd %.10g",
                     a->law, at.vc, at.vo, at.vo2, at.vs, k, an[k], num[k]);
    }
}

static ru_amp inverter(void)
{
    ru_amp a;
    ru_amp_defaults(&a, RU_LAW_CMOS_INVERTER);
    a.vthn_v = 0.5;
    a.vthp_v = 0.6;
    a.kn_a_per_v2 = 2e-3;
    a.kp_a_per_v2 = 1e-3;
    a.n = 1.3;
    return a;
}

static void test_derivatives(void **state)
{
    (void)state;
    ru_amp n = mos(1.0), p = mos(-1.0), nv = mos(1.0);
    nv.va_v = 15.0;
    const double vcs[] = {-1.0, 0.1, 0.45, 0.5, 0.9, 3.0, 40.0};
    const double vos[] = {-2.0, -0.05, -1e-3, 1e-3, 0.03, 0.5, 4.0};
    for (int i = 0; i < 7; i++)
        for (int j = 0; j < 7; j++) {
            check_ports(&n, (ru_law_at){vcs[i], vos[j], 0, 0, 0, 0});
            check_ports(&p, (ru_law_at){-vcs[i], -vos[j], 0, 0, 0, 0});
            check_ports(&nv, (ru_law_at){vcs[i], vos[j], 0, 0, 0, 0});
        }
    ru_amp inv = inverter(), invv = inverter();
    invv.va_v = 8.0;
    const double vs[] = {0.0, 1.0, 3.3, 5.0};
    const double vi[] = {-0.3, 0.2, 0.7, 1.4, 2.9, 3.6};
    for (int i = 0; i < 6; i++)
        for (int j = 0; j < 6; j++)
            for (int k = 0; k < 4; k++) {
                check_ports(&inv, (ru_law_at){vi[i], vi[j] + 0.013, 0, vs[k], 0, 0});
                check_ports(&invv, (ru_law_at){vi[i], vi[j] - 0.017, 0, vs[k], 0, 0});
            }
}

/* Modified Bessel function I1 by its power series (Abramowitz & Stegun 9.6.10). */
static double bessel_i1(double x)
{
    double term = x / 2, sum = 0.0;
    for (int k = 0; k < 60; k++) {
        sum += term;
        term *= (x / 2) * (x / 2) / ((k + 1.0) * (k + 2.0));
    }
    return sum;
}

static void test_describing_function(void **state)
{
    (void)state;
    ru_amp a = mos(1.0);
    double ut = ut_of(&a), n = a.n, beta = a.kmos_a_per_v2;
    /* Strong inversion in saturation over the whole cycle (overdrive 1 +- 0.3 V,
     * vds 3 V): i_out = -beta/(2n) (vc - vth)^2, whose describing function is the
     * slope at the bias, -beta/n (vc0 - vth), for any amplitude (Source: the
     * fundamental of (x0 + a sin t)^2 is 2 x0 a sin t, trigonometry). The EKV
     * correction at the trough (u = 21) is ~4 e^(-10.5)/21 relative: 1e-4. */
    RU_ASSERT_REL(ru_df_amp_gain(&a, a.vth_v + 1.0, 3.0, 0.3), -beta / n * 1.0, 1e-4);
    /* Weak inversion: i_out = -is e^((vc - vth)/(n ut)); the fundamental of
     * e^(b sin t) is 2 I1(b) sin t (Source: Abramowitz & Stegun 9.6.34, the
     * generating function of I_k), so N = -is e^(u0) 2 I1(b)/a, b = a/(n ut). At
     * u0 = -26, b = 2 the EKV correction is e^(-12) relative at the crest: 2e-5. */
    double is = 2 * n * beta * ut * ut, amp = 2.0 * n * ut;
    RU_ASSERT_REL(ru_df_amp_gain(&a, vg_at(&a, -26.0), 3.0, amp),
                  -is * exp(-26.0) * 2.0 * bessel_i1(2.0) / amp, 2e-5);
    /* The inverter's describing function at a small amplitude is its small-signal
     * transconductance di_out/dvc at the bias (Taylor: N(a) = f' + f''' a^2/8;
     * a = 1 uV leaves 1e-10), with the rail at vdd. */
    ru_amp inv = inverter();
    ru_law_eval e;
    ru_law_at at = {1.4, 1.6, 0.0, 3.3, 0.0, 0};
    ru_law_eval_at(&inv, &at, &e);
    RU_ASSERT_REL(ru_df_amp_gain_rail(&inv, 1.4, 1.6, 3.3, 1e-6), e.di_out_dvc, 1e-8);
    /* and without the rail the p device is off: only the n device's slope */
    RU_ASSERT_REL(ru_df_amp_gain_rail(&inv, 1.4, 1.6, 0.0, 1e-6),
                  ru_df_amp_gain_rail(&inv, 1.4, 1.6, 0.0, 2e-6), 1e-6);
}

/* The long-channel switching threshold (Source: Rabaey, Chandrakasan & Nikolic,
 * "Digital Integrated Circuits", 2nd ed., ch. 5, both devices saturated with
 * equal square-law currents; from memory): vM = (vthn + r (vdd - vthp))/(1 + r),
 * r = sqrt(kp/kn); the slope factor is the same for both devices and cancels. */
static double switching_threshold(const ru_amp *a, double vdd)
{
    double r = sqrt(a->kp_a_per_v2 / a->kn_a_per_v2);
    return (a->vthn_v + r * (vdd - a->vthp_v)) / (1.0 + r);
}

/* The root of i_out(v, v) = 0 by bisection (the self-biased point). */
static double self_bias(const ru_amp *a, double vdd)
{
    double lo = 0.0, hi = vdd;
    for (int it = 0; it < 200; it++) {
        double mid = 0.5 * (lo + hi);
        ru_law_eval e;
        ru_law_at at = {mid, mid, 0.0, vdd, 0.0, 0};
        ru_law_eval_at(a, &at, &e);
        if (e.i_out > 0) /* p stronger: the point lies higher */
            lo = mid;
        else
            hi = mid;
    }
    return 0.5 * (lo + hi);
}

static void test_inverter(void **state)
{
    (void)state;
    ru_amp a = inverter();
    const double vdds[] = {3.3, 5.0};
    for (int k = 0; k < 2; k++) {
        /* At vM both devices are deep in strong inversion (u = vov/(n ut) >= 27)
         * and saturation: the EKV corrections are 4 e^(-u/2)/u ~ 2e-7 of the
         * currents, which moves the crossing by ~1e-7 V (vov/2 per unit relative
         * current). Below about 2.5 V the devices reach moderate inversion and the
         * square-law threshold no longer holds (at 1.8 V: 0.5 mV off). */
        RU_ASSERT_NEAR(self_bias(&a, vdds[k]), switching_threshold(&a, vdds[k]), 1e-6);
    }
    /* Small-signal gain at vM with channel-length modulation: gm = beta/n vov
     * (1 + vds/va), gds = beta/(2n) vov^2/va per device (Source: the square law
     * with the (1 + vds/va) factor, differentiated by hand), the stage's
     * transconductance -(gmn + gmp) and output conductance gdsn + gdsp. */
    ru_amp b = a;
    b.va_v = 10.0;
    double vdd = 3.3, vm = switching_threshold(&b, vdd), n = b.n;
    double ovn = vm - b.vthn_v, ovp = vdd - vm - b.vthp_v;
    double gmn = b.kn_a_per_v2 / n * ovn * (1 + vm / b.va_v);
    double gmp = b.kp_a_per_v2 / n * ovp * (1 + (vdd - vm) / b.va_v);
    double gdsn = b.kn_a_per_v2 / (2 * n) * ovn * ovn / b.va_v;
    double gdsp = b.kp_a_per_v2 / (2 * n) * ovp * ovp / b.va_v;
    ru_law_eval e;
    ru_law_at at = {vm, vm, 0.0, vdd, 0.0, 0};
    ru_law_eval_at(&b, &at, &e);
    /* 1e-6: the EKV corrections at u >= 27 */
    RU_ASSERT_REL(e.di_out_dvc, -(gmn + gmp), 1e-6);
    RU_ASSERT_REL(e.di_out_dvo, -(gdsn + gdsp), 1e-6);
    /* KCL over the part: the supply gives the p device's current, which is the n
     * device's at the self-biased point of the unmodulated inverter. */
    double v0 = self_bias(&a, vdd);
    at = (ru_law_at){v0, v0, 0.0, vdd, 0.0, 0};
    ru_law_eval_at(&a, &at, &e);
    double id_n = a.kn_a_per_v2 / (2 * n) * (v0 - a.vthn_v) * (v0 - a.vthn_v);
    RU_ASSERT_REL(-e.i_sup, id_n, 1e-6); /* same square law as above */
    /* Rails: input low, output at vdd: the p device carries nothing (vds = 0)
     * and the n device only its subthreshold leakage is e^(-vthn/(n ut)) (Source:
     * EKV 1995's weak-inversion limit; relative error e^(u/2) = 6e-4 at u = -14.9). */
    at = (ru_law_at){0.0, vdd, 0.0, vdd, 0.0, 0};
    ru_law_eval_at(&a, &at, &e);
    double ut = ru_law_thermal_voltage(a.temp_c);
    double leak = 2 * n * a.kn_a_per_v2 * ut * ut * exp(-a.vthn_v / (n * ut));
    RU_ASSERT_REL(-e.i_out, leak, 1e-3);
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

static double node_v(const ru_circuit *c, const ru_system *s, const double *x,
                     const char *name)
{
    return x[ru_system_node_state(s, ru_circuit_find_node(c, name))];
}

/* An inverter self-biased by a feedback resistor settles at vM: the DC point of
 * the Pierce stage (Source: the switching threshold above; with no current in
 * the gate, v(in) = v(out) wherever the resistor carries nothing). Its
 * capacitances enter the mass matrix (Source: the charge of a capacitor between
 * two nodes, q = C (va - vb), gives C on both diagonals and -C off them). */
static void test_self_biased(void **state)
{
    (void)state;
    ru_circuit *c = load_ok("stray: 1p\nparts:\n"
                            "  VDD: {type: supply, nodes: [vdd, gnd], value: 3.3V}\n"
                            "  U1: {type: amplifier, law: cmos-inverter, in: a, out: b, vdd: vdd,"
                            " kn: 2m, kp: 1m, vthn: 0.5, vthp: 0.6, cin: 5p, cgd: 2p, cout: 3p}\n"
                            "  RF: {type: resistor, nodes: [a, b], value: 1M}\n");
    ru_system *s = compile(c);
    assert_int_equal(ru_system_size(s), 2);
    double x[2] = {0, 0};
    ru_error err;
    assert_int_equal(ru_oppoint_solve(s, x, 0, NULL, &err), RU_OK);
    ru_amp a = inverter();
    double vm = switching_threshold(&a, 3.3);
    /* Newton's tolerance and the EKV corrections: 1e-5 V */
    RU_ASSERT_NEAR(node_v(c, s, x, "a"), vm, 1e-5);
    RU_ASSERT_NEAR(node_v(c, s, x, "b"), vm, 1e-5);
    double M[4];
    ru_system_mass(s, M);
    int ka = ru_system_node_state(s, ru_circuit_find_node(c, "a"));
    int kb = ru_system_node_state(s, ru_circuit_find_node(c, "b"));
    RU_ASSERT_REL(M[ka * 2 + ka], 5e-12 + 2e-12 + 1e-12, 1e-12);
    RU_ASSERT_REL(M[kb * 2 + kb], 3e-12 + 2e-12 + 1e-12, 1e-12);
    RU_ASSERT_REL(M[ka * 2 + kb], -2e-12, 1e-12);
    /* the check listing names vdd */
    const ru_part *p = ru_circuit_part(c, (size_t)ru_circuit_find_part(c, "U1"));
    ru_terminal t[RU_PART_NODES];
    int nt = ru_part_terminals(p, t, RU_PART_NODES);
    assert_int_equal(nt, 4); /* in, out, ref, vdd */
    assert_string_equal(t[3].key, "vdd");
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* Reference: central differences of the residual (as test_system.c), h = 10 uV
 * (truncation (h/(n ut))^2/6 ~ 1e-8 relative): 1e-6 of the entry plus 1e-9 of the
 * column's largest plus rounding. Here the rail is a free node
 * (fed through a resistor), so the vdd column and row exist, and a mos-ekv stage
 * has its own inv (source) node and both capacitances. */
static void test_system_jacobian(void **state)
{
    (void)state;
    ru_circuit *c = load_ok("parts:\n"
                            "  VS: {type: supply, nodes: [vs, gnd], value: 3V}\n"
                            "  RS: {type: resistor, nodes: [vs, vdd], value: 100}\n"
                            "  CS: {type: capacitor, nodes: [vdd, gnd], value: 1n}\n"
                            "  U1: {type: amplifier, law: cmos-inverter, in: a, out: b, vdd: vdd,"
                            " va: 9, cin: 1p, cgd: 1p}\n"
                            "  M1: {type: amplifier, law: mos-ekv, in: b, out: d, inv: s,"
                            " cgs: 2p, cgd: 0.5p, va: 20}\n"
                            "  RD: {type: resistor, nodes: [vdd, d], value: 2k}\n"
                            "  RE: {type: resistor, nodes: [s, gnd], value: 200}\n"
                            "  RF: {type: resistor, nodes: [a, d], value: 100k}\n"
                            "  RB: {type: resistor, nodes: [b, gnd], value: 1M}\n");
    ru_system *s = compile(c);
    size_t n = ru_system_size(s);
    assert_int_equal(n, 5);
    const double xs[3][5] = {{1.1, 1.7, 2.9, 0.9, 0.1},
                             {0.3, 2.6, 2.2, 1.9, 0.4},
                             {2.0, 0.2, 3.1, 0.05, -0.02}};
    for (int t = 0; t < 3; t++) {
        double x[5], r[5], rp[5], rm[5], J[25];
        memcpy(x, xs[t], sizeof x);
        ru_eval_point ep = {0.0, 1, 1.0};
        assert_int_equal(ru_system_residual(s, &ep, x, r, J), RU_OK);
        for (size_t j = 0; j < n; j++) {
            double h = 1e-5, keep = x[j], big = 0.0;
            for (size_t i = 0; i < n; i++)
                big = fmax(big, fabs(J[i * n + j]));
            x[j] = keep + h;
            assert_int_equal(ru_system_residual(s, &ep, x, rp, NULL), RU_OK);
            x[j] = keep - h;
            assert_int_equal(ru_system_residual(s, &ep, x, rm, NULL), RU_OK);
            x[j] = keep;
            for (size_t i = 0; i < n; i++) {
                double fd = (rp[i] - rm[i]) / (2 * h);
                /* rounding: 4 eps of the largest current a row carries (VS/RS =
                 * 30 mA) over h */
                RU_ASSERT_NEAR(J[i * n + j], fd,
                               1e-6 * fabs(fd) + 1e-9 * big + 8.9e-16 * 0.03 / h);
            }
        }
        /* the loop split of the inverter: dr/dx = A0 + b g^T exactly (Source:
         * its definition, ringup/system.h), with b on the vdd row too */
        double A0[25], b[5], g[5];
        ru_error err;
        assert_int_equal(ru_system_loop_split(s, ru_circuit_find_part(c, "U1"), x, A0, b, g,
                                              &err),
                         RU_OK);
        int kv = ru_system_node_state(s, ru_circuit_find_node(c, "vdd"));
        double bmax = 0.0;
        for (size_t i = 0; i < n; i++)
            bmax = fmax(bmax, fabs(b[i]));
        assert_true(bmax > 0.0);
        if (node_v(c, s, x, "vdd") - node_v(c, s, x, "a") > 0.8) /* p device on */
            assert_true(fabs(b[kv]) > 1e-9 * bmax);
        for (size_t i = 0; i < n * n; i++)
            RU_ASSERT_NEAR(A0[i] + b[i / n] * g[i % n], J[i], 1e-14 * (bmax + 1.0));
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
             "parts:\n  VDD: {type: supply, nodes: [vdd, gnd], value: 3V}\n%s", body);
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

/* Reference: README's amplifier keys and messages (FILE:LINE:COL at the part,
 * or at the key or value the loader refuses). */
static void test_loader_errors(void **state)
{
    (void)state;
    load_bad("  U1: {type: amplifier, law: cmos-inverter, in: a, out: b}\n", "U1",
             "part U1: law cmos-inverter needs vdd: NODE (its upper rail)");
    load_bad("  M1: {type: amplifier, law: mos-ekv, in: a, out: b, vdd: vdd}\n", "M1",
             "part M1: key vdd does not apply to law mos-ekv");
    load_bad("  M1: {type: amplifier, law: mos-ekv, in: a, out: b, out2: c}\n", "M1",
             "part M1: key out2 does not apply to law mos-ekv");
    load_bad("  U1: {type: amplifier, law: cmos-inverter, in: a, out: vdd, vdd: vdd}\n", "U1",
             "part U1: vdd must differ from out and ref");
    load_bad("  M1: {type: amplifier, law: mos-ekv, in: a, out: b, polarity: 2}\n", "M1",
             "polarity must be 1 (n-channel) or -1 (p-channel) (got 2)");
    load_bad("  M1: {type: amplifier, law: mos-ekv, in: a, out: b, n: 0.9}\n", "M1",
             "n (the EKV slope factor 1 + Cdep/Cox) must be at least 1 (got 0.9)");
    load_bad("  M1: {type: amplifier, law: mos-ekv, in: a, out: b, k: 0}\n", "M1",
             "k must be positive (got 0)");
    load_bad("  M1: {type: amplifier, law: mos-ekv, in: a, out: b, cgd: -1p}\n", "M1",
             "cgd must not be negative");
    load_bad("  U1: {type: amplifier, law: cmos-inverter, in: a, out: b, vdd: vdd, kp: -1m}\n",
             "U1", "kp must be positive");
    load_bad("  U1: {type: amplifier, law: cmos-inverter, in: a, out: b, vdd: vdd, cout: -1p}\n",
             "U1", "cout must not be negative");
    load_bad("  M1: {type: amplifier, law: mos-ekv, in: a, out: b, k: 2mF}\n", "2mF",
             "unit F does not fit, expected A/V2");
    load_bad("  M1: {type: amplifier, law: mos-ekv, in: a, out: b, kn: 2m}\n", "kn",
             "key kn does not apply to law mos-ekv");
    /* units: A/V2 written out, and a plain prefixed number */
    ru_circuit *c = load_ok("parts:\n  VDD: {type: supply, nodes: [vdd, gnd], value: 3V}\n"
                            "  U1: {type: amplifier, law: cmos-inverter, in: a, out: b, vdd: vdd,"
                            " kn: 3mA/V2, kp: 1.5m}\n"
                            "  RF: {type: resistor, nodes: [a, b], value: 1M}\n");
    const ru_part *p = ru_circuit_part(c, (size_t)ru_circuit_find_part(c, "U1"));
    RU_ASSERT_REL(p->amp.kn_a_per_v2, 3e-3, 1e-15);
    RU_ASSERT_REL(p->amp.kp_a_per_v2, 1.5e-3, 1e-15);
    ru_circuit_destroy(c);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_ekv_regions),     cmocka_unit_test(test_derivatives),
        cmocka_unit_test(test_describing_function), cmocka_unit_test(test_inverter),
        cmocka_unit_test(test_self_biased),     cmocka_unit_test(test_system_jacobian),
        cmocka_unit_test(test_loader_errors),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
