/* test_transient.c: the time-domain engine against analytic results.
 *
 * Every circuit is built with the builder API (circuit.h) and run through
 * ru_system + ru_transient_run; the waveforms are checked against closed-form
 * solutions of the circuit's ODE (named beside each check). The stray capacitance
 * (1 pF default, from every free node to ground) is included in the analytic values. */
#include "ru_test.h"

#include "ringup/circuit.h"
#include "ringup/system.h"
#include "ringup/transient.h"

#include <malloc.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define PI 3.14159265358979323846

/* ---- circuit building ------------------------------------------------------- */

static void add2(ru_circuit *c, ru_part_type type, const char *name, const char *a,
                 const char *b, double value)
{
    ru_part p;
    ru_part_init(&p, type, name);
    p.node[0] = ru_circuit_node(c, a, 0, 0);
    p.node[1] = ru_circuit_node(c, b, 0, 0);
    p.value = value;
    ru_error e;
    assert_int_equal(ru_circuit_add_part(c, &p, &e), RU_OK);
}

static void add_poly(ru_circuit *c, const char *name, const char *a, const double *k,
                     int nk)
{
    ru_part p;
    ru_part_init(&p, RU_PART_POLY, name);
    p.node[0] = ru_circuit_node(c, a, 0, 0);
    p.node[1] = 0;
    memcpy(p.coeffs, k, (size_t)nk * sizeof *k);
    p.ncoeffs = nk;
    ru_error e;
    assert_int_equal(ru_circuit_add_part(c, &p, &e), RU_OK);
}

static void add_supply(ru_circuit *c, const char *name, const char *a, const ru_wave *w)
{
    ru_part p;
    ru_part_init(&p, RU_PART_SUPPLY, name);
    p.node[0] = ru_circuit_node(c, a, 0, 0);
    p.node[1] = 0;
    p.wave = *w;
    ru_error e;
    assert_int_equal(ru_circuit_add_part(c, &p, &e), RU_OK);
}

static void set_preset(ru_circuit *c, const char *node, double v)
{
    ru_run_opts *ro = ru_circuit_run_opts(c);
    ro->kick = RU_KICK_PRESET;
    ro->npreset = 1;
    ro->preset_node[0] = ru_circuit_find_node(c, node);
    ro->preset_v[0] = v;
}

/* Parallel tank L || C || poly-conductance (coefficients k) at node "t", preset v0. */
static ru_circuit *tank(double L, double C, const double *k, int nk, double v0)
{
    ru_circuit *c = NULL;
    assert_int_equal(ru_circuit_create("tank", &c), RU_OK);
    add2(c, RU_PART_CAPACITOR, "C1", "t", "gnd", C);
    add2(c, RU_PART_INDUCTOR, "L1", "t", "gnd", L);
    if (nk > 0)
        add_poly(c, "G1", "t", k, nk);
    set_preset(c, "t", v0);
    return c;
}

/* ---- recording sink ------------------------------------------------------------ */

typedef struct rec {
    const ru_system *sys;
    int node;        /* node whose voltage is recorded */
    double *t, *v;   /* samples */
    long n, cap;
    long fail_after; /* > 0: return RU_EIO when this many samples are in */
} rec;

static void rec_init(rec *r, const ru_system *s, int node, long cap)
{
    memset(r, 0, sizeof *r);
    r->sys = s;
    r->node = node;
    r->cap = cap;
    r->t = malloc((size_t)cap * sizeof *r->t);
    r->v = malloc((size_t)cap * sizeof *r->v);
    assert_non_null(r->t);
    assert_non_null(r->v);
}

static void rec_free(rec *r)
{
    free(r->t);
    free(r->v);
}

static ru_status rec_sample(void *user, double t, const double *x, size_t n)
{
    rec *r = user;
    if (n != ru_system_size(r->sys) || r->n >= r->cap)
        return RU_ERANGE;
    if (r->fail_after > 0 && r->n >= r->fail_after)
        return RU_EIO;
    r->t[r->n] = t;
    r->v[r->n] = ru_system_node_voltage(r->sys, r->node, t, x);
    r->n++;
    return RU_OK;
}

