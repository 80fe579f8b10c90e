/* report.c: the pieces of a run's report that the analysis and the prediction
 * both fill: the notes list (ru_report_note) and the kept data for pictures
 * (ru_run_data). The bottom of the analysis layer: it calls nothing above it. */
#include "analysis/analysis_impl.h"

#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

void ru_report_note(ru_run_report *rep, const char *fmt, ...)
{
    if (rep->nnotes >= RU_MAX_NOTES)
        return;
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(rep->notes[rep->nnotes], sizeof rep->notes[0], fmt, ap);
    va_end(ap);
    rep->nnotes++;
}

ru_status ru_run_data_create(ru_run_data **out)
{
    *out = calloc(1, sizeof **out);
    if (!*out)
        return RU_ENOMEM;
    (*out)->dominant = -1;
    return RU_OK;
}

void ru_run_data_reset(ru_run_data *d)
{
    ru_trace_destroy(d->trace);
    free(d->env_t_s);
    free(d->env_v);
    free(d->poles);
    memset(d, 0, sizeof *d);
    d->dominant = -1;
}

void ru_run_data_destroy(ru_run_data *d)
{
    if (!d)
        return;
    ru_run_data_reset(d);
    free(d);
}

void ru_run_data_get(const ru_run_data *d, ru_run_data_view *v)
{
    memset(v, 0, sizeof *v);
    v->dominant = -1;
    if (!d)
        return;
    if (d->trace)
        ru_trace_get(d->trace, &v->trace);
    v->nenv = d->nenv;
    v->env_t_s = d->env_t_s;
    v->env_v = d->env_v;
    v->npoles = d->npoles;
    v->poles = d->poles;
    v->dominant = d->dominant;
    v->nloop = d->nloop;
    v->loop_f_hz = d->loop_f_hz;
    v->loop_mag = d->loop_mag;
    v->loop_phase_deg = d->loop_phase_deg;
    v->ndf = d->ndf;
    v->df = d->df;
}
