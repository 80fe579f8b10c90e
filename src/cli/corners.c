/* corners.c: `ringup corners FILE`: the circuit at every combination of its
 * corner factors (ringup/corners.h: the file's corners: section, or every
 * toleranced value at its two ends), analysed in parallel as a study of numbered
 * units (cli.h, "batch studies": --out, --resume, --shard, merge, MPI; unit 0 is
 * the nominal circuit), and the worst case of each figure with the corner that
 * caused it. A corner that fails is reported and does not stop the others. */
#include "cli/cli.h"

#include "ringup/batch.h"
#include "ringup/corners.h"
#include "ringup/format.h"
#include "ringup/json.h"
#include "ringup/units.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define TABLE_ROWS 64 /* corners listed in the text table (all of them in JSON) */

typedef struct corners_ctx {
    const ru_circuit *c;
    ru_corners *k;
    size_t n;                 /* units: nominal + corners */
    ru_run_request rq;
    ru_batch_item *items;     /* filled from the records */
    unsigned char *have;      /* 1: the unit's record is in */
    size_t done;
} corners_ctx;

/* The worst cases the report names: figure, which end is worst, its label. */
typedef struct worst_def {
    int fig;         /* 0 start-up, 1 growth, 2 frequency, 3 amplitude, 4 THD */
    int highest;     /* 1: the largest value is the worst */
    const char *label, *key, *unit;
} worst_def;

static const worst_def worst_defs[] = {
    {0, 1, "start-up time (latest)", "startup_time_latest", "s"},
    {1, 0, "growth rate (slowest)", "growth_rate_slowest", "/s"},
    {2, 0, "frequency (lowest)", "frequency_lowest", "Hz"},
    {2, 1, "frequency (highest)", "frequency_highest", "Hz"},
    {3, 0, "settled amplitude (lowest)", "settled_amplitude_lowest", "V"},
    {3, 1, "settled amplitude (highest)", "settled_amplitude_highest", "V"},
    {4, 1, "THD (highest)", "thd_highest", "%"},
};
#define NWORST (sizeof worst_defs / sizeof worst_defs[0])

static double figure(const ru_batch_item *it, int fig)
{
    const ru_measure_result *m = &it->report.meas;
    if (it->status != RU_OK || !m->started)
        return NAN;
    switch (fig) {
    case 0: return m->startup_time_s;
    case 1: return m->growth_rate_per_s;
    case 2: return m->frequency_hz;
    case 3: return m->settled_amplitude_v;
    default: return m->thd_percent;
    }
}

/* The corner (unit >= 1, in) with the worst value of w; 0 when none has one. */
static size_t worst_unit(const corners_ctx *x, const worst_def *w)
{
    size_t best = 0;
    double bv = NAN;
    for (size_t u = 1; u < x->n; u++) {
        double v = x->have[u] ? figure(&x->items[u], w->fig) : NAN;
        if (isfinite(v) && (!isfinite(bv) || (w->highest ? v > bv : v < bv))) {
            bv = v;
            best = u;
        }
    }
    return best;
}

static void cell(double v, const char *unit, char *buf, size_t size)
{
    if (!isfinite(v))
        snprintf(buf, size, "-");
    else if (!strcmp(unit, "%"))
        snprintf(buf, size, "%.3g %%", v);
    else if (!strcmp(unit, "/s"))
        snprintf(buf, size, "%.4g /s", v);
    else
        ru_format_si(v, unit, 4, buf, size);
}

