/* response.c: `ringup response FILE --from N --to M`: the network's transfer from
 * an ideal source at node N to node M over log-spaced frequencies, refined
 * adaptively where the curve turns sharply between grid points. */
#include "cli/cli.h"

#include "ringup/format.h"
#include "ringup/json.h"
#include "ringup/plot.h"
#include "ringup/smallsig.h"
#include "ringup/system.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

typedef struct resp_data {
    size_t npts;        /* points held (the grid and the refinements) */
    size_t nbase;       /* points of the log-spaced grid (--points) */
    double *f_hz, *mag, *phase_deg;
    unsigned char *base; /* 1: a point of the log-spaced grid (the text table's rows) */
    double peak_f_hz;   /* the peak refined between grid points */
    double peak_mag;
    double peak_phase_deg;
    double f0_hz;       /* a zero-phase crossing (NAN: none), linear interpolation */
    double mag0;        /* magnitude there */
} resp_data;

/* Frequency range from the poles: a decade and a half around the smallest and
 * largest pole magnitudes (ignoring the fast poles of the stray capacitance). */
static void range_from_poles(const ru_system *s, const double *x, double *fmin, double *fmax)
{
    size_t n = ru_system_size(s);
    ru_pole *p = calloc(n ? n : 1, sizeof *p);
    double lo = INFINITY, hi = 0;
    if (p && ru_poles_compute(s, x, p, NULL) == RU_OK) {
        n = ru_poles_count(s);
        for (size_t i = 0; i < n; i++) {
            double w = hypot(p[i].re_per_s, p[i].im_rad_per_s) / (2 * M_PI);
            if (w > 0 && w < lo)
                lo = w;
        }
        for (size_t i = 0; i < n; i++) {
            double w = hypot(p[i].re_per_s, p[i].im_rad_per_s) / (2 * M_PI);
            if (w > hi && w < lo * 1e4) /* stray poles sit far above */
                hi = w;
        }
    }
    free(p);
    if (!isfinite(lo) || !(hi > 0)) {
        lo = 10;
        hi = 1e6;
    }
    *fmin = lo / 30;
    *fmax = hi * 30;
}

/* Adaptive refinement: where two neighbours differ by more than REFINE_DB in
 * magnitude or REFINE_DEG in phase (a sharp resonance between grid points, such as
 * a crystal's), the geometric midpoint is added, pass after pass, until every step
 * is smooth, the neighbours are closer than 1e-9 relative, or REFINE_MAX_FACTOR
 * times the grid's points (at least REFINE_MIN_CAP) are held. The grid's own points stay (d->base). */
#define REFINE_DB 1.0
#define REFINE_DEG 10.0
#define REFINE_MAX_FACTOR 8
#define REFINE_MIN_CAP 4000
#define REFINE_PASSES 40

static int rough(const resp_data *d, size_t i)
{
    double dp = d->phase_deg[i + 1] - d->phase_deg[i];
    dp -= 360.0 * round(dp / 360.0);
    double a = d->mag[i], b = d->mag[i + 1];
    double ddb = a > 0 && b > 0 ? fabs(20.0 * log10(b / a)) : INFINITY;
    return (ddb > REFINE_DB || fabs(dp) > REFINE_DEG) &&
           d->f_hz[i + 1] / d->f_hz[i] > 1.0 + 1e-9;
}

