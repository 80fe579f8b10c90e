/* steady.c: `ringup steady FILE`: the periodic steady state by shooting Newton, its
 * Floquet multipliers and the exact settled figures (ringup/tone.h). */
#include "cli/cli.h"

#include "ringup/format.h"
#include "ringup/json.h"
#include "ringup/plot.h"
#include "ringup/tone.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static void print_multipliers(const ru_steady_view *v)
{
    printf("  Floquet multipliers");
    for (size_t i = 0; i < v->n && i < 6; i++) {
        const ru_multiplier *m = &v->multipliers[i];
        if (i == 0)
            printf("  %.10g", m->re);
        else if (fabs(m->im) > 0)
            printf(", %.6g%+.4gj", m->re, m->im);
        else
            printf(", %.6g", m->re);
        if (i == 0)
            printf(" (phase)");
    }
    printf("%s\n", v->n > 6 ? ", ..." : "");
}

static void print_recovery(const ru_steady_view *v)
{
    char a[32];
    if (isinf(v->recovery_time_s))
        printf("  amplitude recovery  none: a multiplier lies outside the unit circle (the "
               "cycle is not stable)\n");
    else if (isfinite(v->recovery_time_s))
        printf("  amplitude recovery  %s = %.4g cycles (1/e)%s\n",
               ru_format_si(v->recovery_time_s, "s", 4, a, sizeof a), v->recovery_cycles,
               v->recovery_oscillates ? ", ringing" : "");
    if (v->recovery_oscillates) {
        printf("                      the amplitude rings at %s as it recovers\n",
               ru_format_si(v->recovery_ring_hz, "Hz", 4, a, sizeof a));
    }
}

static void print_text(const ru_circuit *c, const ru_tone *t)
{
    ru_steady_view v;
    ru_tone_steady(t, &v);
    ru_tone_spectrum sp;
    ru_tone_spectrum_get(t, &sp);
    char a[40], b[40], d[40];
    printf("%s: %s\n", ru_circuit_file(c), ru_circuit_title(c));
    if (!v.found) {
        printf("no periodic steady state on %s: %s\n", ru_tone_probe(t), v.note);
        return;
    }
    printf("periodic steady state on %s (shooting Newton, started from the %s)\n\n",
           ru_tone_probe(t), v.start);
    printf("  frequency           %s   (period %s, estimated error %.1g)\n",
           ru_format_si(v.frequency_hz, "Hz", 10, a, sizeof a),
           ru_format_si(v.period_s, "s", 10, b, sizeof b), v.period_rel_error);
    printf("  amplitude           %s   (max %s, min %s)\n",
           ru_format_si(v.amplitude_v, "V", 7, a, sizeof a),
           ru_format_si(v.probe_max_v, "V", 5, b, sizeof b),
           ru_format_si(v.probe_min_v, "V", 5, d, sizeof d));
    printf("    fundamental       %s\n", ru_format_si(sp.fundamental_v, "V", 7, a, sizeof a));
    printf("  DC level            %s\n", ru_format_si(v.dc_level_v, "V", 5, a, sizeof a));
    printf("  THD                 %.4g %%\n", sp.thd_percent);
    printf("  harmonics (dBc)    ");
    for (int h = 0; h < RU_HARMONICS - 1; h++) {
        if (h == 5)
            printf("\n                     ");
        printf(" H%d %.1f", h + 2, sp.harmonics_dbc[h]);
    }
    printf("\n");
    print_multipliers(&v);
    print_recovery(&v);
    printf("\nNewton: %d iterations after %.0f periods of plain integration; %ld steps, "
           "%.3f s\n", v.newton_iterations, v.transient_periods, v.steps, v.cpu_s);
    if (v.phase_multiplier_error > 1e-4)
        printf("note: the phase multiplier is %.3g away from 1: the orbit closes only "
               "roughly (tighten --rtol)\n", v.phase_multiplier_error);
    if (v.note[0])
        printf("note: %s\n", v.note);
}