static void print_table(const corners_ctx *x)
{
    const ru_circuit *c = x->c;
    size_t nf = ru_corners_factor_count(x->k), ncorners = x->n - 1, started = 0, in = 0;
    printf("%s: %s\n%zu corners of %zu factor%s:", ru_circuit_file(c), ru_circuit_title(c),
           ncorners, nf, nf == 1 ? "" : "s");
    for (size_t f = 0; f < nf; f++) {
        const ru_corner_factor *cf = ru_corners_factor(x->k, f);
        printf("%s %s [", f ? ";" : "", cf->name);
        for (int l = 0; l < cf->nlevels; l++)
            printf(cf->kind == RU_CORNER_TEMP ? "%s%g C" : "%s%+.4g %%", l ? ", " : "",
                   cf->kind == RU_CORNER_TEMP ? cf->level[l] : 100.0 * cf->level[l]);
        printf("]");
    }
    printf("\n");
    for (size_t u = 1; u < x->n; u++)
        if (x->have[u]) {
            in++;
            started += x->items[u].status == RU_OK && x->items[u].report.meas.started;
        }
    if (x->done < x->n)
        printf("%zu of the %zu units done (unit 0 is the nominal circuit)\n", x->done, x->n);
    printf("\nstarts at every corner%s: %s (%zu of %zu started)\n", in < ncorners ? " done" : "",
           started == in ? "yes" : "no", started, in);
    size_t shown = 0;
    for (size_t u = 1; u < x->n; u++) {
        const ru_batch_item *it = &x->items[u];
        if (!x->have[u] || (it->status == RU_OK && it->report.meas.started))
            continue;
        char d[512], msg[RU_ERROR_TEXT + RU_ERROR_FILE + 32];
        ru_corners_describe(x->k, u, d, sizeof d);
        if (shown++ >= 10)
            continue;
        if (it->status != RU_OK) {
            ru_error_format(&it->error, msg, sizeof msg);
            printf("  failed at %s: %s\n", d, msg);
        } else {
            printf("  %s at %s\n", ru_verdict_name(it->report.verdict), d);
        }
    }
    if (shown > 10)
        printf("  ... and %zu more (--json lists every corner)\n", shown - 10);
    printf("\nworst case over the corners:\n");
    cli_table t;
    cli_table_init(&t, 4);
    const char *head[] = {"figure", "nominal", "worst", "corner"};
    cli_table_add(&t, head);
    for (size_t w = 0; w < NWORST; w++) {
        size_t u = worst_unit(x, &worst_defs[w]);
        char nom[32], wv[32], d[512];
        cell(x->have[0] ? figure(&x->items[0], worst_defs[w].fig) : NAN, worst_defs[w].unit,
             nom, sizeof nom);
        cell(u ? figure(&x->items[u], worst_defs[w].fig) : NAN, worst_defs[w].unit, wv,
             sizeof wv);
        if (u)
            ru_corners_describe(x->k, u, d, sizeof d);
        else
            snprintf(d, sizeof d, "-");
        const char *row[] = {worst_defs[w].label, nom, wv, d};
        cli_table_add(&t, row);
    }
    cli_table_print(&t, stdout, "  ");
    cli_table_free(&t);
    if (ncorners > TABLE_ROWS) {
        printf("\n(%zu corners: --json lists every one)\n", ncorners);
        return;
    }
    printf("\nevery corner:\n");
    cli_table_init(&t, nf + 6 > CLI_TABLE_COLS ? CLI_TABLE_COLS : nf + 6);
    size_t nc = t.ncols, nfs = nc - 6;
    const char *hd[CLI_TABLE_COLS] = {"unit"};
    for (size_t f = 0; f < nfs; f++)
        hd[1 + f] = ru_corners_factor(x->k, f)->name;
    const char *tail[] = {"verdict", "start-up", "frequency", "amplitude", "THD"};
    for (size_t i = 0; i < 5; i++)
        hd[1 + nfs + i] = tail[i];
    cli_table_add(&t, hd);
    for (size_t u = 0; u < x->n; u++) {
        if (!x->have[u])
            continue;
        const ru_batch_item *it = &x->items[u];
        char cells[CLI_TABLE_COLS][48];
        const char *row[CLI_TABLE_COLS];
        snprintf(cells[0], sizeof cells[0], "%zu%s", u, u ? "" : " (nominal)");
        for (size_t f = 0; f < nfs; f++)
            ru_corners_level_text(x->k, u, f, cells[1 + f], sizeof cells[1 + f]);
        snprintf(cells[1 + nfs], sizeof cells[0], "%s",
                 it->status != RU_OK ? "error" : ru_verdict_name(it->report.verdict));
        cell(figure(it, 0), "s", cells[2 + nfs], sizeof cells[0]);
        cell(figure(it, 2), "Hz", cells[3 + nfs], sizeof cells[0]);
        cell(figure(it, 3), "V", cells[4 + nfs], sizeof cells[0]);
        cell(figure(it, 4), "%", cells[5 + nfs], sizeof cells[0]);
        for (size_t i = 0; i < nc; i++)
            row[i] = cells[i];
        cli_table_add(&t, row);
    }
    cli_table_print(&t, stdout, "  ");
    cli_table_free(&t);
}

