/* test_dae.c: the two integrators of the time-domain engine (CVODE on x' = M^{-1} r,
 * IDA on M x' = r with dense LU or KLU) on the same reference circuits, and
 * circuits with ideal nodes (`stray: 0`) that only IDA can run: algebraic nodes,
 * a capacitor group with no capacitance to ground, jumps, the refusal of a node
 * nothing fixes. Each waveform is checked against the closed-form solution of the
 * circuit's equations, named beside each check. */
#include "ru_test.h"

#include "ringup/analysis.h"
#include "ringup/circuit.h"
#include "ringup/loader.h"
#include "ringup/system.h"
#include "ringup/transient.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define PI 3.14159265358979323846

/* The three ways to run: CVODE dense, IDA dense, IDA KLU. */
typedef struct way {
    const char *name;
    ru_integrator integrator;
    ru_linsol linsol;
} way;

static const way WAYS[3] = {{"CVODE", RU_INTEGRATOR_CVODE, RU_LINSOL_AUTO},
                            {"IDA dense", RU_INTEGRATOR_IDA, RU_LINSOL_DENSE},
                            {"IDA KLU", RU_INTEGRATOR_IDA, RU_LINSOL_KLU}};

/* ---- circuit building ------------------------------------------------------- */

static void add2(ru_circuit *c, ru_part_type type, const char *name, const char *a,
                 const char *b, double value)
{
    ru_part p;
    ru_part_init(&p, type, name);
    p.node[0] = ru_circuit_node(c, a, 3, 5);
    p.node[1] = ru_circuit_node(c, b, 3, 5);
    p.value = value;
    ru_error e;
    if (ru_circuit_add_part(c, &p, &e) != RU_OK)
        fail_msg("add %s: %s", name, e.msg);
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
    if (nk > 0) {
        ru_part p;
        ru_part_init(&p, RU_PART_POLY, "G1");
        p.node[0] = ru_circuit_find_node(c, "t");
        memcpy(p.coeffs, k, (size_t)nk * sizeof *k);
        p.ncoeffs = nk;
        ru_error e;
        assert_int_equal(ru_circuit_add_part(c, &p, &e), RU_OK);
    }
    set_preset(c, "t", v0);
    return c;
}

/* ---- recording sink ------------------------------------------------------------ */

#define REC_NODES 3

typedef struct rec {
    const ru_system *sys;
    int node[REC_NODES];  /* nodes recorded (-1: none) */
    double *t, *v[REC_NODES];
    long n, cap;
} rec;

static ru_status rec_sample(void *user, double t, const double *x, size_t n)
{
    rec *r = user;
    if (n != ru_system_size(r->sys) || r->n >= r->cap)
        return RU_ERANGE;
    r->t[r->n] = t;
    for (int q = 0; q < REC_NODES; q++)
        r->v[q][r->n] = r->node[q] >= 0 ? ru_system_node_voltage(r->sys, r->node[q], t, x)
                                        : 0.0;
    r->n++;
    return RU_OK;
}

static void rec_free(rec *r)
{
    free(r->t);
    for (int q = 0; q < REC_NODES; q++)
        free(r->v[q]);
}

/* Runs c one way, recording up to three nodes (names or NULL). */
static ru_status run_way(const ru_circuit *c, ru_system **sys, const way *w,
                         ru_accuracy acc, double stop_s, double sample_s,
                         const char *const nodes[REC_NODES], rec *r, ru_solver_stats *st,
                         ru_error *err)
{
    ru_status cs = ru_system_create(c, sys, err);
    if (cs != RU_OK)
        fail_msg("system: %s", err->msg);
    size_t n = ru_system_size(*sys);
    double *x0 = calloc(n ? n : 1, sizeof *x0);
    assert_non_null(x0);
    assert_int_equal(ru_system_initial_state(*sys, x0, err), RU_OK);
    ru_transient_opts o;
    ru_transient_opts_for(acc, &o);
    o.stop_s = stop_s;
    o.sample_s = sample_s;
    o.integrator = w->integrator;
    o.linsol = w->linsol;
    memset(r, 0, sizeof *r);
    r->sys = *sys;
    r->cap = (long)(stop_s / sample_s) + 2;
    r->t = malloc((size_t)r->cap * sizeof *r->t);
    for (int q = 0; q < REC_NODES; q++) {
        r->node[q] = nodes[q] ? ru_circuit_find_node(c, nodes[q]) : -1;
        r->v[q] = malloc((size_t)r->cap * sizeof *r->v[q]);
    }
    ru_status rc = ru_transient_run(*sys, &o, x0, rec_sample, r, st, err);
    free(x0);
    return rc;
}

