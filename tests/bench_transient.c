/* bench_transient.c: wall time of the transient engine per accuracy setting.
 *
 * Not a test (not named test_*, not built by the CMake glob). Build by hand:
 *   cc -O2 -Iinclude tests/bench_transient.c build/libringup.a $(pkg-config --libs
 *      yaml-0.1 fftw3 lapacke sndfile) -lsundials_cvodes -lsundials_kinsol
 *      -lsundials_nvecserial -lsundials_sunmatrixdense -lsundials_sunlinsoldense
 *      -lm -lpthread
 * Runs a van der Pol tank (L 1 mH, C 1 uF, eps 0.05, settled 1 V) for CYCLES cycles
 * at 100 samples per cycle into a counting sink and prints steps, samples and time. */
#include "ringup/circuit.h"
#include "ringup/system.h"
#include "ringup/transient.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>

static ru_status count_sample(void *user, double t, const double *x, size_t n)
{
    (void)t, (void)x, (void)n;
    (*(long *)user)++;
    return RU_OK;
}

static int add(ru_circuit *c, ru_part_type type, const char *name, double value)
{
    ru_part p;
    ru_error e;
    ru_part_init(&p, type, name);
    p.node[0] = ru_circuit_node(c, "t", 0, 0);
    p.value = value;
    if (type == RU_PART_POLY) {
        double a = 0.05 / sqrt(1e-3 / 1e-6);
        p.ncoeffs = 4;
        p.coeffs[1] = -a;
        p.coeffs[3] = 4.0 * a / 3.0;
    }
    return ru_circuit_add_part(c, &p, &e) == RU_OK ? 0 : -1;
}

int main(int argc, char **argv)
{
    double cycles = argc > 1 ? atof(argv[1]) : 2000;
    ru_circuit *c = NULL;
    ru_system *s = NULL;
    ru_error e;
    if (ru_circuit_create("bench", &c) || add(c, RU_PART_CAPACITOR, "C1", 1e-6) ||
        add(c, RU_PART_INDUCTOR, "L1", 1e-3) || add(c, RU_PART_POLY, "G1", 0))
        return 1;
    ru_run_opts *ro = ru_circuit_run_opts(c);
    ro->kick = RU_KICK_PRESET;
    ro->npreset = 1;
    ro->preset_node[0] = 1;
    ro->preset_v[0] = 10e-3;
    if (ru_system_create(c, &s, &e))
        return 1;
    double x0[2];
    ru_system_initial_state(s, x0, &e);
    double T = 2 * 3.14159265358979323846 * sqrt(1e-3 * 1e-6);
    static const char *const names[3] = {"draft", "normal", "precise"};
    for (int a = 0; a < 3; a++) {
        ru_transient_opts o;
        ru_transient_opts_for((ru_accuracy)a, &o);
        o.stop_s = cycles * T;
        o.sample_s = T / 100;
        long n = 0;
        ru_solver_stats st;
        ru_status rc = ru_transient_run(s, &o, x0, count_sample, &n, &st, &e);
        printf("%-8s rtol %.0e: %s, %.0f cycles, %ld steps (%.1f per cycle), %ld samples,"
               " %ld rhs, %ld jac, %.3f s wall\n",
               names[a], o.rtol, ru_status_str(rc), cycles, st.steps, st.steps / cycles,
               n, st.rhs_evals, st.jac_evals, st.wall_s);
    }
    ru_system_destroy(s);
    ru_circuit_destroy(c);
    return 0;
}