static void print_json(const ru_tone *t)
{
    ru_steady_view v;
    ru_tone_steady(t, &v);
    ru_tone_spectrum sp;
    ru_tone_spectrum_get(t, &sp);
    ru_json j;
    ru_json_init(&j, stdout, 1);
    ru_json_begin_object(&j, NULL);
    ru_json_string(&j, "probe", ru_tone_probe(t));
    ru_json_bool(&j, "found", v.found);
    ru_json_string(&j, "start", v.found ? v.start : NULL);
    double nan = NAN;
    ru_json_number(&j, "frequency_hz", v.found ? v.frequency_hz : nan);
    ru_json_number(&j, "period_s", v.found ? v.period_s : nan);
    ru_json_number(&j, "period_rel_error", v.found ? v.period_rel_error : nan);
    ru_json_number(&j, "amplitude_v", v.found ? v.amplitude_v : nan);
    ru_json_number(&j, "max_v", v.found ? v.probe_max_v : nan);
    ru_json_number(&j, "min_v", v.found ? v.probe_min_v : nan);
    ru_json_number(&j, "fundamental_v", v.found ? sp.fundamental_v : nan);
    ru_json_number(&j, "dc_level_v", v.found ? v.dc_level_v : nan);
    ru_json_number(&j, "thd_percent", v.found ? sp.thd_percent : nan);
    ru_json_begin_array(&j, "harmonics_dbc");
    for (int h = 0; v.found && h < RU_HARMONICS - 1; h++)
        ru_json_number(&j, NULL, sp.harmonics_dbc[h]);
    ru_json_end_array(&j);
    ru_json_begin_array(&j, "multipliers");
    for (size_t i = 0; v.found && i < v.n; i++) {
        ru_json_begin_object(&j, NULL);
        ru_json_number(&j, "re", v.multipliers[i].re);
        ru_json_number(&j, "im", v.multipliers[i].im);
        ru_json_end_object(&j);
    }
    ru_json_end_array(&j);
    ru_json_number(&j, "phase_multiplier_error", v.found ? v.phase_multiplier_error : nan);
    ru_json_number(&j, "recovery_time_s", v.found ? v.recovery_time_s : nan);
    ru_json_number(&j, "recovery_cycles", v.found ? v.recovery_cycles : nan);
    ru_json_bool(&j, "recovery_rings", v.found && v.recovery_oscillates);
    ru_json_number(&j, "recovery_ring_hz", v.found && v.recovery_oscillates ? v.recovery_ring_hz
                                                                             : nan);
    ru_json_int(&j, "newton_iterations", v.newton_iterations);
    ru_json_number(&j, "transient_periods", v.transient_periods);
    ru_json_int(&j, "steps", v.steps);
    ru_json_number(&j, "cpu_s", v.cpu_s);
    ru_json_begin_array(&j, "notes");
    if (v.note[0])
        ru_json_string(&j, NULL, v.note);
    ru_json_end_array(&j);
    ru_json_end_object(&j);
    ru_json_finish(&j);
}

/* Figures: one period, harmonics, Floquet multipliers. */
static int plot_steady(const cli_plot_req *pr, const ru_circuit *c, const ru_tone *t,
                       const char *text)
{
    if (!pr->dir && !pr->report)
        return 0;
    ru_steady_view v;
    ru_tone_steady(t, &v);
    ru_tone_spectrum sp;
    ru_tone_spectrum_get(t, &sp);
    if (!v.found)
        return 0;
    double *re = malloc(2 * v.n * sizeof *re);
    if (!re)
        return 2;
    double *im = re + v.n;
    for (size_t i = 0; i < v.n; i++) {
        re[i] = v.multipliers[i].re;
        im[i] = v.multipliers[i].im;
    }
    ru_plot_period per = {ru_circuit_title(c), ru_tone_probe(t), v.ngrid, v.grid_probe,
                          v.period_s, v.probe_max_v, v.probe_min_v, v.dc_level_v,
                          sp.thd_percent};
    ru_plot_floquet fl = {v.n, re, im, v.recovery_time_s, v.period_s};
    ru_plot_spectrum spec = {v.frequency_hz, sp.harmonics_dbc, RU_HARMONICS - 1,
                             sp.thd_percent};
    ru_plot_set set = {0};
    set.period = &per;
    set.spectrum = isfinite(sp.thd_percent) ? &spec : NULL;
    set.floquet = &fl;
    int rc = cli_plot_set(pr, ru_circuit_title(c), &set, text);
    free(re);
    return rc;
}

