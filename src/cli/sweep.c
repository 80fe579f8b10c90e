/* sweep.c: `ringup sweep FILE --vary PART.KEY=LO:HI:N [--vary ...] [--log]`: the
 * same circuit at N values of one part's key, or on the grid of several keys (the
 * first key varies slowest), analysed in parallel as a study of numbered units
 * (cli.h, "batch studies": --out, --resume, --shard, merge, MPI); one table row
 * (or JSON entry) per point. A value the part refuses (a negative resistance) or a
 * run that fails is reported in its row and does not stop the others. */
#include "cli/cli.h"

#include "ringup/batch.h"
#include "ringup/format.h"
#include "ringup/json.h"
#include "ringup/params.h"
#include "ringup/plot.h"
#include "ringup/units.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define GRID_MAX 4        /* most --vary keys */
#define GRID_UNITS 4000   /* most points of a grid */

typedef struct point {
    char label[GRID_MAX][32]; /* each key's value as shown ("10.0 kohm") */
    ru_run_data *data;        /* kept for pictures, or NULL */
    int ran;                  /* 1: run in this process (data filled) */
} point;

typedef struct sweep_ctx {
    const ru_circuit *c;
    size_t naxes;
    ru_sweep_spec ax[GRID_MAX];
    size_t n;                 /* points (units) */
    ru_run_request rq;
    const char *out_dir;      /* --out: DIR/NN-VALUE/wave.csv per point */
    point *p;
    ru_batch_item *items;     /* filled from the records */
    unsigned char *have;      /* 1: the point's record is in */
    size_t done;
} sweep_ctx;

/* The index of unit i along axis a (the first axis varies slowest). */
static size_t coord(const sweep_ctx *x, size_t i, size_t a)
{
    size_t stride = 1;
    for (size_t b = a + 1; b < x->naxes; b++)
        stride *= x->ax[b].n;
    return i / stride % x->ax[a].n;
}

static double axis_value(const sweep_ctx *x, size_t i, size_t a)
{
    return ru_sweep_value(&x->ax[a], coord(x, i, a));
}

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

static void print_labels(const sweep_ctx *x, size_t i)
{
    printf(" ");
    for (size_t a = 0; a < x->naxes; a++)
        printf(" %-12s", x->p[i].label[a]);
}

