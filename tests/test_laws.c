/* test_laws.c: the amplifier laws (src/parts/laws.c): values against their defining
 * formulas, derivatives against central finite differences in every region
 * (cut-off, active, junction limiting, vo < 0), the exp-stage transconductance
 * against gm = Ic/(n Vt), the thermal voltage against NIST's k/e, and the law
 * table. New laws: the long-tailed pair against Itail tanh(vd/(2 n vt)), the
 * opamp's pole and DC gain against the single-pole model A0/(1 + j f/fp), its
 * rails and slew limit, the table curve against scipy's PchipInterpolator and
 * the Fritsch-Carlson properties (monotone, C1, straight lines exact), the diode
 * against Shockley's law with KVL across rs, and the thermal resistor against its
 * R(T) laws and the thermal RC heat balance. */
#include "ru_test.h"

#include "parts/laws.h"

#include <stdio.h>
#include <string.h>

/* NIST CODATA 2018: k/e = 8.617333262e-5 V/K (exact ratio of the 2019 SI
 * constants). 300 K is 26.85 C. */
static void test_thermal_voltage(void **state)
{
    (void)state;
    /* Reference: NIST CODATA 2018, Boltzmann constant in eV/K = 8.617333262e-5.
     * Tolerance 1e-9 relative: the quoted value has 10 significant digits. */
    RU_ASSERT_REL(ru_law_thermal_voltage(26.85), 8.617333262e-5 * 300.0, 1e-9);
    RU_ASSERT_REL(ru_law_thermal_voltage(-273.15 + 1.0), 8.617333262e-5, 1e-9);
}

static ru_amp follower(void)
{
    ru_amp a;
    ru_amp_defaults(&a, RU_LAW_FOLLOWER_TANH);
    a.gain = 0.97;
    a.swing_v = 1.5;
    a.center_v = 4.5;
    a.rout_ohm = 120.0;
    return a;
}

static ru_amp exp_stage(void)
{
    ru_amp a;
    ru_amp_defaults(&a, RU_LAW_EXP_STAGE);
    a.is_a = 2e-14;
    a.n = 1.3;
    a.beta = 150.0;
    a.vsat_v = 0.25;
    a.temp_c = 40.0;
    return a;
}

static void test_follower_values(void **state)
{
    (void)state;
    ru_amp a = follower();
    const double vcs[] = {-3.0, 3.0, 4.5, 4.9, 9.0};
    const double vos[] = {-1.0, 0.0, 4.4, 7.0};
    for (size_t i = 0; i < 5; i++)
        for (size_t j = 0; j < 4; j++) {
            ru_law_eval e;
            assert_int_equal(ru_law_eval_amp(&a, vcs[i], vos[j], &e), 1);
            /* Reference: the law as specified (Thevenin source behind rout),
             * written out independently here. 1e-12 relative: rounding only. */
            double emf = a.center_v + a.gain * a.swing_v *
                                          tanh((vcs[i] - a.center_v) / a.swing_v);
            RU_ASSERT_NEAR(e.i_out, (emf - vos[j]) / a.rout_ohm, 1e-12 * 0.1);
            RU_ASSERT_NEAR(e.i_in, 0.0, 0.0);
            RU_ASSERT_NEAR(e.di_out_dvo, -1.0 / a.rout_ohm, 1e-15);
        }
    /* Reference: d tanh(u)/du = 1 at u = 0, so at vc = center the open-circuit
     * small-signal gain dE/dvc = rout * di_out/dvc equals `gain` exactly. */
    ru_law_eval e;
    ru_law_eval_amp(&a, a.center_v, 0.0, &e);
    RU_ASSERT_REL(e.di_out_dvc * a.rout_ohm, a.gain, 1e-14);
    /* Reference: tanh saturates at +-1, so E stays within center +- gain*swing. */
    ru_law_eval_amp(&a, 1e3, 0.0, &e);
    RU_ASSERT_REL(e.i_out * a.rout_ohm, a.center_v + a.gain * a.swing_v, 1e-12);
}

