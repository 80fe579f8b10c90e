/* compare.c: `ringup compare FILE --part A1 --models a,b,c`: the same circuit with
 * each model in one part, analysed in parallel; one table (or JSON) of the figures.
 * A model that fails is reported in its row and does not stop the others. */
#include "cli/cli.h"

#include "ringup/batch.h"
#include "ringup/format.h"
#include "ringup/json.h"
#include "ringup/loader.h"
#include "ringup/plot.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define MAX_MODELS 64

typedef struct variant {
    char model[RU_NAME_MAX];
    ru_circuit *circuit;  /* clone with the model applied; NULL when that failed */
    ru_run_data *data;    /* kept for pictures, or NULL */
    char out[1024];       /* --out: this model's folder for wave.csv */
} variant;

static int split_models(const char *list, variant *v, size_t *n)
{
    *n = 0;
    const char *p = list;
    while (*p) {
        const char *q = strchr(p, ',');
        size_t len = q ? (size_t)(q - p) : strlen(p);
        if (len == 0 || len >= RU_NAME_MAX || *n == MAX_MODELS) {
            fprintf(stderr, "ringup compare: --models wants names separated by commas "
                            "(at most %d, each shorter than %d characters)\n",
                    MAX_MODELS, RU_NAME_MAX);
            return 0;
        }
        memcpy(v[*n].model, p, len);
        v[*n].model[len] = '\0';
        for (size_t k = 0; k < *n; k++)
            if (!strcmp(v[k].model, v[*n].model)) {
                fprintf(stderr, "ringup compare: --models names %s twice\n", v[k].model);
                return 0;
            }
        (*n)++;
        p += len + (q ? 1 : 0);
    }
    return *n > 0;
}

static void cell_si(double v, const char *unit, char *buf, size_t size)
{
    ru_format_si(v, unit, 4, buf, size);
}

static void add_row(cli_table *t, const variant *v, const ru_batch_item *it)
{
    if (it->status != RU_OK) {
        char msg[RU_ERROR_TEXT + RU_ERROR_FILE + 32], text[sizeof msg + 8];
        ru_error_format(&it->error, msg, sizeof msg);
        snprintf(text, sizeof text, "error: %s", msg);
        cli_table_add_text(t, v->model, text);
        return;
    }
    const ru_measure_result *m = &it->report.meas;
    const ru_prediction *p = &it->report.pred;
    char a[24], b[24], c[24], d[24], e[24], f[24], g[24], h[24];
    cell_si(m->startup_time_s, "s", a, sizeof a);
    cell_si(m->frequency_hz, "Hz", c, sizeof c);
    cell_si(m->settled_amplitude_v, "V", d, sizeof d);
    cell_si(p->settled_amplitude_v, "V", e, sizeof e);
    if (isfinite(m->growth_rate_per_s))
        snprintf(b, sizeof b, "%.4g /s", m->growth_rate_per_s);
    else
        snprintf(b, sizeof b, "-");
    int thd = isfinite(m->thd_percent);
    snprintf(f, sizeof f, thd ? "%.3g" : "-", m->thd_percent);
    snprintf(g, sizeof g, thd ? "%.1f" : "-", m->harmonics_dbc[0]);
    snprintf(h, sizeof h, thd ? "%.1f" : "-", m->harmonics_dbc[1]);
    const char *row[] = {v->model, m->started ? "yes" : "no", m->settled ? "yes" : "no",
                         a, b, c, d, e, f, g, h};
    cli_table_add(t, row);
}

static void print_table(const ru_circuit *c, const char *part, const variant *v,
                        const ru_batch_item *items, size_t n)
{
    static const char *const head[] = {"model", "started", "settled", "start-up",
                                       "growth", "frequency", "amplitude", "predicted",
                                       "THD %", "HD2 dB", "HD3 dB"};
    printf("%s: %s\nmodels in part %s, same circuit otherwise\n\n", ru_circuit_file(c),
           ru_circuit_title(c), part);
    cli_table t;
    cli_table_init(&t, sizeof head / sizeof head[0]);
    cli_table_add(&t, head);
    for (size_t i = 0; i < n; i++)
        add_row(&t, &v[i], &items[i]);
    cli_table_print(&t, stdout, "  ");
    cli_table_free(&t);
    for (size_t i = 0; i < n; i++)
        for (int k = 0; k < items[i].report.nnotes && items[i].status == RU_OK; k++)
            printf("note (%s): %s\n", v[i].model, items[i].report.notes[k]);
}

static void print_json(const char *part, const variant *v, const ru_batch_item *items,
                       size_t n)
{
    ru_json j;
    ru_json_init(&j, stdout, 1);
    ru_json_begin_object(&j, NULL);
    ru_json_string(&j, "part", part);
    ru_json_begin_array(&j, "results");
    for (size_t i = 0; i < n; i++) {
        ru_json_begin_object(&j, NULL);
        ru_json_string(&j, "model", v[i].model);
        cli_json_item(&j, &items[i]);
        ru_json_end_object(&j);
    }
    ru_json_end_array(&j);
    ru_json_end_object(&j);
    ru_json_finish(&j);
}

/* Clones the circuit with each model applied to the part; a failure goes into the
 * item (its row), not to the caller. */
