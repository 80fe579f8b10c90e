/* test_envfollow.c: the envelope engine (Petzold's envelope following on a
 * Poincare section) against direct runs and the method of averaging.
 *
 * Circuits are van der Pol tanks: L, C, a loss resistor R (tank Q = R / sqrt(L/C))
 * and a cubic conductance i = -g1 v + b v^3 with g1 = m / R (m: how many times the
 * negative conductance beats the loss). The net conductance a = g1 - 1/R gives
 *   growth  sigma = a / (2 C),   settled amplitude A = 2 sqrt(a / (3 b))
 * and, started at a0, the averaged envelope
 *   a(t) = a0 e^{sigma t} / sqrt(1 + (a0/A)^2 (e^{2 sigma t} - 1)),
 *   start-up to level L: t = ln((A^2/a0^2 - 1) / (1/L^2 - 1)) / (2 sigma)
 * (Source: the method of averaging for the van der Pol equation, e.g. Nayfeh &
 * Mook, "Nonlinear Oscillations", ch. 4; from memory), with the tone at
 * w0 (1 - eps^2/16), eps = a sqrt(L/C) (Lindstedt-Poincare, same source). C
 * includes the 1 pF stray. Direct runs go through ringup's CVODE transient engine
 * and the same measurement code as the envelope runs. */
#include "ru_test.h"

#include "ringup/circuit.h"
#include "ringup/envfollow.h"
#include "ringup/loader.h"
#include "ringup/measure.h"
#include "ringup/smallsig.h"
#include "ringup/system.h"
#include "ringup/transient.h"
#include "ringup/verdict.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define PI 3.14159265358979323846
#define LT 10e-3
#define CT (100e-9 + 1e-12)

typedef struct tank {
    double q, m, amp, a0;  /* tank Q, margin, settled amplitude, kick */
    double r, g1, a, b;    /* derived values */
    double sigma, f0, eps;
} tank;

static tank tank_make(double q, double m, double amp)
{
    tank t = {.q = q, .m = m, .amp = amp, .a0 = 1e-3};
    t.r = q * sqrt(LT / 100e-9);
    t.g1 = m / t.r;
    t.a = t.g1 - 1.0 / t.r;
    t.b = 4.0 * t.a / (3.0 * amp * amp);
    t.sigma = t.a / (2.0 * CT);
    t.f0 = 1.0 / (2.0 * PI * sqrt(LT * CT));
    t.eps = t.a * sqrt(LT / CT);
    return t;
}

static double avg_startup(const tank *t, double level)
{
    double r = t->amp * t->amp / (t->a0 * t->a0) - 1.0;
    return log(r / (1.0 / (level * level) - 1.0)) / (2.0 * t->sigma);
}

static double avg_envelope(const tank *t, double time_s)
{
    double e = exp(t->sigma * time_s), k = t->a0 / t->amp;
    return t->a0 * e / sqrt(1.0 + k * k * (e * e - 1.0));
}

/* A compiled tank with its operating point, dominant pole and initial state. */
typedef struct rig {
    ru_circuit *c;
    ru_system *s;
    double xop[4], x0[4];
    ru_pole pole;
    int probe;
    double stop_s, sample_s;
} rig;