static void test_exp_values(void **state)
{
    (void)state;
    ru_amp a = exp_stage();
    double nvt = a.n * ru_law_thermal_voltage(a.temp_c);
    const double vcs[] = {-0.5, 0.0, 0.55, 0.7};
    const double vos[] = {-0.3, 0.01, 0.5, 5.0};
    for (size_t i = 0; i < 4; i++)
        for (size_t j = 0; j < 4; j++) {
            ru_law_eval e;
            ru_law_eval_amp(&a, vcs[i], vos[j], &e);
            /* Reference: Shockley junction law ic = is (exp(vc/(n vt)) - 1) times
             * the tanh saturation factor, as specified; sinks into out. */
            double ic = a.is_a * (exp(vcs[i] / nvt) - 1.0) * tanh(vos[j] / a.vsat_v);
            RU_ASSERT_NEAR(e.i_out, -ic, 1e-12 * fabs(ic) + 1e-30);
            /* Reference: base current = junction current / beta (the exp-stage
             * definition in circuit.h: not reduced by the output saturation). */
            double ij = a.is_a * (exp(vcs[i] / nvt) - 1.0);
            RU_ASSERT_NEAR(e.i_in, -ij / a.beta, 1e-12 * fabs(ij) + 1e-30);
        }
    /* Reference: bipolar transconductance gm = Ic / (n Vt) in forward active
     * operation (standard small-signal model, e.g. Sedra & Smith, from memory).
     * Here n vt = 1.3 * 26.98 mV = 35.08 mV; at vc = 0.9 V, u = 25.7 and the -1
     * term is exp(-u) = 7e-12 of exp(u); at vo = 5 V = 20 vsat, tanh = 1 - 8e-18.
     * So 1e-9 relative is ample. */
    ru_law_eval e;
    ru_law_eval_amp(&a, 0.9, 5.0, &e);
    RU_ASSERT_REL(-e.di_out_dvc, -e.i_out / nvt, 1e-9);
    /* at vo = 20 vsat the saturation factor is 1 to 8e-18: gm_in = gm / beta */
    RU_ASSERT_REL(e.di_in_dvc * a.beta, e.di_out_dvc, 1e-12);
}

/* Junction limiting: linear continuation above U_MAX with a continuous value and
 * slope; nothing overflows far beyond it. */
static void test_exp_limiting(void **state)
{
    (void)state;
    double d_lo, d_hi;
    double u = RU_LAW_U_MAX;
    double lo = ru_law_limexp(u * (1 - 1e-12), &d_lo);
    double hi = ru_law_limexp(u * (1 + 1e-12), &d_hi);
    /* Reference: exp is its own derivative; continuity at U_MAX to 1e-9 (the
     * step 2e-12*U changes exp by 8e-11 relative). */
    RU_ASSERT_REL(hi, lo, 1e-9);
    RU_ASSERT_REL(d_hi, d_lo, 1e-9);
    RU_ASSERT_REL(lo, exp(u), 1e-9);
    double d;
    double far = ru_law_limexp(1e4, &d);
    assert_true(isfinite(far) && isfinite(d));
    /* Reference: tangent line of exp at U: exp(U) (1 + u - U). */
    RU_ASSERT_REL(far, exp(u) * (1.0 + 1e4 - u), 1e-12);
    RU_ASSERT_REL(d, exp(u), 1e-12);
    double neg = ru_law_limexp(-1e4, &d);
    assert_true(neg == 0.0 && d == 0.0);
    ru_amp a = exp_stage();
    ru_law_eval e;
    ru_law_eval_amp(&a, 500.0, 3.0, &e);
    assert_true(isfinite(e.i_out) && isfinite(e.di_out_dvc) && isfinite(e.di_in_dvo));
}

/* Central difference of one law output with respect to vc (which = 0) or vo. */
static double fd(const ru_amp *a, double vc, double vo, int which, int out)
{
    double h = 1e-6;
    ru_law_eval p, m;
    ru_law_eval_amp(a, vc + (which == 0 ? h : 0), vo + (which == 1 ? h : 0), &p);
    ru_law_eval_amp(a, vc - (which == 0 ? h : 0), vo - (which == 1 ? h : 0), &m);
    return out ? (p.i_out - m.i_out) / (2 * h) : (p.i_in - m.i_in) / (2 * h);
}

