/* bench_damping.c: how much BDF (this engine: CVODE, orders 1..5) damps an undamped
 * oscillation, as a function of the relative tolerance, the steps per cycle and the
 * DC level the tone rides on. Prints the table kept in src/engines/tolerance.c and
 * the README ("Accuracy chosen from the poles").
 *
 * Not a test (not named test_*, not built by the CMake glob). Build by hand:
 *   cc -O2 -Iinclude tests/bench_damping.c build/libringup.a $(pkg-config --libs
 *      yaml-0.1 fftw3 lapacke sndfile) -lsundials_cvodes -lsundials_kinsol
 *      -lsundials_nvecserial -lsundials_sunmatrixdense -lsundials_sunlinsoldense
 *      -lm -lpthread
 * Circuit: a lossless tank, L = 1 mH, C = 1 uF (f0 = 5.03 kHz; stray 1 pF), its
 * inductor returned to a supply VB (0 V, or 9 V: the tone rides on a 9 V bias, as
 * on a transistor's collector). Preset kick A above the bias (1 V, or 1 mV on 9 V).
 * Measured: the stored energy E = C (v - VB)^2/2 + L i^2/2 at 32 samples per cycle
 * over CYCLES cycles; the numerical damping is delta = -(1/2) d ln E/dt (least
 * squares over the samples), given as delta/omega (per radian: compare with a
 * circuit's predicted sigma/omega). Exact solution: E constant (delta = 0).
 * Columns: error weights absolute (CVODE's rtol |x| + atol) or relative to the
 * operating point (rtol |x - x_op| + atol, ru_transient_opts.x_ref), and with the
 * step capped at T/N. */
#include "ringup/circuit.h"
#include "ringup/system.h"
#include "ringup/transient.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define CYCLES 400.0
#define SPC 32.0

typedef struct acc {
    const ru_system *s;
    double vb, c_f, l_h;
    int node, ind;
    double st, se, stt, ste, n; /* least squares of ln E on t */
} acc;

static ru_status sink(void *user, double t, const double *x, size_t n)
{
    (void)n;
    acc *a = user;
    double v = x[a->node] - a->vb, i = x[a->ind];
    double e = log(0.5 * a->c_f * v * v + 0.5 * a->l_h * i * i);
    a->st += t;
    a->se += e;
    a->stt += t * t;
    a->ste += t * e;
    a->n += 1;
    return RU_OK;
}

static int add(ru_circuit *c, ru_part_type type, const char *name, const char *n0,
               const char *n1, double value)
{
    ru_part p;
    ru_error e;
    ru_part_init(&p, type, name);
    p.node[0] = ru_circuit_node(c, n0, 0, 0);
    p.node[1] = ru_circuit_node(c, n1, 0, 0);
    p.value = value;
    if (type == RU_PART_SUPPLY) {
        p.wave.kind = RU_WAVE_DC;
        p.wave.value = value;
    }
    return ru_circuit_add_part(c, &p, &e) == RU_OK ? 0 : -1;
}