static void print_row(const sweep_ctx *x, size_t i)
{
    const ru_batch_item *it = &x->items[i];
    print_labels(x, i);
    if (it->status != RU_OK) {
        char msg[RU_ERROR_TEXT + RU_ERROR_FILE + 32];
        ru_error_format(&it->error, msg, sizeof msg);
        printf(" error: %s\n", msg);
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
    printf(" %-8s %-8s %-11s %-11s %-11s %-12s %-10s %-10s %s\n", m->started ? "yes" : "no",
           m->settled ? "yes" : "no", a, b, b2, c, d, e, f);
}

/* "k" of a row's notes: its values joined. */
static void row_name(const sweep_ctx *x, size_t i, char *buf, size_t size)
{
    size_t len = 0;
    buf[0] = '\0';
    for (size_t a = 0; a < x->naxes && len < size; a++)
        len += (size_t)snprintf(buf + len, size - len, "%s%s", a ? ", " : "", x->p[i].label[a]);
}

static void print_table(const sweep_ctx *x)
{
    const ru_circuit *c = x->c;
    printf("%s: %s\n", ru_circuit_file(c), ru_circuit_title(c));
    for (size_t a = 0; a < x->naxes; a++) {
        const ru_sweep_spec *s = &x->ax[a];
        char lo[32], hi[32];
        format_value(s->lo, s->unit, lo, sizeof lo);
        format_value(s->hi, s->unit, hi, sizeof hi);
        printf("%s from %s to %s, %zu %s points%s\n", s->param, lo, hi, s->n,
               s->log ? "geometric" : "linear",
               a + 1 < x->naxes ? "" : ", same circuit otherwise");
    }
    if (x->done < x->n)
        printf("%zu of the %zu points done\n", x->done, x->n);
    printf("\n ");
    for (size_t a = 0; a < x->naxes; a++)
        printf(" %-12s", x->naxes == 1 ? "value" : x->ax[a].param);
    printf(" %-8s %-8s %-11s %-11s %-11s %-12s %-10s %-10s %s\n", "started", "settled",
           "start-up", "growth", "predicted", "frequency", "amplitude", "predicted", "THD %");
    for (size_t i = 0; i < x->n; i++)
        if (x->have[i])
            print_row(x, i);
    for (size_t i = 0; i < x->n; i++) {
        const ru_batch_item *it = &x->items[i];
        char name[160];
        row_name(x, i, name, sizeof name);
        for (int k = 0; x->have[i] && k < it->report.nnotes && it->status == RU_OK; k++)
            printf("note (%s): %s\n", name, it->report.notes[k]);
    }
}

static void print_json(const sweep_ctx *x)
{
    ru_json j;
    ru_json_init(&j, stdout, 1);
    ru_json_begin_object(&j, NULL);
    const ru_sweep_spec *s0 = &x->ax[0];
    ru_json_string(&j, "vary", s0->param);
    ru_json_string(&j, "unit", !strcmp(s0->unit, "%") ? "fraction" : s0->unit);
    ru_json_bool(&j, "log", s0->log);
    ru_json_begin_array(&j, "grid");
    for (size_t a = 0; a < x->naxes; a++) {
        const ru_sweep_spec *s = &x->ax[a];
        ru_json_begin_object(&j, NULL);
        ru_json_string(&j, "vary", s->param);
        ru_json_string(&j, "unit", !strcmp(s->unit, "%") ? "fraction" : s->unit);
        ru_json_bool(&j, "log", s->log);
        ru_json_int(&j, "points", (long)s->n);
        ru_json_end_object(&j);
    }
    ru_json_end_array(&j);
    ru_json_int(&j, "units_done", (long)x->done);
    ru_json_begin_array(&j, "results");
    for (size_t i = 0; i < x->n; i++) {
        if (!x->have[i])
            continue;
        ru_json_begin_object(&j, NULL);
        ru_json_number(&j, "value", axis_value(x, i, 0));
        ru_json_begin_array(&j, "values");
        for (size_t a = 0; a < x->naxes; a++)
            ru_json_number(&j, NULL, axis_value(x, i, a));
        ru_json_end_array(&j);
        cli_json_item(&j, &x->items[i]);
        ru_json_end_object(&j);
    }
    ru_json_end_array(&j);
    ru_json_end_object(&j);
    ru_json_finish(&j);
}

/* The variant of unit i: a clone with every key at its point. */
static ru_status make_variant(const sweep_ctx *x, size_t i, ru_circuit **out, ru_error *err)
{
    ru_status st = ru_sweep_variant(x->c, &x->ax[0], coord(x, i, 0), out, err);
    for (size_t a = 1; st == RU_OK && a < x->naxes; a++)
        st = ru_circuit_set_param(*out, x->ax[a].param, axis_value(x, i, a), err);
    if (st != RU_OK) {
        ru_circuit_destroy(*out);
        *out = NULL;
    }
    return st;
}

/* Unit i: its folder for --out (DIR/03-12.60_mH), its variant, its run, its record. */
static ru_status sweep_run(void *ctx, size_t i, char **line, ru_error *err)
{
    sweep_ctx *x = ctx;
    ru_batch_item it;
    memset(&it, 0, sizeof it);
    it.request = x->rq;
    char dir[4200];
    if (x->out_dir) {
        char name[200];
        size_t len = (size_t)snprintf(name, sizeof name, "%02zu", i);
        for (size_t a = 0; a < x->naxes && len < sizeof name; a++)
            len += (size_t)snprintf(name + len, sizeof name - len, "-%s", x->p[i].label[a]);
        if (cli_variant_dir(x->out_dir, name, dir, sizeof dir) != 0)
            it.status = ru_error_set(&it.error, RU_EIO, x->out_dir, 0, 0,
                                     "cannot create the folder %s", name);
        it.request.out_dir = dir;
    }
    ru_circuit *v = NULL;
    if (it.status == RU_OK)
        it.status = make_variant(x, i, &v, &it.error);
    if (v) {
        it.circuit = v;
        it.request.keep = x->p[i].data;
        ru_batch_run(&it, 1, 1);
        x->p[i].ran = x->p[i].data != NULL;
    }
    ru_circuit_destroy(v);
    if (it.status == RU_ESTOPPED)
        return RU_ESTOPPED;
    double vals[GRID_MAX];
    for (size_t a = 0; a < x->naxes; a++)
        vals[a] = axis_value(x, i, a);
    if (ru_unit_record_of_item(i, &it, "values", vals, x->naxes, line) != RU_OK)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "sweep: out of memory");
    return RU_OK;
}