static void check_derivs(const ru_amp *a, double vc, double vo)
{
    ru_law_eval e;
    ru_law_eval_amp(a, vc, vo, &e);
    double an[4] = {e.di_out_dvc, e.di_out_dvo, e.di_in_dvc, e.di_in_dvo};
    double num[4] = {fd(a, vc, vo, 0, 1), fd(a, vc, vo, 1, 1), fd(a, vc, vo, 0, 0),
                     fd(a, vc, vo, 1, 0)};
    double big = 0.0;
    for (int k = 0; k < 4; k++)
        big = fmax(big, fabs(an[k]));
    for (int k = 0; k < 4; k++) {
        /* Reference: central finite differences, error O(h^2 f''') with h = 1 uV:
         * (h / n vt)^2 ~ 1e-9 relative for the exp law; plus roundoff
         * eps |i| / h. 1e-6 relative to the entry plus 1e-9 of the largest. */
        double tol = 1e-6 * fabs(num[k]) + 1e-9 * big + 1e-18;
        if (!(fabs(an[k] - num[k]) <= tol))
            fail_msg("law %d vc=%g vo=%g deriv %d: analytic %.10g fd %.10g", a->law, vc,
                     vo, k, an[k], num[k]);
    }
}

static void test_derivatives(void **state)
{
    (void)state;
    ru_amp f = follower(), x = exp_stage();
    const double vcs_f[] = {-2.0, 3.7, 4.5, 5.2, 8.0};
    const double vcs_x[] = {-1.0, 0.2, 0.6, 0.72, 1.5 /* > U_MAX n vt = 1.08 V */, 3.0};
    const double vos[] = {-2.0, -0.1, 0.0, 0.05, 0.3, 6.0};
    for (size_t i = 0; i < 5; i++)
        for (size_t j = 0; j < 6; j++)
            check_derivs(&f, vcs_f[i], vos[j]);
    for (size_t i = 0; i < 6; i++)
        for (size_t j = 0; j < 6; j++)
            check_derivs(&x, vcs_x[i], vos[j]);
}

/* Central differences of every derivative of a law, the state included. */
static void check_derivs_x(const ru_amp *a, double vc, double vo, double xs)
{
    double h = 1e-6 * fmax(1.0, fabs(xs));
    ru_law_eval e, p, m;
    ru_law_eval_state(a, vc, vo, xs, &e);
    double an[8] = {e.di_out_dvc, e.di_out_dvo, e.di_out_dxs, e.di_in_dvc, e.di_in_dvo,
                    e.ddxs_dvc,   e.ddxs_dvo,   e.ddxs_dxs};
    double num[8];
    for (int w = 0; w < 3; w++) { /* vc, vo, xs */
        double hh = w == 2 ? h : 1e-6;
        ru_law_eval_state(a, vc + (w == 0) * hh, vo + (w == 1) * hh, xs + (w == 2) * hh, &p);
        ru_law_eval_state(a, vc - (w == 0) * hh, vo - (w == 1) * hh, xs - (w == 2) * hh, &m);
        double dout = (p.i_out - m.i_out) / (2 * hh), din = (p.i_in - m.i_in) / (2 * hh);
        double dx = (p.dxs - m.dxs) / (2 * hh);
        if (w == 0) {
            num[0] = dout;
            num[3] = din;
            num[5] = dx;
        } else if (w == 1) {
            num[1] = dout;
            num[4] = din;
            num[6] = dx;
        } else {
            num[2] = dout;
            num[7] = dx;
        }
    }
    double big = 0.0;
    for (int k = 0; k < 8; k++)
        big = fmax(big, fabs(an[k]));
    for (int k = 0; k < 8; k++) {
        /* Reference: central finite differences (truncation O(h^2) times the third
         * derivative, h = 1 uV; roundoff eps |f|/h); 1e-6 of the entry plus 1e-8
         * of the largest entry (the opamp's rows mix 1/s and S scales). */
        double tol = 1e-6 * fabs(num[k]) + 1e-8 * big + 1e-18;
        if (!(fabs(an[k] - num[k]) <= tol))
            fail_msg("law %d vc=%g vo=%g xs=%g deriv %d: analytic %.10g fd %.10g", a->law,
                     vc, vo, xs, k, an[k], num[k]);
    }
}

static ru_amp diff_pair(void)
{
    ru_amp a;
    ru_amp_defaults(&a, RU_LAW_DIFF_PAIR_TANH);
    a.itail_a = 2e-3;
    a.n = 1.1;
    a.temp_c = 35.0;
    a.rout_ohm = 50e3;
    return a;
}

