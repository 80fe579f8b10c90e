/* analysis.c: one start-up analysis end to end (see ringup/analysis.h).
 *
 * Order: compile -> operating point -> poles -> loop gain -> choose the sample
 * spacing -> transient streamed to the CSV writer, the measurement and the energy
 * balance -> predictions and self-checks. Every stage that cannot run leaves its
 * figures NAN and a note; only input errors and I/O errors stop the analysis. */
#include "ringup/analysis.h"

#include "ringup/system.h"
#include "ringup/wavefile.h"
#include "analysis/analysis_impl.h"

#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

void ru_run_request_default(ru_run_request *rq)
{
    memset(rq, 0, sizeof *rq);
    rq->accuracy = -1;
    rq->tol_scale = 1.0;
    ru_wav_opts_default(&rq->wav);
}

ru_status ru_run_sink_sample(void *user, double t_s, const double *x, size_t n)
{
    ru_run_sink *k = user;
    ru_status st = RU_OK;
    if (k->stop && *k->stop)
        return RU_ESTOPPED;
    if (k->csv && (st = ru_csv_sample(k->csv, t_s, x, n)) != RU_OK)
        return st;
    double v = ru_system_node_voltage(k->sys, k->probe_pos, t_s, x) -
               ru_system_node_voltage(k->sys, k->probe_neg, t_s, x);
    if ((st = ru_measure_push(k->meas, t_s, v)) != RU_OK)
        return st;
    if (k->wav && (st = ru_wav_push(k->wav, t_s, v)) != RU_OK)
        return st;
    if (k->trace && (st = ru_trace_push(k->trace, t_s, v)) != RU_OK)
        return st;
    if (k->energy)
        ru_energy_balance_push(k->energy, t_s, x);
    memcpy(k->x_last, x, n * sizeof *x);
    k->have_last = 1;
    if (!k->mark.have && t_s >= k->mark.t_s) {
        memcpy(k->mark.x, x, n * sizeof *x);
        k->mark.have = 1;
    }
    return RU_OK;
}

static ru_status resolve_probe(const ru_circuit *c, const ru_system *sys,
                               ru_run_report *rep, int *pos, int *neg, ru_error *err)
{
    const ru_measure_opts *mo = ru_circuit_measure_opts_const(c);
    *pos = mo->probe_pos;
    *neg = mo->probe_neg;
    if (*pos < 0) { /* no probe named: an amplifier's output, else the first free node */
        *neg = 0;
        const char *why = "the first free node";
        char amp[RU_NAME_MAX + 32] = "";
        for (size_t i = 0; i < ru_circuit_part_count(c) && *pos < 0; i++) {
            const ru_part *p = ru_circuit_part(c, i);
            int out = ru_part_output_node(p);
            if (out > 0 && ru_system_node_state(sys, out) >= 0) {
                *pos = out;
                snprintf(amp, sizeof amp, "the output of %s %s", ru_part_type_name(p->type), p->name);
                why = amp;
            }
        }
        for (size_t i = 1; i < ru_circuit_node_count(c) && *pos < 0; i++)
            if (ru_system_node_state(sys, (int)i) >= 0)
                *pos = (int)i;
        if (*pos < 0)
            return ru_error_set(err, RU_EINPUT, ru_circuit_file(c), 0, 0,
                                "the circuit has no free node to probe");
        ru_report_note(rep, "no probe named in the file (measure: {probe: NODE}): "
                            "measuring v(%s), %s", ru_circuit_node_name(c, *pos), why);
    }
    if (*neg > 0)
        snprintf(rep->probe, sizeof rep->probe, "%s-%s", ru_circuit_node_name(c, *pos),
                 ru_circuit_node_name(c, *neg));
    else
        snprintf(rep->probe, sizeof rep->probe, "%s", ru_circuit_node_name(c, *pos));
    return RU_OK;
}