/* Runs circuit c with accuracy acc over stop_s at sample_s, recording node `node`. */
static ru_status run(ru_circuit *c, ru_system **sys, ru_accuracy acc, double stop_s,
                     double sample_s, const char *node, rec *r, long max_steps,
                     ru_solver_stats *st, ru_error *err)
{
    assert_int_equal(ru_system_create(c, sys, err), RU_OK);
    size_t n = ru_system_size(*sys);
    double *x0 = calloc(n ? n : 1, sizeof *x0);
    assert_non_null(x0);
    assert_int_equal(ru_system_initial_state(*sys, x0, err), RU_OK);
    ru_transient_opts o;
    ru_transient_opts_for(acc, &o);
    o.stop_s = stop_s;
    o.sample_s = sample_s;
    o.max_steps = max_steps;
    long cap = (long)(stop_s / sample_s) + 2;
    long keep_fail = r->fail_after;
    rec_init(r, *sys, ru_circuit_find_node(c, node), cap);
    r->fail_after = keep_fail;
    ru_status rc = ru_transient_run(*sys, &o, x0, rec_sample, r, st, err);
    free(x0);
    return rc;
}

/* Peaks of the recorded waveform by parabolic interpolation through the largest
 * sample and its neighbours; returns how many (at most max). */
static int find_peaks(const rec *r, double dt, double *tp, double *vp, int max)
{
    int np = 0;
    for (long k = 1; k + 1 < r->n && np < max; k++) {
        double y0 = r->v[k - 1], y1 = r->v[k], y2 = r->v[k + 1];
        if (!(y1 > y0 && y1 >= y2 && y1 > 0))
            continue;
        double d = 0.5 * (y0 - y2) / (y0 - 2 * y1 + y2);
        tp[np] = r->t[k] + d * dt;
        vp[np] = y1 - 0.25 * (y0 - y2) * d;
        np++;
    }
    return np;
}

/* Least-squares slope of ln(vp) against tp. */
static double log_slope(const double *tp, const double *vp, int np)
{
    double sx = 0, sy = 0, sxx = 0, sxy = 0;
    for (int i = 0; i < np; i++) {
        double y = log(vp[i]);
        sx += tp[i], sy += y, sxx += tp[i] * tp[i], sxy += tp[i] * y;
    }
    return (np * sxy - sx * sy) / (np * sxx - sx * sx);
}

/* ---- RC step ---------------------------------------------------------------- */