static void test_diff_pair(void **state)
{
    (void)state;
    ru_amp a = diff_pair();
    double vt = ru_law_thermal_voltage(a.temp_c);
    const double vds[] = {-0.3, -0.05, 0.0, 0.02, 0.1, 1.0};
    for (size_t i = 0; i < 6; i++) {
        ru_law_eval e;
        ru_law_eval_amp(&a, vds[i], 1.5, &e);
        /* Reference: emitter-coupled pair, differential output current
         * Itail tanh(vd/(2 n vt)) (Gray, Hurst, Lewis & Meyer, Analysis and Design
         * of Analog Integrated Circuits, ch. 3, from memory), minus vo/rout.
         * 1e-13 of itail: rounding only. */
        double want = a.itail_a * tanh(vds[i] / (2 * a.n * vt)) - 1.5 / a.rout_ohm;
        RU_ASSERT_NEAR(e.i_out, want, 1e-13 * a.itail_a);
        RU_ASSERT_NEAR(e.i_in, 0.0, 0.0);
        for (size_t j = 0; j < 3; j++)
            check_derivs_x(&a, vds[i], -2.0 + 2.0 * (double)j, 0.0);
    }
    /* Reference: transconductance of the pair at balance gm = Itail/(2 n Vt)
     * (same source): d tanh/du = 1 at 0, exact to rounding. */
    ru_law_eval e;
    ru_law_eval_amp(&a, 0.0, 0.0, &e);
    RU_ASSERT_REL(e.di_out_dvc, a.itail_a / (2 * a.n * vt), 1e-14);
    /* Reference: tanh -> 1: the whole tail current, at most. */
    ru_law_eval_amp(&a, 5.0, 0.0, &e);
    RU_ASSERT_REL(e.i_out, a.itail_a, 1e-14);
    a.sign = -1.0; /* inverting: the same current, pulled out of out */
    ru_law_eval_amp(&a, 5.0, 0.0, &e);
    RU_ASSERT_REL(e.i_out, -a.itail_a, 1e-14);
    a.rout_ohm = 0.0; /* no output resistance */
    ru_law_eval_amp(&a, 0.0, 3.0, &e);
    RU_ASSERT_NEAR(e.i_out, 0.0, 0.0);
    RU_ASSERT_NEAR(e.di_out_dvo, 0.0, 0.0);
}

static ru_amp opamp(void)
{
    ru_amp a;
    ru_amp_defaults(&a, RU_LAW_OPAMP);
    a.gain = 2e5;
    a.gbw_hz = 3e6;
    a.vmax_v = 10.0;
    a.vmin_v = -8.0;
    a.knee_v = 0.2;
    a.slew_v_per_s = 2e6;
    a.rout_ohm = 60.0;
    return a;
}