/* Sample spacing: the request's, the file's, or 72 samples per predicted period
 * (at least 64 even if the tone settles 10 % higher), else 20000 over the (first
 * chunk of the) run. */
static double choose_sample(const ru_run_request *rq, const ru_run_opts *ro,
                            const ru_prediction *pr, double stop_s)
{
    if (rq->sample_s > 0)
        return rq->sample_s;
    if (ro->sample_s > 0)
        return ro->sample_s;
    if (pr->have_poles && pr->frequency_hz > 0)
        return 1.0 / (72.0 * pr->frequency_hz);
    return stop_s / 20000.0;
}

/* A sample spacing given by the caller or the file that cannot show the predicted
 * tone at all (fewer than RU_MIN_SAMPLES_PER_PERIOD samples per period) is bad
 * input: the run would only say "did not start". Between that and 16 the run goes
 * on with a note (ru_selfcheck). */
#define RU_MIN_SAMPLES_PER_PERIOD 4.0
static ru_status check_sampling(const ru_circuit *c, const ru_run_request *rq,
                                const ru_run_opts *ro, const ru_run_report *rep,
                                ru_error *err)
{
    const ru_prediction *pr = &rep->pred;
    if (!(rq->sample_s > 0 || ro->sample_s > 0) || !pr->have_poles ||
        !(pr->frequency_hz > 0))
        return RU_OK;
    double per = 1.0 / (rep->sample_s * pr->frequency_hz);
    if (per >= RU_MIN_SAMPLES_PER_PERIOD)
        return RU_OK;
    return ru_error_set(err, RU_EINPUT, ru_circuit_file(c), 0, 0,
                        "sample spacing %.4g s gives %.2g samples per period of the "
                        "predicted %.4g Hz tone (the dominant poles): at least %.0f are "
                        "needed to see the oscillation at all and 16 to measure it; use "
                        "a sample of %.3g s or less, or leave it auto",
                        rep->sample_s, per, pr->frequency_hz, RU_MIN_SAMPLES_PER_PERIOD,
                        1.0 / (64.0 * pr->frequency_hz));
}

/* The WAV sink, planned from the run's spacing, length and predicted tone. */
static ru_status wav_open(const ru_run_request *rq, const ru_run_report *rep,
                          ru_wav **out, ru_error *err)
{
    ru_wav_opts wo = rq->wav;
    wo.sample_s = rep->sample_s;
    wo.stop_s = rep->stop_s;
    wo.tone_hint_hz = rep->pred.have_poles && rep->pred.frequency_hz > 0
                          ? rep->pred.frequency_hz
                          : 0;
    return ru_wav_create(&wo, out, err);
}

/* Writes the audio with the measured tone (the predicted one when none was
 * measured): a pitch maps that tone onto the asked pitch. */
static ru_status wav_finish(ru_wav *w, const ru_run_request *rq, ru_run_report *rep,
                            ru_error *err)
{
    double tone = rep->meas.frequency_hz;
    if (!(isfinite(tone) && tone > 0) && rep->pred.have_poles)
        tone = rep->pred.frequency_hz;
    ru_status st = ru_wav_finish(w, tone, rq->wav_path, &rep->wav, err);
    rep->have_wav = st == RU_OK;
    return st;
}

/* Size of a preset kick on the probe: the dominant mode's share when the poles
 * give it, else the largest preset voltage (a start with no small-signal mode, such
 * as a relaxation oscillation, still begins from that level). */
static double preset_level(const ru_run_opts *ro, const ru_run_report *rep)
{
    if (isfinite(rep->pred.kick_amplitude_v))
        return rep->pred.kick_amplitude_v;
    double v = 0;
    for (int i = 0; i < ro->npreset; i++)
        v = fmax(v, fabs(ro->preset_v[i]));
    return v;
}