static void rig_open(rig *g, const tank *t, double stop_s, double r_ohm)
{
    char y[1024], rline[128] = "";
    if (r_ohm > 0)
        snprintf(rline, sizeof rline,
                 "  R1: {type: resistor, nodes: [tank, gnd], value: %.17g}\n", r_ohm);
    int len = snprintf(y, sizeof y,
                       "parts:\n"
                       "  L1: {type: inductor, nodes: [tank, gnd], value: %.17g}\n"
                       "  C1: {type: capacitor, nodes: [tank, gnd], value: 100n}\n%s"
                       "  G1: {type: poly-conductance, nodes: [tank, gnd], "
                       "coeffs: [0, %.17g, 0, %.17g]}\n"
                       "run: {stop: %.17g, kick: {preset: {tank: %.17g}}}\n"
                       "measure: {probe: tank}\n",
                       LT, rline, -t->g1, t->b, stop_s, t->a0);
    assert_true(len > 0 && (size_t)len < sizeof y);
    ru_error e;
    ru_error_clear(&e);
    assert_int_equal(ru_circuit_load_string(y, "tank.yaml", NULL, &g->c, &e), RU_OK);
    assert_int_equal(ru_system_create(g->c, &g->s, &e), RU_OK);
    size_t n = ru_system_size(g->s);
    assert_int_equal(n, 2);
    ru_pole p[4];
    memset(g->xop, 0, sizeof g->xop);
    assert_int_equal(ru_oppoint_solve(g->s, g->xop, 0, NULL, &e), RU_OK);
    assert_int_equal(ru_poles_compute(g->s, g->xop, p, &e), RU_OK);
    int d = ru_poles_dominant(p, n);
    assert_true(d >= 0);
    g->pole = p[d];
    assert_int_equal(ru_system_initial_state(g->s, g->x0, &e), RU_OK);
    g->probe = ru_circuit_find_node(g->c, "tank");
    g->stop_s = stop_s;
    g->sample_s = 1.0 / (72.0 * t->f0);
}

static void rig_close(rig *g)
{
    ru_system_destroy(g->s);
    ru_circuit_destroy(g->c);
}

/* The verdict as a run gives it: the kick is the seed, the poles give the scales. */
static void judge(const rig *g, const tank *t, ru_measure_result *r)
{
    ru_verdict_input in;
    ru_verdict_input_default(&in);
    in.meas = r;
    in.seed_v = t->a0;
    in.seed_is_kick = 1;
    in.floor_v = 1e-9;
    in.growth_per_s = g->pole.re_per_s;
    in.period_s = 2 * PI / g->pole.im_rad_per_s;
    in.t_expect_s = avg_startup(t, 0.9);
    in.dc_scale_v = 1.0;
    ru_verdict_result v;
    ru_verdict_judge(&in, &v);
    ru_verdict_apply(&v, r);
}

static ru_measure *measure_new(const rig *g, const tank *t)
{
    ru_measure_cfg mc;
    ru_measure_cfg_default(&mc, g->stop_s, g->sample_s);
    mc.period_hint_s = 1.0 / t->f0;
    mc.kick_level_v = t->a0;
    ru_measure *m = NULL;
    assert_int_equal(ru_measure_create(&mc, &m), RU_OK);
    return m;
}

typedef struct sink {
    const rig *g;
    ru_measure *m;
    double last_t, last_a; /* the last envelope cycle seen */
    long cycles, alone;
} sink;

static ru_status direct_sample(void *user, double t, const double *x, size_t n)
{
    (void)n;
    sink *k = user;
    return ru_measure_push(k->m, t, ru_system_node_voltage(k->g->s, k->g->probe, t, x));
}

/* Direct run: measured figures. */
static void run_direct(const rig *g, const tank *t, ru_accuracy acc, ru_measure_result *r,
                       double *t_last, double *a_last)
{
    ru_transient_opts to;
    ru_transient_opts_for(acc, &to);
    to.stop_s = g->stop_s;
    to.sample_s = g->sample_s;
    sink k = {.g = g, .m = measure_new(g, t)};
    ru_error e;
    ru_error_clear(&e);
    assert_int_equal(ru_transient_run(g->s, &to, g->x0, direct_sample, &k, NULL, &e), RU_OK);
    assert_int_equal(ru_measure_finish(k.m, r), RU_OK);
    judge(g, t, r);
    const double *et, *ea;
    size_t ne;
    ru_measure_envelope(k.m, &et, &ea, &ne);
    assert_true(ne > 2);
    *t_last = et[ne - 2];
    *a_last = ea[ne - 2];
    ru_measure_destroy(k.m);
}

/* Envelope runs feed the measurement as a run does: samples of integrated
 * stretches, and one envelope point per cycle computed alone. */
static ru_status env_sample(void *user, double t, const double *x, size_t n, int flags)
{
    (void)n;
    sink *k = user;
    if (flags & RU_ENVF_ALONE)
        return RU_OK;
    return ru_measure_push(k->m, t, ru_system_node_voltage(k->g->s, k->g->probe, t, x));
}

