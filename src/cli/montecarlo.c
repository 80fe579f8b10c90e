/* montecarlo.c (CLI): `ringup montecarlo FILE --samples N`: draws every toleranced
 * part value per unit (ringup/montecarlo.h), runs the units in parallel, and says
 * whether the oscillator starts on every unit, the spread of each figure over the
 * started units, and the worst units with the values drawn for them. */
#include "cli/cli.h"

#include "ringup/batch.h"
#include "ringup/format.h"
#include "ringup/json.h"
#include "ringup/montecarlo.h"
#include "ringup/params.h"
#include "ringup/plot.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define WORST_SHOWN 5     /* latest start-ups listed */
#define NOSTART_SHOWN 10  /* units that did not start, listed */

static const char *const fig_label[RU_MC_NFIG] = {"start-up time", "growth rate",
                                                  "frequency", "settled amplitude", "THD"};

static void cell(double v, ru_mc_figure f, char *buf, size_t size)
{
    static const char *const unit[RU_MC_NFIG] = {"s", "/s", "Hz", "V", "%"};
    if (!isfinite(v))
        snprintf(buf, size, "-");
    else if (f == RU_MC_GROWTH || f == RU_MC_THD)
        snprintf(buf, size, "%.4g %s", v, unit[f]);
    else
        ru_format_si(v, unit[f], 4, buf, size);
}

static void print_stats(const ru_mc_result *r)
{
    printf("\nover the started units:\n  %-18s %-11s %-11s %-11s %-11s %-11s %-11s %s\n",
           "figure", "min", "p05", "mean", "p95", "max", "std", "n");
    for (int f = 0; f < RU_MC_NFIG; f++) {
        const ru_mc_stats *s = ru_mc_get_stats(r, (ru_mc_figure)f);
        double v[6] = {s->min, s->p05, s->mean, s->p95, s->max, s->std};
        char b[6][24];
        for (int k = 0; k < 6; k++)
            cell(v[k], (ru_mc_figure)f, b[k], sizeof b[k]);
        printf("  %-18s %-11s %-11s %-11s %-11s %-11s %-11s %zu\n", fig_label[f], b[0], b[1],
               b[2], b[3], b[4], b[5], s->n);
    }
}

/* One unit: its figures (or error) and the values drawn for it. */
static void print_unit(const ru_mc_result *r, const ru_circuit *c, size_t i)
{
    const ru_mc_unit *u = ru_mc_get_unit(r, i);
    char a[24], b[24], g[24];
    cell(u->fig[RU_MC_STARTUP], RU_MC_STARTUP, a, sizeof a);
    cell(u->fig[RU_MC_AMPLITUDE], RU_MC_AMPLITUDE, b, sizeof b);
    cell(u->predicted_growth_per_s, RU_MC_GROWTH, g, sizeof g);
    if (u->status != RU_OK)
        printf("  unit %zu%s: error: %s\n   ", i, i ? "" : " (nominal)", u->error);
    else
        printf("  unit %zu%s: %s%s, start-up %s, amplitude %s, poles' growth %s\n   ", i,
               i ? "" : " (nominal)", ru_verdict_name(u->verdict),
               u->started && !u->settled ? " (not settled)" : "", a, b, g);
    for (size_t k = 0; k < ru_mc_tol_count(r); k++) {
        const char *unit = "";
        double nominal = NAN, x = ru_mc_value(r, i, k);
        ru_error err;
        ru_circuit_get_param(c, ru_mc_tol_param(r, k), &nominal, &err);
        ru_circuit_param_unit(c, ru_mc_tol_param(r, k), &unit, &err);
        char v[24];
        if (unit[0] && strcmp(unit, "%") != 0)
            ru_format_si(x, unit, 4, v, sizeof v);
        else
            snprintf(v, sizeof v, "%.4g", x);
        printf(" %s %s", ru_mc_tol_name(r, k), v);
        if (nominal != 0 && isfinite(nominal))
            printf(" (%+.2f%%)", 100.0 * (x / nominal - 1.0));
    }
    printf("\n");
}

/* The units that did not start (failed = 0) or whose run failed (failed = 1). */
static void print_not_started(const ru_mc_result *r, const ru_circuit *c, int failed)
{
    size_t shown = 0;
    for (size_t i = 0; i < ru_mc_sample_count(r); i++) {
        const ru_mc_unit *u = ru_mc_get_unit(r, i);
        if (!ru_mc_unit_done(r, i) || u->started || (u->status != RU_OK) != failed ||
            shown++ >= NOSTART_SHOWN)
            continue;
        if (shown == 1)
            printf(failed ? "\nruns that failed (not counted as started):\n"
                          : "\ndid not start:\n");
        print_unit(r, c, i);
    }
    if (shown > NOSTART_SHOWN)
        printf("  ... and %zu more (--json lists every unit)\n", shown - NOSTART_SHOWN);
}

