/* margin.c: `ringup margin FILE --part X1`: the negative-resistance analysis of one
 * two-terminal part (ringup/margin.h): the impedance the rest of the circuit
 * presents to it over frequency, the operating frequency, the margin, the start-up
 * time constant and time, and with --amplitude Re Z against the part's current
 * (settled current, drive power). */
#include "cli/cli.h"

#include "ringup/format.h"
#include "ringup/json.h"
#include "ringup/margin.h"
#include "ringup/plot.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define PI 3.14159265358979323846
#define KT (1.380649e-23 * (27 + 273.15)) /* thermal energy at 27 C (J) */
#define AMP_POINTS 200

typedef struct mg_data {
    const ru_part *part;
    double dom_re, dom_im;        /* the whole circuit's dominant poles */
    size_t npts;
    double *f_hz, *re, *im, *xp;  /* sweep: rest's Z and the part's reactance */
    ru_margin_result r;
    ru_margin_amp amp;            /* settled current by the describing function */
    int have_amp;
    ru_margin_point curve[AMP_POINTS];
    size_t ncurve;
    double l_h;                   /* the part's inductance (NAN: none) */
    double i0_a;                  /* thermal start level of its current (peak) */
    double startup_s;             /* tau ln(0.9 I_settled / I_0) */
} mg_data;

static ru_status sweep(const ru_margin *m, double fmin, double fmax, mg_data *d,
                       ru_error *err)
{
    for (size_t i = 0; i < d->npts; i++) {
        double u = (double)i / (double)(d->npts - 1), pr;
        d->f_hz[i] = fmin * pow(fmax / fmin, u);
        ru_status st = ru_margin_rest_z(m, d->f_hz[i], &d->re[i], &d->im[i], err);
        if (st == RU_OK)
            st = ru_margin_part_z(m, d->f_hz[i], &pr, &d->xp[i], err);
        if (st != RU_OK)
            return st;
    }
    return RU_OK;
}

static void figures(const ru_margin *m, mg_data *d, int want_curve, ru_error *err)
{
    d->l_h = ru_margin_part_inductance(m);
    d->i0_a = d->l_h > 0 ? sqrt(2 * KT / d->l_h) : NAN; /* equipartition: L i^2/2 = kT/2 */
    d->startup_s = NAN;
    if (!d->r.found)
        return;
    ru_error e;
    ru_error_clear(&e);
    if (ru_margin_amplitude(m, d->r.frequency_hz, want_curve ? d->curve : NULL,
                            want_curve ? AMP_POINTS : 0, &d->ncurve, &d->amp, &e) == RU_OK)
        d->have_amp = 1;
    else if (err)
        snprintf(d->amp.note, sizeof d->amp.note, "%.200s", e.msg);
    if (d->have_amp && d->amp.found && d->i0_a > 0 && d->r.time_constant_s > 0 &&
        0.9 * d->amp.current_a > d->i0_a)
        d->startup_s = d->r.time_constant_s * log(0.9 * d->amp.current_a / d->i0_a);
}