/* A 1 V supply (at value from t = 0) through R into C. */
static void test_rc_step(void **state)
{
    (void)state;
    const double R = 1e3, C = 1e-6, V = 1.0;
    ru_circuit *c = NULL;
    assert_int_equal(ru_circuit_create("rc", &c), RU_OK);
    ru_wave w = {.kind = RU_WAVE_DC, .value = V, .rise_s = 0};
    add_supply(c, "VS", "in", &w);
    add2(c, RU_PART_RESISTOR, "R1", "in", "out", R);
    add2(c, RU_PART_CAPACITOR, "C1", "out", "gnd", C);
    ru_system *s = NULL;
    rec r = {0};
    ru_solver_stats st;
    ru_error err;
    ru_status rc = run(c, &s, RU_ACCURACY_NORMAL, 5e-3, 10e-6, "out", &r, 0, &st, &err);
    assert_int_equal(rc, RU_OK);
    /* Row count: k = 0..floor(stop/sample) (transient.h). */
    assert_int_equal(r.n, 501);
    assert_int_equal(st.samples, 501);
    RU_ASSERT_NEAR(st.t_reached_s, 5e-3, 1e-15);
    /* Reference: first-order RC step response v = V (1 - exp(-t / RC)), with the
     * stray 1 pF in parallel with C (tau = R (C + stray)). Tolerance 1e-6 V: the
     * NORMAL local error target is 1e-8 (rtol) of 1 V; over ~1000 steps on a
     * decaying mode the global error stays far below 100x that. */
    double tau = R * (C + ru_circuit_stray_f(c)), maxerr = 0;
    for (long k = 0; k < r.n; k++) {
        RU_ASSERT_NEAR(r.t[k], (double)k * 10e-6, 1e-18);
        double want = V * (1.0 - exp(-r.t[k] / tau));
        maxerr = fmax(maxerr, fabs(r.v[k] - want));
        RU_ASSERT_NEAR(r.v[k], want, 1e-6);
    }
    RU_ASSERT_NEAR(r.v[0], 0.0, 0.0); /* the t = 0 sample is x0 */
    print_message("rc step: max |error| %.3g V, %ld steps\n", maxerr, st.steps);
    assert_true(st.steps > 0 && st.rhs_evals >= st.steps && st.jac_evals > 0);
    rec_free(&r);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* ---- LC tank: frequency and energy --------------------------------------------- */

static void test_lc_tank(void **state)
{
    (void)state;
    const double L = 1e-3, C = 1e-6;
    ru_circuit *c = tank(L, C, NULL, 0, 1.0);
    double Ct = C + ru_circuit_stray_f(c);
    double f0 = 1.0 / (2 * PI * sqrt(L * Ct)), T = 1.0 / f0, dt = T / 100;
    ru_system *s = NULL;
    rec r = {0};
    ru_solver_stats st;
    ru_error err;
    assert_int_equal(run(c, &s, RU_ACCURACY_NORMAL, 100.5 * T, dt, "t", &r, 0, &st, &err),
                     RU_OK);
    /* Rising zero crossings, linearly interpolated between samples. */
    double first = -1, last = -1;
    int ncross = 0;
    for (long k = 1; k < r.n; k++)
        if (r.v[k - 1] < 0 && r.v[k] >= 0) {
            double tc = r.t[k - 1] + dt * r.v[k - 1] / (r.v[k - 1] - r.v[k]);
            if (first < 0)
                first = tc;
            last = tc;
            ncross++;
        }
    assert_int_equal(ncross, 100);
    double f = (ncross - 1) / (last - first);
    /* Reference: LC resonance f = 1 / (2 pi sqrt(L C)) (C includes the stray).
     * Tolerance 1e-6: the interpolation error is the same at every crossing of a
     * pure sine and cancels in the period; what is left is the integrator's phase
     * error, O(rtol) per cycle at NORMAL (rtol 1e-8), far below 1e-6. */
    RU_ASSERT_REL(f, f0, 1e-6);
    double tp[128], vp[128];
    int np = find_peaks(&r, dt, tp, vp, 128);
    assert_true(np >= 100);
    double drift = vp[np - 1] / vp[0] - 1.0;
    /* Reference: energy conservation of a lossless LC tank: the amplitude stays
     * 1 V. Requirement: |drift| < 1e-4 over 100 cycles at NORMAL (catches the
     * numerical damping of BDF). Peak interpolation error is the same for every
     * peak (same phase grid drift aside), ~1e-7 at 100 samples per cycle. */
    print_message("lc tank: f %.9g Hz (exact %.9g), drift over %d cycles %.3g, "
                  "%ld steps\n", f, f0, np - 1, drift, st.steps);
    RU_ASSERT_NEAR(drift, 0.0, 1e-4);
    rec_free(&r);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* ---- van der Pol ------------------------------------------------------------ */

static void test_van_der_pol(void **state)
{
    (void)state;
    /* i = -a v + b v^3 across the tank. In van der Pol form the small parameter is
     * eps = a sqrt(L/C) = 0.05 (a/(2C) = eps*omega/2 << omega). */
    const double L = 1e-3, C = 1e-6, eps = 0.05;
    const double a = eps / sqrt(L / C), b = 4.0 * a / 3.0; /* amplitude 1 V */
    double k[4] = {0, -a, 0, b};
    ru_circuit *c = tank(L, C, k, 4, 10e-3);
    double T = 2 * PI * sqrt(L * (C + ru_circuit_stray_f(c))), dt = T / 100;
    ru_system *s = NULL;
    rec r = {0};
    ru_solver_stats st;
    ru_error err;
    /* Growth from 10 mV at eps*omega/2 needs ~30 cycles, settling ~1/(eps pi) = 6
     * cycles per e-fold: 250 cycles leave it settled to far below 1e-6. */
    assert_int_equal(run(c, &s, RU_ACCURACY_NORMAL, 250 * T, dt, "t", &r, 0, &st, &err),
                     RU_OK);
    double tp[300], vp[300];
    int np = find_peaks(&r, dt, tp, vp, 300);
    assert_true(np > 240);
    double amp = 0;
    for (int i = np - 20; i < np; i++)
        amp += vp[i] / 20;
    double want = 2 * sqrt(a / (3 * b));
    print_message("van der Pol: settled peak %.7g V, averaging %.7g V (off %.3g)\n", amp,
                  want, amp / want - 1);
    /* Reference: van der Pol oscillator, method of averaging: settled amplitude
     * 2 sqrt(a / (3b)) in the weakly nonlinear limit. The first-order correction
     * is a third harmonic in quadrature with the fundamental, so the peak moves
     * only by O(eps^2) = 0.25 %; tolerance 1 % (4x that bound). */
    RU_ASSERT_REL(amp, want, 1e-2);
    /* Independent library: scipy solve_ivp (DOP853, rtol 1e-12, atol 1e-14) of
     * x'' - eps (1 - x^2) x' + x = 0 with eps = 0.05, run once on this machine
     * with /usr/bin/python3, gave a settled peak of 2 (1 + 1.30e-5). Tolerance
     * 2e-6: the parabolic peak estimate at 100 samples per cycle is good to
     * ~(omega dt)^4 / 48 = 3e-7, the NORMAL solver error is below 1e-7. */
    RU_ASSERT_NEAR(amp / want - 1.0, 1.30e-5, 2e-6);
    /* and it is settled: the last 20 peaks agree to 1e-5 (common practice) */
    RU_ASSERT_REL(vp[np - 1], vp[np - 20], 1e-5);
    rec_free(&r);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* ---- growth rate of a weak start --------------------------------------------- */

/* Measured envelope growth rate relative to the exact one, minus 1. */
static double growth_bias(ru_accuracy acc, long *steps)
{
    /* Tank with conductance -g: C v'' + (-g) v' + v / L = 0 has poles
     * -(-g)/(2C) +- j sqrt(1/(LC) - (g/2C)^2); sigma/omega = 0.005. */
    const double L = 1e-3, C = 1e-6, ratio = 0.005;
    ru_circuit *c = tank(L, C, (double[]){0, 0}, 2, 10e-3);
    double Ct = C + ru_circuit_stray_f(c), w0 = 1 / sqrt(L * Ct);
    double sigma = ratio * w0 / sqrt(1 + ratio * ratio), wd = sqrt(w0 * w0 - sigma * sigma);
    ru_part *g = ru_circuit_part_mut(c, (size_t)ru_circuit_find_part(c, "G1"));
    g->coeffs[1] = -2 * Ct * sigma;
    double T = 2 * PI / wd, dt = T / 100;
    ru_system *s = NULL;
    rec r = {0};
    ru_solver_stats st;
    ru_error err;
    /* From 10 mV (1 % of the 1 V tolerance scale, as in a real start-up's fit
     * window) over 200 cycles: x535, to 5.4 V. */
    assert_int_equal(run(c, &s, acc, 200 * T, dt, "t", &r, 0, &st, &err), RU_OK);
    double tp[256], vp[256];
    int np = find_peaks(&r, dt, tp, vp, 256);
    assert_true(np >= 199);
    double bias = log_slope(tp, vp, np) / sigma - 1.0;
    *steps = st.steps;
    rec_free(&r);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
    return bias;
}

static void test_growth_rate(void **state)
{
    (void)state;
    static const char *const names[3] = {"draft", "normal", "precise"};
    double bias[3];
    for (int a = 0; a < 3; a++) {
        long steps = 0;
        bias[a] = growth_bias((ru_accuracy)a, &steps);
        print_message("growth rate sigma/omega 0.005, %s: bias %+.4f %% (%ld steps)\n",
                      names[a], 100 * bias[a], steps);
    }
    /* Reference: second-order linear ODE, exact poles (above). Requirement
     * (README): NORMAL within 0.1 %. PRECISE must be at least as good. The fit
     * itself (parabolic peaks at 100 samples per cycle) is exact for the growth
     * rate: every peak sits at the same phase, so its error is a constant factor
     * that drops out of the slope. */
    RU_ASSERT_NEAR(bias[RU_ACCURACY_NORMAL], 0.0, 1e-3);
    RU_ASSERT_NEAR(bias[RU_ACCURACY_PRECISE], 0.0, 1e-3);
    /* DRAFT is documented (circuit.h) as "a few tenths of a percent off": 1 %. */
    RU_ASSERT_NEAR(bias[RU_ACCURACY_DRAFT], 0.0, 1e-2);
}

/* ---- breakpoint with a jump ---------------------------------------------------- */

/* Supply steps 0 -> 1 V at 1 ms (no edge) through a series C into R to ground. */
static void test_step_through_capacitor(void **state)
{
    (void)state;
    const double R = 1e3, C = 1e-6, t1 = 1e-3, V = 1.0;
    ru_circuit *c = NULL;
    assert_int_equal(ru_circuit_create("jump", &c), RU_OK);
    ru_wave w = {.kind = RU_WAVE_STEP, .v0 = 0, .v1 = V, .at_s = t1, .edge_s = 0};
    add_supply(c, "VS", "in", &w);
    add2(c, RU_PART_CAPACITOR, "C1", "in", "out", C);
    add2(c, RU_PART_RESISTOR, "R1", "out", "gnd", R);
    double Cs = ru_circuit_stray_f(c);
    ru_system *s = NULL;
    rec r = {0};
    ru_solver_stats st;
    ru_error err;
    assert_int_equal(run(c, &s, RU_ACCURACY_NORMAL, 4e-3, 10e-6, "out", &r, 0, &st, &err),
                     RU_OK);
    assert_int_equal(r.n, 401);
    /* Reference: charge conservation at the edge: the node "out" (C to the supply,
     * stray Cs to ground) jumps by V C / (C + Cs); then RC decay with
     * tau = R (C + Cs). Before the edge nothing moves. Tolerance 1e-6 V as in
     * test_rc_step. The sample at exactly t1 shows the state after the jump. */
    double dv = V * C / (C + Cs), tau = R * (C + Cs);
    for (long k = 0; k < r.n; k++) {
        double want = r.t[k] < t1 - 1e-12 ? 0.0 : dv * exp(-(r.t[k] - t1) / tau);
        RU_ASSERT_NEAR(r.v[k], want, 1e-6);
    }
    RU_ASSERT_NEAR(r.v[100], dv, 1e-9);
    RU_ASSERT_NEAR(r.t[100], t1, 1e-15);
    rec_free(&r);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* Supply ramps linearly to V over T (rise) into an RC: a slope-change breakpoint. */
static void test_ramp_into_rc(void **state)
{
    (void)state;
    const double R = 1e3, C = 1e-6, V = 1.0, Tr = 0.5e-3;
    ru_circuit *c = NULL;
    assert_int_equal(ru_circuit_create("ramp", &c), RU_OK);
    ru_wave w = {.kind = RU_WAVE_DC, .value = V, .rise_s = Tr};
    add_supply(c, "VS", "in", &w);
    add2(c, RU_PART_RESISTOR, "R1", "in", "out", R);
    add2(c, RU_PART_CAPACITOR, "C1", "out", "gnd", C);
    double tau = R * (C + ru_circuit_stray_f(c)), m = V / Tr;
    ru_system *s = NULL;
    rec r = {0};
    ru_solver_stats st;
    ru_error err;
    assert_int_equal(run(c, &s, RU_ACCURACY_NORMAL, 3e-3, 10e-6, "out", &r, 0, &st, &err),
                     RU_OK);
    /* Reference: ramp response of a first-order low-pass, v = m (t - tau (1 -
     * e^{-t/tau})) for t < Tr, then an exponential approach to V from v(Tr):
     * v = V + (v(Tr) - V) e^{-(t - Tr)/tau}. Tolerance 1e-6 V as above. */
    double vT = m * (Tr - tau * (1 - exp(-Tr / tau)));
    for (long k = 0; k < r.n; k++) {
        double t = r.t[k];
        double want = t <= Tr ? m * (t - tau * (1 - exp(-t / tau)))
                              : V + (vT - V) * exp(-(t - Tr) / tau);
        RU_ASSERT_NEAR(r.v[k], want, 1e-6);
    }
    rec_free(&r);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* A pulse train (zero-width edges, 200 of them: more than the engine keeps on its
 * stack) through a series C into R: a jump and a restart at every edge. */
static void test_pulse_train_jumps(void **state)
{
    (void)state;
    const double R = 1e3, C = 10e-9, V = 1.0;
    ru_circuit *c = NULL;
    assert_int_equal(ru_circuit_create("pulses", &c), RU_OK);
    ru_wave w = {.kind = RU_WAVE_PULSE, .v0 = 0, .v1 = V, .at_s = 0.1e-3,
                 .edge_s = 0, .width_s = 0.2e-3, .period_s = 0.4e-3};
    add_supply(c, "VS", "in", &w);
    add2(c, RU_PART_CAPACITOR, "C1", "in", "out", C);
    add2(c, RU_PART_RESISTOR, "R1", "out", "gnd", R);
    double dv = V * C / (C + ru_circuit_stray_f(c));
    ru_system *s = NULL;
    rec r = {0};
    ru_solver_stats st;
    ru_error err;
    assert_int_equal(run(c, &s, RU_ACCURACY_NORMAL, 40e-3, 10e-6, "out", &r, 0, &st, &err),
                     RU_OK);
    assert_int_equal(r.n, 4001);
    /* Reference: charge conservation at each edge, as in
     * test_step_through_capacitor; tau = 10 us, so 10 us after an edge v is
     * dv e^{-1}, and by the next edge (20 tau) it has decayed to 2e-9 of dv.
     * Edges fall on samples: rising at 0.1 ms + k 0.4 ms, falling 0.2 ms later. */
    int edges = 0;
    for (long k = 10; k < r.n; k += 20) {
        double want = ((k - 10) / 20) % 2 == 0 ? dv : -dv;
        RU_ASSERT_NEAR(r.v[k], want, 1e-6);
        RU_ASSERT_NEAR(r.v[k + 1], want * exp(-10e-6 / (R * (C + 1e-12))), 1e-6);
        edges++;
    }
    assert_int_equal(edges, 200);
    rec_free(&r);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* A run in chunks (ru_transient_advance) delivers exactly the samples of one run
 * to the same horizon: the pulse train above (jumps every 0.2 ms), cut at times
 * between samples, on a sample, on an edge and just before one. Reference: the
 * single ru_transient_run, sample by sample (bit-identical: the same solver steps). */
static void test_chunks_match_one_run(void **state)
{
    (void)state;
    ru_circuit *c = NULL;
    assert_int_equal(ru_circuit_create("pulses", &c), RU_OK);
    ru_wave w = {.kind = RU_WAVE_PULSE, .v0 = 0, .v1 = 1.0, .at_s = 0.1e-3,
                 .edge_s = 0, .width_s = 0.2e-3, .period_s = 0.4e-3};
    add_supply(c, "VS", "in", &w);
    add2(c, RU_PART_CAPACITOR, "C1", "in", "out", 10e-9);
    add2(c, RU_PART_RESISTOR, "R1", "out", "gnd", 1e3);
    ru_system *s = NULL;
    rec one = {0}, parts = {0};
    ru_solver_stats st;
    ru_error err;
    assert_int_equal(run(c, &s, RU_ACCURACY_NORMAL, 4e-3, 3e-6, "out", &one, 0, &st, &err),
                     RU_OK);
    rec_init(&parts, s, ru_circuit_find_node(c, "out"), one.n + 8);
    size_t n = ru_system_size(s);
    double *x0 = calloc(n, sizeof *x0);
    assert_int_equal(ru_system_initial_state(s, x0, &err), RU_OK);
    ru_transient_opts o;
    ru_transient_opts_for(RU_ACCURACY_NORMAL, &o);
    o.stop_s = 4e-3;
    o.sample_s = 3e-6;
    ru_transient *tr = NULL;
    assert_int_equal(ru_transient_create(s, &o, x0, rec_sample, &parts, &tr, &err), RU_OK);
    assert_int_equal(parts.n, 1); /* t = 0 */
    const double cut[] = {1.5e-6, 0.1e-3, 0.3e-3 - 1e-9, 0.3e-3, 0.3e-3, 0.77e-3,
                          1.234e-3, 2e-3, 3.9e-3};
    for (size_t i = 0; i < sizeof cut / sizeof cut[0]; i++) {
        assert_int_equal(ru_transient_advance(tr, cut[i], &err), RU_OK);
        /* every sample up to the cut, none after it */
        assert_true(parts.t[parts.n - 1] <= cut[i] + 1e-12);
        assert_true(parts.n == one.n || one.t[parts.n] > cut[i] - 1e-12);
        RU_ASSERT_NEAR(ru_transient_time(tr), parts.t[parts.n - 1], 1e-15);
    }
    assert_false(ru_transient_done(tr));
    assert_int_equal(ru_transient_advance(tr, 1.0, &err), RU_OK); /* past the horizon */
    assert_true(ru_transient_done(tr));
    assert_int_equal(parts.n, one.n);
    for (long k = 0; k < one.n; k++) {
        assert_true(parts.t[k] == one.t[k]);
        assert_true(parts.v[k] == one.v[k]);
    }
    ru_solver_stats sc;
    ru_transient_stats(tr, &sc);
    assert_int_equal(sc.steps, st.steps);
    ru_transient_destroy(tr);
    free(x0);
    rec_free(&one);
    rec_free(&parts);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* ---- failures ------------------------------------------------------------------ */

static void test_step_limit_fails(void **state)
{
    (void)state;
    ru_circuit *c = tank(1e-3, 1e-6, NULL, 0, 1.0);
    ru_system *s = NULL;
    rec r = {0};
    ru_solver_stats st;
    ru_error err;
    ru_error_clear(&err);
    ru_status rc = run(c, &s, RU_ACCURACY_NORMAL, 10e-3, 2e-6, "t", &r, 200, &st, &err);
    /* transient.h: a numerical failure stops with RU_ENUMERIC, keeps the samples
     * delivered and says how far it got. */
    assert_int_equal(rc, RU_ENUMERIC);
    assert_int_equal(err.code, RU_ENUMERIC);
    assert_non_null(strstr(err.msg, "solver failed at t = "));
    assert_non_null(strstr(err.msg, "200 internal steps"));
    assert_true(st.t_reached_s > 0 && st.t_reached_s < 10e-3);
    assert_int_equal(st.steps, 200);
    assert_true(r.n > 1 && r.n == st.samples);
    assert_true(r.t[r.n - 1] <= st.t_reached_s);
    /* nothing missing: every sample up to the time reached was delivered */
    assert_true(r.t[r.n - 1] + 2e-6 > st.t_reached_s);
    print_message("step limit: %s (%ld samples)\n", err.msg, r.n);
    rec_free(&r);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

static void test_sink_stops_run(void **state)
{
    (void)state;
    ru_circuit *c = tank(1e-3, 1e-6, NULL, 0, 1.0);
    ru_system *s = NULL;
    rec r = {.fail_after = 37};
    ru_solver_stats st;
    ru_error err;
    ru_status rc = run(c, &s, RU_ACCURACY_NORMAL, 1e-3, 1e-6, "t", &r, 0, &st, &err);
    /* transient.h: a sink's non-OK return stops the run with that status. */
    assert_int_equal(rc, RU_EIO);
    assert_int_equal(r.n, 37);
    assert_int_equal(st.samples, 37);
    rec_free(&r);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

static void test_bad_options(void **state)
{
    (void)state;
    ru_circuit *c = tank(1e-3, 1e-6, NULL, 0, 1.0);
    ru_system *s = NULL;
    ru_error err;
    assert_int_equal(ru_system_create(c, &s, &err), RU_OK);
    double x0[2] = {1, 0};
    rec r;
    rec_init(&r, s, 1, 4);
    ru_transient_opts o;
    ru_transient_opts_for(RU_ACCURACY_NORMAL, &o);
    o.sample_s = 0;
    assert_int_equal(ru_transient_run(s, &o, x0, rec_sample, &r, NULL, &err), RU_ERANGE);
    o.sample_s = 1e-6;
    o.stop_s = NAN;
    assert_int_equal(ru_transient_run(s, &o, x0, rec_sample, &r, NULL, &err), RU_ERANGE);
    assert_int_equal(r.n, 0);
    rec_free(&r);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* ---- memory does not grow with run length -------------------------------------- */

/* The engine allocates everything before the first step (transient.c head comment:
 * vectors, matrix, Jacobian scratch, breakpoint list) and the step loop only calls
 * CVode / CVodeGetDky on those, so heap use at the last sample of a long run equals
 * heap use at an early one. Checked with glibc's mallinfo2 (bytes in use). */
typedef struct heap_probe {
    long n;
    size_t at_early, at_last;
} heap_probe;

static ru_status heap_sample(void *user, double t, const double *x, size_t n)
{
    (void)t, (void)x, (void)n;
    heap_probe *h = user;
    h->n++;
    size_t used = mallinfo2().uordblks;
    if (h->n == 1000)
        h->at_early = used;
    h->at_last = used;
    return RU_OK;
}

static void test_no_growth(void **state)
{
    (void)state;
    ru_circuit *c = tank(1e-3, 1e-6, NULL, 0, 1.0);
    ru_system *s = NULL;
    ru_error err;
    assert_int_equal(ru_system_create(c, &s, &err), RU_OK);
    double x0[2];
    assert_int_equal(ru_system_initial_state(s, x0, &err), RU_OK);
    ru_transient_opts o;
    ru_transient_opts_for(RU_ACCURACY_DRAFT, &o);
    o.stop_s = 50e-3; /* 250 cycles */
    o.sample_s = 1e-6;
    heap_probe h = {0};
    ru_solver_stats st;
    assert_int_equal(ru_transient_run(s, &o, x0, heap_sample, &h, &st, &err), RU_OK);
    assert_int_equal(h.n, 50001);
    print_message("heap in use: %zu bytes at sample 1000, %zu at sample %ld\n",
                  h.at_early, h.at_last, h.n);
    if (h.at_early == 0) { /* sanitizer builds replace malloc: no figures to compare */
        ru_system_destroy(s);
        ru_circuit_destroy(c);
        skip();
    }
    assert_int_equal(h.at_last, h.at_early);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_rc_step),
        cmocka_unit_test(test_lc_tank),
        cmocka_unit_test(test_van_der_pol),
        cmocka_unit_test(test_growth_rate),
        cmocka_unit_test(test_step_through_capacitor),
        cmocka_unit_test(test_ramp_into_rc),
        cmocka_unit_test(test_pulse_train_jumps),
        cmocka_unit_test(test_chunks_match_one_run),
        cmocka_unit_test(test_step_limit_fails),
        cmocka_unit_test(test_sink_stops_run),
        cmocka_unit_test(test_bad_options),
        cmocka_unit_test(test_no_growth),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