static void test_opamp(void **state)
{
    (void)state;
    ru_amp a = opamp();
    ru_law_eval e;
    /* Reference: single-pole op-amp A(s) = A0/(1 + s/wp), wp = 2 pi GBW/A0
     * (Sedra & Smith, Microelectronic Circuits, ch. 2, from memory). Small
     * signal around vc = 0, vint = 0: dvint/dt = wt vc - wp vint, so
     * d rate/d vint = -wp and d rate/d vc = wt = wp A0: the pole and the DC gain.
     * The anti-windup force at 0 V is slew*exp(-60) here: 1e-12 relative. */
    double wp = 2 * M_PI * a.gbw_hz / a.gain;
    ru_law_eval_state(&a, 0.0, 0.0, 0.0, &e);
    RU_ASSERT_REL(-e.ddxs_dxs, wp, 1e-12);
    RU_ASSERT_REL(e.ddxs_dvc / -e.ddxs_dxs, a.gain, 1e-12);
    RU_ASSERT_REL(e.ddxs_dvc, 2 * M_PI * a.gbw_hz, 1e-12);
    /* Reference: at DC the rate is 0 where wp vint = slew tanh(wt vc/slew), i.e.
     * vint = A0 vc for small vc (same model): 1 mV of vc rests at 200 V... inside
     * the rails we take 20 uV -> 4 V. tanh(x)/x = 1 - x^2/3 with x = 1.9e-4:
     * 1.2e-8 relative. */
    ru_law_eval_state(&a, 20e-6, 0.0, 4.0, &e);
    RU_ASSERT_NEAR(e.dxs, 0.0, 2e-8 * wp * 4.0);
    /* output: rail(vint) behind rout; rail(3) = 3 to exp(-25) */
    ru_law_eval_state(&a, 0.0, 1.0, 3.0, &e);
    RU_ASSERT_REL(e.i_out, (3.0 - 1.0) / a.rout_ohm, 1e-10);
    RU_ASSERT_NEAR(e.i_in, 0.0, 0.0);
    /* Reference: the rail function's definition (circuit.h): far beyond the rails
     * vmax or vmin; between them the input, off by at most 2 knee exp(-d/knee) at
     * a distance d from the nearer rail; at a rail knee ln 2 inside it. */
    double d;
    RU_ASSERT_NEAR(ru_law_rail(&a, 1e4, &d), a.vmax_v, 1e-12);
    RU_ASSERT_NEAR(d, 0.0, 1e-12);
    RU_ASSERT_NEAR(ru_law_rail(&a, -1e4, &d), a.vmin_v, 1e-12);
    RU_ASSERT_NEAR(ru_law_rail(&a, 2.5, &d), 2.5, a.knee_v * exp(-7.5 / 0.2) * 2 + 1e-14);
    RU_ASSERT_NEAR(ru_law_rail(&a, a.vmax_v, &d), a.vmax_v - a.knee_v * log(2.0), 1e-12);
    RU_ASSERT_NEAR(ru_law_rail(&a, a.vmin_v, &d), a.vmin_v + a.knee_v * log(2.0), 1e-12);
    /* Reference: the input stage saturates (slew*tanh): a large vc gives the slew
     * rate, less the leak wp vint (tanh(94) = 1 in double; K(-5) = slew e^-55). */
    ru_law_eval_state(&a, 10.0, 0.0, -5.0, &e);
    RU_ASSERT_REL(e.dxs - wp * 5.0, a.slew_v_per_s, 1e-12);
    ru_law_eval_state(&a, -10.0, 0.0, 5.0, &e);
    RU_ASSERT_REL(e.dxs + wp * 5.0, -a.slew_v_per_s, 1e-12);
    /* Anti-windup: driven hard up, vint rests where K balances the drive,
     * sp(z) = 1 at z = ln(e - 1) knees beyond vmax + 20 knee (leak wp*14 V is
     * 7e-4 of slew, shifting z by 1e-3 knee). */
    double vrest = a.vmax_v + a.knee_v * (20.0 + log(exp(1.0) - 1.0));
    ru_law_eval_state(&a, 10.0, 0.0, vrest, &e);
    RU_ASSERT_NEAR(e.dxs, 0.0, 2e-3 * a.slew_v_per_s);
    /* Reference: rest state (circuit.h): 0 V for rails far from 0. */
    RU_ASSERT_NEAR(ru_law_rest_state(&a), 0.0, 1e-12);
    /* derivatives in every region: linear, slew-limited, near and beyond each
     * rail, in the anti-windup band */
    const double vcs[] = {-0.5, -0.1, -1e-3, 0.0, 1e-6, 0.05, 0.3};
    const double xss[] = {-12.5, -11.0, -8.1, -3.0, 0.0, 0.4, 9.9, 12.0, 14.2};
    for (size_t i = 0; i < 7; i++)
        for (size_t j = 0; j < 9; j++)
            check_derivs_x(&a, vcs[i], 0.3, xss[j]);
    /* a single-supply part: the rest solves wp v + K(v) = 0 (checked by value) */
    a.vmin_v = 0.05;
    a.knee_v = 0.05;
    double v0 = ru_law_rest_state(&a);
    ru_law_eval_state(&a, 0.0, 0.0, v0, &e);
    RU_ASSERT_NEAR(e.dxs, 0.0, 1e-9 * a.slew_v_per_s);
}

/* The table's reference data (our own points: a flat stretch, uneven spacing). */
static ru_amp table_amp(void)
{
    static const double x[] = {-2.0, -0.7, -0.3, 0.0, 0.4, 1.1, 2.5};
    static const double y[] = {-1.2, -0.9, -0.5, 0.1, 0.6, 0.6, 1.3};
    ru_amp a;
    ru_amp_defaults(&a, RU_LAW_TABLE);
    a.npoints = 7;
    for (int i = 0; i < 7; i++) {
        a.pt_vin[i] = x[i];
        a.pt_vout[i] = y[i];
    }
    a.rout_ohm = 150.0;
    return a;
}

