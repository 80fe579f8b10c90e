/* test_coupling.c: the coupling part (src/parts/coupling.c, system_couple.c): its
 * loader keys and every error with FILE:LINE:COL, the refusals of the system (a
 * pair coupled twice, an inductance matrix that is not positive definite),
 * PART.KEY, the mass matrix, the poles of two coupled tanks against the closed
 * form, a transformer's open- and short-circuit inductance through its poles (an
 * ideal secondary node: the DAE path), and the beating of two equal coupled tanks
 * on CVODE, IDA dense and IDA KLU against the closed-form normal modes. */
#include "ru_test.h"

#include "ringup/circuit.h"
#include "ringup/loader.h"
#include "ringup/params.h"
#include "ringup/smallsig.h"
#include "ringup/system.h"
#include "ringup/transient.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define NAME "k.yaml"
#define PI 3.14159265358979323846

static ru_circuit *load_ok(const char *text)
{
    ru_circuit *c = NULL;
    ru_error err;
    if (ru_circuit_load_string(text, NAME, RU_MODELS_DIR, &c, &err) != RU_OK)
        fail_msg("load: %s:%d:%d: %s", err.file, err.line, err.col, err.msg);
    return c;
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

/* Loading text fails with RU_EINPUT at line:col of token, the message holding want. */
static void load_bad(const char *text, int line, const char *token, const char *want)
{
    ru_circuit *c = NULL;
    ru_error err;
    assert_int_equal(ru_circuit_load_string(text, NAME, RU_MODELS_DIR, &c, &err), RU_EINPUT);
    assert_null(c);
    assert_string_equal(err.file, NAME);
    assert_int_equal(err.line, line);
    assert_int_equal(err.col, col_of(text, line, token));
    if (!strstr(err.msg, want))
        fail_msg("message '%s' lacks '%s'", err.msg, want);
}

/* The system of text fails with RU_EINPUT, the message holding want, at the line
 * of the part named in it (line, 0: any column). */
static void system_bad(const char *text, int line, const char *want)
{
    ru_circuit *c = load_ok(text);
    ru_system *s = NULL;
    ru_error err;
    assert_int_equal(ru_system_create(c, &s, &err), RU_EINPUT);
    assert_null(s);
    if (!strstr(err.msg, want))
        fail_msg("message '%s' lacks '%s'", err.msg, want);
    if (line > 0)
        assert_int_equal(err.line, line);
    ru_circuit_destroy(c);
}

/* Two tanks: La || Ca at a, Lb || Cb at b, coupled by k; %s: extra parts. */
static char *two_tanks(double La, double Ca, double Lb, double Cb, double k,
                       const char *extra)
{
    char *t = malloc(2048);
    snprintf(t, 2048,
             "title: two coupled tanks\n"
             "stray: 0\n"
             "parts:\n"
             "  Ca: {type: capacitor, nodes: [a, gnd], value: %.17g}\n"
             "  La: {type: inductor, nodes: [a, gnd], value: %.17g}\n"
             "  Cb: {type: capacitor, nodes: [b, gnd], value: %.17g}\n"
             "  Lb: {type: inductor, nodes: [b, gnd], value: %.17g}\n"
             "  K1: {type: coupling, inductors: [La, Lb], k: %.17g}\n"
             "%s"
             "run: {stop: 1m, kick: {preset: {a: 1}}}\n"
             "measure: {probe: a}\n",
             Ca, La, Cb, Lb, k, extra);
    return t;
}

static const char good[] = "title: t\n"                                           /* 1 */
                           "parts:\n"                                             /* 2 */
                           "  L1: {type: inductor, nodes: [a, gnd], value: 1m}\n" /* 3 */
                           "  L2: {type: inductor, nodes: [b, gnd], value: 4m}\n" /* 4 */
                           "  C1: {type: capacitor, nodes: [a, b], value: 1n}\n"  /* 5 */
                           "  K1: {type: coupling, inductors: [L1, L2], k: -0.5}\n"; /* 6 */

static void test_loader(void **state)
{
    (void)state;
    ru_circuit *c = load_ok(good);
    int k = ru_circuit_find_part(c, "K1");
    assert_true(k >= 0);
    const ru_part *p = ru_circuit_part(c, (size_t)k);
    assert_int_equal(p->type, RU_PART_COUPLING);
    assert_string_equal(p->coupling.inductor[0], "L1");
    assert_string_equal(p->coupling.inductor[1], "L2");
    RU_ASSERT_NEAR(p->coupling.k, -0.5, 0.0);
    ru_error err;
    assert_int_equal(ru_circuit_set_param(c, "K1.k", 0.25, &err), RU_OK); /* PART.KEY */
    RU_ASSERT_NEAR(ru_circuit_part(c, (size_t)k)->coupling.k, 0.25, 0.0);
    ru_circuit_destroy(c);

    char t[1024];
    const char *head = "title: t\nparts:\n"
                       "  L1: {type: inductor, nodes: [a, gnd], value: 1m}\n"
                       "  L2: {type: inductor, nodes: [b, gnd], value: 4m}\n"
                       "  C1: {type: capacitor, nodes: [a, b], value: 1n}\n";
    snprintf(t, sizeof t, "%s  K1: {type: coupling, inductors: [L1, L2], k: 1}\n", head);
    load_bad(t, 6, "K1", "k must be between -1 and 1");
    snprintf(t, sizeof t, "%s  K1: {type: coupling, inductors: [L1, L2], k: -1.2}\n", head);
    load_bad(t, 6, "K1", "k must be between -1 and 1");
    snprintf(t, sizeof t, "%s  K1: {type: coupling, inductors: [L1, L3], k: 0.5}\n", head);
    load_bad(t, 6, "L3", "no part L3");
    snprintf(t, sizeof t, "%s  K1: {type: coupling, inductors: [L1, C1], k: 0.5}\n", head);
    load_bad(t, 6, "C1]", "C1 is a capacitor, not an inductor");
    snprintf(t, sizeof t, "%s  K1: {type: coupling, inductors: [L1, L1], k: 0.5}\n", head);
    load_bad(t, 6, "K1", "couples inductor L1 with itself");
    snprintf(t, sizeof t, "%s  K1: {type: coupling, inductors: [L1], k: 0.5}\n", head);
    load_bad(t, 6, "[L1]", "needs a list of 2 part names");
    snprintf(t, sizeof t, "%s  K1: {type: coupling, inductors: [L1, L2]}\n", head);
    load_bad(t, 6, "K1", "missing required key k");
    snprintf(t, sizeof t, "%s  K1: {type: coupling, k: 0.5}\n", head);
    load_bad(t, 6, "K1", "missing required key inductors");
    snprintf(t, sizeof t, "%s  K1: {type: coupling, inductors: [L1, L2], k: 0.5, "
                          "nodes: [a, b]}\n", head);
    load_bad(t, 6, "nodes", "nodes");
    /* a coupling may name inductors defined after it */
    snprintf(t, sizeof t, "title: t\nparts:\n"
                          "  K1: {type: coupling, inductors: [L1, L2], k: 0.5}\n"
                          "  L1: {type: inductor, nodes: [a, gnd], value: 1m}\n"
                          "  L2: {type: inductor, nodes: [b, gnd], value: 4m}\n");
    c = load_ok(t);
    ru_circuit_destroy(c);
}

static void test_system_refusals(void **state)
{
    (void)state;
    char t[1024];
    snprintf(t, sizeof t, "%s  K2: {type: coupling, inductors: [L2, L1], k: 0.1}\n", good);
    system_bad(t, 7, "coupled twice");
    /* Reference: the coefficient matrix [[1, .9, .9], [.9, 1, -.9], [.9, -.9, 1]] has
     * determinant 0.19 - 2 * 0.9 * 1.71 < 0 (hand expansion): no set of windings. */
    snprintf(t, sizeof t,
             "title: t\nparts:\n"
             "  L1: {type: inductor, nodes: [a, gnd], value: 1m}\n"
             "  L2: {type: inductor, nodes: [b, gnd], value: 1m}\n"
             "  L3: {type: inductor, nodes: [c, gnd], value: 1m}\n"
             "  K1: {type: coupling, inductors: [L1, L2], k: 0.9}\n"
             "  K2: {type: coupling, inductors: [L1, L3], k: 0.9}\n"
             "  K3: {type: coupling, inductors: [L2, L3], k: -0.9}\n");
    system_bad(t, 0, "not positive definite");
}

/* The mass matrix holds M/La and M/Lb beside the unit diagonal of the inductor
 * rows, and the rates x' = M^-1 r solve L_set di/dt = v (hand algebra). */
static void test_mass_and_rates(void **state)
{
    (void)state;
    ru_circuit *c = load_ok(good);
    ru_system *s = NULL;
    ru_error err;
    assert_int_equal(ru_system_create(c, &s, &err), RU_OK);
    size_t n = ru_system_size(s);
    assert_int_equal(n, 4);
    double M[16], x[4] = {0.3, -0.7, 0.0, 0.0}, f[4];
    ru_system_mass(s, M);
    int i1 = ru_system_inductor_state(s, ru_circuit_find_part(c, "L1"));
    int i2 = ru_system_inductor_state(s, ru_circuit_find_part(c, "L2"));
    double L1 = 1e-3, L2 = 4e-3, m = -0.5 * sqrt(L1 * L2);
    /* Reference: desc.h's ru_mutual (rows di/dt = v/L: entries M/L1, M/L2) */
    RU_ASSERT_NEAR(M[i1 * 4 + i2], m / L1, 1e-15);
    RU_ASSERT_NEAR(M[i2 * 4 + i1], m / L2, 1e-15);
    RU_ASSERT_NEAR(M[i1 * 4 + i1], 1.0, 0.0);
    assert_int_equal(ru_system_rhs(s, 0.0, x, f), RU_OK);
    /* Reference: [L1 M; M L2] [i1'; i2'] = [v(a); v(b)] solved by Cramer's rule. */
    double va = x[ru_system_node_state(s, ru_circuit_find_node(c, "a"))];
    double vb = x[ru_system_node_state(s, ru_circuit_find_node(c, "b"))];
    double det = L1 * L2 - m * m;
    RU_ASSERT_REL(f[i1], (L2 * va - m * vb) / det, 1e-12);
    RU_ASSERT_REL(f[i2], (L1 * vb - m * va) / det, 1e-12);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* The complex poles (im > 0) of c, sorted by frequency, into w (rad/s); returns
 * how many. */
static size_t complex_poles(const ru_circuit *c, double *w, size_t max)
{
    ru_system *s = NULL;
    ru_error err;
    if (ru_system_create(c, &s, &err) != RU_OK)
        fail_msg("system: %s", err.msg);
    size_t n = ru_system_size(s), np = ru_poles_count(s);
    double *x = calloc(n, sizeof *x);
    ru_pole *p = calloc(n, sizeof *p);
    assert_int_equal(ru_poles_compute(s, x, p, &err), RU_OK);
    size_t k = 0;
    for (size_t i = 0; i < np && k < max; i++)
        if (p[i].im_rad_per_s > 0)
            w[k++] = p[i].im_rad_per_s;
    for (size_t i = 1; i < k; i++) /* insertion sort */
        for (size_t j = i; j > 0 && w[j] < w[j - 1]; j--) {
            double q = w[j];
            w[j] = w[j - 1];
            w[j - 1] = q;
        }
    free(x);
    free(p);
    ru_system_destroy(s);
    return k;
}

/* Two different lossless tanks coupled by k. Reference (own derivation from the
 * loop equations La qa'' + M qb'' + qa/Ca = 0, M qa'' + Lb qb'' + qb/Cb = 0):
 * det[[1/Ca - w^2 La, -w^2 M], [-w^2 M, 1/Cb - w^2 Lb]] = 0, i.e.
 * (1 - k^2) w^4 - (wa^2 + wb^2) w^2 + wa^2 wb^2 = 0 with wa^2 = 1/(La Ca). */
static void test_coupled_tanks_poles(void **state)
{
    (void)state;
    const double La = 1e-3, Ca = 100e-9, Lb = 2.2e-3, Cb = 33e-9;
    const double ks[] = {0.05, 0.3, -0.6, 0.95};
    for (size_t q = 0; q < sizeof ks / sizeof ks[0]; q++) {
        double k = ks[q];
        char *t = two_tanks(La, Ca, Lb, Cb, k, "");
        ru_circuit *c = load_ok(t);
        double w[4];
        assert_int_equal(complex_poles(c, w, 4), 2);
        double a2 = 1 / (La * Ca), b2 = 1 / (Lb * Cb), A = 1 - k * k, B = a2 + b2;
        double disc = sqrt(B * B - 4 * A * a2 * b2);
        double lo = sqrt((B - disc) / (2 * A)), hi = sqrt((B + disc) / (2 * A));
        print_message("k %+.2f: %.9g Hz, %.9g Hz (closed form %.9g, %.9g)\n", k,
                      w[0] / (2 * PI), w[1] / (2 * PI), lo / (2 * PI), hi / (2 * PI));
        RU_ASSERT_REL(w[0], lo, 1e-9);
        RU_ASSERT_REL(w[1], hi, 1e-9);
        ru_circuit_destroy(c);
        free(t);
    }
}

/* A two-winding transformer: primary L1 with C1 at p, secondary L2 from s to ground
 * loaded by R at s, which has no capacitance (stray 0: s is an ideal node, the
 * DAE path). Reference (the transformer's textbook limits, from memory, checked by
 * the loop equations): with the secondary open (R -> infinity) the primary sees
 * L1, with it shorted (R -> 0) L1 (1 - k^2); the tank rings at 1/sqrt(L C). The
 * loads used put the correction (w L2/R)^2 or (R/(w L2))^2 below 1e-13. */
static void test_transformer_limits(void **state)
{
    (void)state;
    const double L1 = 1e-3, L2 = 4.7e-3, C1 = 47e-9, k = 0.8;
    const double loads[2] = {1e9, 1e-6};
    for (int q = 0; q < 2; q++) {
        char t[1024];
        snprintf(t, sizeof t,
                 "title: transformer\n"
                 "stray: 0\n"
                 "parts:\n"
                 "  C1: {type: capacitor, nodes: [p, gnd], value: %.17g}\n"
                 "  L1: {type: inductor, nodes: [p, gnd], value: %.17g}\n"
                 "  L2: {type: inductor, nodes: [s, gnd], value: %.17g}\n"
                 "  K1: {type: coupling, inductors: [L1, L2], k: %.17g}\n"
                 "  RL: {type: resistor, nodes: [s, gnd], value: %.17g}\n",
                 C1, L1, L2, k, loads[q]);
        ru_circuit *c = load_ok(t);
        ru_system *s = NULL;
        ru_error err;
        assert_int_equal(ru_system_create(c, &s, &err), RU_OK);
        assert_int_equal(ru_system_algebraic_count(s), 1); /* s has no capacitance */
        ru_system_destroy(s);
        double w[4];
        assert_int_equal(complex_poles(c, w, 4), 1);
        double L = q == 0 ? L1 : L1 * (1 - k * k);
        print_message("secondary %s: %.9g Hz, closed form %.9g Hz\n",
                      q == 0 ? "open" : "shorted", w[0] / (2 * PI),
                      1 / (2 * PI * sqrt(L * C1)));
        RU_ASSERT_REL(w[0], 1 / sqrt(L * C1), 1e-9);
        ru_circuit_destroy(c);
    }
}

/* ---- transient: two equal tanks exchange their energy ------------------------- */

typedef struct rec2 {
    const ru_system *sys;
    int a, b;
    double *t, *va, *vb;
    long n, cap;
} rec2;

static ru_status rec2_sample(void *user, double t, const double *x, size_t n)
{
    (void)n;
    rec2 *r = user;
    if (r->n >= r->cap)
        return RU_ERANGE;
    r->t[r->n] = t;
    r->va[r->n] = ru_system_node_voltage(r->sys, r->a, t, x);
    r->vb[r->n] = ru_system_node_voltage(r->sys, r->b, t, x);
    r->n++;
    return RU_OK;
}

/* Equal tanks L || C coupled by k, a preset to V, b at 0, no loss. Reference (own
 * derivation, normal modes): the even mode (va = vb) sees L + M, the odd one
 * L - M, so va = V/2 (cos ws t + cos wo t), vb = V/2 (cos ws t - cos wo t) with
 * ws = 1/sqrt((L + M) C), wo = 1/sqrt((L - M) C): the energy moves to b and back
 * every 2 pi/(wo - ws). Checked over 3 exchanges on every integrator; the tolerance
 * 2e-5 V is the global error NORMAL keeps over ~60 cycles (README accuracy table:
 * lossless drift 1e-4 per 100 cycles of the amplitude). */
static void test_beating_all_integrators(void **state)
{
    (void)state;
    const double L = 1e-3, C = 100e-9, k = 0.1, V = 1.0;
    const double ws = 1 / sqrt(L * (1 + k) * C), wo = 1 / sqrt(L * (1 - k) * C);
    const double stop = 3 * 2 * PI / (wo - ws), dt = 2e-7;
    const struct {
        ru_integrator in;
        ru_linsol ls;
        const char *name;
    } ways[3] = {{RU_INTEGRATOR_CVODE, RU_LINSOL_AUTO, "CVODE"},
                 {RU_INTEGRATOR_IDA, RU_LINSOL_DENSE, "IDA dense"},
                 {RU_INTEGRATOR_IDA, RU_LINSOL_KLU, "IDA KLU"}};
    char *t = two_tanks(L, C, L, C, k, "");
    ru_circuit *c = load_ok(t);
    for (int w = 0; w < 3; w++) {
        ru_system *s = NULL;
        ru_error err;
        assert_int_equal(ru_system_create(c, &s, &err), RU_OK);
        size_t n = ru_system_size(s);
        double *x0 = calloc(n, sizeof *x0);
        assert_int_equal(ru_system_initial_state(s, x0, &err), RU_OK);
        ru_transient_opts o;
        ru_transient_opts_for(RU_ACCURACY_NORMAL, &o);
        o.stop_s = stop;
        o.sample_s = dt;
        o.integrator = ways[w].in;
        o.linsol = ways[w].ls;
        rec2 r = {s, ru_circuit_find_node(c, "a"), ru_circuit_find_node(c, "b"), NULL,
                  NULL, NULL, 0, (long)(stop / dt) + 2};
        r.t = malloc((size_t)r.cap * sizeof *r.t);
        r.va = malloc((size_t)r.cap * sizeof *r.va);
        r.vb = malloc((size_t)r.cap * sizeof *r.vb);
        ru_solver_stats st;
        if (ru_transient_run(s, &o, x0, rec2_sample, &r, &st, &err) != RU_OK)
            fail_msg("%s: %s", ways[w].name, err.msg);
        assert_int_equal(st.integrator, ways[w].in);
        assert_true(r.n > 1000);
        double emax = 0, bmax = 0;
        for (long i = 0; i < r.n; i++) {
            double ti = r.t[i], cs = cos(ws * ti), co = cos(wo * ti);
            emax = fmax(emax, fabs(r.va[i] - V / 2 * (cs + co)));
            emax = fmax(emax, fabs(r.vb[i] - V / 2 * (cs - co)));
            bmax = fmax(bmax, fabs(r.vb[i]));
        }
        print_message("%s: %ld samples, max |error| %.3g V, b reaches %.4f V\n",
                      ways[w].name, r.n, emax, bmax);
        assert_true(bmax > 0.99 * V); /* the whole swing moves to b */
        RU_ASSERT_NEAR(emax, 0.0, 2e-5);
        free(r.t);
        free(r.va);
        free(r.vb);
        free(x0);
        ru_system_destroy(s);
    }
    ru_circuit_destroy(c);
    free(t);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_loader),
        cmocka_unit_test(test_system_refusals),
        cmocka_unit_test(test_mass_and_rates),
        cmocka_unit_test(test_coupled_tanks_poles),
        cmocka_unit_test(test_transformer_limits),
        cmocka_unit_test(test_beating_all_integrators),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
