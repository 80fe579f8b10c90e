/* bench_run.c: where `ringup run` spends its time, on the bundled examples and on
 * generated circuits of growing size, through the library (ru_analysis_run, the
 * same call as the command line) and through the system's hot calls alone; and how
 * the two integrators scale with the circuit's size.
 *
 * Not a test (not named test_*, not built by the CMake glob; speed is never
 * asserted). Build by hand against a built library, from the source folder:
 *   cc -O2 -Iinclude tests/bench_run.c BUILD/libringup.a $(pkg-config --libs
 *      yaml-0.1 fftw3 lapacke sndfile) -lsundials_cvodes -lsundials_ida
 *      -lsundials_kinsol -lsundials_nvecserial -lsundials_sunmatrixdense
 *      -lsundials_sunmatrixsparse -lsundials_sunlinsoldense -lsundials_sunlinsolklu
 *      -lm -lpthread -o /tmp/bench_run
 * and run it from the source folder (it reads examples/) with RINGUP_MODELS=models:
 *   bench_run [REPEATS [CASE...]]
 *   bench_run scale [MAX_STATES [CVODE_MAX_STATES [REPEATS]]]
 *   bench_run stald [REPEATS [CASE...]]
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
 *   growth=G freq=F amp=A damp=D engine=E
 * run_s: fastest whole ru_analysis_run (prediction + transient + measurement);
 * rhs_us, jac_us: mean time of one ru_system_rhs / ru_system_jacobian call at the
 * initial state (microseconds; -1 for a DAE, which has neither); growth (1/s),
 * freq (Hz), amp (V), damp (the integrator damping estimate, 1/s) are the run's
 * results printed to 10 significant digits, so that two builds can be compared
 * for identical results; engine the integrator that ran.
 *
 * scale: tank chains tanks-M with 2 to MAX_STATES (default 400) states, 20 ms
 * simulated at normal accuracy from the 1 mV preset, through ru_transient_run
 * alone with each integrator (CVODE dense up to CVODE_MAX_STATES, default 400;
 * IDA dense up to 100; IDA with KLU), each run in a child process of its own so
 * its peak resident memory (getrusage of the child) is its own. Per run: steps,
 * CPU microseconds per step and CPU milliseconds per simulated cycle (cycles
 * counted as rising crossings of the first tank's voltage; CPU time of the
 * transient alone, CLOCK_PROCESS_CPUTIME_ID, the least of REPEATS runs, default
 * 1), peak RSS; then the exponent p of
 * CPU per simulated cycle ~ n^p fitted by least squares in log-log over the runs
 * with 50 states or more, and the load average before and after (the machine is
 * shared: read ratios within one run). CVODE runs without its stability-limit
 * detection, as a run chooses for these chains (no stiff mode near the jw axis);
 * with BENCH_STALD set in the environment, with it.
 *
 * stald: each case (default: the examples, ladder-10, tanks-3, tanks-4) as a whole
 * run with CVODE's stability-limit detection on and off: CPU seconds (least of
 * REPEATS, default 3), steps, settled amplitude, growth rate and frequency of
 * each, the ratio of the CPU times, and what `auto` (the default) chose. */
#define _DEFAULT_SOURCE /* wait4, getloadavg */

#include "ringup/analysis.h"
#include "ringup/loader.h"
#include "ringup/system.h"
#include "ringup/transient.h"

#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/resource.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>

#define YAML_MAX 262144

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
    if (ru_system_algebraic_count(s) > 0) { /* a DAE has no rhs or Jacobian */
        ru_system_destroy(s);
        return;
    }
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
           "jac_us=%.3f growth=%.10g freq=%.10g amp=%.10g damp=%.10g engine=\"%s\"%s\n",
           name, n, rep.solver.steps, rep.solver.rhs_evals, rep.solver.jac_evals, best,
           rhs_us, jac_us, rep.meas.growth_rate_per_s, rep.meas.frequency_hz,
           rep.meas.settled_amplitude_v, rep.integrator_damping_per_s,
           ru_transient_engine_name(&rep.solver), st == RU_OK ? "" : " status=failed");
    fflush(stdout);
    ru_circuit_destroy(c);
    return st == RU_OK ? 0 : 1;
}

/* ---- scale: the integrators against the circuit's size ------------------------ */