static ru_status refine(const ru_system *s, const double *x, int in, int out, resp_data *d,
                        ru_error *err)
{
    size_t cap = d->nbase * REFINE_MAX_FACTOR; /* + 1 below: the peak (insert_point) */
    if (cap < REFINE_MIN_CAP)
        cap = REFINE_MIN_CAP;
    cap++;
    double *f = realloc(d->f_hz, cap * sizeof *f);
    if (f)
        d->f_hz = f;
    double *m = realloc(d->mag, cap * sizeof *m);
    if (m)
        d->mag = m;
    double *ph = realloc(d->phase_deg, cap * sizeof *ph);
    if (ph)
        d->phase_deg = ph;
    unsigned char *bs = realloc(d->base, cap);
    if (bs)
        d->base = bs;
    if (!f || !m || !ph || !bs)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "out of memory refining the sweep");
    for (int pass = 0; pass < REFINE_PASSES; pass++) {
        size_t add = 0;
        for (size_t i = 0; i + 1 < d->npts; i++)
            add += rough(d, i);
        if (add == 0 || d->npts + add + 1 > cap)
            break;
        /* move from the end, inserting midpoints where a step is rough */
        size_t j = d->npts + add;
        for (size_t i = d->npts; i-- > 0;) {
            int split = i + 1 < d->npts && rough(d, i);
            double fi = d->f_hz[i], fn = i + 1 < d->npts ? d->f_hz[i + 1] : 0;
            if (split) {
                j--;
                d->f_hz[j] = sqrt(fi * fn);
                d->base[j] = 0;
                d->mag[j] = NAN; /* evaluated below */
            }
            j--;
            d->f_hz[j] = fi;
            d->mag[j] = d->mag[i];
            d->phase_deg[j] = d->phase_deg[i];
            d->base[j] = d->base[i];
        }
        d->npts += add;
        for (size_t i = 0; i < d->npts; i++) {
            if (!isnan(d->mag[i]))
                continue;
            ru_status st = ru_response_at(s, x, in, out, d->f_hz[i], &d->mag[i],
                                          &d->phase_deg[i], err);
            if (st != RU_OK)
                return st;
        }
    }
    return RU_OK;
}

/* Puts the refined peak among the points (in order; refine leaves room for it), so
 * the curve drawn and the points listed reach it. */
static void insert_point(resp_data *d, double f_hz, double mag, double phase_deg)
{
    size_t i = 0;
    while (i < d->npts && d->f_hz[i] < f_hz)
        i++;
    if (i < d->npts && d->f_hz[i] == f_hz)
        return;
    memmove(d->f_hz + i + 1, d->f_hz + i, (d->npts - i) * sizeof *d->f_hz);
    memmove(d->mag + i + 1, d->mag + i, (d->npts - i) * sizeof *d->mag);
    memmove(d->phase_deg + i + 1, d->phase_deg + i, (d->npts - i) * sizeof *d->phase_deg);
    memmove(d->base + i + 1, d->base + i, d->npts - i);
    d->f_hz[i] = f_hz;
    d->mag[i] = mag;
    d->phase_deg[i] = phase_deg;
    d->base[i] = 0;
    d->npts++;
}

static ru_status sweep(const ru_system *s, const double *x, int in, int out, double fmin,
                       double fmax, resp_data *d, ru_error *err)
{
    d->f0_hz = d->mag0 = NAN;
    d->npts = d->nbase;
    for (size_t i = 0; i < d->npts; i++) {
        double u = d->npts > 1 ? (double)i / (double)(d->npts - 1) : 0;
        d->f_hz[i] = fmin * pow(fmax / fmin, u);
        d->base[i] = 1;
        ru_status st = ru_response_at(s, x, in, out, d->f_hz[i], &d->mag[i],
                                      &d->phase_deg[i], err);
        if (st != RU_OK)
            return st;
    }
    ru_status st = refine(s, x, in, out, d, err);
    if (st != RU_OK)
        return st;
    for (size_t i = 1; i < d->npts && !isfinite(d->f0_hz); i++) {
        double p0 = d->phase_deg[i - 1], p1 = d->phase_deg[i];
        if (((p0 <= 0 && p1 > 0) || (p0 >= 0 && p1 < 0)) && fabs(p1 - p0) < 180) {
            double w = p0 / (p0 - p1); /* not the +-180 wrap */
            d->f0_hz = d->f_hz[i - 1] * pow(d->f_hz[i] / d->f_hz[i - 1], w);
            d->mag0 = d->mag[i - 1] + w * (d->mag[i] - d->mag[i - 1]);
        }
    }
    return RU_OK;
}