static void print_json(const corners_ctx *x)
{
    ru_json j;
    ru_json_init(&j, stdout, 1);
    ru_json_begin_object(&j, NULL);
    size_t nf = ru_corners_factor_count(x->k), started = 0, in = 0;
    ru_json_begin_array(&j, "factors");
    for (size_t f = 0; f < nf; f++) {
        const ru_corner_factor *cf = ru_corners_factor(x->k, f);
        ru_json_begin_object(&j, NULL);
        ru_json_string(&j, "name", cf->name);
        ru_json_string(&j, "kind", cf->kind == RU_CORNER_TEMP     ? "temp"
                                   : cf->kind == RU_CORNER_SUPPLY ? "supply"
                                                                  : "quantity");
        ru_json_begin_array(&j, cf->kind == RU_CORNER_TEMP ? "levels_c" : "levels");
        for (int l = 0; l < cf->nlevels; l++)
            ru_json_number(&j, NULL, cf->level[l]);
        ru_json_end_array(&j);
        ru_json_end_object(&j);
    }
    ru_json_end_array(&j);
    for (size_t u = 1; u < x->n; u++)
        if (x->have[u]) {
            in++;
            started += x->items[u].status == RU_OK && x->items[u].report.meas.started;
        }
    ru_json_int(&j, "corners", (long)(x->n - 1));
    ru_json_int(&j, "units_done", (long)x->done);
    ru_json_int(&j, "started_count", (long)started);
    ru_json_bool(&j, "all_started", started == in);
    ru_json_begin_object(&j, "worst");
    for (size_t w = 0; w < NWORST; w++) {
        size_t u = worst_unit(x, &worst_defs[w]);
        ru_json_begin_object(&j, worst_defs[w].key);
        ru_json_number(&j, "value", u ? figure(&x->items[u], worst_defs[w].fig) : NAN);
        if (u)
            ru_json_int(&j, "unit", (long)u);
        else
            ru_json_null(&j, "unit");
        ru_json_end_object(&j);
    }
    ru_json_end_object(&j);
    ru_json_begin_array(&j, "results");
    for (size_t u = 0; u < x->n; u++) {
        if (!x->have[u])
            continue;
        ru_json_begin_object(&j, NULL);
        ru_json_int(&j, "unit", (long)u);
        ru_json_begin_array(&j, "levels");
        for (size_t f = 0; f < nf; f++)
            ru_json_number(&j, NULL, ru_corners_level_value(x->k, u, f));
        ru_json_end_array(&j);
        cli_json_item(&j, &x->items[u]);
        ru_json_end_object(&j);
    }
    ru_json_end_array(&j);
    ru_json_end_object(&j);
    ru_json_finish(&j);
}

/* Unit u: its circuit, its run, its record (the levels as extras). */
static ru_status corners_run(void *ctx, size_t u, char **line, ru_error *err)
{
    corners_ctx *x = ctx;
    ru_batch_item it;
    memset(&it, 0, sizeof it);
    it.request = x->rq;
    ru_circuit *v = NULL;
    it.status = ru_corners_circuit(x->c, x->k, u, &v, &it.error);
    if (v) {
        it.circuit = v;
        ru_batch_run(&it, 1, 1);
    }
    ru_circuit_destroy(v);
    if (it.status == RU_ESTOPPED)
        return RU_ESTOPPED;
    double lv[RU_CORNER_FACTORS];
    size_t nf = ru_corners_factor_count(x->k);
    for (size_t f = 0; f < nf; f++)
        lv[f] = ru_corners_level_value(x->k, u, f);
    if (ru_unit_record_of_item(u, &it, "levels", lv, nf, line) != RU_OK)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "corners: out of memory");
    return RU_OK;
}

