/* bench_jitter.c: the long version of test_jitter.c's noise-run check, and how long
 * `ringup jitter` takes on the bundled examples.
 *
 * Part 1: the phase diffusion constant c of a noisy van der Pol tank (L = C = 1,
 * R = 1 ohm cancelled by a cubic conductance, eps given) by the PPV, against the
 * spread of the timing of N seeded noise runs of the project's own transient
 * (ru_system_set_noise), each started on the limit cycle and run P periods: the
 * sample variance of the last crossing's shift must be c t within its statistical
 * error sqrt(2/(N-1)) (printed as sigma).
 * Part 2: CPU time of ru_tone_run with phase noise on every example.
 *
 * Not a test (speed is never asserted). Build by hand against a built library:
 *   cc -O2 -Iinclude tests/bench_jitter.c BUILD/libringup.a $(pkg-config --libs
 *      yaml-0.1 fftw3 lapacke sndfile plplot) -lsundials_cvodes -lsundials_idas
 *      -lsundials_kinsol -lsundials_nvecserial -lsundials_sunmatrixdense
 *      -lsundials_sunlinsoldense -lsundials_sunlinsolklu -lklu -lm -lpthread
 *      -o /tmp/bench_jitter
 * and run it from the source folder with RINGUP_MODELS=models:
 *   bench_jitter [N [PERIODS [EPS]]]      (defaults 1000, 24, 0.2)
 * Output: KEY=VALUE lines; load=L1,L5,L15 first and last. */
#include "ringup/loader.h"
#include "ringup/system.h"
#include "ringup/tone.h"
#include "ringup/transient.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

static void load_average(void)
{
    double l[3] = {0, 0, 0};
    if (getloadavg(l, 3) == 3)
        printf("load=%.2f,%.2f,%.2f\n", l[0], l[1], l[2]);
}

typedef struct zc {
    double t_prev, v_prev, t_cross, window_s;
} zc;

static ru_status zc_sample(void *user, double t, const double *x, size_t n)
{
    (void)n;
    zc *z = user;
    if (t > z->window_s && z->v_prev < 0 && x[0] >= 0)
        z->t_cross = z->t_prev + (t - z->t_prev) * (-z->v_prev) / (x[0] - z->v_prev);
    z->t_prev = t;
    z->v_prev = x[0];
    return RU_OK;
}

static double crossing(const ru_circuit *c, const double *x0, double T, double periods,
                       double temp_c, unsigned long seed)
{
    ru_system *s = NULL;
    ru_error err;
    if (ru_system_create(c, &s, &err) != RU_OK)
        return NAN;
    if (seed)
        ru_system_set_noise(s, seed, 20.0 / T, temp_c);
    ru_transient_opts o;
    ru_transient_opts_for(RU_ACCURACY_NORMAL, &o);
    o.stop_s = periods * T;
    o.sample_s = T / 64.0;
    zc z = {0, 1, NAN, (periods - 1.5) * T};
    ru_status st = ru_transient_run(s, &o, x0, zc_sample, &z, NULL, &err);
    ru_system_destroy(s);
    return st == RU_OK ? z.t_cross : NAN;
}

static int diffusion(int n, double periods, double eps)
{
    char text[512];
    snprintf(text, sizeof text,
             "parts:\n  L1: {type: inductor, nodes: [v, gnd], value: 1}\n"
             "  C1: {type: capacitor, nodes: [v, gnd], value: 1}\n"
             "  R1: {type: resistor, nodes: [v, gnd], value: 1}\n"
             "  G1: {type: poly-conductance, nodes: [v, gnd], coeffs: [0, %.17g, 0, %.17g]}\n"
             "measure: {probe: v}\n",
             -(1.0 + eps), eps / 3.0);
    ru_circuit *c = NULL;
    ru_error err;
    if (ru_circuit_load_string(text, "bench.yaml", NULL, &c, &err) != RU_OK)
        return 1;
    double temp_c = 4e18;
    ru_tone_request rq;
    ru_tone_request_default(&rq);
    rq.jitter = 1;
    rq.temp_c = temp_c;
    rq.loop_part = "";
    ru_tone *t = NULL;
    if (ru_tone_run(c, &rq, &t, &err) != RU_OK) {
        printf("error=\"%s\"\n", err.msg);
        return 1;
    }
    ru_steady_view v;
    ru_tone_noise nv;
    ru_tone_steady(t, &v);
    ru_tone_noise_get(t, &nv);
    double T = v.period_s, t0 = (double)clock() / CLOCKS_PER_SEC;
    double clean = crossing(c, v.x0, T, periods, temp_c, 0), sum = 0, sq = 0;
    int used = 0;
    for (int k = 1; k <= n; k++) {
        double d = crossing(c, v.x0, T, periods, temp_c, (unsigned long)k) - clean;
        if (!isfinite(d))
            continue;
        d -= T * round(d / T);
        sum += d;
        sq += d * d;
        used++;
    }
    double var = (sq - sum * sum / used) / (used - 1), want = nv.ppv.c_s * clean;
    printf("case=noise-runs eps=%g runs=%d periods=%g c_ppv=%.6g var=%.6g c_t=%.6g "
           "ratio=%.4f sigma=%.4f cpu_s=%.2f\n",
           eps, used, periods, nv.ppv.c_s, var, want, var / want, sqrt(2.0 / (used - 1)),
           (double)clock() / CLOCKS_PER_SEC - t0);
    ru_tone_destroy(t);
    ru_circuit_destroy(c);
    return 0;
}

static int examples(void)
{
    static const char *const names[] = {"vdp-tank", "follower-colpitts", "rc-ladder-npn",
                                        "wien-lamp"};
    int bad = 0;
    for (size_t i = 0; i < sizeof names / sizeof names[0]; i++) {
        char path[256];
        snprintf(path, sizeof path, "examples/%s.yaml", names[i]);
        ru_circuit *c = NULL;
        ru_error err;
        if (ru_circuit_load(path, NULL, &c, &err) != RU_OK) {
            bad = 1;
            continue;
        }
        double best = 1e300, cs = NAN, ppv = NAN;
        for (int r = 0; r < 3; r++) {
            ru_tone_request rq;
            ru_tone_request_default(&rq);
            rq.jitter = 1;
            ru_tone *t = NULL;
            double t0 = (double)clock() / CLOCKS_PER_SEC;
            if (ru_tone_run(c, &rq, &t, &err) != RU_OK) {
                printf("case=%s error=\"%s\"\n", names[i], err.msg);
                bad = 1;
                break;
            }
            best = fmin(best, (double)clock() / CLOCKS_PER_SEC - t0);
            ru_tone_noise nv;
            ru_tone_noise_get(t, &nv);
            cs = nv.ppv.c_s;
            ppv = nv.ppv.cpu_s;
            ru_tone_destroy(t);
        }
        printf("case=%s cpu_s=%.4f ppv_cpu_s=%.4f c=%.6g\n", names[i], best, ppv, cs);
        ru_circuit_destroy(c);
    }
    return bad;
}

int main(int argc, char **argv)
{
    int n = argc > 1 ? atoi(argv[1]) : 1000;
    double periods = argc > 2 ? atof(argv[2]) : 24.0, eps = argc > 3 ? atof(argv[3]) : 0.2;
    if (n < 3 || !(periods >= 3) || !(eps > 0))
        return 2;
    load_average();
    int bad = examples();
    bad |= diffusion(n, periods, eps);
    load_average();
    return bad;
}