static void test_table_scipy(void **state)
{
    (void)state;
    ru_amp a = table_amp();
    /* Reference: scipy 1.10.1 scipy.interpolate.PchipInterpolator(x, y) and its
     * derivative() at these points (Debian /usr/bin/python3), printed with repr:
     * columns v, f(v), f'(v). 1e-13: both evaluate the same cubic in double. */
    static const double ref[][3] = {
        {-1.5, -1.1508815552387364, 0.1905490958745396},
        {-0.5, -0.7466675553185819, 1.055918421754199},
        {-0.1, -0.09458383114297093, 2.21505376344086},
        {0.2, 0.4277777777777778, 1.4861111111111112},
        {0.7, 0.6, 0.0},
        {1.0, 0.6, 0.0},
        {1.8, 0.8041666666666667, 0.5416666666666667},
        {2.4, 1.2179421768707483, 0.8069727891156464}};
    for (size_t i = 0; i < 8; i++) {
        double d;
        double f = ru_law_table_curve(&a, ref[i][0], &d);
        RU_ASSERT_NEAR(f, ref[i][1], 1e-13);
        RU_ASSERT_NEAR(d, ref[i][2], 1e-13);
    }
    /* Reference: scipy's end derivatives 0.0 (its shape-preserving end rule sets
     * a slope of the wrong sign to 0) and 0.8333333333333335; beyond the ends
     * the curve continues on those tangents (circuit.h: linear extrapolation). */
    double d;
    RU_ASSERT_NEAR(ru_law_table_curve(&a, -5.0, &d), -1.2, 1e-15);
    RU_ASSERT_NEAR(d, 0.0, 1e-15);
    RU_ASSERT_NEAR(ru_law_table_curve(&a, 4.5, &d), 1.3 + 2.0 * 0.8333333333333335, 1e-13);
    RU_ASSERT_NEAR(d, 0.8333333333333335, 1e-13);
    /* the law: f(vc) behind rout */
    ru_law_eval e;
    ru_law_eval_amp(&a, 0.2, 0.1, &e);
    RU_ASSERT_NEAR(e.i_out, (0.4277777777777778 - 0.1) / 150.0, 1e-15);
    const double vcs[] = {-3.0, -2.0, -1.9, -0.31, 0.0, 0.2, 0.7, 1.1, 2.4, 2.5, 6.0};
    for (size_t i = 0; i < 11; i++) /* off the knots (f'' jumps there) */
        check_derivs_x(&a, vcs[i] + 1e-5, -0.4, 0.0);
}

/* Fritsch-Carlson: monotone data give a monotone curve; C1 at the knots; a
 * straight line is reproduced exactly. */
static void test_table_properties(void **state)
{
    (void)state;
    ru_amp a = table_amp();
    double prev = -INFINITY, d;
    for (int k = 0; k <= 5000; k++) {
        /* Reference: Fritsch & Carlson, SIAM J. Numer. Anal. 17 (1980) 238: slopes
         * inside their monotonicity region give a monotone cubic on every interval
         * (the data here are non-decreasing). */
        double f = ru_law_table_curve(&a, -2.5 + 5.5 * k / 5000.0, &d);
        assert_true(f >= prev - 1e-15 && d >= -1e-15);
        prev = f;
    }
    for (int i = 1; i < a.npoints - 1; i++) {
        double dl, dr, x = a.pt_vin[i];
        double fl = ru_law_table_curve(&a, x - 1e-12, &dl);
        double fr = ru_law_table_curve(&a, x + 1e-12, &dr);
        /* Reference: Hermite interpolation uses one slope per knot on both sides
         * (C1 by construction); 1e-10: the 1e-12 step times f'' (< 100). */
        RU_ASSERT_NEAR(fl, a.pt_vout[i], 1e-10);
        RU_ASSERT_NEAR(fr, a.pt_vout[i], 1e-10);
        RU_ASSERT_NEAR(dl, dr, 1e-9);
    }
    /* A straight line through uneven points: every slope is the line's, so the
     * cubic is the line (Reference: the Hermite basis reproduces degree-1 data). */
    static const double xs[] = {-1.0, -0.2, 0.1, 1.7, 1.9};
    for (int i = 0; i < 5; i++) {
        a.pt_vin[i] = xs[i];
        a.pt_vout[i] = 0.5 - 2.5 * xs[i];
    }
    a.npoints = 5;
    for (double v = -3.0; v <= 3.0; v += 0.1234) {
        RU_ASSERT_NEAR(ru_law_table_curve(&a, v, &d), 0.5 - 2.5 * v, 1e-14);
        RU_ASSERT_NEAR(d, -2.5, 1e-13);
    }
    a.npoints = 2; /* two points: a line */
    RU_ASSERT_NEAR(ru_law_table_curve(&a, 0.3, &d), 0.5 - 2.5 * 0.3, 1e-15);
}

