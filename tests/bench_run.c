/* bench_run.c: where `ringup run` spends its time, on the bundled examples and on
 * generated circuits of growing size, through the library (ru_analysis_run, the
 * same call as the command line) and through the system's hot calls alone.
 *
 * Not a test (not named test_*, not built by the CMake glob; speed is never
 * asserted). Build by hand against a built library, from the source folder:
 *   cc -O2 -Iinclude tests/bench_run.c BUILD/libringup.a $(pkg-config --libs
 *      yaml-0.1 fftw3 lapacke sndfile) -lsundials_cvodes -lsundials_kinsol
 *      -lsundials_nvecserial -lsundials_sunmatrixdense -lsundials_sunlinsoldense
 *      -lm -lpthread -o /tmp/bench_run
 * and run it from the source folder (it reads examples/) with RINGUP_MODELS=models:
 *   bench_run [REPEATS [CASE...]]
 * REPEATS (default 3) runs of each case; the wall time printed is the fastest.
 * Cases (our own bench values):
 *   the examples by file stem (vdp-tank, follower-colpitts, ...);
 *   ladder-N: N sections (10 nF series, 10 kOhm shunt) from an op-amp's output back
 *     to its inverting input through 10 kOhm, 200 kOhm feedback (N+4 states);
 *   tanks-M: M tanks (10 mH with 0.5 Ohm, 100 nF) in a chain joined by 10 nF, the
 *     first with a van der Pol conductance of -0.5 mS * M (2M states).
 * N and M from 1 to 200. Default: every example, ladder-10, tanks-10, tanks-20.
 *
 * Output: one line per case, fields separated by spaces, KEY=VALUE:
 *   case=NAME n=STATES steps=S rhs=R jac=J run_s=WALL rhs_us=T1 jac_us=T2
 *   growth=G freq=F amp=A damp=D
 * run_s: fastest whole ru_analysis_run (prediction + transient + measurement);
 * rhs_us, jac_us: mean time of one ru_system_rhs / ru_system_jacobian call at the
 * initial state (microseconds); growth (1/s), freq (Hz), amp (V), damp (the
 * integrator damping estimate, 1/s) are the run's results printed to 10
 * significant digits, so that two builds can be compared for identical results. */
#define _POSIX_C_SOURCE 200809L

#include "ringup/analysis.h"
#include "ringup/loader.h"
#include "ringup/system.h"

#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#define YAML_MAX 65536