static ru_status keep_envelope(ru_run_data *d, const ru_measure *m)
{
    const double *t, *a;
    size_t n;
    ru_measure_envelope(m, &t, &a, &n);
    d->env_t_s = malloc((n ? n : 1) * sizeof *t);
    d->env_v = malloc((n ? n : 1) * sizeof *a);
    if (!d->env_t_s || !d->env_v)
        return RU_ENOMEM;
    memcpy(d->env_t_s, t, n * sizeof *t);
    memcpy(d->env_v, a, n * sizeof *a);
    d->nenv = n;
    return RU_OK;
}

/* Accuracy chosen from the poles: the integrator's own damping (the table of
 * ru_transient_damping_per_rad) must stay below RU_DAMP_SHARE of the predicted
 * growth (or decay) rate, so rtol is tightened where the setting would not resolve
 * it, with a note; the error is weighed relative to the operating point and the
 * absolute tolerance set to a hundredth of rtol times the start level, so a tone
 * that starts at the thermal level on a bias is held to rtol of its own size. */
#define RU_DAMP_SHARE 0.03
#define RU_ATOL_FLOOR 2e-14 /* of each state's scale: well above rounding */
static void choose_tolerances(const ru_circuit *c, const ru_system *sys,
                              ru_run_report *rep, int pos, int neg, const double *x_op,
                              int accuracy, ru_transient_opts *to)
{
    (void)c;
    const ru_prediction *p = &rep->pred;
    static const char *const acc[] = {"draft", "normal", "precise"};
    if (p->have_poles && p->growth_rate_per_s != 0 && p->frequency_hz > 0) {
        double w = 2 * M_PI * p->frequency_hz, rate = fabs(p->growth_rate_per_s);
        int resolved = 1;
        double r = ru_transient_rtol_for(RU_DAMP_SHARE * rate / w, to->rtol, &resolved);
        if (r < to->rtol) {
            ru_report_note(rep, "accuracy %s (rtol %.0e) would damp the oscillation by "
                           "about %.3g /s, more than %g %% of the predicted %s rate "
                           "(%.4g /s): rtol tightened to %.2g",
                           acc[accuracy >= 0 && accuracy < 3 ? accuracy : 1], to->rtol,
                           ru_transient_damping_per_rad(to->rtol) * w,
                           100 * RU_DAMP_SHARE,
                           p->growth_rate_per_s > 0 ? "growth" : "decay", rate, r);
            to->atol_rel *= r / to->rtol;
            to->rtol = r;
        }
        if (!resolved)
            ru_report_note(rep, "the predicted %s rate (%.4g /s) is within %g %% of "
                           "the integrator's own damping even at the tightest "
                           "tolerance (%.3g /s): the verdict may be the integrator's; "
                           "confirm with a long run",
                           p->growth_rate_per_s > 0 ? "growth" : "decay", rate,
                           100 * RU_DAMP_SHARE, ru_transient_damping_per_rad(r) * w);
    }
    if (!x_op)
        return;
    to->x_ref = x_op;
    size_t n = ru_system_size(sys);
    double *scale = malloc((n ? n : 1) * sizeof *scale);
    if (!scale)
        return;
    ru_system_state_scale(sys, scale);
    int kp = ru_system_node_state(sys, pos), kn = neg > 0 ? ru_system_node_state(sys, neg) : -1;
    double sp = fmax(kp >= 0 ? scale[kp] : 0, kn >= 0 ? scale[kn] : 0);
    double seed = rep->seed_v > 0 ? rep->seed_v : p->noise_amplitude_v;
    if (isfinite(seed) && seed > 0 && sp > 0)
        to->atol_rel = fmax(RU_ATOL_FLOOR, fmin(to->atol_rel, 1e-2 * to->rtol * seed / sp));
    free(scale);
}

