/* bench_steady.c: how long `ringup steady` takes, and how many Newton iterations it
 * needs, on the bundled examples and on van der Pol oscillators from nearly
 * harmonic to relaxation (through the library: ru_tone_run, the call the command
 * line makes).
 *
 * Not a test (not named test_*, not built by the CMake glob; speed is never
 * asserted). Build by hand against a built library, from the source folder:
 *   cc -O2 -Iinclude tests/bench_steady.c BUILD/libringup.a $(pkg-config --libs
 *      yaml-0.1 fftw3 lapacke sndfile plplot) -lsundials_cvodes -lsundials_idas
 *      -lsundials_kinsol -lsundials_nvecserial -lsundials_sunmatrixdense
 *      -lsundials_sunlinsoldense -lsundials_sunlinsolklu -lklu -lm -lpthread
 *      -o /tmp/bench_steady
 * and run it from the source folder with RINGUP_MODELS=models:
 *   bench_steady [REPEATS]
 * REPEATS (default 3) solves of each case; the CPU time printed is the smallest
 * (processor time of the whole ru_tone_run: operating point, describing function,
 * Newton, the waveform). The load average is printed beside it: the machine is
 * shared, so compare cases within one run.
 *
 * Then what polishing costs a run (ru_run_request.polish, `ringup run`'s default):
 * each example run with and without it, the smallest CPU time of REPEATS each.
 *
 * Output: one line per case, KEY=VALUE fields:
 *   case=NAME n=STATES newton=I transient_periods=P steps=S cpu_s=T freq=F amp=A
 *   mu2=|M| start=WHERE
 *   case=run-NAME cpu_plain_s=T0 cpu_polish_s=T1 ratio=T1/T0 newton=I polished=0|1
 * and a first and last line load=L1,L5,L15. */
#include "ringup/analysis.h"
#include "ringup/loader.h"
#include "ringup/tone.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <math.h>

static double cpu_s(void)
{
    return (double)clock() / CLOCKS_PER_SEC;
}

static void load_average(void)
{
    double l[3] = {0, 0, 0};
    if (getloadavg(l, 3) == 3)
        printf("load=%.2f,%.2f,%.2f\n", l[0], l[1], l[2]);
}

static int bench(const char *name, ru_circuit *c, int repeats)
{
    double best = 1e300;
    ru_steady_view v;
    ru_tone *keep = NULL;
    for (int r = 0; r < repeats; r++) {
        ru_tone_request rq;
        ru_tone_request_default(&rq);
        ru_tone *t = NULL;
        ru_error err;
        double t0 = cpu_s();
        if (ru_tone_run(c, &rq, &t, &err) != RU_OK) {
            printf("case=%s error=\"%s\"\n", name, err.msg);
            return 1;
        }
        double dt = cpu_s() - t0;
        if (dt < best)
            best = dt;
        ru_tone_destroy(keep);
        keep = t;
    }
    ru_tone_steady(keep, &v);
    double mu2 = v.n > 1 ? hypot(v.multipliers[1].re, v.multipliers[1].im) : 0;
    printf("case=%s n=%zu newton=%d transient_periods=%.1f steps=%ld cpu_s=%.4f "
           "freq=%.10g amp=%.10g mu2=%.6g start=\"%s\"\n",
           name, v.n, v.newton_iterations, v.transient_periods, v.steps, best,
           v.frequency_hz, v.amplitude_v, mu2, v.start);
    ru_tone_destroy(keep);
    return 0;
}

/* Smallest CPU time of `repeats` runs of c, with or without polishing. */
static double run_cpu(const ru_circuit *c, int polish, int repeats, ru_run_report *r)
{
    double best = INFINITY;
    for (int k = 0; k < repeats; k++) {
        ru_run_request rq;
        ru_run_request_default(&rq);
        rq.polish = polish;
        ru_error err;
        double t0 = cpu_s();
        if (ru_analysis_run(c, &rq, r, &err) != RU_OK) {
            printf("run error=\"%s\"\n", err.msg);
            return NAN;
        }
        best = fmin(best, cpu_s() - t0);
    }
    return best;
}

static int bench_run(const char *name, const ru_circuit *c, int repeats)
{
    ru_run_report *r = calloc(1, sizeof *r);
    if (!r)
        return 1;
    double t0 = run_cpu(c, 0, repeats, r), t1 = run_cpu(c, 1, repeats, r);
    printf("case=run-%s cpu_plain_s=%.4f cpu_polish_s=%.4f ratio=%.3f newton=%d polished=%d\n",
           name, t0, t1, t1 / t0, r->polish.newton_iterations, r->polish.have);
    int bad = !isfinite(t0) || !isfinite(t1);
    free(r);
    return bad;
}

int main(int argc, char **argv)
{
    int repeats = argc > 1 ? atoi(argv[1]) : 3;
    if (repeats < 1)
        repeats = 1;
    static const char *const examples[] = {"vdp-tank", "follower-colpitts",
                                           "rc-ladder-npn", "wien-lamp"};
    int bad = 0;
    load_average();
    for (size_t i = 0; i < sizeof examples / sizeof examples[0]; i++) {
        char path[256];
        snprintf(path, sizeof path, "examples/%s.yaml", examples[i]);
        ru_circuit *c = NULL;
        ru_error err;
        if (ru_circuit_load(path, NULL, &c, &err) != RU_OK) {
            printf("case=%s error=\"%s\"\n", examples[i], err.msg);
            bad = 1;
            continue;
        }
        bad |= bench(examples[i], c, repeats);
        bad |= bench_run(examples[i], c, repeats);
        ru_circuit_destroy(c);
    }
    static const double eps[] = {0.01, 0.1, 1.0, 3.0, 10.0};
    for (size_t i = 0; i < sizeof eps / sizeof eps[0]; i++) {
        char text[512], name[32];
        snprintf(text, sizeof text,
                 "parts:\n"
                 "  L1: {type: inductor, nodes: [v, gnd], value: 1}\n"
                 "  C1: {type: capacitor, nodes: [v, gnd], value: 1}\n"
                 "  G1: {type: poly-conductance, nodes: [v, gnd], coeffs: [0, %.17g, 0, "
                 "%.17g]}\nmeasure: {probe: v}\n",
                 -eps[i], eps[i] / 3.0);
        snprintf(name, sizeof name, "vdp-eps-%g", eps[i]);
        ru_circuit *c = NULL;
        ru_error err;
        if (ru_circuit_load_string(text, name, NULL, &c, &err) != RU_OK) {
            printf("case=%s error=\"%s\"\n", name, err.msg);
            bad = 1;
            continue;
        }
        bad |= bench(name, c, repeats);
        ru_circuit_destroy(c);
    }
    load_average();
    return bad;
}