static void print_text(const ru_circuit *c, const mg_data *d, int show_curve)
{
    char a[40], b[40], line[200];
    const ru_margin_result *r = &d->r;
    cli_part_text(c, d->part, line, sizeof line);
    printf("%s: %s\nnegative resistance seen by %s\n(the rest of the circuit "
           "linearized at the operating point)\n\n",
           ru_circuit_file(c), ru_circuit_title(c), line);
    if (!r->found) {
        printf("no operating frequency: %s\n", r->note);
        return;
    }
    printf("  operating frequency   %s", ru_format_si(r->frequency_hz, "Hz", 9, a, sizeof a));
    if (isfinite(d->dom_im))
        printf("   (dominant poles: %s)",
               ru_format_si(d->dom_im / (2 * PI), "Hz", 9, b, sizeof b));
    printf("\n  Re Z of the rest      %s\n",
           ru_format_si(r->negative_resistance_ohm, "ohm", 5, a, sizeof a));
    printf("  Im Z of the rest      %s\n",
           ru_format_si(r->rest_reactance_ohm, "ohm", 5, a, sizeof a));
    printf("  ESR of %-14s %s\n", d->part->name, ru_format_si(r->esr_ohm, "ohm", 5, a, sizeof a));
    if (isfinite(r->margin))
        printf("  margin -Re Z / ESR    %.4g%s\n", r->margin,
               r->margin < 5 ? "   (below 5, the usual sign-off minimum: common practice)"
                             : "");
    else
        printf("  margin                -\n");
    if (isfinite(r->time_constant_s)) {
        printf("  time constant         %s (growth %.4g /s",
               ru_format_si(r->time_constant_s, "s", 4, a, sizeof a), r->growth_rate_per_s);
        if (isfinite(d->dom_re))
            printf("; the poles: %.4g /s", d->dom_re);
        printf(")\n");
    }
    if (isfinite(d->startup_s))
        printf("  start-up time         %s (from the thermal level %s to 90 %% of the "
               "settled current)\n",
               ru_format_si(d->startup_s, "s", 4, a, sizeof a),
               ru_format_si(d->i0_a, "A", 3, b, sizeof b));
    if (d->have_amp && d->amp.found) {
        printf("  settled current       %s peak (%s rms) at %s\n",
               ru_format_si(d->amp.current_a, "A", 4, a, sizeof a),
               ru_format_si(d->amp.current_a / sqrt(2), "A", 4, b, sizeof b),
               ru_format_si(d->amp.frequency_hz, "Hz", 9, line, sizeof line));
        printf("  drive power           %s\n",
               ru_format_si(d->amp.drive_power_w, "W", 4, a, sizeof a));
    } else if (d->amp.note[0]) {
        printf("  settled current       - (%s)\n", d->amp.note);
    }
    if (r->note[0])
        printf("\nnote: %s\n", r->note);
    if (show_curve && d->ncurve) {
        printf("\n  %-14s %-14s %s\n", "current (pk)", "Re Z", "frequency");
        size_t stride = d->ncurve > 40 ? (d->ncurve + 39) / 40 : 1;
        for (size_t i = 0; i < d->ncurve; i += stride)
            printf("  %-14s %-14s %s\n",
                   ru_format_si(d->curve[i].current_a, "A", 4, a, sizeof a),
                   ru_format_si(d->curve[i].re_ohm, "ohm", 5, b, sizeof b),
                   ru_format_si(d->curve[i].frequency_hz, "Hz", 9, line, sizeof line));
    }
}