static ru_status run_transient(const ru_circuit *c, const ru_system *sys,
                               const ru_run_request *rq, ru_run_report *rep,
                               int probe_pos, int probe_neg, const double *x_op,
                               ru_error *err)
{
    const ru_run_opts *ro = ru_circuit_run_opts_const(c);
    size_t n = ru_system_size(sys);
    ru_status st = RU_OK;
    ru_run_sink k = {.sys = sys, .probe_pos = probe_pos, .probe_neg = probe_neg,
                     .stop = rq->stop};
    double *x0 = calloc(n ? n : 1, sizeof *x0);
    k.x_last = calloc(n ? n : 1, sizeof *k.x_last);
    k.mark.x = calloc(n ? n : 1, sizeof *k.mark.x);
    char path[4096];
    if (!x0 || !k.x_last || !k.mark.x) {
        free(x0);
        free(k.x_last);
        free(k.mark.x);
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "out of memory");
    }
    if ((st = ru_system_initial_state(sys, x0, err)) != RU_OK)
        goto cleanup;
    if (rep->engine.envelope && ru_run_opts_noise(ro))
        ru_envrun_noise_start(sys, rep, probe_pos, probe_neg, x_op, x0);
    ru_transient_opts to;
    int accuracy = rq->accuracy >= 0 ? rq->accuracy : (int)ro->accuracy;
    ru_transient_opts_for((ru_accuracy)accuracy, &to);
    to.stop_s = rep->stop_s;
    to.sample_s = rep->sample_s;
    to.rtol *= rq->tol_scale;
    to.atol_rel *= rq->tol_scale;
    /* A preset kick is a small-signal start whose size the modal projection gives;
     * power-on moves the bias through a large-signal transient, whose projection
     * says nothing about the envelope's floor: its seed is the thermal noise (or
     * none with noise off). */
    rep->seed_v = ro->kick == RU_KICK_PRESET ? preset_level(ro, rep)
                  : rep->noise_on && isfinite(rep->pred.noise_amplitude_v)
                      ? rep->pred.noise_amplitude_v
                      : 0;
    choose_tolerances(c, sys, rep, probe_pos, probe_neg, x_op, accuracy, &to);
    to.integrator = (ru_integrator)rq->integrator;
    for (size_t i = 0; to.integrator == RU_INTEGRATOR_CVODE && i < n; i++)
        if (ru_system_state_kind(sys, i) != RU_STATE_DIFFERENTIAL) {
            st = ru_error_set(err, RU_EINPUT, ru_circuit_file(c), 0, 0,
                              "the CVODE integrator needs capacitance at every node, and "
                              "node %s has none to ground (stray 0): use IDA (the "
                              "default here)", ru_system_state_name(sys, i));
            goto cleanup;
        }
    to.stab_lim_det = rq->stab_limit == RU_STAB_ON    ? 1
                      : rq->stab_limit == RU_STAB_OFF ? 0
                                                      : !rep->pred.have_poles ||
                                                            rep->pred.stiff_oscillatory;
    ru_measure_cfg mc;
    ru_measure_cfg_default(&mc, rep->stop_s, rep->sample_s);
    const ru_measure_opts *mo = ru_circuit_measure_opts_const(c);
    mc.startup_level = mo->startup_level;
    mc.growth_lo = mo->growth_lo;
    mc.growth_hi = mo->growth_hi;
    if (rep->pred.have_poles && rep->pred.frequency_hz > 0)
        mc.period_hint_s = 1.0 / rep->pred.frequency_hz;
    mc.kick_level_v = rep->seed_v;
    if ((st = ru_measure_create(&mc, &k.meas)) != RU_OK) {
        ru_error_set(err, st, NULL, 0, 0, "cannot set up the measurement");
        goto cleanup;
    }
    if (ru_energy_balance_create(sys, rep->stop_s, &k.energy) != RU_OK ||
        (x_op && ru_energy_balance_set_ref(k.energy, x_op) != RU_OK)) {
        ru_energy_balance_destroy(k.energy);
        k.energy = NULL; /* the estimate is optional */
    }
    if (rq->wav_path && (st = wav_open(rq, rep, &k.wav, err)) != RU_OK)
        goto cleanup;
    if (rq->keep) {
        /* spanning the first chunk: the trace folds its columns as the run goes on */
        if ((st = ru_trace_create(rep->stop.first_s, 0, &rq->keep->trace)) != RU_OK) {
            ru_error_set(err, st, NULL, 0, 0, "cannot set up the waveform trace");
            goto cleanup;
        }
        k.trace = rq->keep->trace;
    }
    if (rq->out_dir) {
        snprintf(path, sizeof path, "%s/wave.csv", rq->out_dir);
        if ((st = ru_csv_open(sys, path, &k.csv, err)) != RU_OK)
            goto cleanup;
    }
    ru_judge_ctx jc = {.c = c, .sys = sys, .probe_pos = probe_pos, .probe_neg = probe_neg,
                       .x_op = x_op, .x_end = k.x_last, .mark = &k.mark, .rtol = to.rtol,
                       .atol_rel = to.atol_rel, .relative = to.x_ref != NULL,
                       .seed_v = mc.kick_level_v,
                       .seed_is_kick = ro->kick == RU_KICK_PRESET};
    ru_transient *tr = NULL;
    if (rep->engine.envelope) {
        st = ru_envrun(sys, rq, rep, &k, x0, x_op, &jc, err);
        goto closing;
    }
    st = ru_transient_create(sys, &to, x0, ru_run_sink_sample, &k, &tr, err);
    if (st == RU_OK) {
        ru_run_engine eng;
        ru_run_engine_transient(tr, &eng);
        st = ru_runloop(&eng, k.meas, &jc, rep, err);
        ru_transient_stats(tr, &rep->solver);
        if (st != RU_OK)
            rep->solver.t_reached_s = rep->stop_s;
    }
    ru_transient_destroy(tr);