static double cpu_s(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

typedef struct cross_sink {
    const ru_system *sys;
    int node;
    double prev;
    long cycles;
} cross_sink;

static ru_status count_cycles(void *user, double t, const double *x, size_t n)
{
    (void)n;
    cross_sink *k = user;
    double v = ru_system_node_voltage(k->sys, k->node, t, x);
    if (k->prev < 0 && v >= 0)
        k->cycles++;
    k->prev = v;
    return RU_OK;
}

/* One scale run's figures, as the child reports them. */
typedef struct scale_fig {
    int ok;
    long steps, cycles;
    double cpu_s;
    long rss_kb;
} scale_fig;

/* In a child: tanks-M through ru_transient_run one way; figures into *f. */
static void scale_child(int m, ru_integrator integ, ru_linsol ls, scale_fig *f)
{
    char name[32];
    snprintf(name, sizeof name, "tanks-%d", m);
    ru_circuit *c = NULL;
    ru_system *s = NULL;
    ru_error err;
    memset(f, 0, sizeof *f);
    if (load_case(name, &c, &err) != RU_OK || ru_system_create(c, &s, &err) != RU_OK)
        return;
    size_t n = ru_system_size(s);
    double *x0 = calloc(n, sizeof *x0);
    ru_transient_opts o;
    ru_transient_opts_for(RU_ACCURACY_NORMAL, &o);
    o.stop_s = 20e-3;
    o.sample_s = 20e-3 / 20000;
    o.integrator = integ;
    o.linsol = ls;
    o.stab_lim_det = getenv("BENCH_STALD") != NULL; /* what a run's auto takes here */
    cross_sink k = {s, ru_circuit_find_node(c, "t1"), 0, 0};
    ru_solver_stats st;
    if (x0 && ru_system_initial_state(s, x0, &err) == RU_OK) {
        double t0 = cpu_s();
        f->ok = ru_transient_run(s, &o, x0, count_cycles, &k, &st, &err) == RU_OK;
        f->cpu_s = cpu_s() - t0;
        f->steps = st.steps;
        f->cycles = k.cycles;
    }
    free(x0);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* Forks one run; the child's peak RSS from wait4. */
static scale_fig scale_once(int m, ru_integrator integ, ru_linsol ls)
{
    scale_fig f = {0};
    int fd[2];
    if (pipe(fd) != 0)
        return f;
    fflush(stdout);
    pid_t pid = fork();
    if (pid == 0) {
        close(fd[0]);
        scale_child(m, integ, ls, &f);
        ssize_t w = write(fd[1], &f, sizeof f);
        _exit(w == (ssize_t)sizeof f ? 0 : 1);
    }
    close(fd[1]);
    ssize_t got = pid > 0 ? read(fd[0], &f, sizeof f) : 0;
    close(fd[0]);
    struct rusage ru;
    int status = 0;
    if (pid > 0 && wait4(pid, &status, 0, &ru) == pid && got == (ssize_t)sizeof f)
        f.rss_kb = ru.ru_maxrss;
    else
        f.ok = 0;
    return f;
}

/* The least CPU time of `repeats` runs (the others only wait on a shared machine). */
static scale_fig scale_run(int m, ru_integrator integ, ru_linsol ls, int repeats)
{
    scale_fig best = scale_once(m, integ, ls);
    for (int i = 1; i < repeats && best.ok; i++) {
        scale_fig f = scale_once(m, integ, ls);
        if (f.ok && f.cpu_s < best.cpu_s)
            best = f;
    }
    return best;
}

static void print_fig(const scale_fig *f)
{
    if (!f->ok) {
        printf(" | %7s %7s %8s %6s", "-", "-", "-", "-");
        return;
    }
    printf(" | %7ld %7.2f %8.4f %6.1f", f->steps, 1e6 * f->cpu_s / (double)f->steps,
           1e3 * f->cpu_s / (double)(f->cycles ? f->cycles : 1), f->rss_kb / 1024.0);
}

/* Least-squares slope of log(cpu per cycle) against log(n) over n >= 50. */
static double fit_exponent(const int *states, const scale_fig *f, int count)
{
    double sx = 0, sy = 0, sxx = 0, sxy = 0;
    int m = 0;
    for (int i = 0; i < count; i++) {
        if (states[i] < 50 || !f[i].ok || f[i].cycles == 0)
            continue;
        double x = log((double)states[i]), y = log(f[i].cpu_s / (double)f[i].cycles);
        sx += x, sy += y, sxx += x * x, sxy += x * y;
        m++;
    }
    return m >= 2 ? (m * sxy - sx * sy) / (m * sxx - sx * sx) : NAN;
}

static void print_load(const char *when)
{
    double la[3];
    if (getloadavg(la, 3) == 3)
        printf("load average %s: %.2f %.2f %.2f\n", when, la[0], la[1], la[2]);
}

static int run_scale(int max_states, int cvode_max, int repeats)
{
    static const int tanks[] = {1, 3, 5, 10, 20, 25, 50, 100, 150, 200};
    enum { NT = sizeof tanks / sizeof tanks[0], NW = 3 };
    static const char *const wname[NW] = {"CVODE dense", "IDA dense", "IDA KLU"};
    int states[NT];
    scale_fig fig[NW][NT];
    memset(fig, 0, sizeof fig);
    print_load("before");
    printf("tank chains, 20 ms simulated, normal accuracy; per integrator: steps, CPU "
           "us/step, CPU ms/cycle, peak RSS MB\n%6s", "states");
    for (int w = 0; w < NW; w++)
        printf(" | %-33s", wname[w]);
    printf("\n");
    int count = 0;
    for (int i = 0; i < NT && 2 * tanks[i] <= max_states; i++, count++) {
        states[i] = 2 * tanks[i];
        if (states[i] <= cvode_max)
            fig[0][i] = scale_run(tanks[i], RU_INTEGRATOR_CVODE, RU_LINSOL_DENSE, repeats);
        if (states[i] <= 100)
            fig[1][i] = scale_run(tanks[i], RU_INTEGRATOR_IDA, RU_LINSOL_DENSE, repeats);
        fig[2][i] = scale_run(tanks[i], RU_INTEGRATOR_IDA, RU_LINSOL_KLU, repeats);
        printf("%6d", states[i]);
        for (int w = 0; w < NW; w++)
            print_fig(&fig[w][i]);
        if (fig[0][i].ok && fig[2][i].ok)
            printf(" | CVODE/KLU %.2fx", fig[0][i].cpu_s / fig[2][i].cpu_s);
        printf("\n");
    }
    for (int w = 0; w < NW; w++)
        printf("%-12s CPU per cycle ~ n^%.2f (states >= 50)\n", wname[w],
               fit_exponent(states, fig[w], count));
    print_load("after");
    return 0;
}

/* ---- stald: stability-limit detection on against off -------------------------- */

/* One whole run with detection st (RU_STAB_*): the least CPU time of `repeats`. */
static double stald_run(const ru_circuit *c, int st, int repeats, ru_run_report *rep)
{
    double best = 1e300;
    for (int r = 0; r < repeats; r++) {
        ru_run_request rq;
        ru_run_request_default(&rq);
        rq.stab_limit = st;
        ru_error err;
        double t0 = cpu_s();
        if (ru_analysis_run(c, &rq, rep, &err) != RU_OK)
            return NAN;
        double t = cpu_s() - t0;
        best = t < best ? t : best;
    }
    return best;
}

static int run_stald(int repeats, int ncases, char **cases)
{
    static const char *const dflt[] = {"vdp-tank", "follower-colpitts", "rc-ladder-npn",
                                       "wien-lamp", "tickler-pair", "ladder-10",
                                       "tanks-3", "tanks-4"};
    print_load("before");
    printf("whole runs (ru_analysis_run), CPU s (least of %d) and steps with CVODE's "
           "stability-limit detection on and off, what auto chose, and the results\n",
           repeats);
    int n = ncases > 0 ? ncases : (int)(sizeof dflt / sizeof dflt[0]);
    for (int i = 0; i < n; i++) {
        const char *name = ncases > 0 ? cases[i] : dflt[i];
        ru_circuit *c = NULL;
        ru_error err;
        if (load_case(name, &c, &err) != RU_OK) {
            printf("case=%s error=\"%s\"\n", name, err.msg);
            continue;
        }
        ru_run_report on, off, au;
        double t_on = stald_run(c, RU_STAB_ON, repeats, &on);
        double t_off = stald_run(c, RU_STAB_OFF, repeats, &off);
        stald_run(c, RU_STAB_AUTO, 1, &au);
        printf("case=%s on: cpu_s=%.4f steps=%ld amp=%.10g growth=%.10g freq=%.10g | "
               "off: cpu_s=%.4f steps=%ld amp=%.10g growth=%.10g freq=%.10g | on/off %.3f "
               "auto=%s engine=\"%s\"\n",
               name, t_on, on.solver.steps, on.meas.settled_amplitude_v,
               on.meas.growth_rate_per_s, on.meas.frequency_hz, t_off, off.solver.steps,
               off.meas.settled_amplitude_v, off.meas.growth_rate_per_s,
               off.meas.frequency_hz, t_on / t_off, au.solver.stab_lim_det ? "on" : "off",
               ru_transient_engine_name(&au.solver));
        fflush(stdout);
        ru_circuit_destroy(c);
    }
    print_load("after");
    return 0;
}

int main(int argc, char **argv)
{
    if (argc > 1 && !strcmp(argv[1], "stald"))
        return run_stald(argc > 2 && atoi(argv[2]) > 0 ? atoi(argv[2]) : 3,
                         argc > 3 ? argc - 3 : 0, argv + 3);
    if (argc > 1 && !strcmp(argv[1], "scale"))
        return run_scale(argc > 2 ? atoi(argv[2]) : 400, argc > 3 ? atoi(argv[3]) : 400,
                         argc > 4 && atoi(argv[4]) > 0 ? atoi(argv[4]) : 1);
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