static void print_json(const mg_data *d, int show_curve)
{
    ru_json j;
    const ru_margin_result *r = &d->r;
    int amp = d->have_amp && d->amp.found;
    ru_json_init(&j, stdout, 1);
    ru_json_begin_object(&j, NULL);
    ru_json_string(&j, "part", d->part->name);
    ru_json_number(&j, "frequency_hz", r->frequency_hz);
    ru_json_number(&j, "negative_resistance_ohm", r->negative_resistance_ohm);
    ru_json_number(&j, "reactance_ohm", r->rest_reactance_ohm);
    ru_json_number(&j, "esr_ohm", r->esr_ohm);
    ru_json_number(&j, "margin", r->margin);
    ru_json_number(&j, "growth_rate_per_s", r->growth_rate_per_s);
    ru_json_number(&j, "time_constant_s", r->time_constant_s);
    ru_json_number(&j, "startup_time_s", d->startup_s);
    ru_json_number(&j, "start_current_a", d->i0_a);
    ru_json_number(&j, "settled_current_a", amp ? d->amp.current_a : NAN);
    ru_json_number(&j, "drive_power_w", amp ? d->amp.drive_power_w : NAN);
    ru_json_begin_object(&j, "poles");
    ru_json_number(&j, "growth_rate_per_s", d->dom_re);
    ru_json_number(&j, "frequency_hz", d->dom_im / (2 * PI));
    ru_json_end_object(&j);
    ru_json_begin_array(&j, "points");
    for (size_t i = 0; i < d->npts; i++) {
        ru_json_begin_object(&j, NULL);
        ru_json_number(&j, "f_hz", d->f_hz[i]);
        ru_json_number(&j, "re_ohm", d->re[i]);
        ru_json_number(&j, "im_ohm", d->im[i]);
        ru_json_end_object(&j);
    }
    ru_json_end_array(&j);
    if (show_curve) {
        ru_json_begin_array(&j, "amplitude_curve");
        for (size_t i = 0; i < d->ncurve; i++) {
            ru_json_begin_object(&j, NULL);
            ru_json_number(&j, "current_a", d->curve[i].current_a);
            ru_json_number(&j, "re_ohm", d->curve[i].re_ohm);
            ru_json_number(&j, "frequency_hz", d->curve[i].frequency_hz);
            ru_json_end_object(&j);
        }
        ru_json_end_array(&j);
    }
    ru_json_begin_array(&j, "notes");
    if (r->note[0])
        ru_json_string(&j, NULL, r->note);
    if (d->amp.note[0])
        ru_json_string(&j, NULL, d->amp.note);
    ru_json_end_array(&j);
    ru_json_end_object(&j);
    ru_json_finish(&j);
}

/* Frequency range: the options, else a factor 2 around the dominant poles. */
static int freq_range(const cli_opt *opts, const mg_data *d, double *fmin, double *fmax)
{
    *fmin = *fmax = NAN;
    if (!cli_range(opts, "fmin", "Hz", RU_CLI_FREQ_MIN_HZ, RU_CLI_FREQ_MAX_HZ, fmin) ||
        !cli_range(opts, "fmax", "Hz", RU_CLI_FREQ_MIN_HZ, RU_CLI_FREQ_MAX_HZ, fmax))
        return 1;
    double f0 = d->dom_im > 0 ? d->dom_im / (2 * PI) : NAN;
    if (!isfinite(*fmin) && !isfinite(*fmax) && !isfinite(f0)) {
        fprintf(stderr, "ringup margin: the circuit has no complex pole pair to center "
                        "the sweep on; give --fmin and --fmax\n");
        return 1;
    }
    if (!isfinite(*fmin))
        *fmin = isfinite(*fmax) && !isfinite(f0) ? *fmax / 4 : f0 / 2;
    if (!isfinite(*fmax))
        *fmax = isfinite(f0) && f0 * 2 > *fmin ? f0 * 2 : *fmin * 4;
    if (!(*fmax > *fmin)) {
        fprintf(stderr, "ringup margin: need fmin < fmax (got %g, %g)\n", *fmin, *fmax);
        return 1;
    }
    return 0;
}

static int alloc_sweep(mg_data *d, double npts)
{
    d->npts = (size_t)npts;
    d->f_hz = calloc(d->npts, sizeof *d->f_hz);
    d->re = calloc(d->npts, sizeof *d->re);
    d->im = calloc(d->npts, sizeof *d->im);
    d->xp = calloc(d->npts, sizeof *d->xp);
    return d->f_hz && d->re && d->im && d->xp ? 0 : 2;
}

static void free_sweep(mg_data *d)
{
    free(d->f_hz);
    free(d->re);
    free(d->im);
    free(d->xp);
}