static void print_table(const ru_circuit *c, const ru_mc_opts *o, const ru_mc_result *r)
{
    size_t n = ru_mc_done_count(r), k = ru_mc_started_count(r);
    char units[64];
    if (n == ru_mc_sample_count(r))
        snprintf(units, sizeof units, "%zu units", n);
    else
        snprintf(units, sizeof units, "%zu of %zu units done", n, ru_mc_sample_count(r));
    printf("%s: %s\nMonte Carlo: %s (unit 0 nominal), seed %llu, %s\n",
           ru_circuit_file(c), ru_circuit_title(c), units, (unsigned long long)o->seed,
           o->dist == RU_MC_NORMAL ? "normal deviations, sigma = tol/3, truncated at +-tol"
                                   : "uniform deviations within +-tol");
    printf("\nstarts on every unit%s: %s (%zu of %zu started, %zu of them settled",
           n == ru_mc_sample_count(r) ? "" : " done", k == n ? "yes" : "no", k, n,
           ru_mc_settled_count(r));
    if (ru_mc_failed_count(r))
        printf(", %zu runs failed", ru_mc_failed_count(r));
    printf(")\n");
    print_stats(r);
    size_t idx[WORST_SHOWN], nw = ru_mc_latest(r, idx, WORST_SHOWN);
    if (nw)
        printf("\nlatest start-up:\n");
    for (size_t i = 0; i < nw; i++)
        print_unit(r, c, idx[i]);
    print_not_started(r, c, 0);
    print_not_started(r, c, 1);
}

static void json_stats(ru_json *j, const ru_mc_result *r)
{
    ru_json_begin_object(j, "stats");
    for (int f = 0; f < RU_MC_NFIG; f++) {
        const ru_mc_stats *s = ru_mc_get_stats(r, (ru_mc_figure)f);
        ru_json_begin_object(j, ru_mc_figure_key((ru_mc_figure)f));
        ru_json_int(j, "n", (long)s->n);
        ru_json_number(j, "min", s->min);
        ru_json_number(j, "mean", s->mean);
        ru_json_number(j, "max", s->max);
        ru_json_number(j, "std", s->std);
        ru_json_number(j, "p05", s->p05);
        ru_json_number(j, "p95", s->p95);
        ru_json_end_object(j);
    }
    ru_json_end_object(j);
}

static void json_unit(ru_json *j, const ru_mc_result *r, size_t i)
{
    const ru_mc_unit *u = ru_mc_get_unit(r, i);
    ru_json_begin_object(j, NULL);
    ru_json_int(j, "index", (long)i);
    ru_json_string(j, "verdict", ru_verdict_name(u->verdict));
    ru_json_bool(j, "started", u->started);
    ru_json_bool(j, "settled", u->settled);
    if (u->status != RU_OK)
        ru_json_string(j, "error", u->error);
    for (int f = 0; f < RU_MC_NFIG; f++)
        ru_json_number(j, ru_mc_figure_key((ru_mc_figure)f), u->fig[f]);
    ru_json_number(j, "predicted_growth_rate_per_s", u->predicted_growth_per_s);
    ru_json_begin_object(j, "values");
    for (size_t k = 0; k < ru_mc_tol_count(r); k++)
        ru_json_number(j, ru_mc_tol_name(r, k), ru_mc_value(r, i, k));
    ru_json_end_object(j);
    ru_json_end_object(j);
}

static void print_json(const ru_mc_opts *o, const ru_mc_result *r)
{
    ru_json j;
    ru_json_init(&j, stdout, 1);
    ru_json_begin_object(&j, NULL);
    ru_json_int(&j, "samples", (long)ru_mc_sample_count(r));
    ru_json_int(&j, "units_done", (long)ru_mc_done_count(r));
    ru_json_number(&j, "seed", (double)o->seed);
    ru_json_string(&j, "distribution", o->dist == RU_MC_NORMAL ? "normal" : "uniform");
    ru_json_int(&j, "started_count", (long)ru_mc_started_count(r));
    ru_json_int(&j, "settled_count", (long)ru_mc_settled_count(r));
    ru_json_int(&j, "failed_count", (long)ru_mc_failed_count(r));
    ru_json_bool(&j, "all_started", ru_mc_started_count(r) == ru_mc_done_count(r));
    json_stats(&j, r);
    ru_json_begin_array(&j, "units");
    for (size_t i = 0; i < ru_mc_sample_count(r); i++)
        if (ru_mc_unit_done(r, i))
            json_unit(&j, r, i);
    ru_json_end_array(&j);
    ru_json_end_object(&j);
    ru_json_finish(&j);
}

