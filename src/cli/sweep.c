/* sweep.c: `ringup sweep FILE --vary PART.KEY=LO:HI:N [--log]`: the same circuit at
 * N values of one part's key, analysed in parallel; one table row (or JSON entry)
 * per value. A value the part refuses (a negative resistance) or a run that fails
 * is reported in its row and does not stop the others. */
#include "cli/cli.h"

#include "ringup/batch.h"
#include "ringup/format.h"
#include "ringup/json.h"
#include "ringup/params.h"
#include "ringup/plot.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

typedef struct point {
    double value;         /* the key's value (its unit; % keys as a fraction) */
    char label[32];       /* the value as shown ("10.0 kohm") */
    ru_circuit *circuit;  /* the variant; NULL when it could not be made */
    ru_run_data *data;    /* kept for pictures, or NULL */
    char out[1024];       /* --out: this variant's folder for wave.csv */
} point;

/* The key's value for people: SI prefix and unit, % keys in percent. */
static void format_value(double v, const char *unit, char *buf, size_t size)
{
    if (!strcmp(unit, "%"))
        snprintf(buf, size, "%.4g %%", 100.0 * v);
    else if (!unit[0])
        snprintf(buf, size, "%.6g", v);
    else
        ru_format_si(v, unit, 4, buf, size);
}

static void cell_rate(double v, char *buf, size_t size)
{
    if (isfinite(v))
        snprintf(buf, size, "%.4g /s", v);
    else
        snprintf(buf, size, "-");
}

static void print_row(const point *p, const ru_batch_item *it)
{
    if (it->status != RU_OK) {
        char msg[RU_ERROR_TEXT + RU_ERROR_FILE + 32];
        ru_error_format(&it->error, msg, sizeof msg);
        printf("  %-12s error: %s\n", p->label, msg);
        return;
    }
    const ru_measure_result *m = &it->report.meas;
    const ru_prediction *pr = &it->report.pred;
    char a[24], b[24], b2[24], c[24], d[24], e[24], f[24];
    ru_format_si(m->startup_time_s, "s", 4, a, sizeof a);
    cell_rate(m->growth_rate_per_s, b, sizeof b);
    cell_rate(pr->have_poles ? pr->growth_rate_per_s : NAN, b2, sizeof b2);
    ru_format_si(m->frequency_hz, "Hz", 4, c, sizeof c);
    ru_format_si(m->settled_amplitude_v, "V", 4, d, sizeof d);
    ru_format_si(pr->settled_amplitude_v, "V", 4, e, sizeof e);
    if (isfinite(m->thd_percent))
        snprintf(f, sizeof f, "%.3g", m->thd_percent);
    else
        snprintf(f, sizeof f, "-");
    printf("  %-12s %-8s %-8s %-11s %-11s %-11s %-12s %-10s %-10s %s\n", p->label,
           m->started ? "yes" : "no", m->settled ? "yes" : "no", a, b, b2, c, d, e, f);
}

static void print_table(const ru_circuit *c, const ru_sweep_spec *s, const point *p,
                        const ru_batch_item *items)
{
    printf("%s: %s\n%s from %s to %s, %zu %s points, same circuit otherwise\n\n",
           ru_circuit_file(c), ru_circuit_title(c), s->param, p[0].label,
           p[s->n - 1].label, s->n, s->log ? "geometric" : "linear");
    printf("  %-12s %-8s %-8s %-11s %-11s %-11s %-12s %-10s %-10s %s\n", "value", "started",
           "settled", "start-up", "growth", "predicted", "frequency", "amplitude", "predicted",
           "THD %");
    for (size_t i = 0; i < s->n; i++)
        print_row(&p[i], &items[i]);
    for (size_t i = 0; i < s->n; i++)
        for (int k = 0; k < items[i].report.nnotes && items[i].status == RU_OK; k++)
            printf("note (%s): %s\n", p[i].label, items[i].report.notes[k]);
}

static void print_json(const ru_sweep_spec *s, const point *p, const ru_batch_item *items)
{
    ru_json j;
    ru_json_init(&j, stdout, 1);
    ru_json_begin_object(&j, NULL);
    ru_json_string(&j, "vary", s->param);
    ru_json_string(&j, "unit", !strcmp(s->unit, "%") ? "fraction" : s->unit);
    ru_json_bool(&j, "log", s->log);
    ru_json_begin_array(&j, "results");
    for (size_t i = 0; i < s->n; i++) {
        ru_json_begin_object(&j, NULL);
        ru_json_number(&j, "value", p[i].value);
        cli_json_item(&j, &items[i]);
        ru_json_end_object(&j);
    }
    ru_json_end_array(&j);
    ru_json_end_object(&j);
    ru_json_finish(&j);
}