/* delta/omega and steps per cycle of one run. */
static void one(double vb, double amp, double rtol, int rel, double atol_v,
                double spc_cap, double *dw, double *spc)
{
    const double L = 1e-3, C = 1e-6, w = 1.0 / sqrt(L * C), T = 2 * M_PI / w;
    ru_circuit *c = NULL;
    ru_system *s = NULL;
    ru_error e;
    if (ru_circuit_create("tank", &c) || add(c, RU_PART_SUPPLY, "VB", "b", "gnd", vb) ||
        add(c, RU_PART_INDUCTOR, "L1", "t", "b", L) ||
        add(c, RU_PART_CAPACITOR, "C1", "t", "gnd", C))
        exit(1);
    ru_run_opts *ro = ru_circuit_run_opts(c);
    ro->kick = RU_KICK_PRESET;
    ro->npreset = 1;
    ro->preset_node[0] = ru_circuit_find_node(c, "t");
    ro->preset_v[0] = vb + amp;
    if (ru_system_create(c, &s, &e))
        exit(1);
    size_t n = ru_system_size(s);
    double *x0 = calloc(n, sizeof *x0), *xop = calloc(n, sizeof *xop);
    ru_system_initial_state(s, x0, &e);
    acc a = {.s = s, .vb = vb, .c_f = C + 1e-12, .l_h = L};
    a.node = ru_system_node_state(s, ru_circuit_find_node(c, "t"));
    a.ind = ru_system_inductor_state(s, ru_circuit_find_part(c, "L1"));
    xop[a.node] = vb; /* the operating point: v = VB, i = 0 */
    ru_transient_opts o;
    ru_transient_opts_for(RU_ACCURACY_NORMAL, &o);
    o.rtol = rtol;
    double scale = vb > 1.0 ? vb : 1.0; /* the engine's voltage scale (supplies) */
    o.atol_rel = atol_v > 0 ? fmax(atol_v, 2e-14 * scale) / scale : rtol * 1e-2;
    o.stop_s = CYCLES * T;
    o.sample_s = T / SPC;
    o.x_ref = rel ? xop : NULL;
    o.max_step_s = spc_cap > 0 ? T / spc_cap : 0;
    ru_solver_stats st;
    if (ru_transient_run(s, &o, x0, sink, &a, &st, &e) != RU_OK) {
        *dw = *spc = NAN;
    } else {
        double slope = (a.n * a.ste - a.st * a.se) / (a.n * a.stt - a.st * a.st);
        *dw = -0.5 * slope / w;
        *spc = (double)st.steps / CYCLES;
    }
    free(x0);
    free(xop);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

int main(void)
{
    static const double rtols[] = {1e-4, 1e-5, 1e-6, 1e-7, 1e-8, 1e-9, 1e-10};
    printf("numerical damping delta/omega of a lossless tank (steps per cycle), %g "
           "cycles\n", CYCLES);
    printf("atol: 1e-2 rtol times the voltage scale (9 V) in columns 1-3, times the tone "
           "(1 mV) in 4-5\n");
    printf("%-7s %-20s %-20s %-20s %-20s %-20s\n", "rtol", "1 V, absolute",
           "1 mV on 9 V, abs.", "1 mV on 9 V, rel.", "rel., atol of tone", "same, T/100 cap");
    for (size_t i = 0; i < sizeof rtols / sizeof rtols[0]; i++) {
        double d[5], k[5];
        double r = rtols[i];
        one(0.0, 1.0, r, 0, 0, 0, &d[0], &k[0]);
        one(9.0, 1e-3, r, 0, 0, 0, &d[1], &k[1]);
        one(9.0, 1e-3, r, 1, 0, 0, &d[2], &k[2]);
        one(9.0, 1e-3, r, 1, 1e-2 * r * 1e-3, 0, &d[3], &k[3]);
        one(9.0, 1e-3, r, 1, 1e-2 * r * 1e-3, 100, &d[4], &k[4]);
        printf("%-7.0e", rtols[i]);
        for (int j = 0; j < 5; j++) {
            char cell[32];
            snprintf(cell, sizeof cell, "%+.2e (%.0f)", d[j], k[j]);
            printf(" %-20s", cell);
        }
        printf("\n");
    }
    static const double caps[] = {0, 25, 50, 100, 200, 400};
    printf("\nthe same (1 mV on 9 V, relative weights, atol of the tone) with the step "
           "capped at T/N:\n%-7s", "rtol");
    for (size_t j = 0; j < sizeof caps / sizeof caps[0]; j++) {
        char h[24];
        snprintf(h, sizeof h, caps[j] > 0 ? "N = %.0f" : "no cap", caps[j]);
        printf(" %-20s", h);
    }
    printf("\n");
    for (size_t i = 0; i < 4; i++) {
        printf("%-7.0e", rtols[i]);
        for (size_t j = 0; j < sizeof caps / sizeof caps[0]; j++) {
            double d, k;
            one(9.0, 1e-3, rtols[i], 1, 1e-2 * rtols[i] * 1e-3, caps[j], &d, &k);
            char cell[32];
            snprintf(cell, sizeof cell, "%+.2e (%.0f)", d, k);
            printf(" %-20s", cell);
        }
        printf("\n");
    }
    return 0;
}