/* Peaks of recorded node q by a parabola through the largest sample and its
 * neighbours; returns how many (at most max). */
static int find_peaks(const rec *r, int q, double dt, double *tp, double *vp, int max)
{
    int np = 0;
    const double *v = r->v[q];
    for (long k = 1; k + 1 < r->n && np < max; k++) {
        double y0 = v[k - 1], y1 = v[k], y2 = v[k + 1];
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

static const char *const ONE_T[REC_NODES] = {"t", NULL, NULL};

/* ---- the README's accuracy figures on every way --------------------------------- */

/* Growth-rate bias at sigma/omega = 0.005 (README "Accuracy settings"). */
static double growth_bias(const way *w, ru_accuracy acc, long *steps)
{
    const double L = 1e-3, C = 1e-6, ratio = 0.005;
    ru_circuit *c = tank(L, C, (double[]){0, 0}, 2, 10e-3);
    double Ct = C + ru_circuit_stray_f(c), w0 = 1 / sqrt(L * Ct);
    double sigma = ratio * w0 / sqrt(1 + ratio * ratio), wd = sqrt(w0 * w0 - sigma * sigma);
    ru_circuit_part_mut(c, (size_t)ru_circuit_find_part(c, "G1"))->coeffs[1] =
        -2 * Ct * sigma;
    double T = 2 * PI / wd, dt = T / 100;
    ru_system *s = NULL;
    rec r;
    ru_solver_stats st;
    ru_error err;
    assert_int_equal(run_way(c, &s, w, acc, 200 * T, dt, ONE_T, &r, &st, &err), RU_OK);
    assert_int_equal(st.integrator, w->integrator);
    double tp[256], vp[256];
    int np = find_peaks(&r, 0, dt, tp, vp, 256);
    assert_true(np >= 199);
    *steps = st.steps;
    double bias = log_slope(tp, vp, np) / sigma - 1.0;
    rec_free(&r);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
    return bias;
}

static void test_growth_rate_all(void **state)
{
    (void)state;
    for (int k = 0; k < 3; k++) {
        long sn = 0, sd = 0;
        double bn = growth_bias(&WAYS[k], RU_ACCURACY_NORMAL, &sn);
        double bd = growth_bias(&WAYS[k], RU_ACCURACY_DRAFT, &sd);
        print_message("%-9s growth bias: normal %+.4f %% (%ld steps), draft %+.4f %% "
                      "(%ld steps)\n", WAYS[k].name, 100 * bn, sn, 100 * bd, sd);
        /* Reference: the exact poles of the second-order linear ODE. Requirement
         * (README): NORMAL within 0.1 %, DRAFT within 1 %, on every integrator. */
        RU_ASSERT_NEAR(bn, 0.0, 1e-3);
        RU_ASSERT_NEAR(bd, 0.0, 1e-2);
    }
}

/* Lossless tank: frequency and amplitude drift over 100 cycles. */
static void test_lc_tank_all(void **state)
{
    (void)state;
    const double L = 1e-3, C = 1e-6;
    for (int k = 0; k < 3; k++) {
        ru_circuit *c = tank(L, C, NULL, 0, 1.0);
        double Ct = C + ru_circuit_stray_f(c);
        double f0 = 1.0 / (2 * PI * sqrt(L * Ct)), T = 1.0 / f0, dt = T / 100;
        ru_system *s = NULL;
        rec r;
        ru_solver_stats st;
        ru_error err;
        assert_int_equal(run_way(c, &s, &WAYS[k], RU_ACCURACY_NORMAL, 100.5 * T, dt, ONE_T,
                                 &r, &st, &err),
                         RU_OK);
        double first = -1, last = -1;
        int ncross = 0;
        for (long i = 1; i < r.n; i++)
            if (r.v[0][i - 1] < 0 && r.v[0][i] >= 0) {
                double tc = r.t[i - 1] + dt * r.v[0][i - 1] / (r.v[0][i - 1] - r.v[0][i]);
                if (first < 0)
                    first = tc;
                last = tc;
                ncross++;
            }
        assert_int_equal(ncross, 100);
        double tp[128], vp[128];
        int np = find_peaks(&r, 0, dt, tp, vp, 128);
        assert_true(np >= 100);
        double drift = vp[np - 1] / vp[0] - 1.0, f = (ncross - 1) / (last - first);
        print_message("%-9s lc tank: f/f0 - 1 = %.3g, drift over %d cycles %.3g, %ld "
                      "steps\n", WAYS[k].name, f / f0 - 1, np - 1, drift, st.steps);
        /* Reference: LC resonance 1/(2 pi sqrt(LC)) (to 1e-6, as test_transient.c)
         * and energy conservation (README: |drift| < 1e-4 per 100 cycles at NORMAL). */
        RU_ASSERT_REL(f, f0, 1e-6);
        RU_ASSERT_NEAR(drift, 0.0, 1e-4);
        rec_free(&r);
        ru_system_destroy(s);
        ru_circuit_destroy(c);
    }
}

/* Van der Pol amplitude against averaging and scipy (as test_transient.c). */
static void test_van_der_pol_all(void **state)
{
    (void)state;
    const double L = 1e-3, C = 1e-6, eps = 0.05;
    const double a = eps / sqrt(L / C), b = 4.0 * a / 3.0;
    double kc[4] = {0, -a, 0, b};
    for (int k = 0; k < 3; k++) {
        ru_circuit *c = tank(L, C, kc, 4, 10e-3);
        double T = 2 * PI * sqrt(L * (C + ru_circuit_stray_f(c))), dt = T / 100;
        ru_system *s = NULL;
        rec r;
        ru_solver_stats st;
        ru_error err;
        assert_int_equal(run_way(c, &s, &WAYS[k], RU_ACCURACY_NORMAL, 250 * T, dt, ONE_T,
                                 &r, &st, &err),
                         RU_OK);
        double tp[300], vp[300];
        int np = find_peaks(&r, 0, dt, tp, vp, 300);
        assert_true(np > 240);
        double amp = 0;
        for (int i = np - 20; i < np; i++)
            amp += vp[i] / 20;
        double want = 2 * sqrt(a / (3 * b));
        print_message("%-9s van der Pol: settled peak / averaging - 1 = %.3g\n",
                      WAYS[k].name, amp / want - 1);
        /* Reference: method of averaging 2 sqrt(a/(3b)) (1 %), and scipy solve_ivp
         * (DOP853, rtol 1e-12) of the same equation: 2 (1 + 1.30e-5), tolerance 2e-6
         * (test_transient.c states the budget). */
        RU_ASSERT_REL(amp, want, 1e-2);
        RU_ASSERT_NEAR(amp / want - 1.0, 1.30e-5, 2e-6);
        rec_free(&r);
        ru_system_destroy(s);
        ru_circuit_destroy(c);
    }
}

/* A supply steps through a series C into R: a jump and a restart, every way. */
static void test_jump_all(void **state)
{
    (void)state;
    const double R = 1e3, C = 1e-6, t1 = 1e-3, V = 1.0;
    for (int k = 0; k < 3; k++) {
        ru_circuit *c = NULL;
        assert_int_equal(ru_circuit_create("jump", &c), RU_OK);
        ru_wave w = {.kind = RU_WAVE_STEP, .v0 = 0, .v1 = V, .at_s = t1, .edge_s = 0};
        add_supply(c, "VS", "in", &w);
        add2(c, RU_PART_CAPACITOR, "C1", "in", "out", C);
        add2(c, RU_PART_RESISTOR, "R1", "out", "gnd", R);
        double Cs = ru_circuit_stray_f(c);
        ru_system *s = NULL;
        rec r;
        ru_solver_stats st;
        ru_error err;
        const char *const nodes[REC_NODES] = {"out", NULL, NULL};
        assert_int_equal(run_way(c, &s, &WAYS[k], RU_ACCURACY_NORMAL, 4e-3, 10e-6, nodes,
                                 &r, &st, &err),
                         RU_OK);
        assert_int_equal(r.n, 401);
        /* Reference: charge conservation at the edge (jump V C/(C + Cs)), then RC
         * decay with tau = R (C + Cs); 1e-6 V as test_transient.c. */
        double dv = V * C / (C + Cs), tau = R * (C + Cs);
        for (long i = 0; i < r.n; i++) {
            double want = r.t[i] < t1 - 1e-12 ? 0.0 : dv * exp(-(r.t[i] - t1) / tau);
            RU_ASSERT_NEAR(r.v[0][i], want, 1e-6);
        }
        RU_ASSERT_NEAR(r.t[100], t1, 1e-15);
        rec_free(&r);
        ru_system_destroy(s);
        ru_circuit_destroy(c);
    }
}

/* ---- ideal nodes ----------------------------------------------------------------- */

/* Ideal divider into an RC: VS - R1 - m - R2 - out, C at out; stray 0, so m has no
 * capacitance and is algebraic. The supply is at 1 V from t = 0. */
static void test_algebraic_divider(void **state)
{
    (void)state;
    const double R1 = 1e3, R2 = 2e3, C = 100e-9, V = 1.0;
    for (int k = 1; k < 3; k++) {
        ru_circuit *c = NULL;
        assert_int_equal(ru_circuit_create("divider", &c), RU_OK);
        assert_int_equal(ru_circuit_set_stray_f(c, 0.0), RU_OK);
        ru_wave w = {.kind = RU_WAVE_DC, .value = V};
        add_supply(c, "VS", "in", &w);
        add2(c, RU_PART_RESISTOR, "R1", "in", "m", R1);
        add2(c, RU_PART_RESISTOR, "R2", "m", "out", R2);
        add2(c, RU_PART_CAPACITOR, "C1", "out", "gnd", C);
        ru_system *s = NULL;
        rec r;
        ru_solver_stats st;
        ru_error err;
        const char *const nodes[REC_NODES] = {"out", "m", NULL};
        assert_int_equal(run_way(c, &s, &WAYS[k], RU_ACCURACY_NORMAL, 2e-3, 5e-6, nodes, &r,
                                 &st, &err),
                         RU_OK);
        assert_int_equal(ru_system_algebraic_count(s), 1);
        assert_int_equal(ru_system_state_kind(s, (size_t)ru_system_node_state(
                                                     s, ru_circuit_find_node(c, "m"))),
                         RU_STATE_ALGEBRAIC);
        /* Reference: Thevenin: out charges toward V with tau = (R1 + R2) C exactly
         * (no stray); m = out + (V - out) R2/(R1 + R2) (Ohm's law along the chain).
         * The t = 0 sample is already consistent: m = V R2/(R1 + R2). 1e-6 V. */
        double tau = (R1 + R2) * C, maxerr = 0;
        for (long i = 0; i < r.n; i++) {
            double out = V * (1 - exp(-r.t[i] / tau));
            double m = out + (V - out) * R2 / (R1 + R2);
            RU_ASSERT_NEAR(r.v[0][i], out, 1e-6);
            RU_ASSERT_NEAR(r.v[1][i], m, 1e-6);
            maxerr = fmax(maxerr, fabs(r.v[1][i] - m));
        }
        RU_ASSERT_NEAR(r.v[1][0], V * R2 / (R1 + R2), 1e-9);
        print_message("%-9s ideal divider: max |error| on m %.3g V, %ld steps\n",
                      WAYS[k].name, maxerr, st.steps);
        rec_free(&r);
        ru_system_destroy(s);
        ru_circuit_destroy(c);
    }
}

/* A capacitor between two nodes with no capacitance to ground: VS steps 0 -> V at
 * t1 into R1 - a, C between a and b, R2 from b to ground, stray 0. */
static void test_capacitor_group(void **state)
{
    (void)state;
    const double R1 = 1e3, R2 = 3e3, C = 50e-9, V = 2.0, t1 = 0.2e-3;
    for (int k = 1; k < 3; k++) {
        ru_circuit *c = NULL;
        assert_int_equal(ru_circuit_create("group", &c), RU_OK);
        assert_int_equal(ru_circuit_set_stray_f(c, 0.0), RU_OK);
        ru_wave w = {.kind = RU_WAVE_STEP, .v0 = 0, .v1 = V, .at_s = t1, .edge_s = 0};
        add_supply(c, "VS", "in", &w);
        add2(c, RU_PART_RESISTOR, "R1", "in", "a", R1);
        add2(c, RU_PART_CAPACITOR, "C1", "a", "b", C);
        add2(c, RU_PART_RESISTOR, "R2", "b", "gnd", R2);
        ru_system *s = NULL;
        rec r;
        ru_solver_stats st;
        ru_error err;
        const char *const nodes[REC_NODES] = {"a", "b", NULL};
        assert_int_equal(run_way(c, &s, &WAYS[k], RU_ACCURACY_NORMAL, 2e-3, 5e-6, nodes, &r,
                                 &st, &err),
                         RU_OK);
        int sa = ru_system_node_state(s, ru_circuit_find_node(c, "a"));
        int sb = ru_system_node_state(s, ru_circuit_find_node(c, "b"));
        assert_int_equal(ru_system_state_kind(s, (size_t)sa), RU_STATE_COMMON);
        assert_int_equal(ru_system_state_kind(s, (size_t)sb), RU_STATE_DIFFERENTIAL);
        assert_int_equal(ru_system_state_group(s, (size_t)sb), sa);
        /* Reference: series RC driven by a step: i = V/(R1 + R2) e^{-(t - t1)/tau},
         * tau = (R1 + R2) C; v(b) = R2 i, v(a) = V - R1 i. Before the step all is
         * 0; at t1 the capacitor voltage is continuous, so a and b jump together
         * (the sample at t1 shows the state after the edge). 1e-6 V. */
        double tau = (R1 + R2) * C;
        for (long i = 0; i < r.n; i++) {
            double cur = r.t[i] < t1 - 1e-12 ? 0.0
                                             : V / (R1 + R2) * exp(-(r.t[i] - t1) / tau);
            double va = r.t[i] < t1 - 1e-12 ? 0.0 : V - R1 * cur;
            RU_ASSERT_NEAR(r.v[0][i], va, 1e-6);
            RU_ASSERT_NEAR(r.v[1][i], R2 * cur, 1e-6);
        }
        RU_ASSERT_NEAR(r.v[1][40], R2 * V / (R1 + R2), 1e-9); /* t1 = 40 samples */
        rec_free(&r);
        ru_system_destroy(s);
        ru_circuit_destroy(c);
    }
}

/* A tank whose inductor's loss resistor ends on an ideal node: C at t, L from t to
 * m, R from m to ground, stray 0 (m algebraic: i(L) = v(m)/R). */
static void test_algebraic_tank(void **state)
{
    (void)state;
    const double L = 1e-3, C = 1e-6, R = 2.0;
    for (int k = 1; k < 3; k++) {
        ru_circuit *c = NULL;
        assert_int_equal(ru_circuit_create("rlc", &c), RU_OK);
        assert_int_equal(ru_circuit_set_stray_f(c, 0.0), RU_OK);
        add2(c, RU_PART_CAPACITOR, "C1", "t", "gnd", C);
        add2(c, RU_PART_INDUCTOR, "L1", "t", "m", L);
        add2(c, RU_PART_RESISTOR, "R1", "m", "gnd", R);
        set_preset(c, "t", 1.0);
        double alpha = R / (2 * L), wd = sqrt(1 / (L * C) - alpha * alpha);
        double T = 2 * PI / wd, dt = T / 100;
        ru_system *s = NULL;
        rec r;
        ru_solver_stats st;
        ru_error err;
        assert_int_equal(run_way(c, &s, &WAYS[k], RU_ACCURACY_NORMAL, 60 * T, dt, ONE_T, &r,
                                 &st, &err),
                         RU_OK);
        double tp[128], vp[128];
        int np = find_peaks(&r, 0, dt, tp, vp, 128);
        assert_true(np >= 55);
        double decay = log_slope(tp + 1, vp + 1, np - 1);
        print_message("%-9s algebraic tank: decay %.6g /s (exact %.6g)\n", WAYS[k].name,
                      decay, -alpha);
        /* Reference: series RLC, poles -R/(2L) +- j sqrt(1/(LC) - (R/2L)^2): the
         * peaks decay at R/(2L) = 1000 /s. Every peak sits at the same phase, so
         * the fit is exact up to the solver's error: 1e-4 relative. */
        RU_ASSERT_REL(decay, -alpha, 1e-4);
        rec_free(&r);
        ru_system_destroy(s);
        ru_circuit_destroy(c);
    }
}

/* CVODE is refused for a DAE; a node nothing fixes is refused by the system. */
static void test_refusals(void **state)
{
    (void)state;
    ru_circuit *c = NULL;
    assert_int_equal(ru_circuit_create("refuse", &c), RU_OK);
    ru_circuit_set_file(c, "x.yaml");
    assert_int_equal(ru_circuit_set_stray_f(c, 0.0), RU_OK);
    add2(c, RU_PART_CAPACITOR, "C1", "t", "gnd", 1e-6);
    add2(c, RU_PART_INDUCTOR, "L1", "t", "m", 1e-3);
    add2(c, RU_PART_INDUCTOR, "L2", "m", "gnd", 1e-3);
    ru_system *s = (ru_system *)1;
    ru_error err;
    /* Reference: KCL at m holds only inductor currents (i1 = i2), so nothing fixes
     * v(m) at an instant (an index-2 network): refused with m's place. */
    assert_int_equal(ru_system_create(c, &s, &err), RU_EINPUT);
    assert_null(s);
    assert_non_null(strstr(err.msg, "node m has no capacitance"));
    assert_string_equal(err.file, "x.yaml");
    assert_int_equal(err.line, 3);
    /* the same node with its own stray runs */
    assert_int_equal(ru_circuit_set_node_stray_f(c, ru_circuit_find_node(c, "m"), 1e-12),
                     RU_OK);
    assert_int_equal(ru_system_create(c, &s, &err), RU_OK);
    assert_int_equal(ru_system_algebraic_count(s), 0);
    ru_system_destroy(s);
    ru_circuit_destroy(c);

    assert_int_equal(ru_circuit_create("cvode", &c), RU_OK);
    assert_int_equal(ru_circuit_set_stray_f(c, 0.0), RU_OK);
    add2(c, RU_PART_RESISTOR, "R1", "m", "gnd", 1e3);
    add2(c, RU_PART_RESISTOR, "R2", "m", "t", 1e3);
    add2(c, RU_PART_CAPACITOR, "C1", "t", "gnd", 1e-6);
    assert_int_equal(ru_system_create(c, &s, &err), RU_OK);
    double x0[2] = {0, 1}, f[2];
    assert_int_equal(ru_system_rhs(s, 0.0, x0, f), RU_EINPUT);
    ru_transient_opts o;
    ru_transient_opts_for(RU_ACCURACY_NORMAL, &o);
    o.stop_s = 1e-3;
    o.sample_s = 1e-5;
    o.integrator = RU_INTEGRATOR_CVODE;
    rec r = {.sys = s, .node = {-1, -1, -1}};
    assert_int_equal(ru_transient_run(s, &o, x0, rec_sample, &r, NULL, &err), RU_EINPUT);
    assert_non_null(strstr(err.msg, "CVODE needs capacitance"));
    /* AUTO takes IDA for a DAE and says so */
    o.integrator = RU_INTEGRATOR_AUTO;
    r.cap = 200;
    r.t = malloc(200 * sizeof *r.t);
    for (int q = 0; q < REC_NODES; q++)
        r.v[q] = malloc(200 * sizeof *r.v[q]);
    ru_solver_stats st;
    assert_int_equal(ru_transient_run(s, &o, x0, rec_sample, &r, &st, &err), RU_OK);
    assert_int_equal(st.integrator, RU_INTEGRATOR_IDA);
    assert_string_equal(ru_transient_engine_name(&st), "IDA, dense");
    assert_int_equal(r.n, 101);
    rec_free(&r);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* A whole run (prediction, transient, measurement) of a van der Pol tank loaded by
 * an ideal divider: G1 = -a v + b v^3, C and L at t; R1 from t to m, R2 from m to
 * ground, m without capacitance; stray 0 everywhere. */
static void test_analysis_ideal_load(void **state)
{
    (void)state;
    const char *text = "stray: 0\n"
                       "parts:\n"
                       "  C1: {type: capacitor, nodes: [t, gnd], value: 1u}\n"
                       "  L1: {type: inductor, nodes: [t, gnd], value: 1m}\n"
                       "  G1: {type: poly-conductance, nodes: [t, gnd], coeffs: [0, -4m, 0, 1m]}\n"
                       "  R1: {type: resistor, nodes: [t, m], value: 1k}\n"
                       "  R2: {type: resistor, nodes: [m, gnd], value: 1k}\n"
                       "run: {stop: 40m, kick: {preset: {t: 10m}}}\n"
                       "measure: {probe: t}\n";
    ru_circuit *c = NULL;
    ru_error err;
    assert_int_equal(ru_circuit_load_string(text, "ideal.yaml", NULL, &c, &err), RU_OK);
    ru_run_request rq;
    ru_run_request_default(&rq);
    ru_run_report rep;
    ru_status st = ru_analysis_run(c, &rq, &rep, &err);
    if (st != RU_OK)
        fail_msg("run: %s", err.msg);
    assert_int_equal(rep.solver.integrator, RU_INTEGRATOR_IDA);
    /* Reference: the divider loads the tank with 1/(R1 + R2) = 0.5 mS, so the net
     * negative conductance is a = 3.5 mS: poles a/(2C) +- j sqrt(1/(LC) -
     * (a/2C)^2) exactly (no stray), and the method of averaging (which the
     * describing function reproduces for a cubic) settles at 2 sqrt(a/(3b)). */
    const double a = 4e-3 - 0.5e-3, b = 1e-3, C = 1e-6, L = 1e-3;
    double sigma = a / (2 * C), want_amp = 2 * sqrt(a / (3 * b));
    assert_true(rep.pred.have_poles);
    RU_ASSERT_REL(rep.pred.growth_rate_per_s, sigma, 1e-9);
    RU_ASSERT_REL(rep.pred.frequency_hz, sqrt(1 / (L * C) - sigma * sigma) / (2 * M_PI),
                  1e-9);
    RU_ASSERT_REL(rep.pred.settled_amplitude_v, want_amp, 1e-6);
    /* The run settles at averaging's amplitude plus the O(eps^2) correction of the
     * peak: scipy gave +1.30e-5 at eps = 0.05 (test_transient.c), so eps = a
     * sqrt(L/C) = 0.11 here gives about (0.11/0.05)^2 1.3e-5 = 6.3e-5; 2e-4 allows
     * the envelope measurement and the solver (measured 6.5e-5). */
    assert_true(rep.meas.started);
    RU_ASSERT_REL(rep.meas.settled_amplitude_v, want_amp, 2e-4);
    /* The kick's share of the dominant mode (modal projection with the left vector
     * through the eliminated node, predict.c): a single tank preset to v0 with no
     * current rings as v0 e^{sigma t} (cos wd t - (sigma/wd) sin wd t), amplitude
     * v0 sqrt(1 + (sigma/wd)^2) (second-order ODE, own derivation). */
    double wd = sqrt(1 / (L * C) - sigma * sigma);
    RU_ASSERT_REL(rep.pred.kick_amplitude_v, 10e-3 * sqrt(1 + sigma * sigma / (wd * wd)),
                  1e-9);
    print_message("ideal load: measured %.6g V, averaging %.6g V, growth %.6g /s "
                  "(poles %.6g), %s\n", rep.meas.settled_amplitude_v, want_amp,
                  rep.meas.growth_rate_per_s, sigma, ru_transient_engine_name(&rep.solver));
    ru_circuit_destroy(c);
}

/* The start level from thermal noise with an ideal node m against the same circuit
 * with a vanishing capacitance at m (1e-20 F: its pole at -1/(R eps) is far off and
 * the mode moves by O(R eps/L), singular-perturbation limit): the two predictions
 * agree, so the DAE's input projection (the noise of R1 and R2 reaching the tank
 * through m's KCL) is right. */
static void test_noise_level_limit(void **state)
{
    (void)state;
    double level[2];
    for (int k = 0; k < 2; k++) {
        char text[1024];
        snprintf(text, sizeof text,
                 "stray: {default: 0, nodes: {m: %s}}\n"
                 "parts:\n"
                 "  C1: {type: capacitor, nodes: [t, gnd], value: 1u}\n"
                 "  L1: {type: inductor, nodes: [t, gnd], value: 1m, series: 0.5}\n"
                 "  G1: {type: poly-conductance, nodes: [t, gnd], coeffs: [0, -4m, 0, 1m]}\n"
                 "  R1: {type: resistor, nodes: [t, m], value: 1k}\n"
                 "  R2: {type: resistor, nodes: [m, gnd], value: 1k}\n"
                 "run: {stop: 2m, kick: noise}\n"
                 "measure: {probe: t}\n",
                 k ? "1e-20" : "0");
        ru_circuit *c = NULL;
        ru_error err;
        assert_int_equal(ru_circuit_load_string(text, "n.yaml", NULL, &c, &err), RU_OK);
        ru_run_request rq;
        ru_run_request_default(&rq);
        ru_run_report rep;
        if (ru_analysis_run(c, &rq, &rep, &err) != RU_OK)
            fail_msg("run: %s", err.msg);
        level[k] = rep.pred.kick_amplitude_v;
        assert_int_equal(rep.solver.integrator, k ? RU_INTEGRATOR_CVODE : RU_INTEGRATOR_IDA);
        ru_circuit_destroy(c);
    }
    print_message("noise start level: ideal node %.6g V, 1e-20 F there %.6g V\n", level[0],
                  level[1]);
    assert_true(level[0] > 0);
    RU_ASSERT_REL(level[0], level[1], 1e-6);
}

/* A run in chunks (ru_transient_advance) gives exactly the samples of one run, the
 * jumps and consistent restarts included (transient.h). Reference: the one-call run
 * of the same circuit (the contract is equality to the last bit). */
static void test_chunks_ideal(void **state)
{
    (void)state;
    ru_circuit *c = NULL;
    assert_int_equal(ru_circuit_create("chunks", &c), RU_OK);
    assert_int_equal(ru_circuit_set_stray_f(c, 0.0), RU_OK);
    ru_wave w = {.kind = RU_WAVE_PULSE, .v0 = 0, .v1 = 1.0, .at_s = 0.1e-3,
                 .edge_s = 0, .width_s = 0.3e-3, .period_s = 0.7e-3};
    add_supply(c, "VS", "in", &w);
    add2(c, RU_PART_RESISTOR, "R1", "in", "a", 1e3);
    add2(c, RU_PART_CAPACITOR, "C1", "a", "b", 20e-9);
    add2(c, RU_PART_RESISTOR, "R2", "b", "m", 2e3);
    add2(c, RU_PART_RESISTOR, "R3", "m", "gnd", 3e3);
    ru_system *s = NULL;
    rec one, many;
    ru_solver_stats st;
    ru_error err;
    const char *const nodes[REC_NODES] = {"a", "b", "m"};
    assert_int_equal(run_way(c, &s, &WAYS[2], RU_ACCURACY_NORMAL, 3e-3, 7e-6, nodes, &one,
                             &st, &err),
                     RU_OK);
    double x0[3];
    assert_int_equal(ru_system_initial_state(s, x0, &err), RU_OK);
    ru_transient_opts o;
    ru_transient_opts_for(RU_ACCURACY_NORMAL, &o);
    o.stop_s = 3e-3;
    o.sample_s = 7e-6;
    o.linsol = RU_LINSOL_KLU;
    memset(&many, 0, sizeof many);
    many.sys = s;
    many.cap = one.cap;
    many.t = malloc((size_t)many.cap * sizeof *many.t);
    for (int q = 0; q < REC_NODES; q++) {
        many.node[q] = one.node[q];
        many.v[q] = malloc((size_t)many.cap * sizeof *many.v[q]);
    }
    ru_transient *tr = NULL;
    assert_int_equal(ru_transient_create(s, &o, x0, rec_sample, &many, &tr, &err), RU_OK);
    for (double t = 0.13e-3; !ru_transient_done(tr); t += 0.29e-3)
        assert_int_equal(ru_transient_advance(tr, t, &err), RU_OK);
    ru_solver_stats st2;
    ru_transient_stats(tr, &st2);
    assert_int_equal(st2.integrator, RU_INTEGRATOR_IDA);
    ru_transient_destroy(tr);
    /* Reference for the waveform itself: a series loop R1 + R2 + R3 with C; the
     * capacitor voltage q relaxes toward the supply with tau = (R1 + R2 + R3) C
     * and is continuous at the edges, m = R3 (vs - q)/(R1 + R2 + R3) jumps with
     * them (own derivation, piecewise exponentials). 1e-6 V as above. */
    const double Rt = 6e3, tau = Rt * 20e-9;
    double q = 0, tq = 0, maxerr = 0;
    for (long i = 0; i < one.n; i++) {
        double t = one.t[i];
        double ph = fmod(t - 0.1e-3 + 1e-12, 0.7e-3);
        double vs = t >= 0.1e-3 - 1e-12 && ph < 0.3e-3 - 1e-12 ? 1.0 : 0.0;
        /* advance q exactly through the edges between tq and t */
        double tt = tq;
        while (tt < t - 1e-15) {
            double pht = fmod(tt - 0.1e-3 + 1e-12, 0.7e-3);
            double v = tt >= 0.1e-3 - 1e-12 && pht < 0.3e-3 - 1e-12 ? 1.0 : 0.0;
            double tnext = tt < 0.1e-3 - 1e-12 ? 0.1e-3
                                               : tt - pht + 1e-12 + (pht < 0.3e-3 - 1e-12
                                                                        ? 0.3e-3
                                                                        : 0.7e-3);
            double tend = fmin(tnext, t);
            q = v + (q - v) * exp(-(tend - tt) / tau);
            tt = tend;
        }
        tq = t;
        double m = 3e3 * (vs - q) / Rt;
        maxerr = fmax(maxerr, fabs(one.v[2][i] - m));
        RU_ASSERT_NEAR(one.v[2][i], m, 1e-6);
    }
    print_message("pulse train through an ideal loop: max |error| on m %.3g V\n", maxerr);
    assert_int_equal(many.n, one.n);
    for (long i = 0; i < one.n; i++) {
        RU_ASSERT_NEAR(many.t[i], one.t[i], 0.0);
        for (int q = 0; q < REC_NODES; q++)
            RU_ASSERT_NEAR(many.v[q][i], one.v[q][i], 0.0);
    }
    rec_free(&one);
    rec_free(&many);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_growth_rate_all),   cmocka_unit_test(test_lc_tank_all),
        cmocka_unit_test(test_van_der_pol_all),   cmocka_unit_test(test_jump_all),
        cmocka_unit_test(test_algebraic_divider), cmocka_unit_test(test_capacitor_group),
        cmocka_unit_test(test_algebraic_tank),    cmocka_unit_test(test_refusals),
        cmocka_unit_test(test_analysis_ideal_load), cmocka_unit_test(test_chunks_ideal),
        cmocka_unit_test(test_noise_level_limit),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