/* Makes every variant; one that cannot be made keeps its error in its item. */
static int prepare(const ru_circuit *c, const ru_sweep_spec *s, point *p,
                   ru_batch_item *items, const ru_run_request *rq, int keep,
                   const char *out_dir)
{
    for (size_t i = 0; i < s->n; i++) {
        p[i].value = ru_sweep_value(s, i);
        format_value(p[i].value, s->unit, p[i].label, sizeof p[i].label);
        items[i].request = *rq;
        if (out_dir) { /* DIR/03-12.60_mH/wave.csv */
            char name[64];
            snprintf(name, sizeof name, "%02zu-%s", i, p[i].label);
            int rc = cli_variant_dir(out_dir, name, p[i].out, sizeof p[i].out);
            if (rc)
                return rc;
            items[i].request.out_dir = p[i].out;
        }
        items[i].status = ru_sweep_variant(c, s, i, &p[i].circuit, &items[i].error);
        if (items[i].status != RU_OK)
            continue;
        if (keep && ru_run_data_create(&p[i].data) == RU_OK)
            items[i].request.keep = p[i].data;
        items[i].circuit = p[i].circuit;
    }
    return 0;
}

static void free_points(point *p, size_t n)
{
    for (size_t i = 0; p && i < n; i++) {
        ru_circuit_destroy(p[i].circuit);
        ru_run_data_destroy(p[i].data);
    }
    free(p);
}

/* Options into the request and thread count; 0 or an exit status. */
static int read_run_opts(const cli_opt *opts, ru_run_request *rq, double *threads)
{
    ru_run_request_default(rq);
    unsigned long long n = 0;
    if (!cli_stop(opts, rq) || !cli_int(opts, "threads", 1, RU_CLI_THREADS_MAX, &n))
        return 1;
    *threads = (double)n;
    return cli_accuracy(opts, &rq->accuracy);
}

int cmd_sweep(int argc, char **argv)
{
    cli_opt opts[] = {{"vary", "PART.KEY=LO:HI:N", "the value to sweep, e.g. R1.value=8k:12k:5",
                       NULL},
                      {"out", "DIR", "write DIR/NN-VALUE/wave.csv for every value", NULL},
                      {"log", NULL, "geometric spacing between LO and HI", NULL},
                      {"stop", "T", "run length, or auto (default: the file's)", NULL},
                      {"accuracy", "LEVEL", "draft, normal or precise", NULL},
                      {"threads", "N", "parallel runs (default: one per processor)", NULL},
                      {"json", NULL, "print JSON on stdout (keys in README)", NULL},
                      CLI_PLOT_OPTS,
                      {NULL, NULL, NULL, NULL}};
    const char *file;
    int rc = cli_parse(argc, argv, "ringup sweep FILE --vary PART.KEY=LO:HI:N [options]",
                       "Runs the circuit at N values of one part's key (same key names and "
                       "units as the\ncircuit file), in parallel over the processors, and "
                       "prints one row per value:\nstarted, start-up time, growth rate "
                       "(measured and predicted), frequency, settled\namplitude (measured "
                       "and predicted) and THD.",
                       opts, &file);
    if (rc >= 0)
        return rc;
    const char *vary = cli_get(opts, "vary");
    if (!vary) {
        fprintf(stderr, "ringup sweep: --vary PART.KEY=LO:HI:N is required\n");
        return 1;
    }
    ru_run_request rq;
    double threads;
    cli_plot_req plots;
    if ((rc = read_run_opts(opts, &rq, &threads)) != 0 ||
        (rc = cli_plot_check(opts, &plots)) != 0)
        return rc;
    ru_circuit *c = NULL;
    if ((rc = cli_load(file, cli_get(opts, "json") != NULL, &c)) != 0)
        return rc;
    ru_sweep_spec s;
    ru_error err;
    ru_error_clear(&err);
    if (ru_sweep_parse(c, vary, cli_get(opts, "log") != NULL, &s, &err) != RU_OK) {
        fprintf(stderr, "ringup sweep: --vary: %s\n", err.msg);
        ru_circuit_destroy(c);
        return 1;
    }
    point *p = calloc(s.n, sizeof *p);
    ru_batch_item *items = calloc(s.n, sizeof *items);
    rc = 2;
    if (p && items) {
        int prc = prepare(c, &s, p, items, &rq, plots.dir || plots.report,
                          cli_get(opts, "out"));
        if (prc) {
            rc = prc;
        } else {
            /* every item runs, in threads or one after another; variants that could
             * not be made keep their status (ru_batch_run skips them) */
            ru_batch_run(items, s.n, (int)threads);
            int json = cli_get(opts, "json") != NULL;
            if (json)
                print_json(&s, p, items);
            cli_capture cap; /* the text for the report, on the terminal unless --json */
            cli_capture_begin(&cap, plots.report != NULL, !json);
            if (cli_capture_printing(&cap))
                print_table(c, &s, p, items);
            char *text = cli_capture_end(&cap);
            /* figure legends name the key with each value: "L1.value = 5.000 mH" */
            const char **labels = calloc(s.n, sizeof *labels);
            char (*named)[RU_PARAM_NAME_MAX + 40] = calloc(s.n, sizeof *named);
            for (size_t i = 0; labels && named && i < s.n; i++) {
                snprintf(named[i], sizeof named[i], "%s = %s", s.param, p[i].label);
                labels[i] = named[i];
            }
            rc = labels && named ? cli_plot_items(&plots, c, items, s.n, labels, text) : 2;
            free(labels);
            free(named);
            free(text);
        }
    }
    if (rc == 2)
        fprintf(stderr, "ringup sweep: out of memory\n");
    free_points(p, s.n);
    free(items);
    ru_circuit_destroy(c);
    return rc;
}