static void test_diode(void **state)
{
    (void)state;
    ru_diode dd;
    ru_diode_defaults(&dd);
    dd.is_a = 4e-9;
    dd.n = 1.8;
    dd.temp_c = 50.0;
    double nvt = dd.n * ru_law_thermal_voltage(dd.temp_c);
    const double vds[] = {-20.0, -0.5, 0.0, 0.3, 0.6, 0.75, 1.2, 3.0, 50.0};
    for (int rs = 0; rs < 2; rs++) {
        dd.rs_ohm = rs ? 2.5 : 0.0;
        for (size_t i = 0; i < 9; i++) {
            double g;
            double iv = ru_diode_current(&dd, vds[i], &g);
            double vj = vds[i] - dd.rs_ohm * iv; /* KVL across rs */
            double u = vj / nvt;
            /* Reference: Shockley ideal diode i = is (exp(vj/(n vt)) - 1) at the
             * junction voltage (Sze, Physics of Semiconductor Devices, from
             * memory), below the limiting point. vj recovered by KVL from i
             * carries i's rounding times rs gj = rs i/(n vt): relative 1e-14 (1 + rs gj); the
             * exponent's own rounding adds eps u. */
            double tol = 1e-14 * (1.0 + dd.rs_ohm * fabs(iv) / nvt) + 1e-15 * fabs(u);
            if (u < RU_LAW_U_MAX)
                RU_ASSERT_NEAR(iv, dd.is_a * expm1(u), tol * fabs(iv) + 1e-24);
            else /* junction-voltage limiting: the tangent of exp at 40 */
                RU_ASSERT_REL(iv,
                              dd.is_a * (exp(RU_LAW_U_MAX) * (1 + u - RU_LAW_U_MAX) - 1),
                              tol);
            double h = 1e-6, gp, gm;
            double num = (ru_diode_current(&dd, vds[i] + h, &gp) -
                          ru_diode_current(&dd, vds[i] - h, &gm)) / (2 * h);
            /* Reference: central differences; 1e-6 relative plus the rounding of
             * i (1e-16 |i| / h). */
            RU_ASSERT_NEAR(g, num, 1e-6 * fabs(num) + 1e-9 * fabs(iv) + 1e-20);
        }
    }
    double g;
    /* Reference: Shockley's law in reverse bias: i -> -is. */
    RU_ASSERT_REL(ru_diode_current(&dd, -20.0, &g), -dd.is_a, 1e-12);
    /* Reference: with rs the slope tends to 1/rs (the junction's own n vt / i is
     * 2.5 mohm at 20 A, 0.1 % of rs). */
    ru_diode_current(&dd, 50.0, &g);
    RU_ASSERT_REL(g, 1.0 / dd.rs_ohm, 3e-3);
}

/* Derivatives of the thermal resistor at (v, rise) against central differences. */
static void check_thermal_derivs(const ru_thermal *t, double v, double rise)
{
    ru_thermal_eval e, p, m;
    ru_thermal_eval_at(t, v, rise, &e);
    double an[4] = {e.di_dv, e.di_dx, e.ddx_dv, e.ddx_dx}, num[4];
    double hv = 1e-6, hx = 1e-5;
    ru_thermal_eval_at(t, v + hv, rise, &p);
    ru_thermal_eval_at(t, v - hv, rise, &m);
    num[0] = (p.i - m.i) / (2 * hv);
    num[2] = (p.dx - m.dx) / (2 * hv);
    ru_thermal_eval_at(t, v, rise + hx, &p);
    ru_thermal_eval_at(t, v, rise - hx, &m);
    num[1] = (p.i - m.i) / (2 * hx);
    num[3] = (p.dx - m.dx) / (2 * hx);
    /* rounding of the differenced values: eps times their size over the step */
    double ri = 4e-16 * fabs(e.i), rx = 4e-16 * (fabs(e.dx) + fabs(rise) / t->rth_k_per_w /
                                                              t->cth_j_per_k);
    double round[4] = {ri / hv, ri / hx, rx / hv, rx / hx};
    for (int k = 0; k < 4; k++)
        /* Reference: central differences; 1e-6 relative plus rounding */
        if (!(fabs(an[k] - num[k]) <= 1e-6 * fabs(num[k]) + round[k] + 1e-15))
            fail_msg("thermal kind %d rise %g v %g deriv %d: %.10g vs fd %.10g", t->kind,
                     rise, v, k, an[k], num[k]);
}