static ru_status sweep_add(void *ctx, const char *line, int *failed, ru_error *err)
{
    sweep_ctx *x = ctx;
    size_t i;
    ru_batch_item it;
    ru_status st = ru_unit_item_of_record(line, &i, &it, err);
    if (st != RU_OK)
        return st;
    if (i >= x->n || x->have[i])
        return ru_error_set(err, RU_EINPUT, NULL, 0, 0, "unit %zu is %s", i,
                            i >= x->n ? "beyond the sweep's points" : "there twice");
    ru_batch_item *dst = &x->items[i];
    dst->status = it.status;
    dst->error = it.error;
    dst->report = it.report;
    dst->request.keep = x->p[i].ran ? x->p[i].data : NULL;
    x->have[i] = 1;
    x->done++;
    *failed = it.status != RU_OK;
    return RU_OK;
}

/* Every --vary of the command line, in order. */
static size_t vary_args(int argc, char **argv, const char **out)
{
    size_t n = 0;
    for (int i = 1; i < argc && n <= GRID_MAX; i++) {
        if (!strncmp(argv[i], "--vary=", 7))
            out[n++] = argv[i] + 7;
        else if (!strcmp(argv[i], "--vary") && i + 1 < argc)
            out[n++] = argv[++i];
    }
    return n;
}

static int read_run_opts(const cli_opt *opts, ru_run_request *rq)
{
    ru_run_request_default(rq);
    unsigned long long threads = 0; /* checked here to be refused first; kept by the study */
    if (!cli_stop(opts, rq) || !cli_int(opts, "threads", 1, RU_CLI_THREADS_MAX, &threads))
        return 1;
    return cli_accuracy(opts, &rq->accuracy);
}

/* The axes from the --vary texts and the points' labels; 0 or an exit status. */
static int setup(sweep_ctx *x, const char **vary, size_t nv, int log, int keep)
{
    ru_error err;
    ru_error_clear(&err);
    x->naxes = nv;
    x->n = 1;
    for (size_t a = 0; a < nv; a++) {
        if (ru_sweep_parse(x->c, vary[a], log, &x->ax[a], &err) != RU_OK) {
            fprintf(stderr, "ringup sweep: --vary: %s\n", err.msg);
            return 1;
        }
        for (size_t b = 0; b < a; b++)
            if (!strcmp(x->ax[a].param, x->ax[b].param)) {
                fprintf(stderr, "ringup sweep: --vary %s is given twice\n", x->ax[a].param);
                return 1;
            }
        x->n *= x->ax[a].n;
    }
    if (x->n > GRID_UNITS) {
        fprintf(stderr, "ringup sweep: the grid has %zu points, at most %d are allowed\n",
                x->n, GRID_UNITS);
        return 1;
    }
    x->p = calloc(x->n, sizeof *x->p);
    x->items = calloc(x->n, sizeof *x->items);
    x->have = calloc(x->n, 1);
    if (!x->p || !x->items || !x->have) {
        fprintf(stderr, "ringup sweep: out of memory\n");
        return 2;
    }
    for (size_t i = 0; i < x->n; i++) {
        for (size_t a = 0; a < nv; a++)
            format_value(axis_value(x, i, a), x->ax[a].unit, x->p[i].label[a],
                         sizeof x->p[i].label[a]);
        if (keep && ru_run_data_create(&x->p[i].data) != RU_OK)
            return 2;
    }
    return 0;
}

static void free_ctx(sweep_ctx *x)
{
    for (size_t i = 0; x->p && i < x->n; i++)
        ru_run_data_destroy(x->p[i].data);
    free(x->p);
    free(x->items);
    free(x->have);
}

static int report(const sweep_ctx *x, const cli_plot_req *plots, int json)
{
    if (json)
        print_json(x);
    cli_capture cap; /* the text for the report, on the terminal unless --json */
    cli_capture_begin(&cap, plots->report != NULL, !json);
    if (cli_capture_printing(&cap))
        print_table(x);
    char *text = cli_capture_end(&cap);
    /* figure legends name each key with its value: "L1.value = 5.000 mH" */
    const char **labels = calloc(x->n, sizeof *labels);
    char (*names)[GRID_MAX * (RU_PARAM_NAME_MAX + 40)] = calloc(x->n, sizeof *names);
    int rc = labels && names ? 0 : 2;
    for (size_t i = 0; rc == 0 && i < x->n; i++) {
        size_t len = 0;
        for (size_t a = 0; a < x->naxes && len < sizeof names[i]; a++)
            len += (size_t)snprintf(names[i] + len, sizeof names[i] - len, "%s%s = %s",
                                    a ? ", " : "", x->ax[a].param, x->p[i].label[a]);
        labels[i] = names[i];
    }
    if (rc == 0)
        rc = cli_plot_items(plots, x->c, x->items, x->n, labels, text);
    free(labels);
    free(names);
    free(text);
    return rc;
}