closing:
    if (st == RU_ENUMERIC)
        rep->partial = 1;
    if (k.csv) {
        ru_error cerr;
        ru_status cs = ru_csv_close(k.csv, st == RU_OK ? 1 : (st == RU_ENUMERIC ? 2 : 0),
                                    &cerr);
        k.csv = NULL;
        if ((st == RU_OK || st == RU_EIO) && cs != RU_OK) {
            if (err) /* the file's own reason (a full disk) over "output stopped" */
                *err = cerr;
            st = cs;
        }
    }
    if (st == RU_OK || st == RU_ENUMERIC) {
        ru_measure_finish(k.meas, &rep->meas);
        jc.x_end = k.have_last ? k.x_last : NULL;
        ru_judge_final(&jc, rep);
        if (rq->polish && st == RU_OK)
            ru_polish_run(c, jc.x_end, rep);
        ru_crystal_notes(c, sys, x_op, jc.x_end, rep);
        if (rq->keep && keep_envelope(rq->keep, k.meas) != RU_OK)
            st = ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "out of memory");
        if (k.energy)
            rep->integrator_damping_per_s = ru_energy_balance_damping(k.energy);
    }
    if (st == RU_OK && k.wav)
        st = wav_finish(k.wav, rq, rep, err);
cleanup:
    ru_wav_destroy(k.wav);
    if (k.csv)
        ru_csv_close(k.csv, 0, NULL);
    ru_energy_balance_destroy(k.energy);
    ru_measure_destroy(k.meas);
    free(x0);
    free(k.x_last);
    free(k.mark.x);
    return st;
}

static int has_noise_source(const ru_circuit *c)
{
    for (size_t i = 0; i < ru_circuit_part_count(c); i++) {
        const ru_part *p = ru_circuit_part(c, i);
        if (p->type == RU_PART_RESISTOR || p->type == RU_PART_CRYSTAL ||
            (p->type == RU_PART_INDUCTOR && p->series_ohm > 0))
            return 1;
    }
    return 0;
}

