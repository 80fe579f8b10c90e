/* json_run.c: the run keys of a report as JSON (DESIGN.md "JSON keys"): the
 * measured figures, the prediction, the solver, the notes, and one batch row.
 * `run`, `compare`, `sweep` and `montecarlo` share them so every command spells a
 * figure the same way. Calls nothing else of the CLI. */
#include "cli/cli.h"

#include "ringup/batch.h"
#include "ringup/json.h"

#include <math.h>

static void json_measured(ru_json *j, const ru_run_report *r)
{
    const ru_measure_result *m = &r->meas;
    ru_json_string(j, "verdict", ru_verdict_name(r->verdict));
    ru_json_bool(j, "started", m->started);
    ru_json_bool(j, "settled", m->settled);
    ru_json_number(j, "startup_time_s", m->startup_time_s);
    ru_json_number(j, "growth_rate_per_s", m->growth_rate_per_s);
    ru_json_number(j, "frequency_hz", m->frequency_hz);
    ru_json_number(j, "settled_amplitude_v", m->settled_amplitude_v);
    ru_json_number(j, "settling_time_s", m->settling_time_s);
    ru_json_number(j, "fundamental_v", m->fundamental_v);
    ru_json_number(j, "thd_percent", m->thd_percent);
    ru_json_begin_array(j, "harmonics_dbc");
    for (int k = 0; k < RU_HARMONICS - 1; k++)
        ru_json_number(j, NULL, m->harmonics_dbc[k]);
    ru_json_end_array(j);
    ru_json_number(j, "dc_level_v", m->dc_level_v);
}

void cli_json_hb(ru_json *j, const ru_hb_tone *h)
{
    ru_json_begin_object(j, "harmonic_balance");
    ru_json_bool(j, "converged", h->converged);
    ru_json_int(j, "harmonics", h->harmonics);
    ru_json_number(j, "settled_amplitude_v", h->amplitude_v);
    ru_json_number(j, "fundamental_v", h->fundamental_v);
    ru_json_number(j, "frequency_hz", h->frequency_hz);
    ru_json_number(j, "dc_level_v", h->dc_level_v);
    ru_json_number(j, "thd_percent", h->thd_percent);
    ru_json_begin_array(j, "harmonics_dbc");
    for (int k = 0; k < RU_HB_REPORT - 1; k++)
        ru_json_number(j, NULL, h->harmonics_dbc[k]);
    ru_json_end_array(j);
    ru_json_string(j, "note", h->note);
    ru_json_end_object(j);
}

/* "steady": the settled figures from the periodic steady state, null when the
 * run did not settle (or polishing was off). */
static void json_polish(ru_json *j, const ru_polish *p)
{
    if (!p->tried) {
        ru_json_null(j, "steady");
        return;
    }
    ru_json_begin_object(j, "steady");
    ru_json_bool(j, "found", p->have);
    ru_json_number(j, "frequency_hz", p->frequency_hz);
    ru_json_number(j, "period_s", p->period_s);
    ru_json_number(j, "amplitude_v", p->amplitude_v);
    ru_json_number(j, "fundamental_v", p->fundamental_v);
    ru_json_number(j, "dc_level_v", p->dc_level_v);
    ru_json_number(j, "thd_percent", p->thd_percent);
    ru_json_begin_array(j, "harmonics_dbc");
    for (int h = 0; p->have && h < RU_HARMONICS - 1; h++)
        ru_json_number(j, NULL, p->harmonics_dbc[h]);
    ru_json_end_array(j);
    ru_json_number(j, "recovery_time_s", p->recovery_time_s);
    ru_json_int(j, "newton_iterations", p->newton_iterations);
    ru_json_number(j, "cpu_s", p->cpu_s);
    if (!p->have)
        ru_json_string(j, "note", p->note);
    ru_json_end_object(j);
}

void cli_json_run_body(ru_json *j, const ru_run_report *r)
{
    json_measured(j, r);
    const ru_prediction *p = &r->pred;
    ru_json_begin_object(j, "predicted");
    ru_json_number(j, "growth_rate_per_s", p->growth_rate_per_s);
    ru_json_number(j, "frequency_hz", p->frequency_hz);
    ru_json_number(j, "startup_time_s", p->startup_time_s);
    ru_json_number(j, "settled_amplitude_v", p->settled_amplitude_v);
    ru_json_number(j, "settled_frequency_hz", p->df_frequency_hz);
    ru_json_number(j, "start_level_v", p->kick_amplitude_v);
    ru_json_string(j, "start_level_kind", p->start_kind == 0   ? "preset"
                                          : p->start_kind == 2 ? "noise"
                                                               : "power-on");
    ru_json_number(j, "start_level_rms_v", p->start_rms_v);
    if (p->have_hb) {
        cli_json_hb(j, &p->hb);
    } else {
        ru_json_null(j, "harmonic_balance");
    }
    ru_json_end_object(j);
    const ru_stop_info *si = &r->stop;
    ru_json_begin_object(j, "stop");
    ru_json_bool(j, "auto", si->automatic);
    ru_json_string(j, "reason", si->reason);
    ru_json_number(j, "first_s", si->first_s);
    ru_json_number(j, "cap_s", si->cap_s);
    ru_json_number(j, "cap_cycles", si->automatic && si->cap_cycles > 0 ? si->cap_cycles : NAN);
    ru_json_number(j, "cap_cpu_s", si->automatic ? si->cap_cpu_s : NAN);
    ru_json_int(j, "chunks", si->chunks);
    ru_json_end_object(j);
    ru_json_string(j, "engine", r->engine.envelope ? "envelope" : "direct");
    if (r->engine.envelope) {
        ru_json_begin_object(j, "envelope");
        ru_json_int(j, "cycles_integrated", r->engine.cycles_integrated);
        ru_json_number(j, "cycles_skipped",
                       fmax(0.0, r->engine.cycles_spanned - (double)r->engine.cycles_integrated));
        ru_json_number(j, "cycles_spanned", r->engine.cycles_spanned);
        ru_json_int(j, "envelope_steps", r->engine.env_steps);
        ru_json_bool(j, "fell_back", r->engine.fell_back);
        ru_json_end_object(j);
    }
    json_polish(j, &r->polish);
    ru_json_begin_object(j, "solver");
    ru_json_string(j, "engine", ru_transient_engine_name(&r->solver));
    ru_json_int(j, "steps", r->solver.steps);
    ru_json_int(j, "rhs_evals", r->solver.rhs_evals);
    ru_json_number(j, "rtol", r->solver.rtol);
    ru_json_number(j, "wall_s", r->solver.wall_s);
    ru_json_end_object(j);
}

void cli_json_notes(ru_json *j, const ru_run_report *r)
{
    ru_json_begin_array(j, "notes");
    for (int i = 0; i < r->nnotes; i++)
        ru_json_string(j, NULL, r->notes[i]);
    ru_json_end_array(j);
}

void cli_json_item(ru_json *j, const ru_batch_item *it)
{
    if (it->status != RU_OK) {
        char msg[RU_ERROR_TEXT + RU_ERROR_FILE + 32];
        ru_error_format(&it->error, msg, sizeof msg);
        ru_json_string(j, "error", msg);
        return;
    }
    cli_json_run_body(j, &it->report);
    cli_json_notes(j, &it->report);
}
