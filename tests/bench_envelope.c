/* bench_envelope.c: the envelope engine against direct runs: figures, cost, and
 * the crossover that sets `--engine auto`'s threshold.
 *
 * Not a test (not named test_*, not built by the CMake glob; speed is never
 * asserted). Build by hand against a built library, from the source folder:
 *   cc -O2 -Iinclude tests/bench_envelope.c BUILD/libringup.a $(pkg-config --libs
 *      yaml-0.1 fftw3 lapacke sndfile plplot) -lsundials_cvodes -lsundials_kinsol
 *      -lsundials_nvecserial -lsundials_sunmatrixdense -lsundials_sunlinsoldense
 *      -lm -lpthread -o /tmp/bench_envelope
 * and run it from the source folder with RINGUP_MODELS=models:
 *   bench_envelope [SECTION...]
 * Sections (default: all):
 *   accuracy   Q = 1e3 and 1e4 tanks, the cmos-pierce and watch-crystal examples: start-up
 *              time, settled amplitude and frequency of an envelope run against a
 *              direct run, both at precise (the direct runs take minutes);
 *   cost       the envelope engine's right-hand-side evaluations and CPU time from
 *              Q = 1e3 to 1e6 (precise), and the ratio to Q = 1e3;
 *   crossover  CPU time of both engines at normal for start-ups of 300 to 30000
 *              cycles: where the envelope engine becomes the cheaper;
 *   watch      the 32.768 kHz watch-crystal example from power-on to settled.
 * Every run goes through ru_analysis_run (what `ringup run` does, stop: auto). CPU
 * time is the process's (clock_gettime CLOCK_PROCESS_CPUTIME_ID); the load average
 * is printed beside it (the machine may be shared). Tanks (our own bench values):
 * L 10 mH, C 100 nF, a loss resistor for the tank Q, a cubic conductance of margin
 * m (g1 = m/R) settling at 1 V, started from a 1 mV preset. */
#define _POSIX_C_SOURCE 200809L

#include "ringup/analysis.h"
#include "ringup/loader.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

