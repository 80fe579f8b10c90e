/* test_system.c: the circuit compiled to an ODE (src/system/).
 * Checked against references outside the code under test: central finite
 * differences of rhs for the analytic Jacobian, hand-solved DC points (Ohm's
 * and Kirchhoff's laws), charge conservation Q = C V at supply jumps, KVL along
 * supply chains, the mass matrix stamped by hand, and the identity
 * dr/dx = A0 + b g^T of the loop split (A0 stamped separately). New laws and
 * parts: finite differences in every region, a follower's pole at GBW, and a
 * lamp's step response against the first-order thermal RC. */
#include "ru_test.h"

#include "ringup/system.h"
#include "parts/wave.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* ---- building circuits ----------------------------------------------------- */

static int node(ru_circuit *c, const char *name) { return ru_circuit_node(c, name, 1, 1); }

static void add2(ru_circuit *c, ru_part_type t, const char *name, const char *a,
                 const char *b, double value, ru_part *out)
{
    ru_part p;
    ru_part_init(&p, t, name);
    p.node[0] = node(c, a);
    p.node[1] = node(c, b);
    p.value = value;
    p.wave.value = value;
    p.line = 7;
    p.col = 3;
    if (out) { /* caller adjusts, then adds */
        *out = p;
        return;
    }
    ru_error e;
    if (ru_circuit_add_part(c, &p, &e) != RU_OK)
        fail_msg("add %s: %s", name, e.msg);
}

static void add_part(ru_circuit *c, ru_part *p)
{
    ru_error e;
    if (ru_circuit_add_part(c, p, &e) != RU_OK)
        fail_msg("add %s: %s", p->name, e.msg);
}

static void add_amp(ru_circuit *c, const char *name, ru_law law, const char *in,
                    const char *out, const char *ref)
{
    ru_part p;
    ru_part_init(&p, RU_PART_AMPLIFIER, name);
    ru_amp_defaults(&p.amp, law);
    p.node[0] = node(c, in);
    p.node[1] = node(c, out);
    p.node[2] = node(c, ref);
    if (law == RU_LAW_FOLLOWER_TANH) {
        p.amp.center_v = 2.0;
        p.amp.swing_v = 0.8;
        p.amp.gain = 0.95;
        p.amp.rout_ohm = 200.0;
    } else {
        p.amp.n = 1.2;
        p.amp.vsat_v = 0.3;
    }
    add_part(c, &p);
}

/* Every part type and both laws; a supply chain (vb hangs below vcc); the
 * exp-stage's ref on a free node (emitter resistor), so ref columns are used. */
static ru_circuit *rich_circuit(void)
{
    ru_circuit *c;
    assert_int_equal(ru_circuit_create("rich", &c), RU_OK);
    ru_part p;
    add2(c, RU_PART_SUPPLY, "VS", "vcc", "gnd", 9.0, &p);
    p.wave.rise_s = 2e-6;
    add_part(c, &p);
    add2(c, RU_PART_SUPPLY, "VB", "vcc", "vb", 0.0, &p); /* v(vb) = v(vcc) - wave */
    p.wave.kind = RU_WAVE_SINE;
    p.wave.offset = 6.0;
    p.wave.amplitude = 0.5;
    p.wave.freq_hz = 1e3;
    add_part(c, &p);
    add2(c, RU_PART_RESISTOR, "R1", "vcc", "col", 2.2e3, NULL);
    add2(c, RU_PART_RESISTOR, "R2", "vb", "base", 10e3, NULL);
    add2(c, RU_PART_RESISTOR, "RE", "emit", "gnd", 470.0, NULL);
    add2(c, RU_PART_CAPACITOR, "C1", "col", "tank", 10e-9, NULL);
    add2(c, RU_PART_CAPACITOR, "C2", "tank", "gnd", 22e-9, NULL);
    add2(c, RU_PART_CAPACITOR, "C3", "base", "vb", 1e-9, NULL); /* free-driven */
    add2(c, RU_PART_INDUCTOR, "L1", "tank", "base", 1e-3, &p);
    p.series_ohm = 3.0;
    add_part(c, &p);
    add2(c, RU_PART_INDUCTOR, "L2", "fo", "gnd", 4.7e-3, NULL);
    add2(c, RU_PART_CURRENT, "I1", "gnd", "tank", 0.0, &p);
    p.wave.kind = RU_WAVE_STEP;
    p.wave.v0 = 0.0;
    p.wave.v1 = 1e-3;
    p.wave.at_s = 1e-6;
    p.wave.edge_s = 1e-6;
    add_part(c, &p);
    add2(c, RU_PART_POLY, "G1", "tank", "gnd", 0.0, &p);
    p.ncoeffs = 4;
    p.coeffs[0] = 1e-4;
    p.coeffs[1] = -1e-3;
    p.coeffs[2] = 2e-5;
    p.coeffs[3] = 3.3e-4;
    add_part(c, &p);
    add_amp(c, "Q1", RU_LAW_EXP_STAGE, "base", "col", "emit");
    add_amp(c, "A1", RU_LAW_FOLLOWER_TANH, "tank", "fo", "gnd");
    return c;
}

static ru_system *make(const ru_circuit *c)
{
    ru_system *s = NULL;
    ru_error e;
    ru_status st = ru_system_create(c, &s, &e);
    if (st != RU_OK)
        fail_msg("create: %s", e.msg);
    return s;
}

/* Small LCG (Numerical Recipes constants, from memory) for repeatable states. */
static double lcg(unsigned long *seed)
{
    *seed = (*seed * 1664525UL + 1013904223UL) & 0xffffffffUL;
    return (double)*seed / 4294967296.0;
}

/* ---- Jacobian -------------------------------------------------------------- */

/* The sparse assembly against the dense one at the same point: every entry of
 * dr/dx lies in the pattern and has the same value (the same stamps add the same
 * terms in the same order, so equal to the last bit), and the pattern's mass
 * values are ru_system_mass's. The dense Jacobian itself is checked against
 * finite differences (check_jacobian). */