static ru_status env_cycle(void *user, const ru_envf_cycle *cy)
{
    sink *k = user;
    k->cycles++;
    if (cy->kind == RU_ENVF_POINT) {
        k->alone++;
        return ru_measure_push_point(k->m, cy->t_s, cy->amplitude_v);
    }
    k->last_t = cy->t_s;
    k->last_a = cy->amplitude_v;
    return RU_OK;
}

static void run_env(const rig *g, const tank *t, ru_accuracy acc, ru_measure_result *r,
                    ru_envf_stats *st, sink *k)
{
    ru_envf_opts o;
    ru_envf_opts_for(acc, &o);
    o.stop_s = g->stop_s;
    o.sample_s = g->sample_s;
    o.x_op = g->xop;
    o.pole = g->pole;
    o.probe_pos = g->probe;
    o.probe_neg = 0;
    memset(k, 0, sizeof *k);
    k->g = g;
    k->m = measure_new(g, t);
    ru_envf_sink sk = {.user = k, .sample = env_sample, .cycle = env_cycle};
    ru_error e;
    ru_error_clear(&e);
    ru_status s = ru_envf_run(g->s, &o, g->x0, &sk, st, &e);
    if (s != RU_OK)
        fail_msg("envelope run: %s", e.msg);
    assert_int_equal(st->fell_back, 0);
    assert_int_equal(ru_measure_finish(k->m, r), RU_OK);
    judge(g, t, r);
    ru_measure_destroy(k->m);
    k->m = NULL;
}

/* Q = 1e3, margin 5, from 1 mV to 1 V: every figure against a direct run (the
 * issue's targets: start-up 1 %, amplitude 0.1 %, frequency 0.1 ppm; measured
 * differences are far smaller, see the benchmark) and against averaging. */
static void test_q1e3_matches_direct(void **state)
{
    (void)state;
    tank t = tank_make(1e3, 5, 1.0);
    rig g;
    rig_open(&g, &t, 2.5 * avg_startup(&t, 0.9), t.r);
    ru_measure_result d, v;
    ru_envf_stats st;
    sink k;
    double tl, al;
    run_direct(&g, &t, RU_ACCURACY_NORMAL, &d, &tl, &al);
    run_env(&g, &t, RU_ACCURACY_NORMAL, &v, &st, &k);
    assert_true(d.started && v.started && d.settled && v.settled);
    RU_ASSERT_REL(v.startup_time_s, d.startup_time_s, 0.01);
    RU_ASSERT_REL(v.settled_amplitude_v, d.settled_amplitude_v, 1e-3);
    RU_ASSERT_REL(v.frequency_hz, d.frequency_hz, 1e-7);
    RU_ASSERT_REL(v.thd_percent, d.thd_percent, 1e-3);
    /* Averaging (eps = 4e-3: its own error is of order eps^2, far below these) */
    RU_ASSERT_REL(v.startup_time_s, avg_startup(&t, 0.9), 2e-3);
    RU_ASSERT_REL(v.settled_amplitude_v, t.amp, 1e-3);
    RU_ASSERT_REL(v.frequency_hz, t.f0 * (1 - t.eps * t.eps / 16), 1e-7);
    RU_ASSERT_REL(v.growth_rate_per_s, t.sigma, 0.01); /* 1 %..10 % window, README */
    /* it skipped: far fewer cycles integrated than the run has */
    assert_true(st.cycles_spanned > 0.8 * g.stop_s * t.f0);
    assert_true(k.alone > 100);
    rig_close(&g);
}

/* Q = 1e4: 3000 cycles of growth from 1 mV (a direct run of the whole start-up
 * belongs in the benchmark): the last cycle's amplitude against the direct run and
 * the averaged envelope. */