static void test_thermal(void **state)
{
    (void)state;
    ru_thermal t;
    ru_thermal_defaults(&t, RU_THERMAL_LAMP);
    t.r0_ohm = 40.0;
    t.alpha_per_k = 5e-3;
    t.t0_c = 20.0;
    t.tamb_c = 30.0;
    t.rth_k_per_w = 1e3;
    t.cth_j_per_k = 2e-4;
    double dr;
    /* Reference: linear metal resistance R = r0 (1 + alpha (T - t0)), T = tamb + rise. */
    RU_ASSERT_REL(ru_thermal_resistance(&t, 500.0, &dr), 40.0 * (1 + 5e-3 * 510.0), 1e-14);
    RU_ASSERT_REL(dr, 40.0 * 5e-3, 1e-14);
    /* Reference: first-order thermal RC: at rise = P rth the heat balance rests
     * (d rise/dt = 0) with P = v^2/R(T). v chosen for a rise of 300 K. */
    ru_thermal_eval e;
    double r300 = ru_thermal_resistance(&t, 300.0, &dr), v = sqrt(300.0 / 1e3 * r300);
    ru_thermal_eval_at(&t, v, 300.0, &e);
    RU_ASSERT_NEAR(e.dx, 0.0, 1e-12 * 300.0 / (1e3 * 2e-4));
    RU_ASSERT_REL(e.i, v / r300, 1e-14);
    /* with constant R (alpha 0) the rise relaxes with tau = rth cth (same source) */
    t.alpha_per_k = 0.0;
    ru_thermal_eval_at(&t, 2.0, 10.0, &e);
    RU_ASSERT_REL(-1.0 / e.ddx_dx, 1e3 * 2e-4, 1e-14);
    t.alpha_per_k = 5e-3;
    const double rises[] = {-400.0, -250.0, -30.0, 0.0, 5.0, 120.0, 900.0, 2500.0};
    const double vs[] = {-3.0, 0.0, 0.7, 12.0};
    for (size_t i = 0; i < 8; i++) /* cold, hot, and the continuation below -225 K */
        for (size_t j = 0; j < 4; j++)
            check_thermal_derivs(&t, vs[j], rises[i]);
    ru_thermal_defaults(&t, RU_THERMAL_NTC);
    t.r0_ohm = 4.7e3;
    t.beta_k = 3900.0;
    /* Reference: B-parameter thermistor law R = r0 exp(B (1/T - 1/T0)), T in K. */
    RU_ASSERT_REL(ru_thermal_resistance(&t, 0.0, &dr), 4.7e3, 1e-14);
    RU_ASSERT_REL(ru_thermal_resistance(&t, 60.0, &dr),
                  4.7e3 * exp(3900.0 * (1 / 358.15 - 1 / 298.15)), 1e-13);
    const double nrises[] = {-290.0, -200.0, -30.0, 0.0, 5.0, 120.0, 900.0};
    for (size_t i = 0; i < 7; i++) /* -290 K: below the 20 K floor */
        for (size_t j = 0; j < 4; j++)
            check_thermal_derivs(&t, vs[j], nrises[i]);
}

static void test_table(void **state)
{
    (void)state;
    for (int l = 0; l < RU_LAW_COUNT; l++) {
        const ru_law_desc *d = ru_law_get((ru_law)l);
        assert_non_null(d);
        assert_int_equal(d->law, l);
        assert_true(d->eval != NULL || d->eval_at != NULL); /* one evaluator */
        ru_amp da;
        ru_amp_defaults(&da, (ru_law)l);
        /* at its defaults only the opamp has a state */
        assert_int_equal(ru_law_nstates(&da), l == RU_LAW_OPAMP ? 1 : 0);
    }
    assert_null(ru_law_get(RU_LAW_COUNT));
    assert_null(ru_law_get((ru_law)-1));
    ru_amp a = follower();
    a.law = RU_LAW_COUNT;
    ru_law_eval e;
    memset(&e, 1, sizeof e); /* nonzero bytes: the call must zero them */
    assert_int_equal(ru_law_eval_amp(&a, 0.0, 0.0, &e), 0);
    RU_ASSERT_NEAR(e.i_out, 0.0, 0.0);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_thermal_voltage), cmocka_unit_test(test_follower_values),
        cmocka_unit_test(test_exp_values),      cmocka_unit_test(test_exp_limiting),
        cmocka_unit_test(test_derivatives),     cmocka_unit_test(test_table),
        cmocka_unit_test(test_diff_pair),       cmocka_unit_test(test_opamp),
        cmocka_unit_test(test_table_scipy),     cmocka_unit_test(test_table_properties),
        cmocka_unit_test(test_diode),           cmocka_unit_test(test_thermal),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