static void check_sparse(const ru_system *s, double t, const double *x)
{
    size_t n = ru_system_size(s);
    ru_sparsity p;
    ru_system_sparsity(s, &p);
    assert_int_equal(p.n, n);
    double *D = calloc(n * n, sizeof *D), *M = calloc(n * n, sizeof *M);
    double *r1 = calloc(n, sizeof *r1), *r2 = calloc(n, sizeof *r2);
    double *v = calloc((size_t)p.nnz, sizeof *v);
    char *seen = calloc(n * n, 1);
    ru_eval_point ep = {t, 0, 1.0};
    assert_int_equal(ru_system_residual(s, &ep, x, r1, D), RU_OK);
    assert_int_equal(ru_system_residual_sparse(s, &ep, x, r2, v), RU_OK);
    ru_system_mass(s, M);
    for (size_t i = 0; i < n; i++)
        RU_ASSERT_NEAR(r2[i], r1[i], 0.0);
    for (size_t j = 0; j < n; j++) {
        int diag = 0;
        for (long q = p.colptr[j]; q < p.colptr[j + 1]; q++) {
            size_t i = (size_t)p.rowind[q];
            assert_true(i < n);
            if (q > p.colptr[j])
                assert_true(p.rowind[q] > p.rowind[q - 1]); /* ascending */
            diag |= i == j;
            seen[i * n + j] = 1;
            RU_ASSERT_NEAR(v[q], D[i * n + j], 0.0);
            RU_ASSERT_NEAR(p.mass[q], M[i * n + j], 0.0);
        }
        assert_true(diag);
    }
    for (size_t e = 0; e < n * n; e++)
        if (!seen[e] && (D[e] != 0 || M[e] != 0))
            fail_msg("entry (%s, %s) = %g is outside the sparse pattern",
                     ru_system_state_name(s, e / n), ru_system_state_name(s, e % n), D[e]);
    free(D); free(M); free(r1); free(r2); free(v); free(seen);
}

static void check_jacobian(const ru_system *s, double t, const double *x)
{
    check_sparse(s, t, x);
    size_t n = ru_system_size(s);
    double *J = calloc(n * n, sizeof *J), *fp = calloc(n, sizeof *fp),
           *fm = calloc(n, sizeof *fm), *xx = calloc(n, sizeof *xx),
           *sc = calloc(n, sizeof *sc), *rowmax = calloc(n, sizeof *rowmax);
    assert_int_equal(ru_system_jacobian(s, t, x, J), RU_OK);
    ru_system_state_scale(s, sc);
    for (size_t i = 0; i < n * n; i++)
        rowmax[i / n] = fmax(rowmax[i / n], fabs(J[i]) * sc[i % n]);
    for (size_t j = 0; j < n; j++) {
        memcpy(xx, x, n * sizeof *xx);
        double h = 1e-6 * fmax(fabs(x[j]), sc[j]);
        xx[j] = x[j] + h;
        assert_int_equal(ru_system_rhs(s, t, xx, fp), RU_OK);
        xx[j] = x[j] - h;
        assert_int_equal(ru_system_rhs(s, t, xx, fm), RU_OK);
        for (size_t i = 0; i < n; i++) {
            double num = (fp[i] - fm[i]) / (2 * h), an = J[i * n + j];
            /* Reference: central differences, truncation O(h^2) relative ~1e-9
             * for the exp law (h = 1 uV on n vt = 31 mV) and roundoff eps|f|/h;
             * entries are compared at 1e-5 of their own size plus 1e-7 of the
             * row's largest contribution (|J_ik| * scale_k / scale_j). */
            double tol = 1e-5 * fabs(num) + 1e-7 * rowmax[i] / sc[j];
            if (!(fabs(an - num) <= tol))
                fail_msg("J[%s][%s] analytic %.10g fd %.10g (t=%g)",
                         ru_system_state_name(s, i), ru_system_state_name(s, j), an,
                         num, t);
        }
    }
    free(J); free(fp); free(fm); free(xx); free(sc); free(rowmax);
}