static void test_q1e4_growth(void **state)
{
    (void)state;
    tank t = tank_make(1e4, 5, 1.0);
    rig g;
    rig_open(&g, &t, 3000.0 / t.f0, t.r);
    ru_measure_result d, v;
    ru_envf_stats st;
    sink k;
    double tl, al;
    /* precise: at normal the direct run's own damping reads this growth 0.4 % low
     * (measured; its absolute tolerance is set by the 1 V scale, not the 1 mV
     * start), which is what the envelope engine's relative weights avoid */
    run_direct(&g, &t, RU_ACCURACY_PRECISE, &d, &tl, &al);
    run_env(&g, &t, RU_ACCURACY_NORMAL, &v, &st, &k);
    /* the two last-cycle stamps differ by a fraction of a period: compare the
     * envelope engine's amplitude with the direct one carried along exp(sigma dt) */
    double adj = al * exp(t.sigma * (k.last_t - tl));
    /* the envelope steps' tolerance here is 1e4 x rtol_cycle = 6e-5 per step: the
     * amplitude after a growth of 23x (ln 23 = 3.1 time constants) within 1e-3 is a
     * start-up time within 3e-4 */
    RU_ASSERT_REL(k.last_a, adj, 1e-3);
    /* Averaging: a(t) grew 23x; 1e-3 covers the growth window's start (a0 is the
     * dominant mode's share of the kick, exact here) */
    RU_ASSERT_REL(k.last_a, avg_envelope(&t, k.last_t), 1e-3);
    assert_true(st.cycles_spanned > 2500);
    rig_close(&g);
}

/* van der Pol at eps = 1e-4 (no loss resistor): about 24000 cycles to start; the
 * start-up time against averaging's closed form. Tolerance 1e-3: the engine's
 * growth budget at precise is 1e-4 and the envelope points' linear interpolation
 * adds about 5e-5 (README). */
static void test_vdp_eps_1e4(void **state)
{
    (void)state;
    tank t = tank_make(1, 1, 1.0); /* placeholder, set below */
    t.a = 1e-4 / sqrt(LT / CT);    /* eps = a sqrt(L/C) */
    t.g1 = t.a;
    t.b = 4.0 * t.a / 3.0;
    t.sigma = t.a / (2.0 * CT);
    t.eps = 1e-4;
    rig g;
    rig_open(&g, &t, 2.0 * avg_startup(&t, 0.9), 0);
    ru_measure_result v;
    ru_envf_stats st;
    sink k;
    run_env(&g, &t, RU_ACCURACY_PRECISE, &v, &st, &k);
    assert_true(v.started);
    RU_ASSERT_REL(v.startup_time_s, avg_startup(&t, 0.9), 1e-3);
    RU_ASSERT_REL(v.settled_amplitude_v, 1.0, 1e-3);
    RU_ASSERT_REL(g.pole.re_per_s, t.sigma, 1e-9);
    assert_true(st.cycles_integrated < 3000);
    rig_close(&g);
}

/* The cost does not grow with Q: right-hand-side evaluations at Q = 1e6 within 3x
 * of Q = 1e3 (counts, not time: they repeat on any machine). */
static void test_cost_flat_in_q(void **state)
{
    (void)state;
    long rhs[2];
    double qs[2] = {1e3, 1e6};
    for (int i = 0; i < 2; i++) {
        tank t = tank_make(qs[i], 5, 1.0);
        rig g;
        rig_open(&g, &t, 2.5 * avg_startup(&t, 0.9), t.r);
        ru_measure_result v;
        ru_envf_stats st;
        sink k;
        run_env(&g, &t, RU_ACCURACY_NORMAL, &v, &st, &k);
        assert_true(v.started);
        /* draft-to-normal budget: the growth rate within 1e-3 of the poles' */
        RU_ASSERT_REL(v.startup_time_s, avg_startup(&t, 0.9), 3e-3);
        rhs[i] = st.solver.rhs_evals;
        rig_close(&g);
    }
    if (!(rhs[1] < 3 * rhs[0]))
        fail_msg("rhs evaluations: %ld at Q = 1e3, %ld at Q = 1e6", rhs[0], rhs[1]);
}

/* A run in three advances (as the automatic run length drives it, each ending with
 * cycles integrated in full) gives the figures of one advance: start-up time and
 * amplitude to the envelope steps' tolerance (rtol_env 1e-5 at normal; 1e-3 allows
 * for the different step sequences). */