#define PLOT_UNITS 8

/* Pictures: the nominal unit, the latest start-ups and units that did not start
 * are run again with their traces kept (the Monte Carlo keeps figures only) and
 * drawn as the comparison figures: envelopes overlaid, THD and start-up per unit. */
static int plot_units(const cli_plot_req *pr, const ru_circuit *c, const ru_mc_opts *o,
                      const ru_mc_result *r, const char *text)
{
    if (!pr->dir && !pr->report)
        return 0;
    size_t pick[PLOT_UNITS], n = 0;
    if (ru_mc_unit_done(r, 0))
        pick[n++] = 0;
    size_t late[PLOT_UNITS / 2], nl = ru_mc_latest(r, late, PLOT_UNITS / 2);
    for (size_t i = 0; i < nl; i++)
        if (late[i] != 0)
            pick[n++] = late[i];
    for (size_t i = 1; i < ru_mc_sample_count(r) && n < PLOT_UNITS; i++)
        if (ru_mc_unit_done(r, i) && !ru_mc_get_unit(r, i)->started)
            pick[n++] = i;
    ru_batch_item items[PLOT_UNITS];
    ru_circuit *cv[PLOT_UNITS] = {0};
    ru_run_data *data[PLOT_UNITS] = {0};
    ru_plot_model pm[PLOT_UNITS];
    char label[PLOT_UNITS][32];
    memset(items, 0, sizeof items);
    size_t m = 0;
    for (size_t i = 0; i < n; i++) {
        ru_error err;
        if (ru_mc_sample_circuit(c, o->seed, pick[i], o->dist, &cv[m], &err) != RU_OK)
            continue;
        if (ru_run_data_create(&data[m]) != RU_OK) {
            ru_circuit_destroy(cv[m]);
            cv[m] = NULL;
            continue;
        }
        items[m].circuit = cv[m];
        items[m].request = o->request;
        items[m].request.keep = data[m];
        snprintf(label[m], sizeof label[m], pick[i] ? "unit %zu" : "unit 0 (nominal)", pick[i]);
        m++;
    }
    ru_batch_run(items, m, o->threads);
    size_t k = 0;
    for (size_t i = 0; i < m; i++) {
        if (items[i].status != RU_OK)
            continue;
        ru_run_data_view dv;
        ru_run_data_get(data[i], &dv);
        const ru_measure_result *me = &items[i].report.meas;
        pm[k++] = (ru_plot_model){label[i], dv.nenv, dv.env_t_s, dv.env_v, me->thd_percent,
                                  me->started ? me->startup_time_s : NAN};
    }
    ru_plot_set set = {0};
    set.models = k ? pm : NULL;
    set.nmodels = k;
    /* The report is written even when no unit could be redrawn: it holds the table. */
    int rc = (k || pr->report) ? cli_plot_set(pr, ru_circuit_title(c), &set, text) : 0;
    for (size_t i = 0; i < PLOT_UNITS; i++) {
        ru_circuit_destroy(cv[i]);
        ru_run_data_destroy(data[i]);
    }
    return rc;
}

/* --samples, --seed, --distribution, --stop, --accuracy into o. */
static int read_opts(const cli_opt *opts, ru_mc_opts *o)
{
    ru_mc_opts_default(o);
    unsigned long long samples = o->samples, seed = o->seed, threads = 0;
    if (!cli_int(opts, "samples", 1, RU_MC_MAX_SAMPLES, &samples) ||
        !cli_int(opts, "seed", 0, 9007199254740992ULL, &seed) ||
        !cli_int(opts, "threads", 1, RU_CLI_THREADS_MAX, &threads) ||
        !cli_stop(opts, &o->request))
        return 1;
    const char *dist = cli_get(opts, "distribution");
    if (dist && strcmp(dist, "uniform") && strcmp(dist, "normal")) {
        fprintf(stderr, "ringup montecarlo: --distribution takes uniform or normal\n");
        return 1;
    }
    o->dist = dist && !strcmp(dist, "normal") ? RU_MC_NORMAL : RU_MC_UNIFORM;
    o->samples = (size_t)samples;
    o->seed = (uint64_t)seed;
    return cli_accuracy(opts, &o->request.accuracy);
}