static const char *const study_names[] = {"log", "stop", "accuracy", "temp", "shard", NULL};

int cli_sweep_study(int argc, char **argv, cli_pre *pre)
{
    cli_opt opts[] = {{"vary", "PART.KEY=LO:HI:N", "the value to sweep, e.g. R1.value=8k:12k:5; "
                       "several make a grid", NULL},
                      {"log", NULL, "geometric spacing between LO and HI (every key)", NULL},
                      {"stop", "T", "run length, or auto (default: the file's)", NULL},
                      {"accuracy", "LEVEL", "draft, normal or precise", NULL},
                      CLI_TEMP_OPT,
                      CLI_STUDY_OPTS,
                      {"json", NULL, "print JSON on stdout (keys in README)", NULL},
                      CLI_PLOT_OPTS,
                      {NULL, NULL, NULL, NULL}};
    const char *file;
    int rc = cli_parse(argc, argv, "ringup sweep FILE --vary PART.KEY=LO:HI:N [options]",
                       "Runs the circuit at N values of one part's key (same key names and "
                       "units as the\ncircuit file), or on the grid of several --vary keys, "
                       "in parallel over the processors,\nand prints one row per point: "
                       "started, start-up time, growth rate (measured and\npredicted), "
                       "frequency, settled amplitude (measured and predicted) and THD.\n"
                       "--out DIR also writes DIR/NN-VALUE/wave.csv for every point.",
                       opts, &file);
    if (rc >= 0)
        return rc;
    const char *vary[GRID_MAX + 1];
    size_t nv = vary_args(argc, argv, vary);
    if (nv == 0 || nv > GRID_MAX) {
        fprintf(stderr, nv ? "ringup sweep: at most %d --vary keys\n"
                           : "ringup sweep: --vary PART.KEY=LO:HI:N is required\n",
                GRID_MAX);
        return 1;
    }
    sweep_ctx x;
    memset(&x, 0, sizeof x);
    cli_plot_req plots;
    int json = cli_get(opts, "json") != NULL;
    if ((rc = read_run_opts(opts, &x.rq)) != 0 || (rc = cli_plot_check(opts, &plots)) != 0)
        return rc;
    ru_circuit *c = NULL;
    if ((rc = cli_load(file, json || pre->mpi_rank > 0, &c)) != 0)
        return rc;
    if ((rc = cli_temp(opts, c)) != 0) {
        ru_circuit_destroy(c);
        return rc;
    }
    x.c = c;
    x.rq.stop = cli_study_stop_flag();
    cli_study s = {.command = "sweep", .file = file, .json = json, .run = sweep_run,
                   .add = sweep_add, .ctx = &x, .pre = pre};
    rc = setup(&x, vary, nv, cli_get(opts, "log") != NULL, plots.dir || plots.report);
    if (rc == 0 && !cli_study_add_arg(&s, file))
        rc = 2;
    for (size_t a = 0; rc == 0 && a < nv; a++) {
        char arg[300];
        snprintf(arg, sizeof arg, "--vary=%s", vary[a]);
        if (!cli_study_add_arg(&s, arg))
            rc = 2;
    }
    if (rc == 0 && !cli_study_add_args(&s, opts, study_names))
        rc = 2;
    if (rc == 0)
        rc = cli_study_options(opts, &s);
    x.out_dir = s.out_dir;
    s.count = x.n;
    if (rc == 0)
        rc = cli_study_run(&s);
    if (rc == 0 && !s.worker) {
        if (s.shard_n > 1)
            cli_study_shard_summary(&s);
        else
            rc = report(&x, &plots, json);
        int fin = cli_study_finish(&s);
        rc = fin ? fin : rc;
    }
    cli_study_free(&s);
    free_ctx(&x);
    ru_circuit_destroy(c);
    return rc;
}

int cmd_sweep(int argc, char **argv)
{
    return cli_study_main(argc, argv, cli_sweep_study);
}
