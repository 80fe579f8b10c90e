/* judge.c: the verdict of one run (ringup/verdict.h) from what the analysis knows
 * besides the figures: the physical start level, the solver's noise floor on the
 * probe, the driving waveforms, how far the final state sits from the operating
 * point, and the prediction's time scales. Also the verdict's notes. */
#include "analysis/analysis_impl.h"

#include "ringup/format.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* Frequencies of the circuit's driving waveforms: sines and pulse trains. */
static size_t drives(const ru_circuit *c, double *hz, size_t max)
{
    size_t n = 0;
    for (size_t i = 0; i < ru_circuit_part_count(c) && n < max; i++) {
        const ru_part *p = ru_circuit_part(c, i);
        if (!ru_part_is_source(p))
            continue;
        if (p->wave.kind == RU_WAVE_SINE && p->wave.freq_hz > 0)
            hz[n++] = p->wave.freq_hz;
        else if (p->wave.kind == RU_WAVE_PULSE && p->wave.period_s > 0)
            hz[n++] = 1.0 / p->wave.period_s;
    }
    return n;
}

/* Scale of a probe node's voltage (0 for ground). */
static double node_scale(const ru_system *s, const double *scale, int node)
{
    int k = ru_system_node_state(s, node);
    return k >= 0 ? scale[k] : 0.0;
}

/* The probe's voltage scale, the solver's noise floor there (the error the
 * tolerances allow on a state at the probe's DC level: rtol |v| + atol) and the
 * largest distance of the final state from the operating point in state scales. */
static void levels(const ru_judge_ctx *j, const ru_run_report *rep, double *vscale,
                   double *floor_v, double *op_dist, double *motion)
{
    size_t n = ru_system_size(j->sys);
    double *scale = malloc((n ? n : 1) * sizeof *scale);
    *vscale = 1.0;
    *floor_v = 0.0;
    *op_dist = *motion = NAN;
    if (!scale)
        return;
    ru_system_state_scale(j->sys, scale);
    double sp = node_scale(j->sys, scale, j->probe_pos);
    double sn = j->probe_neg > 0 ? node_scale(j->sys, scale, j->probe_neg) : 0.0;
    *vscale = fmax(1.0, fmax(sp, sn));
    double dc = isfinite(rep->meas.dc_level_v) ? fabs(rep->meas.dc_level_v) : *vscale;
    /* with weights relative to the operating point the DC level costs no accuracy;
     * rounding of the DC level (1e-15) still does */
    *floor_v = (j->relative ? 1e-15 : j->rtol) * dc + j->atol_rel * (sp + sn);
    if (j->x_op && j->x_end) {
        double d = 0.0;
        for (size_t i = 0; i < n; i++)
            d = fmax(d, fabs(j->x_end[i] - j->x_op[i]) / (scale[i] > 0 ? scale[i] : 1.0));
        *op_dist = d;
    }
    if (j->mark && j->mark->have && j->x_end) {
        double d = 0.0;
        for (size_t i = 0; i < n; i++)
            d = fmax(d, fabs(j->x_end[i] - j->mark->x[i]) / (scale[i] > 0 ? scale[i] : 1.0));
        *motion = d;
    }
    free(scale);
}

void ru_judge(const ru_judge_ctx *j, const ru_run_report *rep, int final,
              ru_verdict_result *out)
{
    ru_verdict_input in;
    ru_verdict_input_default(&in);
    const ru_prediction *p = &rep->pred;
    in.meas = &rep->meas;
    in.seed_v = j->seed_v;
    in.seed_is_kick = j->seed_is_kick;
    if (p->have_poles) {
        in.growth_per_s = p->growth_rate_per_s;
        in.period_s = p->frequency_hz > 0 ? 1.0 / p->frequency_hz : NAN;
        in.t_expect_s = p->startup_time_s;
        in.slow_per_s = p->slowest_decay_per_s;
    }
    in.ndrive = drives(j->c, in.drive_hz, RU_VERDICT_DRIVES);
    levels(j, rep, &in.dc_scale_v, &in.floor_v, &in.op_distance, &in.state_motion);
    in.final = final;
    ru_verdict_judge(&in, out);
}

/* "not settled by T": a started tone whose envelope still moves at the end. */
static void settle_notes(ru_run_report *rep, const ru_verdict_result *v)
{
    const ru_measure_result *m = &rep->meas;
    char t[40];
    ru_format_si(m->t_last_s, "s", 4, t, sizeof t);
    if (v->verdict == RU_VERDICT_STARTED && !v->settled)
        ru_report_note(rep, "not settled by %s: no start-up or settling time is given; "
                            "%s", t, m->settle_note[0] ? m->settle_note : "run longer");
}

void ru_judge_final(const ru_judge_ctx *j, ru_run_report *rep)
{
    ru_verdict_result v;
    ru_judge(j, rep, 1, &v);
    rep->verdict = v.verdict;
    double vs, op, mo;
    levels(j, rep, &vs, &rep->floor_v, &op, &mo);
    ru_report_note(rep, "%s", v.note);
    settle_notes(rep, &v);
    ru_verdict_apply(&v, &rep->meas);
}