static void test_jacobian_random(void **state)
{
    (void)state;
    ru_circuit *c = rich_circuit();
    ru_system *s = make(c);
    size_t n = ru_system_size(s);
    assert_int_equal(n, 5 + 2); /* col tank base emit fo, i(L1), i(L2) */
    double x[7];
    unsigned long seed = 12345;
    const double times[] = {0.5e-6, 1.5e-6, 3e-4};
    for (int trial = 0; trial < 30; trial++) {
        for (size_t i = 0; i < n; i++) /* voltages -2..8 V, currents -20..20 mA */
            x[i] = i < ru_system_free_nodes(s) ? -2.0 + 10.0 * lcg(&seed)
                                               : 0.04 * (lcg(&seed) - 0.5);
        check_jacobian(s, times[trial % 3], x);
    }
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* Operating regions picked by hand: exp stage cut off, active, limited
 * (vc = 2 V: u = 2/(1.2*25.9 mV) = 64 > 40), saturated with vo < 0; follower
 * at center and deep in clipping. States: col tank base emit fo, i(L1), i(L2). */
static void test_jacobian_regions(void **state)
{
    (void)state;
    ru_circuit *c = rich_circuit();
    ru_system *s = make(c);
    int sb = ru_system_node_state(s, ru_circuit_find_node(c, "base"));
    int se = ru_system_node_state(s, ru_circuit_find_node(c, "emit"));
    int sc = ru_system_node_state(s, ru_circuit_find_node(c, "col"));
    int st = ru_system_node_state(s, ru_circuit_find_node(c, "tank"));
    const double pts[][4] = {/* base, emit, col, tank */
                             {-0.5, 0.0, 5.0, 2.0},  {0.7, 0.05, 5.0, 2.0},
                             {2.0, 0.0, 4.0, 2.01},  {0.75, 0.1, -0.4, 6.0},
                             {0.72, 0.6, 0.58, -3.0}};
    double x[8] = {0};
    for (size_t k = 0; k < 5; k++) {
        x[sb] = pts[k][0];
        x[se] = pts[k][1];
        x[sc] = pts[k][2];
        x[st] = pts[k][3];
        x[ru_system_inductor_state(s, ru_circuit_find_part(c, "L1"))] = 1e-3;
        x[ru_system_inductor_state(s, ru_circuit_find_part(c, "L2"))] = -2e-3;
        check_jacobian(s, 3e-4, x);
    }
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}


/* ---- DC residual, rhs, mass ------------------------------------------------ */

/* VS (step 0 -> 10 V) - R1 3k - m; R2 1k m-gnd; L1 m-gnd with 1k series; I1
 * pushes 1 mA into m (a = gnd, b = m). DC by hand (nodal analysis):
 * v_m = (10/3k + 1m) / (1/3k + 1/1k + 1/1k) = 13/7 V, i(L1) = v_m / 1k. */
static ru_circuit *divider(void)
{
    ru_circuit *c;
    assert_int_equal(ru_circuit_create("divider", &c), RU_OK);
    ru_part p;
    add2(c, RU_PART_SUPPLY, "VS", "top", "gnd", 0.0, &p);
    p.wave.kind = RU_WAVE_STEP;
    p.wave.v0 = 0.0;
    p.wave.v1 = 10.0;
    p.wave.at_s = 1e-3;
    add_part(c, &p);
    add2(c, RU_PART_RESISTOR, "R1", "top", "m", 3e3, NULL);
    add2(c, RU_PART_RESISTOR, "R2", "m", "gnd", 1e3, NULL);
    add2(c, RU_PART_INDUCTOR, "L1", "m", "gnd", 1e-3, &p);
    p.series_ohm = 1e3;
    add_part(c, &p);
    add2(c, RU_PART_CURRENT, "I1", "gnd", "m", 1e-3, NULL);
    add2(c, RU_PART_CAPACITOR, "C1", "m", "gnd", 1e-9, NULL);
    return c;
}

static void test_residual_dc(void **state)
{
    (void)state;
    ru_circuit *c = divider();
    ru_system *s = make(c);
    assert_int_equal(ru_system_size(s), 2);
    int sm = ru_system_node_state(s, ru_circuit_find_node(c, "m"));
    int sl = ru_system_inductor_state(s, ru_circuit_find_part(c, "L1"));
    double vm = 13.0 / 7.0, x[2], r[2], dr[4];
    x[sm] = vm;
    x[sl] = vm / 1e3;
    ru_eval_point ep = {0.0, 1, 1.0};
    assert_int_equal(ru_system_residual(s, &ep, x, r, dr), RU_OK);
    /* Reference: hand nodal analysis above; currents of a few mA, so 1e-15 A
     * and 1e-9 A/s (inductor row, di/dt) are rounding level. */
    RU_ASSERT_NEAR(r[sm], 0.0, 1e-15);
    RU_ASSERT_NEAR(r[sl], 0.0, 1e-9);
    /* Reference: the node conductance is 1/3k + 1/1k (R1, R2); L1 enters its
     * own column with -1; the inductor row is (v - R i)/L. */
    RU_ASSERT_REL(dr[sm * 2 + sm], -(1.0 / 3e3 + 1.0 / 1e3), 1e-14);
    RU_ASSERT_NEAR(dr[sm * 2 + sl], -1.0, 0.0);
    RU_ASSERT_REL(dr[sl * 2 + sm], 1.0 / 1e-3, 1e-14);
    RU_ASSERT_REL(dr[sl * 2 + sl], -1e3 / 1e-3, 1e-14);
    /* Source stepping halves every source: the half-scale DC point is vm/2. */
    ru_eval_point half = {0.0, 1, 0.5};
    double xh[2] = {0};
    xh[sm] = vm / 2;
    xh[sl] = vm / 2e3;
    assert_int_equal(ru_system_residual(s, &half, xh, r, NULL), RU_OK);
    RU_ASSERT_NEAR(r[sm], 0.0, 1e-15);
    /* Before the step (t = 0.5 ms) only I1 acts: residual at vm is not zero. */
    ru_eval_point early = {0.5e-3, 0, 1.0};
    assert_int_equal(ru_system_residual(s, &early, x, r, NULL), RU_OK);
    RU_ASSERT_REL(r[sm], 1e-3 - vm / 3e3 - vm / 1e3 - vm / 1e3, 1e-12);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* rhs must satisfy M f = r (checks the Cholesky solve against a plain product). */
static void test_rhs_mass(void **state)
{
    (void)state;
    ru_circuit *c = rich_circuit();
    ru_system *s = make(c);
    size_t n = ru_system_size(s);
    double x[7], f[7], r[7], M[49];
    unsigned long seed = 99;
    for (size_t i = 0; i < n; i++)
        x[i] = i < ru_system_free_nodes(s) ? 4.0 * lcg(&seed) : 1e-3 * lcg(&seed);
    double t = 1.7e-6; /* inside VS's ramp and I1's edge: dv/dt terms active */
    assert_int_equal(ru_system_rhs(s, t, x, f), RU_OK);
    ru_eval_point ep = {t, 0, 1.0};
    assert_int_equal(ru_system_residual(s, &ep, x, r, NULL), RU_OK);
    ru_system_mass(s, M);
    for (size_t i = 0; i < n; i++) {
        double mf = 0.0, big = 0.0;
        for (size_t j = 0; j < n; j++) {
            mf += M[i * n + j] * f[j];
            big = fmax(big, fabs(M[i * n + j] * f[j]));
        }
        /* Reference: definition M x' = r; the product cancels terms of size
         * `big`, so 1e-12 of that is rounding (C's condition is about 1e4). */
        RU_ASSERT_NEAR(mf, r[i], 1e-12 * big + 1e-18);
    }
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* Mass matrix stamped by hand: C1 col-tank 10n, C2 tank-gnd 22n, C3 base-vb
 * (vb driven) 1n, stray 1p on every free node; inductor rows identity. */
static void test_mass_matrix(void **state)
{
    (void)state;
    ru_circuit *c = rich_circuit();
    ru_system *s = make(c);
    size_t n = ru_system_size(s);
    double M[49];
    ru_system_mass(s, M);
    int col = ru_system_node_state(s, ru_circuit_find_node(c, "col"));
    int tank = ru_system_node_state(s, ru_circuit_find_node(c, "tank"));
    int base = ru_system_node_state(s, ru_circuit_find_node(c, "base"));
    int emit = ru_system_node_state(s, ru_circuit_find_node(c, "emit"));
    int l1 = ru_system_inductor_state(s, ru_circuit_find_part(c, "L1"));
    double sp = 1e-12;
    /* Reference: nodal capacitance matrix (diagonal: sum at the node; off
     * diagonal: minus the capacitance between the two nodes). Exact sums. */
    RU_ASSERT_REL(M[col * n + col], 10e-9 + sp, 1e-15);
    RU_ASSERT_REL(M[tank * n + tank], 32e-9 + sp, 1e-15);
    RU_ASSERT_REL(M[col * n + tank], -10e-9, 1e-15);
    RU_ASSERT_REL(M[tank * n + col], -10e-9, 1e-15);
    RU_ASSERT_REL(M[base * n + base], 1e-9 + sp, 1e-15);
    RU_ASSERT_REL(M[emit * n + emit], sp, 1e-15);
    RU_ASSERT_NEAR(M[base * n + tank], 0.0, 0.0);
    RU_ASSERT_NEAR(M[l1 * n + l1], 1.0, 0.0);
    RU_ASSERT_NEAR(M[l1 * n + col], 0.0, 0.0);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* ---- jumps, breakpoints, initial state ---------------------------------------- */

/* Capacitive divider: VS top-gnd (step v0 -> v1 at 1 ms, no edge), C1 top-m,
 * C2 m-gnd, stray on m. */
static ru_circuit *cap_divider(double v0, double v1)
{
    ru_circuit *c;
    assert_int_equal(ru_circuit_create("cap divider", &c), RU_OK);
    ru_part p;
    add2(c, RU_PART_SUPPLY, "VS", "top", "gnd", 0.0, &p);
    p.wave.kind = RU_WAVE_STEP;
    p.wave.v0 = v0;
    p.wave.v1 = v1;
    p.wave.at_s = 1e-3;
    add_part(c, &p);
    add2(c, RU_PART_CAPACITOR, "C1", "top", "m", 2e-9, NULL);
    add2(c, RU_PART_CAPACITOR, "C2", "m", "gnd", 3e-9, NULL);
    add2(c, RU_PART_RESISTOR, "R1", "m", "gnd", 1e6, NULL);
    return c;
}

static void test_charge_jump(void **state)
{
    (void)state;
    ru_circuit *c = cap_divider(1.0, 5.0);
    ru_system *s = make(c);
    assert_int_equal(ru_system_size(s), 1);
    /* Reference: charge conservation at node m, Q = C V: a step dV on the top
     * node moves m by dV * C1 / (C1 + C2 + stray). Rounding only: 1e-13. */
    double share = 2e-9 / (2e-9 + 3e-9 + 1e-12), x[1];
    ru_error e;
    assert_int_equal(ru_system_initial_state(s, x, &e), RU_OK);
    RU_ASSERT_REL(x[0], 1.0 * share, 1e-13); /* 0 -> v0 at power-on */
    double bp[4];
    assert_int_equal(ru_system_breakpoints(s, 10e-3, bp, 4), 1);
    RU_ASSERT_NEAR(bp[0], 1e-3, 0.0);
    double before = x[0];
    ru_system_apply_jump(s, 0.5e-3, x); /* nothing jumps there */
    RU_ASSERT_NEAR(x[0], before, 0.0);
    ru_system_apply_jump(s, bp[0], x);
    RU_ASSERT_REL(x[0] - before, 4.0 * share, 1e-13);
    /* The driven node itself follows the wave. */
    RU_ASSERT_NEAR(ru_system_node_voltage(s, ru_circuit_find_node(c, "top"), 2e-3, x),
                   5.0, 0.0);
    RU_ASSERT_NEAR(ru_system_node_voltage(s, ru_circuit_find_node(c, "m"), 2e-3, x),
                   x[0], 0.0);
    RU_ASSERT_NEAR(ru_system_node_voltage(s, 0, 2e-3, x), 0.0, 0.0);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* A supply at value from t = 0 (rise 0) through a chain: the initial state
 * carries the t = 0 jump; a ramped supply (rise > 0) does not jump. */
/* A capacitor to a ramping supply injects C dv/dt into the free node. */
static void test_cap_coupling(void **state)
{
    (void)state;
    ru_circuit *c = cap_divider(0.0, 5.0);
    ru_part *vs = ru_circuit_part_mut(c, (size_t)ru_circuit_find_part(c, "VS"));
    vs->wave.edge_s = 1e-3; /* 5 V over 1 ms from t = 1 ms: 5000 V/s */
    add2(c, RU_PART_CAPACITOR, "C4", "m", "top", 1e-9, NULL); /* driven node as b */
    ru_system *s = make(c);
    double x[1] = {0.7}, f[1];
    assert_int_equal(ru_system_rhs(s, 1.5e-3, x, f), RU_OK);
    /* Reference: i = C dv/dt through C1 and Ohm's law through R1, divided by the
     * node's capacitance (KCL at m). Rounding only: 1e-12. */
    double ctot = 2e-9 + 3e-9 + 1e-9 + 1e-12;
    RU_ASSERT_REL(f[0], (3e-9 * 5000.0 - 0.7 / 1e6) / ctot, 1e-12);
    assert_int_equal(ru_system_rhs(s, 2.5e-3, x, f), RU_OK); /* after the edge */
    RU_ASSERT_REL(f[0], (-0.7 / 1e6) / ctot, 1e-12);
    double bp[4];
    assert_int_equal(ru_system_breakpoints(s, 1.0, bp, 4), 2); /* edge start, end */
    RU_ASSERT_NEAR(bp[1], 2e-3, 0.0);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

static void test_initial_chain_jump(void **state)
{
    (void)state;
    ru_circuit *c;
    assert_int_equal(ru_circuit_create("chain jump", &c), RU_OK);
    ru_part p;
    add2(c, RU_PART_SUPPLY, "V1", "a", "gnd", 3.0, NULL);
    add2(c, RU_PART_SUPPLY, "V2", "b", "a", 2.0, NULL);        /* v(b) = 5 V */
    add2(c, RU_PART_SUPPLY, "V3", "r", "gnd", 7.0, &p);        /* ramps: no jump */
    p.wave.rise_s = 1e-3;
    add_part(c, &p);
    add2(c, RU_PART_CAPACITOR, "C1", "b", "m", 1e-9, NULL);
    add2(c, RU_PART_CAPACITOR, "C2", "r", "m", 1e-9, NULL);
    add2(c, RU_PART_CAPACITOR, "C3", "m", "gnd", 2e-9, NULL);
    ru_system *s = make(c);
    double x[1];
    assert_int_equal(ru_system_initial_state(s, x, NULL), RU_OK);
    /* Reference: Q = C V on node m: v_m = 5 V * 1n / (1n + 1n + 2n + 1p). */
    RU_ASSERT_REL(x[0], 5.0 * 1e-9 / (4e-9 + 1e-12), 1e-13);
    double bp[2];
    assert_int_equal(ru_system_breakpoints(s, 1.0, bp, 2), 1); /* ramp end */
    RU_ASSERT_NEAR(bp[0], 1e-3, 0.0);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* Breakpoints of a repeating pulse with edges and of a sine start, merged and
 * sorted; more than max are counted. */
static void test_breakpoints(void **state)
{
    (void)state;
    ru_circuit *c;
    assert_int_equal(ru_circuit_create("bp", &c), RU_OK);
    ru_part p;
    add2(c, RU_PART_CURRENT, "IP", "gnd", "m", 0.0, &p);
    p.wave.kind = RU_WAVE_PULSE;
    p.wave.v0 = 0.0;
    p.wave.v1 = 1e-3;
    p.wave.at_s = 1e-3;
    p.wave.edge_s = 0.1e-3;
    p.wave.width_s = 2e-3;
    p.wave.period_s = 5e-3;
    add_part(c, &p);
    add2(c, RU_PART_SUPPLY, "VS", "s", "gnd", 0.0, &p);
    p.wave.kind = RU_WAVE_SINE;
    p.wave.amplitude = 1.0;
    p.wave.freq_hz = 100.0;
    p.wave.at_s = 4e-3;
    p.wave.phase_deg = 90.0;
    add_part(c, &p);
    add2(c, RU_PART_RESISTOR, "R", "m", "gnd", 1e3, NULL);
    add2(c, RU_PART_CAPACITOR, "C", "m", "s", 1e-9, NULL);
    ru_system *s = make(c);
    /* Reference: the pulse timing rule (edges inside the width): starts at
     * 1 + 5k ms, edges end 0.1 ms later, falling edges over the last 0.1 ms. */
    const double want[] = {1e-3, 1.1e-3, 2.9e-3, 3e-3, 4e-3, 6e-3, 6.1e-3, 7.9e-3,
                           8e-3, 11e-3, 11.1e-3};
    double bp[16];
    assert_int_equal(ru_system_breakpoints(s, 11.5e-3, bp, 16), 11);
    for (int i = 0; i < 11; i++)
        RU_ASSERT_NEAR(bp[i], want[i], 1e-15);
    assert_int_equal(ru_system_breakpoints(s, 11.5e-3, bp, 3), 11);
    /* Reference: a sine starting at 90 degrees jumps by its amplitude; Q = C V
     * on m (C to s and stray to gnd). Only the sine start moves m. */
    double x[1] = {0.25};
    ru_system_apply_jump(s, 4e-3, x);
    RU_ASSERT_REL(x[0], 0.25 + 1.0 * 1e-9 / (1e-9 + 1e-12), 1e-13);
    ru_system_apply_jump(s, 6e-3, x); /* current source edge: no state change */
    RU_ASSERT_REL(x[0], 0.25 + 1.0 * 1e-9 / (1e-9 + 1e-12), 1e-13);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* Wave values and slopes: slope against central differences inside segments,
 * final values, jumps. */
static void test_waves(void **state)
{
    (void)state;
    ru_wave w = {0};
    w.kind = RU_WAVE_PULSE;
    w.v0 = -1.0;
    w.v1 = 3.0;
    w.at_s = 1.0;
    w.edge_s = 0.2;
    w.width_s = 1.0;
    w.period_s = 3.0;
    /* Reference: pulse timing rule; 1 + 3k start, top 1.2..1.8, fall 1.8..2.0. */
    RU_ASSERT_NEAR(ru_wave_value(&w, 0.5), -1.0, 0.0);
    RU_ASSERT_NEAR(ru_wave_value(&w, 4.1), 1.0, 1e-12);
    RU_ASSERT_NEAR(ru_wave_value(&w, 7.5), 3.0, 0.0);
    RU_ASSERT_NEAR(ru_wave_value(&w, 7.9), 1.0, 1e-12);
    RU_ASSERT_NEAR(ru_wave_value(&w, 8.5), -1.0, 0.0);
    RU_ASSERT_NEAR(ru_wave_final(&w), -1.0, 0.0);
    RU_ASSERT_NEAR(ru_wave_jump(&w, 4.0), 0.0, 0.0); /* edges have width */
    const double ts[] = {1.1, 4.05, 7.9, 0.3};
    for (int i = 0; i < 4; i++) {
        double h = 1e-6;
        double num = (ru_wave_value(&w, ts[i] + h) - ru_wave_value(&w, ts[i] - h)) / (2 * h);
        /* Reference: central difference on a linear segment: exact to 1e-8. */
        RU_ASSERT_NEAR(ru_wave_slope(&w, ts[i]), num, 1e-6);
    }
    ru_wave sn = {0};
    sn.kind = RU_WAVE_SINE;
    sn.offset = 0.5;
    sn.amplitude = 2.0;
    sn.freq_hz = 50.0;
    sn.at_s = 0.01;
    sn.phase_deg = 30.0;
    double h = 1e-7, t = 0.0173;
    double num = (ru_wave_value(&sn, t + h) - ru_wave_value(&sn, t - h)) / (2 * h);
    /* Reference: d/dt A sin(wt + p) = A w cos(wt + p); central difference with
     * h = 1e-7 s: truncation A w^3 h^2 / 6 ~ 1e-10 V/s. */
    RU_ASSERT_NEAR(ru_wave_slope(&sn, t), num, 1e-5);
    RU_ASSERT_NEAR(ru_wave_value(&sn, 0.005), 0.5, 0.0);
    RU_ASSERT_NEAR(ru_wave_jump(&sn, 0.01), 1.0, 1e-12); /* 2 sin 30 deg */
    RU_ASSERT_NEAR(ru_wave_final(&sn), 0.5, 0.0);
    ru_wave st = {0};
    st.kind = RU_WAVE_STEP;
    st.v0 = 2.0;
    st.v1 = -4.0;
    st.at_s = 0.3;
    RU_ASSERT_NEAR(ru_wave_jump(&st, 0.3), -6.0, 0.0);
    RU_ASSERT_NEAR(ru_wave_value(&st, 0.3), -4.0, 0.0); /* right-continuous */
    RU_ASSERT_NEAR(ru_wave_value(&st, -1.0), 0.0, 0.0); /* zero before t = 0 */
    RU_ASSERT_NEAR(ru_wave_final(&st), -4.0, 0.0);
}

/* ---- supplies, names, presets, scales ------------------------------------------ */

/* Chain given in "wrong" order: V3 hangs on b, V2 on a, V1 on gnd. */
static void test_supply_chain(void **state)
{
    (void)state;
    ru_circuit *c;
    assert_int_equal(ru_circuit_create("chain", &c), RU_OK);
    add2(c, RU_PART_SUPPLY, "V3", "b", "c", 2.0, NULL); /* v(c) = v(b) - 2 */
    add2(c, RU_PART_SUPPLY, "V2", "b", "a", 3.0, NULL); /* v(b) = v(a) + 3 */
    add2(c, RU_PART_SUPPLY, "V1", "a", "gnd", 5.0, NULL);
    add2(c, RU_PART_SUPPLY, "V4", "gnd", "n", 1.5, NULL); /* v(n) = -1.5 */
    add2(c, RU_PART_RESISTOR, "R1", "c", "d", 1e3, NULL);
    add2(c, RU_PART_RESISTOR, "R2", "d", "n", 1e3, NULL);
    ru_system *s = make(c);
    assert_int_equal(ru_system_size(s), 1);
    const char *dn[] = {"a", "b", "c", "n"};
    const double dv[] = {5.0, 8.0, 6.0, -1.5}; /* Reference: KVL along the chain */
    double x[1] = {0.3};
    for (int i = 0; i < 4; i++) {
        int k = ru_circuit_find_node(c, dn[i]);
        assert_int_equal(ru_system_node_state(s, k), -2);
        RU_ASSERT_NEAR(ru_system_node_voltage(s, k, 1e-3, x), dv[i], 1e-15);
    }
    int d = ru_circuit_find_node(c, "d");
    assert_int_equal(ru_system_node_state(s, d), 0);
    assert_int_equal(ru_system_node_state(s, 0), -1);
    assert_int_equal(ru_system_node_state(s, 99), -3);
    assert_int_equal(ru_system_node_state(s, -1), -3);
    /* Reference: divider between 6 V and -1.5 V: the DC residual vanishes at
     * 2.25 V (Kirchhoff's current law). */
    double r[1], xd[1] = {2.25};
    ru_eval_point ep = {0.0, 1, 1.0};
    assert_int_equal(ru_system_residual(s, &ep, xd, r, NULL), RU_OK);
    RU_ASSERT_NEAR(r[0], 0.0, 1e-18);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

static void test_supply_errors(void **state)
{
    (void)state;
    ru_circuit *c;
    assert_int_equal(ru_circuit_create("floating", &c), RU_OK);
    ru_circuit_set_file(c, "osc.yaml");
    add2(c, RU_PART_SUPPLY, "VF", "x", "y", 1.0, NULL);
    add2(c, RU_PART_RESISTOR, "R1", "x", "gnd", 1e3, NULL);
    ru_system *s = (ru_system *)1;
    ru_error e;
    assert_int_equal(ru_system_create(c, &s, &e), RU_EINPUT);
    assert_null(s);
    assert_non_null(strstr(e.msg, "part VF"));
    assert_non_null(strstr(e.msg, "needs one terminal on gnd"));
    assert_string_equal(e.file, "osc.yaml");
    assert_int_equal(e.line, 7);
    assert_int_equal(e.col, 3);
    ru_circuit_destroy(c);

    assert_int_equal(ru_circuit_create("loop", &c), RU_OK);
    add2(c, RU_PART_SUPPLY, "V1", "x", "gnd", 1.0, NULL);
    add2(c, RU_PART_SUPPLY, "V2", "y", "x", 1.0, NULL);
    add2(c, RU_PART_SUPPLY, "V3", "y", "gnd", 2.0, NULL); /* closes a loop */
    assert_int_equal(ru_system_create(c, &s, &e), RU_EINPUT);
    assert_non_null(strstr(e.msg, "part V3"));
    assert_non_null(strstr(e.msg, "loop"));
    ru_circuit_destroy(c);
    ru_system_destroy(NULL);
}

static void test_names(void **state)
{
    (void)state;
    ru_circuit *c = rich_circuit();
    ru_system *s = make(c);
    /* Free nodes in node order (vcc, vb driven), then inductors in part order. */
    const char *want[] = {"col", "base", "emit", "tank", "fo", "i(L1)", "i(L2)"};
    assert_int_equal(ru_system_size(s), 7);
    assert_int_equal(ru_system_free_nodes(s), 5);
    for (size_t i = 0; i < 7; i++)
        assert_string_equal(ru_system_state_name(s, i), want[i]);
    assert_string_equal(ru_system_state_name(s, 7), "?");
    assert_int_equal(ru_system_inductor_state(s, ru_circuit_find_part(c, "L2")), 6);
    assert_int_equal(ru_system_inductor_state(s, ru_circuit_find_part(c, "R1")), -1);
    assert_int_equal(ru_system_inductor_state(s, 1000), -1);
    assert_ptr_equal(ru_system_circuit(s), c);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

static void test_preset(void **state)
{
    (void)state;
    ru_circuit *c = cap_divider(0.0, 1.0);
    ru_run_opts *ro = ru_circuit_run_opts(c);
    ro->kick = RU_KICK_PRESET;
    ro->npreset = 1;
    ro->preset_node[0] = ru_circuit_find_node(c, "m");
    ro->preset_v[0] = 1e-3;
    ru_system *s = make(c);
    double x[1];
    ru_error e;
    assert_int_equal(ru_system_initial_state(s, x, &e), RU_OK);
    RU_ASSERT_NEAR(x[0], 1e-3, 0.0);
    ru_system_destroy(s);
    ro->preset_node[0] = ru_circuit_find_node(c, "top"); /* driven: refused */
    s = make(c);
    assert_int_equal(ru_system_initial_state(s, x, &e), RU_EINPUT);
    assert_non_null(strstr(e.msg, "top"));
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* Scales: volts from the largest supply chain, amperes of a tank of L and the
 * total capacitance (V sqrt(C/L)). */
static void test_state_scale(void **state)
{
    (void)state;
    ru_circuit *c = rich_circuit();
    ru_system *s = make(c);
    double sc[7];
    ru_system_state_scale(s, sc);
    /* vb = vcc - (6 +- 0.5): chain sum of peaks 9 + 6.5 = 15.5 V. */
    for (size_t i = 0; i < 5; i++)
        RU_ASSERT_NEAR(sc[i], 15.5, 0.0);
    double ctot = 10e-9 + 22e-9 + 1e-9 + 5e-12;
    RU_ASSERT_REL(sc[5], 15.5 * sqrt(ctot / 1e-3), 1e-14);
    RU_ASSERT_REL(sc[6], 15.5 * sqrt(ctot / 4.7e-3), 1e-14);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* ---- loop split ------------------------------------------------------------------ */

static void check_split(const ru_system *s, int part, const double *x)
{
    size_t n = ru_system_size(s);
    double *A0 = calloc(n * n, sizeof *A0), *dr = calloc(n * n, sizeof *dr);
    double *b = calloc(n, sizeof *b), *g = calloc(n, sizeof *g), *r = calloc(n, sizeof *r);
    ru_error e;
    assert_int_equal(ru_system_loop_split(s, part, x, A0, b, g, &e), RU_OK);
    ru_eval_point ep = {0.0, 1, 1.0};
    assert_int_equal(ru_system_residual(s, &ep, x, r, dr), RU_OK);
    double bmax = 0.0, big = 0.0;
    for (size_t i = 0; i < n; i++)
        bmax = fmax(bmax, fabs(b[i]));
    for (size_t i = 0; i < n * n; i++)
        big = fmax(big, fabs(dr[i]));
    assert_true(bmax > 0.0); /* the loop is really cut */
    for (size_t i = 0; i < n; i++)
        for (size_t j = 0; j < n; j++)
            /* Reference: the split's definition dr/dx = A0 + b g^T; A0 is stamped
             * with the transconductance left out, not computed as dr - b g^T.
             * Rounding of sums of terms up to `big`: 1e-14 of it. */
            RU_ASSERT_NEAR(A0[i * n + j] + b[i] * g[j], dr[i * n + j], 1e-14 * big);
    free(A0); free(dr); free(b); free(g); free(r);
}

static void test_loop_split(void **state)
{
    (void)state;
    ru_circuit *c = rich_circuit();
    ru_system *s = make(c);
    double x[7] = {0};
    unsigned long seed = 7;
    for (int k = 0; k < 5; k++) {
        for (size_t i = 0; i < 7; i++)
            x[i] = i < 5 ? 3.0 * lcg(&seed) : 1e-3 * lcg(&seed);
        check_split(s, ru_circuit_find_part(c, "Q1"), x);
        check_split(s, ru_circuit_find_part(c, "A1"), x);
    }
    /* Follower at its center, ref on gnd: b on the out row is gain / rout
     * (Reference: d tanh/du = 1 at 0) and g picks the input node. */
    size_t n = 7;
    int tank = ru_system_node_state(s, ru_circuit_find_node(c, "tank"));
    int fo = ru_system_node_state(s, ru_circuit_find_node(c, "fo"));
    x[tank] = 2.0;
    double A0[49], b[7], g[7];
    assert_int_equal(ru_system_loop_split(s, ru_circuit_find_part(c, "A1"), x, A0, b, g,
                                          NULL),
                     RU_OK);
    RU_ASSERT_REL(b[fo], 0.95 / 200.0, 1e-14);
    for (size_t i = 0; i < n; i++) {
        RU_ASSERT_NEAR(g[i], i == (size_t)tank ? 1.0 : 0.0, 0.0);
        if (i != (size_t)fo)
            RU_ASSERT_NEAR(b[i], 0.0, 0.0);
    }
    ru_error e;
    assert_int_equal(ru_system_loop_split(s, ru_circuit_find_part(c, "R1"), x, A0, b, g,
                                          &e),
                     RU_EINPUT);
    assert_non_null(strstr(e.msg, "R1"));
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}


/* ---- new laws and parts: Jacobian, internal states, loop split ----------------- */

/* Every new law and part: a diff pair (ref on gnd, inv on a free node), an opamp
 * (inverting input on the output divider), a table stage, a diode with rs, a lamp
 * and an NTC. States: the free nodes, then i(L1), then A2.vint, RT1.rise, RT2.rise. */
static ru_circuit *new_parts_circuit(void)
{
    ru_circuit *c;
    assert_int_equal(ru_circuit_create("new parts", &c), RU_OK);
    ru_part p;
    add2(c, RU_PART_SUPPLY, "VS", "vcc", "gnd", 12.0, NULL);
    add2(c, RU_PART_RESISTOR, "R1", "vcc", "d1", 4.7e3, NULL);
    add2(c, RU_PART_RESISTOR, "R2", "op", "fb", 10e3, NULL);
    add2(c, RU_PART_RESISTOR, "R3", "fb", "gnd", 4.7e3, NULL);
    add2(c, RU_PART_CAPACITOR, "C1", "d1", "x", 10e-9, NULL);
    add2(c, RU_PART_INDUCTOR, "L1", "x", "gnd", 1e-3, NULL);
    ru_part_init(&p, RU_PART_AMPLIFIER, "A1"); /* diff pair x - fb into d1 */
    ru_amp_defaults(&p.amp, RU_LAW_DIFF_PAIR_TANH);
    p.amp.rout_ohm = 20e3;
    p.node[0] = node(c, "x");
    p.node[1] = node(c, "d1");
    p.node[3] = node(c, "fb");
    add_part(c, &p);
    ru_part_init(&p, RU_PART_AMPLIFIER, "A2"); /* opamp x - fb into op */
    ru_amp_defaults(&p.amp, RU_LAW_OPAMP);
    p.amp.vmax_v = 5.0;
    p.amp.vmin_v = -4.0;
    p.amp.knee_v = 0.1;
    p.amp.slew_v_per_s = 1e6;
    p.node[0] = node(c, "x");
    p.node[1] = node(c, "op");
    p.node[3] = node(c, "fb");
    add_part(c, &p);
    ru_part_init(&p, RU_PART_AMPLIFIER, "A3"); /* table op -> tb */
    ru_amp_defaults(&p.amp, RU_LAW_TABLE);
    const double xs[] = {-2.0, -0.5, 0.0, 0.6, 2.0}, ys[] = {-1.0, -0.45, 0.0, 0.5, 0.8};
    p.amp.npoints = 5;
    for (int i = 0; i < 5; i++) {
        p.amp.pt_vin[i] = xs[i];
        p.amp.pt_vout[i] = ys[i];
    }
    p.node[0] = node(c, "op");
    p.node[1] = node(c, "tb");
    add_part(c, &p);
    add2(c, RU_PART_DIODE, "D1", "tb", "dk", 0.0, &p);
    p.diode.rs_ohm = 10.0;
    p.diode.n = 1.5;
    add_part(c, &p);
    add2(c, RU_PART_RESISTOR, "R4", "dk", "gnd", 1e3, NULL);
    add2(c, RU_PART_THERMAL, "RT1", "op", "lp", 0.0, &p);
    ru_thermal_defaults(&p.thermal, RU_THERMAL_LAMP);
    p.thermal.cth_j_per_k = 1e-3;
    p.thermal.rth_k_per_w = 500.0;
    add_part(c, &p);
    add2(c, RU_PART_THERMAL, "RT2", "lp", "gnd", 0.0, &p);
    ru_thermal_defaults(&p.thermal, RU_THERMAL_NTC);
    p.thermal.r0_ohm = 200.0;
    p.thermal.cth_j_per_k = 1e-3;
    add_part(c, &p);
    return c;
}

static int state_named(const ru_system *s, const char *name)
{
    for (size_t i = 0; i < ru_system_size(s); i++)
        if (strcmp(ru_system_state_name(s, i), name) == 0)
            return (int)i;
    fail_msg("no state %s", name);
    return -1;
}

static void test_new_parts_jacobian(void **state)
{
    (void)state;
    ru_circuit *c = new_parts_circuit();
    ru_system *s = make(c);
    size_t n = ru_system_size(s), nf = ru_system_free_nodes(s);
    assert_int_equal(n, nf + 4); /* i(L1), A2.vint, RT1.rise, RT2.rise */
    int sv = state_named(s, "A2.vint"), s1 = state_named(s, "RT1.rise"),
        s2 = state_named(s, "RT2.rise");
    assert_int_equal(sv, (int)nf + 1); /* internal states after the inductor current */
    assert_int_equal(s1, (int)nf + 2);
    assert_int_equal(s2, (int)nf + 3);
    assert_int_equal(ru_system_inductor_state(s, ru_circuit_find_part(c, "RT1")), -1);
    double *x = calloc(n, sizeof *x);
    int sx = ru_system_node_state(s, ru_circuit_find_node(c, "x"));
    int sfb = ru_system_node_state(s, ru_circuit_find_node(c, "fb"));
    int sop = ru_system_node_state(s, ru_circuit_find_node(c, "op"));
    int stb = ru_system_node_state(s, ru_circuit_find_node(c, "tb"));
    int sdk = ru_system_node_state(s, ru_circuit_find_node(c, "dk"));
    /* regions: {x, fb, op, vint, rise1, rise2, tb, dk}: linear and cold; opamp at
     * the upper rail and slew-limited, lamp hot; lower rail, diode reverse;
     * diode forward and limited (tb - dk = 3 V), table beyond both ends, NTC hot */
    const double pts[][8] = {{1e-4, 0.0, 0.1, 0.2, 0.0, 0.0, 0.05, 0.0},
                             {0.3, -0.2, 4.9, 5.3, 400.0, 20.0, 1.2, 0.3},
                             {-0.4, 0.1, -3.9, -4.1, 50.0, 300.0, -1.5, 0.5},
                             {0.01, 0.0, 2.5, 2.4, 1500.0, 5.0, 3.5, 0.5},
                             {-2e-5, 1e-5, -2.5, -2.6, 0.0, 60.0, 0.7, 0.0}};
    unsigned long seed = 99;
    for (size_t k = 0; k < 5; k++) {
        for (size_t i = 0; i < n; i++)
            x[i] = 0.1 * lcg(&seed);
        x[sx] = pts[k][0];
        x[sfb] = pts[k][1];
        x[sop] = pts[k][2];
        x[sv] = pts[k][3];
        x[s1] = pts[k][4];
        x[s2] = pts[k][5];
        x[stb] = pts[k][6];
        x[sdk] = pts[k][7];
        check_jacobian(s, 1e-3, x);
        check_split(s, ru_circuit_find_part(c, "A1"), x);
        check_split(s, ru_circuit_find_part(c, "A2"), x);
        if (fabs(pts[k][2]) < 2.0) /* beyond the table's ends its slope may be 0 */
            check_split(s, ru_circuit_find_part(c, "A3"), x);
    }
    /* The opamp's split: b sits on its vint row only (its output current does
     * not depend on vc), g is e_x - e_fb (in minus inv). */
    double *A0 = calloc(n * n, sizeof *A0), *b = calloc(n, sizeof *b), *g = calloc(n, sizeof *g);
    assert_int_equal(ru_system_loop_split(s, ru_circuit_find_part(c, "A2"), x, A0, b, g, NULL),
                     RU_OK);
    for (size_t i = 0; i < n; i++) {
        if ((int)i != sv)
            RU_ASSERT_NEAR(b[i], 0.0, 0.0);
        RU_ASSERT_NEAR(g[i], (int)i == sx ? 1.0 : (int)i == sfb ? -1.0 : 0.0, 0.0);
    }
    assert_true(b[sv] > 0.0);
    /* initial state: internal states at rest, vint = 0 for rails far from 0 */
    assert_int_equal(ru_system_initial_state(s, x, NULL), RU_OK);
    RU_ASSERT_NEAR(x[sv], 0.0, 1e-12);
    RU_ASSERT_NEAR(x[s1], 0.0, 0.0);
    /* scales: vint in volts (rails 5 V or the 12 V supply), rises in kelvin
     * (P rth at 12 V on r0: 144/50*500 = 1440 K, capped at 1000 K) */
    double *sc = calloc(n, sizeof *sc);
    ru_system_state_scale(s, sc);
    RU_ASSERT_NEAR(sc[sv], 12.0, 0.0);
    RU_ASSERT_NEAR(sc[s1], 1000.0, 0.0);
    free(sc); free(A0); free(b); free(g); free(x);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* A unity follower (out fed back to inv) on the general opamp model: the
 * closed-loop pole sits at GBW. */
static void test_opamp_follower_pole(void **state)
{
    (void)state;
    ru_circuit *c;
    assert_int_equal(ru_circuit_create("follower", &c), RU_OK);
    add2(c, RU_PART_SUPPLY, "VS", "in", "gnd", 0.0, NULL);
    add2(c, RU_PART_RESISTOR, "RL", "o", "gnd", 1e6, NULL);
    ru_part p;
    ru_part_init(&p, RU_PART_AMPLIFIER, "A1");
    ru_amp_defaults(&p.amp, RU_LAW_OPAMP);
    p.amp.gain = 1e5;
    p.amp.gbw_hz = 2e6;
    p.amp.rout_ohm = 50.0;
    p.node[0] = node(c, "in");
    p.node[1] = node(c, "o");
    p.node[3] = node(c, "o");
    add_part(c, &p);
    ru_system *s = make(c);
    assert_int_equal(ru_system_size(s), 2); /* o, A1.vint */
    double x[2] = {0, 0}, J[4];
    assert_int_equal(ru_system_jacobian(s, 0.0, x, J), RU_OK);
    double tr = J[0] + J[3], det = J[0] * J[3] - J[1] * J[2];
    double disc = sqrt(tr * tr - 4 * det);
    double slow = (tr + disc) / 2; /* the pole nearer the origin */
    /* Reference: closed-loop bandwidth of a unity-gain follower equals the GBW
     * for A0 >> 1 (single-pole op-amp: pole at wp (1 + A0 beta), beta = 1;
     * Sedra & Smith ch. 2, from memory). Departures: 1/A0 = 1e-5, rout/RL =
     * 5e-5 and the coupling to the output node's own pole at 1/(rout * 1 pF)
     * = 2e10 /s, i.e. 2 pi GBW / 2e10 = 6e-4: tolerance 1e-3. */
    RU_ASSERT_REL(-slow / (2 * M_PI), 2e6, 1e-3);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* Lamp with alpha 0 (a constant resistor) stepped onto a DC supply: the rise
 * follows P rth (1 - exp(-t/(rth cth))). Integrated here by the classic RK4
 * on ru_system_rhs (the thermal row is the only slow state). */
static void test_thermal_step(void **state)
{
    (void)state;
    ru_circuit *c;
    assert_int_equal(ru_circuit_create("lamp", &c), RU_OK);
    add2(c, RU_PART_SUPPLY, "VS", "a", "gnd", 2.0, NULL);
    ru_part p;
    add2(c, RU_PART_THERMAL, "RT1", "a", "gnd", 0.0, &p);
    p.thermal.alpha_per_k = 0.0;
    p.thermal.r0_ohm = 100.0;
    p.thermal.rth_k_per_w = 800.0;
    p.thermal.cth_j_per_k = 1e-3;
    add_part(c, &p);
    ru_system *s = make(c);
    assert_int_equal(ru_system_size(s), 1); /* RT1.rise only: a is driven */
    double x = 0.0, tau = 800.0 * 1e-3, dt = tau / 2000.0, t = 0.0;
    for (int k = 0; k < 2000; k++) { /* to t = tau */
        double k1, k2, k3, k4, y;
        ru_system_rhs(s, t, &x, &k1);
        y = x + dt / 2 * k1;
        ru_system_rhs(s, t + dt / 2, &y, &k2);
        y = x + dt / 2 * k2;
        ru_system_rhs(s, t + dt / 2, &y, &k3);
        y = x + dt * k3;
        ru_system_rhs(s, t + dt, &y, &k4);
        x += dt / 6 * (k1 + 2 * k2 + 2 * k3 + k4);
        t += dt;
    }
    /* Reference: first-order thermal RC, steady rise P rth = (4/100) 800 = 32 K,
     * time constant rth cth = 0.8 s: 32 (1 - e^-1) at t = tau. RK4's error
     * (dt/tau)^4 = 4e-14 and the sum of 2000 steps' rounding: 1e-10. */
    RU_ASSERT_REL(x, 32.0 * (1.0 - exp(-1.0)), 1e-10);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_jacobian_random),
        cmocka_unit_test(test_jacobian_regions),
        cmocka_unit_test(test_residual_dc),
        cmocka_unit_test(test_rhs_mass),
        cmocka_unit_test(test_mass_matrix),
        cmocka_unit_test(test_charge_jump),
        cmocka_unit_test(test_cap_coupling),
        cmocka_unit_test(test_initial_chain_jump),
        cmocka_unit_test(test_breakpoints),
        cmocka_unit_test(test_waves),
        cmocka_unit_test(test_supply_chain),
        cmocka_unit_test(test_supply_errors),
        cmocka_unit_test(test_names),
        cmocka_unit_test(test_preset),
        cmocka_unit_test(test_state_scale),
        cmocka_unit_test(test_loop_split),
        cmocka_unit_test(test_new_parts_jacobian),
        cmocka_unit_test(test_opamp_follower_pole),
        cmocka_unit_test(test_thermal_step),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