static double cpu_s(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

static void load_avg(char *buf, size_t size)
{
    FILE *f = fopen("/proc/loadavg", "r");
    buf[0] = 0;
    if (f) {
        if (!fgets(buf, (int)size, f))
            buf[0] = 0;
        fclose(f);
    }
    buf[strcspn(buf, "\n")] = 0;
}

/* A tank of quality q and margin m as a circuit. */
static ru_circuit *tank(double q, double m)
{
    double z = sqrt(10e-3 / 100e-9), r = q * z, g1 = m / r, a = g1 - 1 / r;
    double b = 4 * a / 3; /* settles at 1 V */
    char y[1024];
    snprintf(y, sizeof y,
             "title: tank Q %g, margin %g\n"
             "parts:\n"
             "  L1: {type: inductor, nodes: [tank, gnd], value: 10m}\n"
             "  C1: {type: capacitor, nodes: [tank, gnd], value: 100n}\n"
             "  R1: {type: resistor, nodes: [tank, gnd], value: %.17g}\n"
             "  G1: {type: poly-conductance, nodes: [tank, gnd], coeffs: [0, %.17g, 0, "
             "%.17g]}\n"
             "run: {kick: {preset: {tank: 1m}}}\n"
             "measure: {probe: tank}\n",
             q, m, r, -g1, b);
    ru_circuit *c = NULL;
    ru_error e;
    if (ru_circuit_load_string(y, "bench-tank.yaml", NULL, &c, &e) != RU_OK)
        fprintf(stderr, "bench: %s\n", e.msg);
    return c;
}

static ru_circuit *example(const char *path)
{
    ru_circuit *c = NULL;
    ru_error e;
    if (ru_circuit_load(path, NULL, &c, &e) != RU_OK)
        fprintf(stderr, "bench: %s: %s\n", path, e.msg);
    return c;
}

typedef struct result {
    int ok;
    double startup_s, amp_v, freq_hz, cpu, stop_s;
    long rhs, cycles_integrated;
    double cycles_spanned;
    int envelope;
} result;

static result run(const ru_circuit *c, int engine, int accuracy, double stop_s)
{
    result r = {0};
    ru_run_request rq;
    ru_run_request_default(&rq);
    rq.engine = engine;
    rq.accuracy = accuracy;
    if (stop_s > 0)
        rq.stop_s = stop_s;
    ru_run_report *rep = calloc(1, sizeof *rep);
    ru_error e;
    ru_error_clear(&e);
    double t0 = cpu_s();
    ru_status st = rep ? ru_analysis_run(c, &rq, rep, &e) : RU_ENOMEM;
    r.cpu = cpu_s() - t0;
    if (st != RU_OK) {
        fprintf(stderr, "bench: run failed: %s\n", e.msg);
        free(rep);
        return r;
    }
    r.ok = 1;
    r.startup_s = rep->meas.startup_time_s;
    r.amp_v = rep->meas.settled_amplitude_v;
    r.freq_hz = rep->meas.frequency_hz;
    r.stop_s = rep->stop_s;
    r.rhs = rep->solver.rhs_evals;
    r.envelope = rep->engine.envelope;
    r.cycles_integrated = rep->engine.cycles_integrated;
    r.cycles_spanned = rep->engine.cycles_spanned;
    free(rep);
    return r;
}

static void print_pair(const char *name, const result *d, const result *v)
{
    char la[128];
    load_avg(la, sizeof la);
    printf("%-22s direct:   start-up %.9g s  amplitude %.9g V  frequency %.12g Hz  "
           "rhs %ld  cpu %.2f s\n", name, d->startup_s, d->amp_v, d->freq_hz, d->rhs, d->cpu);
    printf("%-22s envelope: start-up %.9g s  amplitude %.9g V  frequency %.12g Hz  "
           "rhs %ld  cpu %.2f s  (%ld cycles integrated, %.4g spanned)\n", "", v->startup_s,
           v->amp_v, v->freq_hz, v->rhs, v->cpu, v->cycles_integrated, v->cycles_spanned);
    printf("%-22s difference: start-up %+.3g %%  amplitude %+.3g %%  frequency %+.3g ppm  "
           "cpu ratio %.3g  load %s\n", "", 100 * (v->startup_s / d->startup_s - 1),
           100 * (v->amp_v / d->amp_v - 1), 1e6 * (v->freq_hz / d->freq_hz - 1),
           d->cpu / v->cpu, la);
}

/* Direct and envelope at precise over the same length (the direct run's). */
static void accuracy_case(const char *name, ru_circuit *c)
{
    if (!c)
        return;
    result d = run(c, RU_ENGINE_DIRECT, RU_ACCURACY_PRECISE, 0);
    result v = run(c, RU_ENGINE_ENVELOPE, RU_ACCURACY_PRECISE, d.ok ? d.stop_s : 0);
    if (d.ok && v.ok)
        print_pair(name, &d, &v);
    ru_circuit_destroy(c);
}

static void section_accuracy(void)
{
    printf("== accuracy: envelope against direct, both at precise, same run length\n");
    accuracy_case("tank Q 1e3", tank(1e3, 5));
    accuracy_case("tank Q 1e4", tank(1e4, 5));
    accuracy_case("cmos-pierce", example("examples/cmos-pierce.yaml"));
}

static void section_cost(void)
{
    printf("== cost: envelope engine at precise, tanks of margin 5\n");
    double base = NAN;
    for (double q = 1e3; q <= 1e6 * 1.01; q *= 10) {
        ru_circuit *c = tank(q, 5);
        if (!c)
            continue;
        result v = run(c, RU_ENGINE_ENVELOPE, RU_ACCURACY_PRECISE, 0);
        char la[128];
        load_avg(la, sizeof la);
        if (v.ok) {
            if (!isfinite(base))
                base = (double)v.rhs;
            printf("Q %-8.0e start-up %.6g s (%.3g cycles)  amplitude %.7g V  rhs %ld "
                   "(%.2fx Q 1e3)  cycles integrated %ld  cpu %.2f s  load %s\n", q,
                   v.startup_s, v.startup_s * v.freq_hz, v.amp_v, v.rhs, v.rhs / base,
                   v.cycles_integrated, v.cpu, la);
        }
        ru_circuit_destroy(c);
    }
}

static void section_crossover(void)
{
    printf("== crossover: CPU of both engines at normal, stop: auto\n");
    double qs[] = {100, 250, 500, 1000, 2000, 4000, 10000};
    for (size_t i = 0; i < sizeof qs / sizeof qs[0]; i++) {
        ru_circuit *c = tank(qs[i], 5);
        if (!c)
            continue;
        result d = run(c, RU_ENGINE_DIRECT, RU_ACCURACY_NORMAL, 0);
        result v = run(c, RU_ENGINE_ENVELOPE, RU_ACCURACY_NORMAL, 0);
        char la[128];
        load_avg(la, sizeof la);
        if (d.ok && v.ok)
            printf("Q %-6g start-up %.4g cycles: direct cpu %.3f s (rhs %ld), envelope cpu "
                   "%.3f s (rhs %ld), direct/envelope %.2f  start-up differs %+.3g %%  "
                   "load %s\n", qs[i], d.startup_s * d.freq_hz, d.cpu, d.rhs, v.cpu, v.rhs,
                   d.cpu / v.cpu, 100 * (v.startup_s / d.startup_s - 1), la);
        ru_circuit_destroy(c);
    }
}

static void section_watch(void)
{
    printf("== watch: 32.768 kHz watch-crystal oscillator, power-on to settled\n");
    ru_circuit *c = example("examples/watch-crystal.yaml");
    if (!c)
        return;
    result v = run(c, RU_ENGINE_AUTO, -1, 0);
    char la[128];
    load_avg(la, sizeof la);
    if (v.ok)
        printf("engine %s: start-up %.6g s (%.3g cycles), amplitude %.6g V, frequency "
               "%.10g Hz, run %.4g s, rhs %ld, cycles integrated %ld, cpu %.2f s  load %s\n",
               v.envelope ? "envelope" : "direct", v.startup_s, v.startup_s * v.freq_hz,
               v.amp_v, v.freq_hz, v.stop_s, v.rhs, v.cycles_integrated, v.cpu, la);
    ru_circuit_destroy(c);
}

int main(int argc, char **argv)
{
    int all = argc < 2;
    for (int i = all ? 0 : 1; i < (all ? 1 : argc); i++) {
        const char *s = all ? NULL : argv[i];
        if (all || !strcmp(s, "accuracy"))
            section_accuracy();
        if (all || !strcmp(s, "cost"))
            section_cost();
        if (all || !strcmp(s, "crossover"))
            section_crossover();
        if (all || !strcmp(s, "watch"))
            section_watch();
    }
    return 0;
}
