/* bench_loader.c: how the circuit loader's time grows with the size of the file
 * (ru_circuit_load_string on generated text), to show it is linear in the parts
 * (duplicate keys and names are found by hash) and that a file past the limits
 * is refused quickly.
 *
 * Not a test (not named test_*, not built by the CMake glob; speed is never
 * asserted). Build by hand against a built library, from the source folder:
 *   cc -O2 -Iinclude tests/bench_loader.c BUILD/libringup.a $(pkg-config --libs
 *      yaml-0.1 fftw3 lapacke sndfile plplot) -lsundials_cvodes -lsundials_kinsol
 *      -lsundials_nvecserial -lsundials_sunmatrixdense -lsundials_sunlinsoldense
 *      -lm -lpthread -o /tmp/bench_loader
 * Run: bench_loader [REPEATS] (default 3; the CPU time printed is the fastest).
 *
 * Cases (our own generated circuits): chain-N, a supply and N resistors in a row
 * (N+1 nodes); parallel-N, N resistors between the same two nodes (one node);
 * the last two go past the limits: parallel-100000 (over 4 MiB of text) and
 * parallel-4MiB (as many parts as fit in 4 MiB: refused at part 10 001).
 * Output, one line per case: case=NAME parts=N bytes=B status=S cpu_s=T
 * us_per_part=U; then the load average, since the machine may be shared. */
#define _POSIX_C_SOURCE 200809L
#include "ringup/loader.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

static char *make(const char *kind, size_t n, size_t max_bytes, size_t *bytes)
{
    size_t cap = 64 + (n ? n : 100000) * 64;
    char *s = malloc(cap);
    if (!s)
        return NULL;
    size_t k = (size_t)snprintf(s, cap, "parts:\n  V: {type: supply, nodes: [n0, gnd], "
                                        "value: 1}\n");
    for (size_t i = 0; n == 0 || i < n; i++) {
        char line[96];
        int w = strcmp(kind, "chain") == 0
                    ? snprintf(line, sizeof line,
                               "  R%zu: {type: resistor, nodes: [n%zu, n%zu], value: 1k}\n",
                               i, i, i + 1)
                    : snprintf(line, sizeof line,
                               "  R%zu: {type: resistor, nodes: [n0, gnd], value: 1k}\n", i);
        if ((max_bytes && k + (size_t)w > max_bytes) || k + (size_t)w + 1 > cap)
            break;
        memcpy(s + k, line, (size_t)w + 1);
        k += (size_t)w;
    }
    *bytes = k;
    return s;
}

static double cpu_s(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

static void run_case(const char *name, const char *kind, size_t n, size_t max_bytes,
                     int repeats)
{
    size_t bytes = 0;
    char *text = make(kind, n, max_bytes, &bytes);
    if (!text)
        return;
    double best = 1e300;
    ru_status st = RU_OK;
    ru_error err;
    for (int r = 0; r < repeats; r++) {
        ru_circuit *c = NULL;
        double t0 = cpu_s();
        st = ru_circuit_load_string(text, name, "models", &c, &err);
        double t = cpu_s() - t0;
        ru_circuit_destroy(c);
        if (t < best)
            best = t;
    }
    size_t parts = n ? n + 1 : 0;
    printf("case=%s parts=%zu bytes=%zu status=%s cpu_s=%.4f us_per_part=%.3f\n", name,
           parts, bytes, ru_status_str(st), best, parts ? 1e6 * best / (double)parts : 0.0);
    free(text);
}

int main(int argc, char **argv)
{
    int repeats = argc > 1 ? atoi(argv[1]) : 3;
    if (repeats < 1)
        repeats = 1;
    static const size_t chains[] = {500, 1000, 1999}, pars[] = {1000, 3000, 9999};
    char name[64];
    for (size_t i = 0; i < 3; i++) {
        snprintf(name, sizeof name, "chain-%zu", chains[i]);
        run_case(name, "chain", chains[i], 0, repeats);
    }
    for (size_t i = 0; i < 3; i++) {
        snprintf(name, sizeof name, "parallel-%zu", pars[i]);
        run_case(name, "parallel", pars[i], 0, repeats);
    }
    run_case("parallel-100000", "parallel", 100000, 0, repeats);
    run_case("parallel-4MiB", "parallel", 0, (size_t)4 << 20, repeats);
    double la[3];
    FILE *f = fopen("/proc/loadavg", "r");
    if (f && fscanf(f, "%lf %lf %lf", &la[0], &la[1], &la[2]) == 3)
        printf("loadavg %.2f %.2f %.2f\n", la[0], la[1], la[2]);
    if (f)
        fclose(f);
    return 0;
}
