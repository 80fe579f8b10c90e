/* test_laws.c: the amplifier laws (src/laws.c): values against their defining
 * formulas, derivatives against central finite differences in every region
 * (cut-off, active, junction limiting, vo < 0), the exp-stage transconductance
 * against gm = Ic/(n Vt), the thermal voltage against NIST's k/e, and the law
 * table. */
#include "ru_test.h"

#include "laws.h"

#include <stdio.h>

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

static void test_table(void **state)
{
    (void)state;
    for (int l = 0; l < RU_LAW_COUNT; l++) {
        const ru_law_desc *d = ru_law_get((ru_law)l);
        assert_non_null(d);
        assert_int_equal(d->law, l);
        assert_non_null(d->eval);
        assert_int_equal(d->nstates, l == RU_LAW_OPAMP ? 1 : 0);
    }
    assert_null(ru_law_get(RU_LAW_COUNT));
    assert_null(ru_law_get((ru_law)-1));
    ru_amp a = follower();
    a.law = RU_LAW_COUNT;
    ru_law_eval e = {1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1};
    assert_int_equal(ru_law_eval_amp(&a, 0.0, 0.0, &e), 0);
    RU_ASSERT_NEAR(e.i_out, 0.0, 0.0);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_thermal_voltage), cmocka_unit_test(test_follower_values),
        cmocka_unit_test(test_exp_values),      cmocka_unit_test(test_exp_limiting),
        cmocka_unit_test(test_derivatives),     cmocka_unit_test(test_table),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