/* The request from the options; returns 0 or an exit status. */
static int steady_request(const cli_opt *opts, ru_tone_request *rq)
{
    ru_tone_request_default(rq);
    double v = 0;
    if (!cli_positive(opts, "rtol", "", &v))
        return 1;
    if (cli_get(opts, "rtol") && !(v >= 1e-13 && v <= 1e-4)) {
        fprintf(stderr, "ringup: --rtol must be between 1e-13 and 1e-4 (got %g)\n", v);
        return 1;
    }
    rq->rtol = cli_get(opts, "rtol") ? v : 0;
    const char *g = cli_get(opts, "grid");
    if (g) {
        char *end = NULL;
        long n = strtol(g, &end, 10);
        if (!end || *end || n < 64 || n > 65536) {
            fprintf(stderr, "ringup: --grid must be a whole number from 64 to 65536 (got "
                            "'%s')\n", g);
            return 1;
        }
        rq->grid = (size_t)n;
    }
    rq->out_dir = cli_get(opts, "out");
    return rq->out_dir ? cli_make_dir(rq->out_dir) : 0;
}

int cmd_steady(int argc, char **argv)
{
    cli_opt opts[] = {{"out", "DIR", "write DIR/steady.csv: one period of every node", NULL},
                      {"rtol", "X", "final integration tolerance (default 1e-10)", NULL},
                      {"grid", "N", "samples per period for the CSV and the FFT (1024)",
                       NULL},
                      {"json", NULL, "print JSON on stdout (keys in README)", NULL},
                      CLI_PLOT_OPTS,
                      {NULL, NULL, NULL, NULL}};
    const char *file;
    int rc = cli_parse(argc, argv, "ringup steady FILE [--out DIR] [--rtol X] [--json]",
                       "Finds the periodic steady state of a self-sustained oscillator by "
                       "shooting Newton\n(period unknown, phase condition), started from "
                       "the describing function: the exact\nsettled frequency, amplitude, "
                       "DC level and harmonics, and the Floquet multipliers\n(how fast "
                       "the amplitude recovers from a disturbance).",
                       opts, &file);
    if (rc >= 0)
        return rc;
    cli_plot_req plots;
    if ((rc = cli_plot_check(opts, &plots)) != 0)
        return rc;
    ru_tone_request rq;
    if ((rc = steady_request(opts, &rq)) != 0)
        return rc;
    ru_circuit *c = NULL;
    if ((rc = cli_load(file, cli_get(opts, "json") != NULL, &c)) != 0)
        return rc;
    ru_tone *t = NULL;
    ru_error err;
    ru_error_clear(&err);
    if (ru_tone_run(c, &rq, &t, &err) != RU_OK) {
        rc = cli_fail(&err);
    } else {
        if (cli_get(opts, "json"))
            print_json(t);
        cli_capture cap; /* the text for the report, on the terminal unless --json */
        cli_capture_begin(&cap, plots.report != NULL, !cli_get(opts, "json"));
        if (cli_capture_printing(&cap))
            print_text(c, t);
        char *text = cli_capture_end(&cap);
        rc = plot_steady(&plots, c, t, text);
        free(text);
    }
    ru_tone_destroy(t);
    ru_circuit_destroy(c);
    return rc;
}
