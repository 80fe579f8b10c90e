/* plots.c: the CLI's --plots DIR, --plot-format and --report FILE: it turns what a
 * command computed into the plot library's plain-array figures (ringup/plot.h). */
#include "cli/cli.h"

#include "ringup/batch.h"
#include "ringup/format.h"
#include "ringup/plot.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

int cli_plot_check(const cli_opt *opts, cli_plot_req *pr)
{
    memset(pr, 0, sizeof *pr);
    pr->dir = cli_get(opts, "plots");
    pr->format = cli_get(opts, "plot-format");
    pr->report = cli_get(opts, "report");
    ru_error err;
    ru_error_clear(&err);
    if (pr->format && !pr->dir && !pr->report) {
        fprintf(stderr, "ringup: --plot-format needs --plots DIR\n");
        return 1;
    }
    if (pr->dir) {
        int rc = cli_make_dir(pr->dir);
        if (rc)
            return rc;
        if (ru_plot_check(pr->dir, pr->format, &err) != RU_OK)
            return cli_fail(&err);
    }
    if (pr->report && ru_plot_report_check(pr->report, &err) != RU_OK)
        return cli_fail(&err);
    return 0;
}

/* Poles of the run with the describing-function drift as poles (sigma, w). */
static void fill_poles(const ru_run_data_view *v, ru_pole *drift, double *amp,
                       ru_plot_poles *p)
{
    memset(p, 0, sizeof *p);
    p->n = v->npoles;
    p->poles = v->poles;
    p->dominant = v->dominant;
    for (size_t i = 0; i < v->ndf; i++) {
        drift[i].re_per_s = v->df[i].growth_rate_per_s;
        drift[i].im_rad_per_s = 2 * M_PI * v->df[i].frequency_hz;
        amp[i] = v->df[i].amplitude_v;
    }
    p->ndrift = v->ndf;
    p->drift = drift;
    p->drift_amp_v = amp;
}

/* The run's report: the terminal text, then the parts of the circuit. */
static int write_report(const cli_plot_req *pr, const ru_circuit *c, const char *text,
                        const ru_plot_set *set)
{
    size_t cap = (text ? strlen(text) : 0) + 64 + ru_circuit_part_count(c) * 512;
    char *summary = malloc(cap);
    if (!summary)
        return 2;
    size_t len = (size_t)snprintf(summary, cap, "%s%sparts:\n", text ? text : "",
                                  text && *text ? "\n" : "");
    for (size_t i = 0; i < ru_circuit_part_count(c) && len < cap; i++) {
        char line[512];
        cli_part_text(c, ru_circuit_part(c, i), line, sizeof line);
        len += (size_t)snprintf(summary + len, cap - len, "  %s\n", line);
    }
    ru_error err;
    ru_error_clear(&err);
    int rc = 0;
    if (ru_plot_report(pr->report, ru_circuit_title(c), summary, NULL, set, &err) != RU_OK)
        rc = cli_fail(&err);
    free(summary);
    return rc;
}

int cli_plot_run(const cli_plot_req *pr, const ru_circuit *c, const ru_run_report *r,
                 const ru_run_data *data, const char *text)
{
    if (!pr->dir && !pr->report)
        return 0;
    ru_run_data_view v;
    ru_run_data_get(data, &v);
    const ru_measure_result *m = &r->meas;
    ru_plot_wave wave = {ru_circuit_title(c), r->probe, v.trace, v.nenv, v.env_t_s,
                         v.env_v, m->dc_level_v, m->startup_time_s, r->startup_level,
                         m->settled_amplitude_v};
    ru_plot_growth growth = {v.nenv, v.env_t_s, v.env_v, m->growth_rate_per_s,
                             m->growth_fit_t0_s, m->growth_fit_t1_s,
                             r->pred.have_poles ? r->pred.growth_rate_per_s : NAN,
                             m->settled_amplitude_v};
    ru_plot_spectrum spec = {m->frequency_hz, m->harmonics_dbc, RU_HARMONICS - 1,
                             m->thd_percent};
    ru_pole drift[RU_RUN_DATA_DF_MAX];
    double amp[RU_RUN_DATA_DF_MAX];
    ru_plot_poles poles;
    fill_poles(&v, drift, amp, &poles);
    ru_plot_bode loop = {r->pred.loop_node[0] ? 2 : 1, r->pred.loop_part, v.nloop, v.loop_f_hz, v.loop_mag,
                         v.loop_phase_deg,
                         r->pred.loop.found ? r->pred.loop.crossover_hz : NAN,
                         r->pred.loop.found ? r->pred.loop.gain : NAN};
    ru_plot_set set = {0};
    set.wave = v.trace.n >= 2 ? &wave : NULL;
    set.growth = v.nenv >= 2 ? &growth : NULL;
    set.spectrum = isfinite(m->thd_percent) ? &spec : NULL;
    set.poles = v.npoles ? &poles : NULL;
    set.loop = v.nloop >= 2 ? &loop : NULL;
    ru_error err;
    ru_error_clear(&err);
    if (pr->dir && ru_plot_set_files(pr->dir, pr->format, &set, &err) != RU_OK)
        return cli_fail(&err);
    if (pr->report)
        return write_report(pr, c, text, &set);
    return 0;
}

int cli_plot_set(const cli_plot_req *pr, const char *title, const ru_plot_set *set,
                 const char *text)
{
    ru_error err;
    ru_error_clear(&err);
    if (pr->dir && ru_plot_set_files(pr->dir, pr->format, set, &err) != RU_OK)
        return cli_fail(&err);
    if (pr->report && ru_plot_report(pr->report, title, text ? text : "", NULL, set,
                                     &err) != RU_OK)
        return cli_fail(&err);
    return 0;
}

int cli_plot_items(const cli_plot_req *pr, const ru_circuit *c,
                   const struct ru_batch_item *items, size_t n, const char *const *labels,
                   const char *text)
{
    if (!pr->dir && !pr->report)
        return 0;
    ru_plot_model *pm = calloc(n ? n : 1, sizeof *pm);
    if (!pm)
        return 2;
    size_t k = 0;
    for (size_t i = 0; i < n; i++) {
        if (items[i].status != RU_OK || !items[i].request.keep)
            continue;
        ru_run_data_view dv;
        ru_run_data_get(items[i].request.keep, &dv);
        const ru_measure_result *m = &items[i].report.meas;
        pm[k++] = (ru_plot_model){labels[i], dv.nenv, dv.env_t_s, dv.env_v,
                                  m->thd_percent, m->started ? m->startup_time_s : NAN};
    }
    ru_plot_set set = {0};
    set.models = k > 0 ? pm : NULL;
    set.nmodels = k;
    /* The report is written even when no item kept figures: it holds the table. */
    int rc = (k > 0 || pr->report) ? cli_plot_set(pr, ru_circuit_title(c), &set, text) : 0;
    free(pm);
    return rc;
}