static int output(const cli_opt *opts, const cli_plot_req *plots, const ru_circuit *c,
                  const mg_data *d)
{
    int json = cli_get(opts, "json") != NULL, curve = cli_get(opts, "amplitude") != NULL;
    if (json)
        print_json(d, curve);
    cli_capture cap;
    cli_capture_begin(&cap, plots->report != NULL, !json);
    if (cli_capture_printing(&cap))
        print_text(c, d, curve);
    char *text = cli_capture_end(&cap);
    int rc = 0;
    if (plots->dir || plots->report) {
        ru_plot_margin pm = {d->part->name, d->npts, d->f_hz, d->re, d->im, d->xp,
                             d->r.esr_ohm, d->r.frequency_hz, d->r.margin};
        ru_plot_set set = {0};
        set.margin = &pm;
        rc = cli_plot_set(plots, ru_circuit_title(c), &set, text);
    }
    free(text);
    return rc;
}

int cmd_margin(int argc, char **argv)
{
    cli_opt opts[] = {{"part", "NAME", "the two-terminal part (a crystal, an inductor, ...)",
                       NULL},
                      {"fmin", "F", "lowest frequency (default: half the poles' tone)", NULL},
                      {"fmax", "F", "highest frequency (default: twice the poles' tone)",
                       NULL},
                      {"points", "N", "log-spaced points of the sweep (default 401)", NULL},
                      {"amplitude", NULL, "Re Z against the part's current (table, JSON "
                                          "amplitude_curve)", NULL},
                      {"json", NULL, "print JSON on stdout (keys in README)", NULL},
                      CLI_PLOT_OPTS,
                      {NULL, NULL, NULL, NULL}};
    const char *file;
    int rc = cli_parse(argc, argv, "ringup margin FILE --part NAME [options]",
                       "The impedance the rest of the circuit presents to one part, "
                       "linearized at the\noperating point, over frequency: the "
                       "operating frequency (reactances cancel),\nthe margin -Re Z / ESR, "
                       "the start-up time constant and time, the settled current\nand "
                       "drive power (describing function). For a crystal, the part is its "
                       "motional\narm and its shunt capacitance counts with the circuit.",
                       opts, &file);
    if (rc >= 0)
        return rc;
    unsigned long long npts = 401;
    if (!cli_int(opts, "points", 2, 100000, &npts))
        return 1;
    const char *pname = cli_get(opts, "part");
    if (!pname) {
        fprintf(stderr, "ringup margin: --part NAME is required\n");
        return 1;
    }
    cli_plot_req plots;
    if ((rc = cli_plot_check(opts, &plots)) != 0)
        return rc;
    ru_circuit *c = NULL;
    if ((rc = cli_load(file, cli_get(opts, "json") != NULL, &c)) != 0)
        return rc;
    mg_data d = {0};
    ru_margin *m = NULL;
    ru_error err;
    ru_error_clear(&err);
    int pi = ru_circuit_find_part(c, pname);
    double fmin, fmax;
    if (pi < 0) {
        fprintf(stderr, "ringup margin: --part: no part named '%s' in %s\n", pname,
                ru_circuit_file(c));
        rc = 1;
        goto done;
    }
    d.part = ru_circuit_part(c, (size_t)pi);
    if (ru_margin_create(c, pi, &m, &err) != RU_OK) {
        rc = cli_fail(&err);
        goto done;
    }
    ru_margin_dominant(m, &d.dom_re, &d.dom_im);
    if ((rc = freq_range(opts, &d, &fmin, &fmax)) != 0 || (rc = alloc_sweep(&d, npts)) != 0)
        goto done;
    double guess = d.dom_im > 0 ? d.dom_im / (2 * PI) : sqrt(fmin * fmax);
    if (sweep(m, fmin, fmax, &d, &err) != RU_OK ||
        ru_margin_analyse(m, guess, fmin, fmax, &d.r, &err) != RU_OK) {
        rc = cli_fail(&err);
        goto done;
    }
    figures(m, &d, cli_get(opts, "amplitude") != NULL, &err);
    rc = output(opts, &plots, c, &d);
done:
    free_sweep(&d);
    ru_margin_destroy(m);
    ru_circuit_destroy(c);
    return rc;
}