static void test_chunks_match_one_run(void **state)
{
    (void)state;
    tank t = tank_make(1e3, 5, 1.0);
    rig g;
    rig_open(&g, &t, 2.5 * avg_startup(&t, 0.9), t.r);
    ru_measure_result one, three;
    ru_envf_stats st;
    sink k1, k3;
    run_env(&g, &t, RU_ACCURACY_NORMAL, &one, &st, &k1);
    ru_envf_opts o;
    ru_envf_opts_for(RU_ACCURACY_NORMAL, &o);
    o.stop_s = g.stop_s;
    o.sample_s = g.sample_s;
    o.x_op = g.xop;
    o.pole = g.pole;
    o.probe_pos = g.probe;
    memset(&k3, 0, sizeof k3);
    k3.g = &g;
    k3.m = measure_new(&g, &t);
    ru_envf_sink sk = {.user = &k3, .sample = env_sample, .cycle = env_cycle};
    ru_envf *ev = NULL;
    ru_error e;
    ru_error_clear(&e);
    assert_int_equal(ru_envf_create(g.s, &o, g.x0, &sk, &ev, &e), RU_OK);
    double stops[3] = {g.stop_s / 3, 0.6 * g.stop_s, g.stop_s};
    for (int i = 0; i < 3; i++) {
        if (ru_envf_advance(ev, stops[i], &e) != RU_OK)
            fail_msg("advance: %s", e.msg);
        RU_ASSERT_REL(ru_envf_time(ev), stops[i], 1e-9);
    }
    assert_true(ru_envf_done(ev));
    ru_envf_get_stats(ev, &st);
    assert_true(st.cycles_spanned > 0.8 * g.stop_s * t.f0);
    ru_envf_destroy(ev);
    assert_int_equal(ru_measure_finish(k3.m, &three), RU_OK);
    judge(&g, &t, &three);
    ru_measure_destroy(k3.m);
    assert_true(three.started && three.settled);
    RU_ASSERT_REL(three.startup_time_s, one.startup_time_s, 1e-3);
    RU_ASSERT_REL(three.settled_amplitude_v, one.settled_amplitude_v, 1e-3);
    RU_ASSERT_REL(k3.last_a, k1.last_a, 1e-3);
    rig_close(&g);
}

/* A circuit whose cycles are not alike (a sine source) is refused with a reason. */
static void test_refuses_driven(void **state)
{
    (void)state;
    const char *y = "parts:\n"
                    "  V1: {type: supply, nodes: [d, gnd], wave: sine, amplitude: 1, "
                    "freq: 1k}\n"
                    "  R1: {type: resistor, nodes: [d, tank], value: 1k}\n"
                    "  L1: {type: inductor, nodes: [tank, gnd], value: 10m}\n"
                    "  C1: {type: capacitor, nodes: [tank, gnd], value: 100n}\n";
    ru_circuit *c;
    ru_system *s;
    ru_error e;
    ru_error_clear(&e);
    assert_int_equal(ru_circuit_load_string(y, "driven.yaml", NULL, &c, &e), RU_OK);
    assert_int_equal(ru_system_create(c, &s, &e), RU_OK);
    double xop[4] = {0}, x0[4] = {0};
    ru_envf_opts o;
    ru_envf_opts_for(RU_ACCURACY_NORMAL, &o);
    o.x_op = xop;
    o.pole.re_per_s = -10;
    o.pole.im_rad_per_s = 3e4;
    o.probe_pos = ru_circuit_find_node(c, "tank");
    char why[200];
    assert_int_equal(ru_envf_applicable(s, &o, why, sizeof why), 0);
    assert_non_null(strstr(why, "sine"));
    assert_int_equal(ru_envf_run(s, &o, x0, NULL, NULL, &e), RU_EINPUT);
    assert_non_null(strstr(e.msg, "envelope engine cannot run"));
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_q1e3_matches_direct),
        cmocka_unit_test(test_q1e4_growth),
        cmocka_unit_test(test_vdp_eps_1e4),
        cmocka_unit_test(test_cost_flat_in_q),
        cmocka_unit_test(test_chunks_match_one_run),
        cmocka_unit_test(test_refuses_driven),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