/* Band of the noise kick: 20x the predicted tone (flat to 0.5 dB up to about
 * 2.6x the tone, see noise.h), or 20x the highest frequency the samples resolve
 * when nothing is predicted. */
static double noise_band(const ru_run_report *rep)
{
    if (rep->pred.have_poles && rep->pred.frequency_hz > 0)
        return 20.0 * rep->pred.frequency_hz;
    return 20.0 * 0.5 / rep->sample_s;
}

/* Refuses a sample spacing not shorter than the run (nothing to measure), and
 * runs that would take hours or fill a disk: more than RU_MAX_SAMPLES
 * output samples, or more than RU_MAX_CYCLES cycles of the predicted tone (about
 * 170 solver steps each at normal accuracy). A long study can be split into runs. */
#define RU_MAX_SAMPLES 5e7
#define RU_MAX_CYCLES 2e6
/* An envelope run samples only what it integrates: about the head (at most 200
 * cycles after the sources settle), a tail of 80 cycles per chunk and 400 cycles
 * computed alone; its samples are bounded by RU_ENV_SAMPLED_CYCLES of them, and
 * the span by RU_MAX_ENV_CYCLES (each envelope step covers up to thousands). */
#define RU_ENV_SAMPLED_CYCLES 2e4
#define RU_MAX_ENV_CYCLES 1e10
/* wave.csv: at most RU_MAX_CSV_BYTES, estimated at 16 bytes a value (",%.10g" of a
 * value such as -0.001234567891 is 16; exponents make some longer, zeros shorter) */
#define RU_MAX_CSV_BYTES 2e9
static ru_status check_size(const ru_circuit *c, const ru_run_request *rq,
                            const ru_run_report *rep, ru_error *err)
{
    if (!(rep->sample_s < rep->stop_s))
        return ru_error_set(err, RU_EINPUT, ru_circuit_file(c), 0, 0,
                            "the sample spacing (%g s) is not shorter than the run (stop "
                            "%g s): lengthen the run or shorten the sample spacing",
                            rep->sample_s, rep->stop_s);
    if (rep->stop.automatic && !(16 * rep->sample_s < rep->stop.first_s))
        return ru_error_set(err, RU_EINPUT, ru_circuit_file(c), 0, 0,
                            "the sample spacing (%g s) leaves fewer than 16 samples in the "
                            "first %g s of the automatic run length: shorten the sample "
                            "spacing or give a stop time",
                            rep->sample_s, rep->stop.first_s);
    double samples = rep->stop_s / rep->sample_s;
    double cycles = rep->pred.have_poles ? rep->stop_s * rep->pred.frequency_hz : 0;
    if (rep->engine.envelope && cycles > 0) {
        /* only the integrated stretches are sampled: the head, the tails, the cycles
         * computed alone; the envelope steps span the rest at a cost that does not
         * grow with their number */
        samples = fmin(samples,
                       RU_ENV_SAMPLED_CYCLES / (rep->pred.frequency_hz * rep->sample_s));
        if (cycles > RU_MAX_ENV_CYCLES)
            return ru_error_set(err, RU_EINPUT, ru_circuit_file(c), 0, 0,
                                "the run spans %.3g cycles of the %.4g Hz tone, more than "
                                "%.0e even for envelope steps: shorten the run",
                                cycles, rep->pred.frequency_hz, RU_MAX_ENV_CYCLES);
        cycles = 0;
    }
    if (samples > RU_MAX_SAMPLES)
        return ru_error_set(err, RU_EINPUT, ru_circuit_file(c), 0, 0,
                            "the run would make %.3g output samples (stop %g s at a "
                            "spacing of %g s), more than %.0e: lengthen the sample "
                            "spacing or shorten the run",
                            samples, rep->stop_s, rep->sample_s, RU_MAX_SAMPLES);
    if (cycles > RU_MAX_CYCLES)
        return ru_error_set(err, RU_EINPUT, ru_circuit_file(c), 0, 0,
                            "the run spans %.3g cycles of the %.4g Hz tone, more than "
                            "%.0e (hours of solver time): shorten the run",
                            cycles, rep->pred.frequency_hz, RU_MAX_CYCLES);
    size_t cols = 1 + ru_circuit_node_count(c) - 1;
    for (size_t i = 0; i < ru_circuit_part_count(c); i++)
        cols += (size_t)ru_part_currents(ru_circuit_part(c, i));
    double bytes = (samples + 1) * (double)cols * 16.0;
    if (rq->out_dir && bytes > RU_MAX_CSV_BYTES)
        return ru_error_set(err, RU_EINPUT, ru_circuit_file(c), 0, 0,
                            "wave.csv would take about %.3g GB (%.3g samples of %zu "
                            "columns), more than %.0f GB: lengthen the sample spacing or "
                            "shorten the run",
                            bytes / 1e9, samples + 1, cols, RU_MAX_CSV_BYTES / 1e9);
    return RU_OK;
}