/* The options that define a study (kept in the log's header for --resume). */
static const char *const study_names[] = {"samples", "seed", "distribution", "stop",
                                          "accuracy", "temp", "shard", NULL};

typedef struct mc_ctx {
    const ru_circuit *c;
    ru_mc_opts o;
    ru_mc_result *r;
} mc_ctx;

static ru_status mc_run(void *ctx, size_t i, char **line, ru_error *err)
{
    mc_ctx *m = ctx;
    return ru_mc_unit_record(m->c, &m->o, i, line, err);
}

static ru_status mc_add(void *ctx, const char *line, int *failed, ru_error *err)
{
    mc_ctx *m = ctx;
    size_t before = ru_mc_failed_count(m->r);
    ru_status st = ru_mc_result_add(m->r, line, err);
    *failed = ru_mc_failed_count(m->r) > before;
    return st;
}

/* The report of the units in: table or JSON, then the pictures. */
static int report(const cli_plot_req *plots, mc_ctx *m, int json)
{
    ru_mc_result_finish(m->r);
    if (json)
        print_json(&m->o, m->r);
    cli_capture cap; /* the text for the report, on the terminal unless --json */
    cli_capture_begin(&cap, plots->report != NULL, !json);
    if (cli_capture_printing(&cap))
        print_table(m->c, &m->o, m->r);
    char *text = cli_capture_end(&cap);
    int rc = plot_units(plots, m->c, &m->o, m->r, text);
    free(text);
    return rc;
}

int cli_montecarlo_study(int argc, char **argv, cli_pre *pre)
{
    cli_opt opts[] = {{"samples", "N", "units to simulate (unit 0 is nominal; default 100)", NULL},
                      {"seed", "S", "seed of the draws (default 1)", NULL},
                      {"distribution", "D", "uniform (default) or normal (sigma tol/3, "
                                            "truncated at tol)", NULL},
                      {"stop", "T", "run length, or auto (default: the file's)", NULL},
                      {"accuracy", "LEVEL", "draft, normal or precise", NULL},
                      CLI_TEMP_OPT,
                      CLI_STUDY_OPTS,
                      {"json", NULL, "print JSON on stdout (keys in README)", NULL},
                      CLI_PLOT_OPTS,
                      {NULL, NULL, NULL, NULL}};
    const char *file;
    int rc = cli_parse(argc, argv, "ringup montecarlo FILE --samples N [options]",
                       "Draws every part value that has a tol once per unit, runs the units "
                       "in parallel,\nand says whether the oscillator starts on every unit, "
                       "how start-up time,\ngrowth rate, frequency, settled amplitude and "
                       "THD spread, and which units\nstart last or not at all, with the "
                       "values drawn for them. Ctrl-C stops it\nand prints the report of the "
                       "units done; with --out DIR, --resume DIR goes on.",
                       opts, &file);
    if (rc >= 0)
        return rc;
    mc_ctx m = {0};
    cli_plot_req plots;
    int json = cli_get(opts, "json") != NULL;
    if ((rc = read_opts(opts, &m.o)) != 0 || (rc = cli_plot_check(opts, &plots)) != 0)
        return rc;
    ru_circuit *c = NULL;
    if ((rc = cli_load(file, json || pre->mpi_rank > 0, &c)) != 0)
        return rc;
    if ((rc = cli_temp(opts, c)) != 0) {
        ru_circuit_destroy(c);
        return rc;
    }
    m.c = c;
    m.o.request.stop = cli_study_stop_flag();
    cli_study s = {.command = "montecarlo", .file = file, .count = m.o.samples, .json = json,
                   .run = mc_run, .add = mc_add, .ctx = &m, .pre = pre};
    ru_error err;
    ru_error_clear(&err);
    if (ru_mc_result_create(c, &m.o, &m.r, &err) != RU_OK)
        rc = cli_fail(&err);
    else if (!cli_study_add_arg(&s, file) || !cli_study_add_args(&s, opts, study_names))
        rc = 2;
    else
        rc = cli_study_options(opts, &s);
    if (rc == 0)
        rc = cli_study_run(&s);
    if (rc == 0 && !s.worker) {
        if (s.shard_n > 1)
            cli_study_shard_summary(&s);
        else
            rc = report(&plots, &m, json);
        int fin = cli_study_finish(&s);
        rc = fin ? fin : rc;
    }
    cli_study_free(&s);
    ru_mc_result_destroy(m.r);
    ru_circuit_destroy(c);
    return rc;
}

int cmd_montecarlo(int argc, char **argv)
{
    return cli_study_main(argc, argv, cli_montecarlo_study);
}