static void prepare(const ru_circuit *c, const char *part, variant *v, ru_batch_item *it,
                    const ru_run_request *rq, int keep, const char *out_dir)
{
    it->request = *rq;
    if (ru_circuit_clone(c, &v->circuit) != RU_OK) {
        it->status = ru_error_set(&it->error, RU_ENOMEM, NULL, 0, 0, "out of memory");
        return;
    }
    if (ru_circuit_apply_model(v->circuit, part, v->model, NULL, &it->error) != RU_OK) {
        it->status = it->error.code ? it->error.code : RU_EINPUT;
        ru_circuit_destroy(v->circuit);
        v->circuit = NULL;
        return;
    }
    if (keep && ru_run_data_create(&v->data) == RU_OK)
        it->request.keep = v->data;
    if (out_dir) { /* DIR/MODEL/wave.csv */
        int rc = cli_variant_dir(out_dir, v->model, v->out, sizeof v->out);
        if (rc) {
            it->status = ru_error_set(&it->error, RU_EIO, out_dir, 0, 0,
                                      "cannot create the folder for model %s", v->model);
            ru_circuit_destroy(v->circuit);
            v->circuit = NULL;
            return;
        }
        it->request.out_dir = v->out;
    }
    it->circuit = v->circuit;
}

int cmd_compare(int argc, char **argv)
{
    cli_opt opts[] = {{"part", "PART", "the amplifier (or diode, thermal resistor) to vary",
                       NULL},
                      {"models", "A,B,C", "presets to put in that part", NULL},
                      {"out", "DIR", "write DIR/MODEL/wave.csv for every model", NULL},
                      {"stop", "T", "run length, or auto (default: the file's)", NULL},
                      {"accuracy", "LEVEL", "draft, normal or precise", NULL},
                      {"threads", "N", "parallel runs (default: one per processor)", NULL},
                      {"json", NULL, "print JSON on stdout (keys in README)", NULL},
                      CLI_PLOT_OPTS,
                      {NULL, NULL, NULL, NULL}};
    const char *file;
    int rc = cli_parse(argc, argv, "ringup compare FILE --part PART --models A,B,C [options]",
                       "Runs the same circuit once per model in one part, in parallel over "
                       "the processors,\nand prints start-up, growth, frequency, settled "
                       "amplitude (measured and predicted),\nTHD, HD2 and HD3 side by side.",
                       opts, &file);
    if (rc >= 0)
        return rc;
    const char *part = cli_get(opts, "part"), *list = cli_get(opts, "models");
    variant v[MAX_MODELS];
    size_t n = 0;
    memset(v, 0, sizeof v);
    if (!part || !list) {
        fprintf(stderr, "ringup compare: --part and --models are required\n");
        return 1;
    }
    if (!split_models(list, v, &n))
        return 1;
    ru_run_request rq;
    ru_run_request_default(&rq);
    unsigned long long threads = 0;
    if (!cli_stop(opts, &rq) || !cli_int(opts, "threads", 1, RU_CLI_THREADS_MAX, &threads))
        return 1;
    if (cli_accuracy(opts, &rq.accuracy) != 0)
        return 1;
    cli_plot_req plots;
    if ((rc = cli_plot_check(opts, &plots)) != 0)
        return rc;
    ru_circuit *c = NULL;
    if ((rc = cli_load(file, cli_get(opts, "json") != NULL, &c)) != 0)
        return rc;
    ru_batch_item *items = calloc(n, sizeof *items);
    if (!items) {
        ru_circuit_destroy(c);
        return 2;
    }
    rq.stop = cli_stop_flag(); /* Ctrl-C: every run stops, temporary files go */
    for (size_t i = 0; i < n; i++)
        prepare(c, part, &v[i], &items[i], &rq, plots.dir || plots.report,
                cli_get(opts, "out"));
    /* items whose preparation failed keep their status; ru_batch_run skips them */
    struct sigaction old_sig[2];
    cli_catch_signals(1, old_sig);
    ru_batch_run(items, n, (int)threads);
    cli_catch_signals(0, old_sig);
    int sig = cli_stop_signal();
    if (sig) {
        fprintf(stderr, "ringup compare: stopped by %s; no unfinished file was kept\n",
                sig == SIGINT ? "SIGINT (Ctrl-C)" : "SIGTERM");
        for (size_t i = 0; i < n; i++) {
            ru_circuit_destroy(v[i].circuit);
            ru_run_data_destroy(v[i].data);
        }
        free(items);
        ru_circuit_destroy(c);
        return 128 + sig;
    }
    int json = cli_get(opts, "json") != NULL;
    if (json)
        print_json(part, v, items, n);
    cli_capture cap; /* the text for the report, on the terminal unless --json */
    cli_capture_begin(&cap, plots.report != NULL, !json);
    if (cli_capture_printing(&cap))
        print_table(c, part, v, items, n);
    char *text = cli_capture_end(&cap);
    const char *labels[MAX_MODELS];
    for (size_t i = 0; i < n; i++)
        labels[i] = v[i].model;
    rc = cli_plot_items(&plots, c, items, n, labels, text);
    free(text);
    size_t failed = 0;
    for (size_t i = 0; i < n; i++)
        failed += items[i].status != RU_OK;
    if (rc == 0 && failed == n)
        rc = 2; /* no model gave a run: a failure, never a result */
    for (size_t i = 0; i < n; i++) {
        ru_circuit_destroy(v[i].circuit);
        ru_run_data_destroy(v[i].data);
    }
    free(items);
    ru_circuit_destroy(c);
    return rc;
}