ru_status ru_analysis_run(const ru_circuit *c, const ru_run_request *rq,
                          ru_run_report *rep, ru_error *err)
{
    memset(rep, 0, sizeof *rep);
    rep->integrator_damping_per_s = NAN;
    rep->growth_mismatch = NAN;
    ru_system *sys = NULL;
    double *x_op = NULL;
    ru_status st = ru_system_create(c, &sys, err);
    if (st != RU_OK)
        return st;
    int pos = -1, neg = 0;
    if ((st = resolve_probe(c, sys, rep, &pos, &neg, err)) != RU_OK)
        goto done;
    const ru_run_opts *ro = ru_circuit_run_opts_const(c);
    rep->startup_level = ru_circuit_measure_opts_const(c)->startup_level;
    if (rq->keep)
        ru_run_data_reset(rq->keep);
    x_op = calloc(ru_system_size(sys) ? ru_system_size(sys) : 1, sizeof *x_op);
    if (!x_op) {
        st = ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "out of memory");
        goto done;
    }
    if ((st = ru_predict(c, sys, rq, pos, neg, rep, rq->keep, x_op, err)) != RU_OK)
        goto done;
    if ((st = ru_engine_choose(c, sys, rq, rep, x_op, err)) != RU_OK)
        goto done;
    ru_stop_plan(c, sys, rq, rep);
    rep->sample_s = choose_sample(rq, ro, &rep->pred, rep->stop.first_s);
    if ((st = check_size(c, rq, rep, err)) != RU_OK ||
        (st = check_sampling(c, rq, ro, rep, err)) != RU_OK)
        goto done;
    if (ro->kick == RU_KICK_NOISE && !has_noise_source(c)) {
        st = ru_error_set(err, RU_EINPUT, ru_circuit_file(c), 0, 0,
                          "kick: noise needs a resistor (or an inductor's series "
                          "resistance): this circuit has no thermal noise source");
        goto done;
    }
    /* the envelope engine: ru_envrun_noise_start gives the noise's start instead */
    rep->noise_on = ru_run_opts_noise(ro) && has_noise_source(c) && !rep->engine.envelope;
    if (ru_run_opts_noise(ro) && !has_noise_source(c))
        ru_report_note(rep, "no resistor and no inductor series resistance: no thermal "
                            "noise to start from, the start is the power-on alone");
    if (rep->noise_on &&
        (st = ru_system_set_noise(sys, ro->seed, noise_band(rep), ru_circuit_temp_c(c))) != RU_OK) {
        ru_error_set(err, st, NULL, 0, 0, "cannot set up the noise kick");
        goto done;
    }
    st = run_transient(c, sys, rq, rep, pos, neg, rep->pred.have_op ? x_op : NULL, err);
    if (st == RU_OK || st == RU_ENUMERIC)
        ru_selfcheck(rep);
done:
    free(x_op);
    ru_system_destroy(sys);
    return st;
}
