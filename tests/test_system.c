/* test_system.c: the circuit compiled to an ODE (src/system*.c, src/wave.c).
 * Checked against references outside the code under test: central finite
 * differences of rhs for the analytic Jacobian, hand-solved DC points (Ohm's
 * and Kirchhoff's laws), charge conservation Q = C V at supply jumps, KVL along
 * supply chains, the mass matrix stamped by hand, and the identity
 * dr/dx = A0 + b g^T of the loop split (A0 stamped separately). */
#include "ru_test.h"

#include "ringup/system.h"
#include "wave.h"

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

static void check_jacobian(const ru_system *s, double t, const double *x)
{
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

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_jacobian_random),
        cmocka_unit_test(test_jacobian_regions),
        cmocka_unit_test(test_residual_dc),
        cmocka_unit_test(test_rhs_mass),
        cmocka_unit_test(test_mass_matrix),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