static void print_text(const ru_circuit *c, const char *from, const char *to,
                       const resp_data *d)
{
    char a[40];
    printf("%s: %s\ntransfer v(%s)/v(%s), %s driven by an ideal source\n\n",
           ru_circuit_file(c), ru_circuit_title(c), to, from, from);
    printf("  %-14s %-12s %-10s %s\n", "frequency", "gain", "gain dB", "phase");
    size_t stride = d->nbase > 41 ? (d->nbase - 1) / 40 : 1;
    for (size_t i = 0, k = 0; i < d->npts; i++) {
        if (!d->base[i] || k++ % stride != 0)
            continue; /* the text shows the log-spaced grid, every stride-th point */
        printf("  %-14s %-12.5g %+-10.2f %+7.2f deg\n",
               ru_format_si(d->f_hz[i], "Hz", 4, a, sizeof a), d->mag[i],
               20 * log10(d->mag[i]), d->phase_deg[i]);
    }
    printf("\npeak: gain %.5g (%+.2f dB) at %s, phase %+.2f deg\n", d->peak_mag,
           20 * log10(d->peak_mag), ru_format_si(d->peak_f_hz, "Hz", 5, a, sizeof a),
           d->peak_phase_deg);
    if (d->peak_mag > 1)
        printf("VOLTAGE GAIN ABOVE ONE: this network steps the voltage up by %.4g at its "
               "peak\n", d->peak_mag);
    else
        printf("the gain stays below one at every frequency swept\n");
    if (isfinite(d->f0_hz))
        printf("phase passes 0 deg at %s with gain %.5g: a loop around an amplifier of "
               "gain %.4g or more would start there\n",
               ru_format_si(d->f0_hz, "Hz", 4, a, sizeof a), d->mag0, 1.0 / d->mag0);
}

static void print_json(const resp_data *d)
{
    ru_json j;
    ru_json_init(&j, stdout, 1);
    ru_json_begin_object(&j, NULL);
    ru_json_begin_array(&j, "points");
    for (size_t i = 0; i < d->npts; i++) {
        ru_json_begin_object(&j, NULL);
        ru_json_number(&j, "f_hz", d->f_hz[i]);
        ru_json_number(&j, "mag", d->mag[i]);
        ru_json_number(&j, "phase_deg", d->phase_deg[i]);
        ru_json_end_object(&j);
    }
    ru_json_end_array(&j);
    ru_json_begin_object(&j, "peak");
    ru_json_number(&j, "f_hz", d->peak_f_hz);
    ru_json_number(&j, "mag", d->peak_mag);
    ru_json_number(&j, "phase_deg", d->peak_phase_deg);
    ru_json_end_object(&j);
    ru_json_begin_object(&j, "zero_phase");
    ru_json_number(&j, "f_hz", d->f0_hz);
    ru_json_number(&j, "mag", d->mag0);
    ru_json_end_object(&j);
    ru_json_bool(&j, "gain_above_one", d->peak_mag > 1);
    ru_json_end_object(&j);
    ru_json_finish(&j);
}

static int node_arg(const ru_circuit *c, const ru_system *s, const char *opt,
                    const char *name)
{
    int k = name ? ru_circuit_find_node(c, name) : -1;
    if (!name) {
        fprintf(stderr, "ringup response: --%s NODE is required\n", opt);
        return -1;
    }
    if (k < 0) {
        fprintf(stderr, "ringup response: --%s: no node named '%s' in %s\n", opt, name,
                ru_circuit_file(c));
        return -1;
    }
    if (!strcmp(opt, "from") && ru_system_node_state(s, k) < 0) {
        fprintf(stderr, "ringup response: --from: node '%s' is ground or held by a "
                        "supply; pick a free node\n", name);
        return -1;
    }
    return k;
}