static double now_s(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

/* Appends printf-formatted text to buf (size YAML_MAX). */
static void put(char *buf, const char *fmt, ...)
{
    size_t len = strlen(buf);
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(buf + len, YAML_MAX - len, fmt, ap);
    va_end(ap);
}

/* N sections (series C, shunt R) from the op-amp output back to its inverting
 * input through RI; RF sets a gain well above what the ladder needs. */
static void gen_ladder(char *y, int nsec)
{
    snprintf(y, YAML_MAX, "title: ladder bench\nparts:\n"
                          "  A1: {type: amplifier, in: p, inv: m, out: o, "
                          "model: general-opamp}\n"
                          "  RB: {type: resistor, nodes: [p, gnd], value: 1k}\n"
                          "  RF: {type: resistor, nodes: [o, m], value: 200k}\n"
                          "  RI: {type: resistor, nodes: [s%d, m], value: 10k}\n",
             nsec);
    for (int i = 1; i <= nsec; i++) {
        put(y, "  C%d: {type: capacitor, nodes: [", i);
        if (i == 1)
            put(y, "o");
        else
            put(y, "s%d", i - 1);
        put(y, ", s%d], value: 10n}\n", i);
        put(y, "  R%d: {type: resistor, nodes: [s%d, gnd], value: 10k}\n", i, i);
    }
    put(y, "run: {stop: 10m, kick: {preset: {s1: 1m}}}\nmeasure: {probe: o}\n");
}

/* M tanks of 10 mH and 100 nF (series 0.5 ohm) joined by 10 nF. */
static void gen_tanks(char *y, int m)
{
    double g1 = 0.5e-3 * m; /* the first tank carries about 1/m of the mode */
    snprintf(y, YAML_MAX, "title: tanks bench\nparts:\n"
                          "  G1: {type: poly-conductance, nodes: [t1, gnd], "
                          "coeffs: [0, %.6g, 0, %.6g]}\n", -g1, g1 / 3.0);
    for (int i = 1; i <= m; i++) {
        put(y, "  L%d: {type: inductor, nodes: [t%d, gnd], value: 10mH, series: "
               "0.5}\n", i, i);
        put(y, "  C%d: {type: capacitor, nodes: [t%d, gnd], value: 100nF}\n", i, i);
        if (i > 1)
            put(y, "  K%d: {type: capacitor, nodes: [t%d, ", i, i);
        if (i > 1)
            put(y, "t%d], value: 10nF}\n", i - 1);
    }
    put(y, "run: {stop: 20m, kick: {preset: {t1: 1m}}}\nmeasure: {probe: t1}\n");
}

/* Loads a case: an example file by stem or a generated circuit. */
static ru_status load_case(const char *name, ru_circuit **c, ru_error *err)
{
    const char *models = getenv("RINGUP_MODELS");
    if (!strncmp(name, "ladder-", 7) || !strncmp(name, "tanks-", 6)) {
        int size = atoi(name + (name[0] == 'l' ? 7 : 6));
        if (size < 1 || size > 200)
            return ru_error_set(err, RU_ERANGE, NULL, 0, 0, "size must be 1..200");
        char *y = calloc(YAML_MAX, 1);
        if (!y)
            return RU_ENOMEM;
        if (name[0] == 'l')
            gen_ladder(y, size);
        else
            gen_tanks(y, size);
        ru_status st = ru_circuit_load_string(y, name, models, c, err);
        free(y);
        return st;
    }
    char path[512];
    snprintf(path, sizeof path, "examples/%s.yaml", name);
    return ru_circuit_load(path, models, c, err);
}

/* Mean microseconds per rhs and per Jacobian call at the initial state. */
static void time_calls(const ru_circuit *c, double *rhs_us, double *jac_us)
{
    ru_system *s = NULL;
    ru_error err;
    *rhs_us = *jac_us = -1;
    if (ru_system_create(c, &s, &err) != RU_OK)
        return;
    size_t n = ru_system_size(s);
    double *x = calloc(n + 1, sizeof *x), *f = calloc(n + 1, sizeof *f);
    double *J = calloc(n * n + 1, sizeof *J);
    if (x && f && J && ru_system_initial_state(s, x, &err) == RU_OK) {
        long reps = 200000 / (long)(n * n + 8) + 200;
        double t0 = now_s();
        for (long k = 0; k < reps * 20; k++)
            ru_system_rhs(s, 1e-6 * (double)k, x, f);
        *rhs_us = 1e6 * (now_s() - t0) / (double)(reps * 20);
        t0 = now_s();
        for (long k = 0; k < reps; k++)
            ru_system_jacobian(s, 1e-6 * (double)k, x, J);
        *jac_us = 1e6 * (now_s() - t0) / (double)reps;
    }
    free(x);
    free(f);
    free(J);
    ru_system_destroy(s);
}

static int run_case(const char *name, int repeats)
{
    ru_circuit *c = NULL;
    ru_error err;
    if (load_case(name, &c, &err) != RU_OK) {
        printf("case=%s error=\"%s\"\n", name, err.msg);
        return 1;
    }
    ru_run_request rq;
    ru_run_request_default(&rq);
    ru_run_report rep;
    double best = 1e300;
    ru_status st = RU_OK;
    for (int r = 0; r < repeats; r++) {
        double t0 = now_s();
        st = ru_analysis_run(c, &rq, &rep, &err);
        double w = now_s() - t0;
        best = w < best ? w : best;
    }
    double rhs_us, jac_us;
    time_calls(c, &rhs_us, &jac_us);
    ru_system *s = NULL;
    size_t n = ru_system_create(c, &s, &err) == RU_OK ? ru_system_size(s) : 0;
    ru_system_destroy(s);
    printf("case=%s n=%zu steps=%ld rhs=%ld jac=%ld run_s=%.4f rhs_us=%.3f "
           "jac_us=%.3f growth=%.10g freq=%.10g amp=%.10g damp=%.10g%s\n",
           name, n, rep.solver.steps, rep.solver.rhs_evals, rep.solver.jac_evals, best,
           rhs_us, jac_us, rep.meas.growth_rate_per_s, rep.meas.frequency_hz,
           rep.meas.settled_amplitude_v, rep.integrator_damping_per_s,
           st == RU_OK ? "" : " status=failed");
    fflush(stdout);
    ru_circuit_destroy(c);
    return st == RU_OK ? 0 : 1;
}

int main(int argc, char **argv)
{
    static const char *const dflt[] = {"vdp-tank", "follower-colpitts", "rc-ladder-npn",
                                       "wien-lamp", "ladder-10", "tanks-10", "tanks-20"};
    int repeats = argc > 1 ? atoi(argv[1]) : 3;
    if (repeats < 1)
        repeats = 1;
    int bad = 0;
    if (argc > 2)
        for (int i = 2; i < argc; i++)
            bad |= run_case(argv[i], repeats);
    else
        for (size_t i = 0; i < sizeof dflt / sizeof dflt[0]; i++)
            bad |= run_case(dflt[i], repeats);
    return bad;
}