static ru_status corners_add(void *ctx, const char *line, int *failed, ru_error *err)
{
    corners_ctx *x = ctx;
    size_t u;
    ru_batch_item it;
    ru_status st = ru_unit_item_of_record(line, &u, &it, err);
    if (st != RU_OK)
        return st;
    if (u >= x->n || x->have[u])
        return ru_error_set(err, RU_EINPUT, NULL, 0, 0, "unit %zu is %s", u,
                            u >= x->n ? "beyond the corners" : "there twice");
    x->items[u].status = it.status;
    x->items[u].error = it.error;
    x->items[u].report = it.report;
    x->have[u] = 1;
    x->done++;
    *failed = it.status != RU_OK;
    return RU_OK;
}

static int report(const corners_ctx *x, const cli_plot_req *plots, int json)
{
    if (json)
        print_json(x);
    cli_capture cap; /* the text for the report, on the terminal unless --json */
    cli_capture_begin(&cap, plots->report != NULL, !json);
    if (cli_capture_printing(&cap))
        print_table(x);
    char *text = cli_capture_end(&cap);
    ru_plot_set set = {0};
    int rc = plots->report ? cli_plot_set(plots, ru_circuit_title(x->c), &set, text) : 0;
    free(text);
    return rc;
}

static const char *const study_names[] = {"stop", "accuracy", "temp", "shard", NULL};

int cli_corners_study(int argc, char **argv, cli_pre *pre)
{
    cli_opt opts[] = {{"stop", "T", "run length, or auto (default: the file's)", NULL},
                      {"accuracy", "LEVEL", "draft, normal or precise", NULL},
                      CLI_TEMP_OPT,
                      CLI_STUDY_OPTS,
                      {"json", NULL, "print JSON on stdout (keys in README)", NULL},
                      {"report", "FILE", "one-file report: FILE.pdf (pages) or FILE.html",
                       NULL},
                      {NULL, NULL, NULL, NULL}};
    const char *file;
    int rc = cli_parse(argc, argv, "ringup corners FILE [options]",
                       "Runs the circuit at every combination of its corners: the levels of "
                       "the file's\ncorners: section (temp, supply, PART or PART.KEY), or "
                       "else every toleranced value\nat both ends of its tol, in parallel; "
                       "prints whether it starts at every corner\nand the worst case of each "
                       "figure with the corner that gives it. Unit 0 is the\nnominal "
                       "circuit.",
                       opts, &file);
    if (rc >= 0)
        return rc;
    corners_ctx x;
    memset(&x, 0, sizeof x);
    cli_plot_req plots = {0};
    plots.report = cli_get(opts, "report");
    int json = cli_get(opts, "json") != NULL;
    ru_run_request_default(&x.rq);
    unsigned long long threads = 0;
    if (!cli_stop(opts, &x.rq) || !cli_int(opts, "threads", 1, RU_CLI_THREADS_MAX, &threads) ||
        cli_accuracy(opts, &x.rq.accuracy) || (plots.report && cli_plot_check(opts, &plots)))
        return 1;
    ru_circuit *c = NULL;
    if ((rc = cli_load(file, json || pre->mpi_rank > 0, &c)) != 0)
        return rc;
    ru_error err;
    ru_error_clear(&err);
    if ((rc = cli_temp(opts, c)) == 0 && ru_corners_create(c, &x.k, &err) != RU_OK)
        rc = cli_fail(&err);
    x.c = c;
    x.rq.stop = cli_study_stop_flag();
    if (rc == 0) {
        x.n = ru_corners_unit_count(x.k);
        x.items = calloc(x.n, sizeof *x.items);
        x.have = calloc(x.n, 1);
        rc = x.items && x.have ? 0 : 2;
    }
    cli_study s = {.command = "corners", .file = file, .count = x.n, .json = json,
                   .run = corners_run, .add = corners_add, .ctx = &x, .pre = pre};
    if (rc == 0 && (!cli_study_add_arg(&s, file) || !cli_study_add_args(&s, opts, study_names)))
        rc = 2;
    if (rc == 0)
        rc = cli_study_options(opts, &s);
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
    free(x.items);
    free(x.have);
    ru_corners_destroy(x.k);
    ru_circuit_destroy(c);
    return rc;
}

int cmd_corners(int argc, char **argv)
{
    return cli_study_main(argc, argv, cli_corners_study);
}
