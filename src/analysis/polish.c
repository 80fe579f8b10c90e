/* polish.c: a run's settled figures polished by the periodic steady state
 * (ru_run_request.polish, ringup/analysis.h): after a run whose self-sustained tone
 * settled, shooting Newton (ringup/tone.h) starts from the run's last state and its
 * measured period and finds the limit cycle itself, so frequency, amplitude, THD and
 * DC level come without the window's error, with the amplitude-recovery time beside
 * them. Anything that stops it (Newton's failure, a circuit the steady state refuses)
 * leaves a note and the measured figures: never an error of the run. */
#include "analysis/analysis_impl.h"

#include "ringup/tone.h"

#include <math.h>
#include <stdio.h>
#include <string.h>

void ru_polish_run(const ru_circuit *c, const double *x_end, ru_run_report *rep)
{
    ru_polish *p = &rep->polish;
    memset(p, 0, sizeof *p);
    p->frequency_hz = p->period_s = p->amplitude_v = p->fundamental_v = NAN;
    p->dc_level_v = p->thd_percent = p->recovery_time_s = p->recovery_cycles = NAN;
    const ru_measure_result *m = &rep->meas;
    if (!x_end || rep->verdict != RU_VERDICT_STARTED || !m->settled ||
        !(m->frequency_hz > 0) || rep->partial)
        return;
    p->tried = 1;
    ru_tone_request rq;
    ru_tone_request_default(&rq);
    rq.x_start = x_end;
    rq.period_start_s = 1.0 / m->frequency_hz;
    ru_tone *t = NULL;
    ru_error err;
    ru_error_clear(&err);
    if (ru_tone_run(c, &rq, &t, &err) != RU_OK) {
        snprintf(p->note, sizeof p->note, "%.*s", (int)sizeof p->note - 1, err.msg);
        ru_report_note(rep, "settled figures not polished: %.200s", err.msg);
        return;
    }
    ru_steady_view v;
    ru_tone_steady(t, &v);
    if (!v.found) {
        snprintf(p->note, sizeof p->note, "%.*s", (int)sizeof p->note - 1, v.note);
        ru_report_note(rep, "settled figures not polished: no periodic steady state from "
                            "the run's end (%.200s)", v.note);
        ru_tone_destroy(t);
        return;
    }
    ru_tone_spectrum sp;
    ru_tone_spectrum_get(t, &sp);
    p->have = 1;
    p->frequency_hz = v.frequency_hz;
    p->period_s = v.period_s;
    p->period_rel_error = v.period_rel_error;
    p->amplitude_v = v.amplitude_v;
    p->fundamental_v = sp.fundamental_v;
    p->dc_level_v = v.dc_level_v;
    p->thd_percent = sp.thd_percent;
    memcpy(p->harmonics_dbc, sp.harmonics_dbc, sizeof p->harmonics_dbc);
    p->recovery_time_s = v.recovery_time_s;
    p->recovery_cycles = v.recovery_cycles;
    p->newton_iterations = v.newton_iterations;
    p->cpu_s = v.cpu_s;
    ru_tone_destroy(t);
}