int cmd_response(int argc, char **argv)
{
    cli_opt opts[] = {{"from", "NODE", "node driven by the ideal test source", NULL},
                      {"to", "NODE", "node whose voltage is read", NULL},
                      {"fmin", "F", "lowest frequency (default: from the poles)", NULL},
                      {"fmax", "F", "highest frequency (default: from the poles)", NULL},
                      {"points", "N", "number of log-spaced points (default 201)", NULL},
                      {"json", NULL, "print JSON on stdout (keys in README)", NULL},
                      CLI_PLOT_OPTS,
                      {NULL, NULL, NULL, NULL}};
    const char *file;
    int rc = cli_parse(argc, argv, "ringup response FILE --from NODE --to NODE [options]",
                       "Drives node NODE with an ideal sine source (every other part stays, "
                       "amplifiers\nlinearized at the operating point) and reports "
                       "v(to)/v(from) over frequency:\nmagnitude, phase, the peak and "
                       "where the phase passes 0 degrees.",
                       opts, &file);
    if (rc >= 0)
        return rc;
    double fmin = NAN, fmax = NAN;
    unsigned long long npts = 201;
    if (!cli_range(opts, "fmin", "Hz", RU_CLI_FREQ_MIN_HZ, RU_CLI_FREQ_MAX_HZ, &fmin) ||
        !cli_range(opts, "fmax", "Hz", RU_CLI_FREQ_MIN_HZ, RU_CLI_FREQ_MAX_HZ, &fmax) ||
        !cli_int(opts, "points", 2, 100000, &npts))
        return 1;
    cli_plot_req plots;
    if ((rc = cli_plot_check(opts, &plots)) != 0)
        return rc;
    ru_circuit *c = NULL;
    if ((rc = cli_load(file, cli_get(opts, "json") != NULL, &c)) != 0)
        return rc;
    ru_system *s = NULL;
    resp_data d = {.npts = (size_t)npts, .nbase = (size_t)npts};
    double *x = NULL;
    ru_error err;
    ru_error_clear(&err);
    int in, out, fl;
    if (ru_system_create(c, &s, &err) != RU_OK) {
        rc = cli_fail(&err);
        goto done;
    }
    if ((in = node_arg(c, s, "from", cli_get(opts, "from"))) < 0 ||
        (out = node_arg(c, s, "to", cli_get(opts, "to"))) < 0) {
        rc = 1;
        goto done;
    }
    if (in == out) {
        fprintf(stderr, "ringup response: --from and --to are the same node (%s): the "
                        "transfer of a node to itself is 1 at every frequency; read another "
                        "node\n", cli_get(opts, "to"));
        rc = 1;
        goto done;
    }
    if (ru_circuit_find_floating_node(c, &fl)) {
        fprintf(stderr, "%s: node %s has no DC path to ground: there is no operating point\n",
                ru_circuit_file(c), ru_circuit_node_name(c, fl));
        rc = 1;
        goto done;
    }
    x = calloc(ru_system_size(s) + 1, sizeof *x);
    d.f_hz = calloc(d.npts, sizeof *d.f_hz);
    d.mag = calloc(d.npts, sizeof *d.mag);
    d.phase_deg = calloc(d.npts, sizeof *d.phase_deg);
    d.base = calloc(d.npts, 1);
    if (!x || !d.f_hz || !d.mag || !d.phase_deg || !d.base) {
        rc = 2;
        goto done;
    }
    if (ru_oppoint_solve(s, x, 0, NULL, &err) != RU_OK) {
        rc = cli_fail(&err);
        goto done;
    }
    double lo, hi;
    range_from_poles(s, x, &lo, &hi);
    if (!isfinite(fmin))
        fmin = isfinite(fmax) ? fmax / 1000 : lo;
    if (!isfinite(fmax))
        fmax = fmin < hi ? hi : fmin * 1000;
    if (!(fmin > 0 && fmax > fmin)) {
        fprintf(stderr, "ringup response: need 0 < fmin < fmax (got %g, %g)\n", fmin, fmax);
        rc = 1;
        goto done;
    }
    if (sweep(s, x, in, out, fmin, fmax, &d, &err) != RU_OK ||
        ru_response_peak(s, x, in, out, fmin, fmax, d.nbase, &d.peak_f_hz, &d.peak_mag,
                         &err) != RU_OK) {
        rc = cli_fail(&err);
        goto done;
    }
    double pm;
    ru_response_at(s, x, in, out, d.peak_f_hz, &pm, &d.peak_phase_deg, NULL);
    insert_point(&d, d.peak_f_hz, d.peak_mag, d.peak_phase_deg);
    if (cli_get(opts, "json"))
        print_json(&d);
    cli_capture cap; /* the text for the report, on the terminal unless --json */
    cli_capture_begin(&cap, plots.report != NULL, !cli_get(opts, "json"));
    if (cli_capture_printing(&cap))
        print_text(c, cli_get(opts, "from"), cli_get(opts, "to"), &d);
    char *text = cli_capture_end(&cap);
    char what[2 * RU_NAME_MAX + 16];
    snprintf(what, sizeof what, "v(%s)/v(%s)", cli_get(opts, "to"), cli_get(opts, "from"));
    ru_plot_bode bode = {0, what, d.npts, d.f_hz, d.mag, d.phase_deg, d.peak_f_hz,
                         d.peak_mag};
    ru_plot_set set = {0};
    set.response = &bode;
    if (plots.dir || plots.report)
        rc = cli_plot_set(&plots, ru_circuit_title(c), &set, text);
    free(text);
done:
    free(x);
    free(d.f_hz);
    free(d.mag);
    free(d.phase_deg);
    free(d.base);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
    return rc;
}
