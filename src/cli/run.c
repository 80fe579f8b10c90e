/* run.c: `ringup run FILE`: simulate the start-up, measure it, compare with the
 * small-signal prediction, check the designer's expectations. */
#include "cli/cli.h"

#include "ringup/analysis.h"
#include "ringup/format.h"
#include "ringup/json.h"
#include "ringup/loader.h"
#include "ringup/outfile.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static const char *yes_no(int v) { return v ? "yes" : "no"; }

static void row(const char *label, double meas, double pred, const char *unit)
{
    char a[40], b[40];
    ru_format_si(meas, unit, 4, a, sizeof a);
    ru_format_si(pred, unit, 4, b, sizeof b);
    printf("  %-20s %-16s %s\n", label, a, b);
}

static void rate_row(const char *label, double meas, double pred)
{
    char a[40] = "-", b[40] = "-";
    if (isfinite(meas))
        snprintf(a, sizeof a, "%.5g /s", meas);
    if (isfinite(pred))
        snprintf(b, sizeof b, "%.5g /s", pred);
    printf("  %-20s %-16s %s\n", label, a, b);
}

static void print_harmonics(const ru_measure_result *m)
{
    printf("  %-20s", "harmonics (dBc)");
    if (!isfinite(m->thd_percent)) {
        printf(" -\n");
        return;
    }
    for (int k = 0; k < RU_HARMONICS - 1; k++) {
        if (isfinite(m->harmonics_dbc[k]) && m->harmonics_dbc[k] > -200)
            printf(" H%d %.1f", k + 2, m->harmonics_dbc[k]);
        else
            printf(" H%d <-200", k + 2);
        if (k == 3)
            printf("\n  %-20s", "");
    }
    printf("\n");
}

/* Where the exponential growth starts from, and what sets that level. */
static void print_start_level(const ru_prediction *p)
{
    char a[40], b[40];
    if (!isfinite(p->kick_amplitude_v))
        return;
    ru_format_si(p->kick_amplitude_v, "V", 3, a, sizeof a);
    if (p->start_kind == 2) {
        printf("start level: %s on the probe (noise: the growing mode's accumulated "
               "thermal noise, log-mean; rms %s",
               a, ru_format_si(p->start_rms_v, "V", 3, b, sizeof b));
        if (p->growth_rate_per_s > 0)
            printf("; one run's start-up scatters by about %s, 1 s.d.",
                   ru_format_si(p->start_log_sd / p->growth_rate_per_s, "s", 2, b,
                                sizeof b));
        printf(")\n");
    } else {
        printf("start level: %s on the probe (%s)\n", a,
               p->start_kind == 0 ? "preset: its share in the dominant mode, with the "
                                    "supplies' ramp"
                                  : "power-on: the dominant mode's response to the "
                                    "supplies' ramp");
    }
}

/* The harmonic balance's H2 and H3 beside the measured list, and what gave the
 * predicted tone. */
static void print_predicted_harmonics(const ru_hb_tone *h)
{
    printf("  %-20s", "  predicted (dBc)");
    for (int k = 0; k < 2; k++) {
        double d = h->harmonics_dbc[k];
        if (isfinite(d) && d > -200)
            printf(" H%d %.1f", k + 2, d);
        else
            printf(" H%d <-200", k + 2);
    }
    printf("   (harmonic balance, %d harmonics%s)\n", h->harmonics,
           h->converged ? "" : ", not converged");
}

/* The settled figures from the periodic steady state (ru_polish), beside the
 * measured ones. */
static void print_polish(const ru_run_report *r)
{
    const ru_polish *p = &r->polish;
    const ru_measure_result *m = &r->meas;
    char a[40], b[40], d[40];
    if (!p->have)
        return;
    printf("\nsettled figures polished by the periodic steady state from the run's end "
           "(`ringup steady`\nfor the whole report):\n");
    printf("  frequency %s (measured %s: %+.3g ppm)\n",
           ru_format_si(p->frequency_hz, "Hz", 10, a, sizeof a),
           ru_format_si(m->frequency_hz, "Hz", 6, b, sizeof b),
           1e6 * (m->frequency_hz - p->frequency_hz) / p->frequency_hz);
    printf("  amplitude %s (measured %s), fundamental %s\n",
           ru_format_si(p->amplitude_v, "V", 7, a, sizeof a),
           ru_format_si(m->settled_amplitude_v, "V", 4, b, sizeof b),
           ru_format_si(p->fundamental_v, "V", 7, d, sizeof d));
    printf("  THD %.5g %% (measured %.4g %%), DC level %s\n", p->thd_percent, m->thd_percent,
           ru_format_si(p->dc_level_v, "V", 5, a, sizeof a));
    if (isfinite(p->recovery_time_s))
        printf("  amplitude recovery %s = %.4g cycles (1/e)\n",
               ru_format_si(p->recovery_time_s, "s", 4, a, sizeof a), p->recovery_cycles);
    printf("  Newton: %d iteration%s from the run's last state, %.3f s\n", p->newton_iterations,
           p->newton_iterations == 1 ? "" : "s", p->cpu_s);
}

static void print_text(const ru_circuit *c, const ru_run_report *r, int auto_sample)
{
    const ru_measure_result *m = &r->meas;
    const ru_prediction *p = &r->pred;
    char a[40], b[40];
    printf("%s: %s\n", ru_circuit_file(c), ru_circuit_title(c));
    printf("probe %s, stop %s%s, sample %s%s\n", r->probe, r->stop.automatic ? "auto: " : "",
           ru_format_si(r->stop_s, "s", 4, a, sizeof a),
           ru_format_si(r->sample_s, "s", 4, b, sizeof b), auto_sample ? " (auto)" : "");
    if (r->stop.automatic) {
        char cap[40], cpu[40];
        ru_format_si(r->stop.cap_s, "s", 4, cap, sizeof cap);
        ru_format_si(r->stop.cap_cpu_s, "s", 3, cpu, sizeof cpu);
        printf("  ended: %s, after %d chunk%s; caps: %s (%s)", r->stop.reason,
               r->stop.chunks, r->stop.chunks == 1 ? "" : "s", cap, r->stop.cap_why);
        if (r->stop.cap_cycles > 0)
            printf(", %.3g cycles", r->stop.cap_cycles);
        printf(", %s CPU\n", cpu);
    }
    printf("\n");
    printf("  %-20s %-16s %s\n", "", "measured", "predicted");
    char vb[40];
    snprintf(vb, sizeof vb, "%s (%s)", yes_no(m->started), ru_verdict_name(r->verdict));
    printf("  %-20s %-16s %s\n", "started", vb,
           !p->have_poles              ? "-"
           : p->growth_rate_per_s > 0 ? "yes (poles right of jw axis)"
           : p->growth_rate_per_s < 0 ? "no (poles left of jw axis)"
                                      : "no (poles on the jw axis)");
    row("start-up time", m->startup_time_s, p->startup_time_s, "s");
    rate_row("growth rate", m->growth_rate_per_s, p->growth_rate_per_s);
    row("frequency", m->frequency_hz, p->frequency_hz, "Hz");
    const ru_hb_tone *h = p->have_hb ? &p->hb : NULL;
    if (h || isfinite(p->df_frequency_hz))
        row("  at settled size", NAN, h ? h->frequency_hz : p->df_frequency_hz, "Hz");
    /* a tone still moving at the end: its size then, not a settled amplitude */
    row(m->settled ? "settled amplitude" : "amplitude at end", m->settled_amplitude_v,
        h ? h->amplitude_v : NAN, "V");
    row("  fundamental", m->fundamental_v, h ? h->fundamental_v : p->settled_amplitude_v,
        "V");
    printf("  %-20s %s\n", "settled", isfinite(m->settled_amplitude_v) ? yes_no(m->settled) : "-");
    row("settling time", m->settling_time_s, NAN, "s");
    if (isfinite(m->thd_percent))
        snprintf(a, sizeof a, "%.4g %%", m->thd_percent);
    else
        snprintf(a, sizeof a, "-");
    if (h)
        snprintf(b, sizeof b, "%.4g %%", h->thd_percent);
    else
        snprintf(b, sizeof b, "-");
    printf("  %-20s %-16s %s\n", "THD", a, b);
    print_harmonics(m);
    if (h)
        print_predicted_harmonics(h);
    row("DC level", m->dc_level_v, h ? h->dc_level_v : NAN, "V");
    print_polish(r);
    if (isfinite(m->growth_rate_per_s))
        printf("\ngrowth fit: %d cycles from %s to %s, rms residual %.2g\n",
               m->growth_fit_points, ru_format_si(m->growth_fit_t0_s, "s", 3, a, sizeof a),
               ru_format_si(m->growth_fit_t1_s, "s", 3, b, sizeof b), m->growth_fit_rms);
    else
        printf("\n"); /* why the growth rate is missing is among the notes */
    print_start_level(p);
    if (p->have_loop) {
        char what[RU_NAME_MAX + RU_LOOP_LOAD_TEXT + 64];
        if (p->loop_node[0])
            snprintf(what, sizeof what, "loop gain at node %s (load side: %s; double "
                     "injection)", p->loop_node, p->loop_load);
        else
            snprintf(what, sizeof what, "loop gain of %s", p->loop_part);
        if (p->loop.found)
            printf("%s: phase 0 at %s, |L| = %.4g (%+.2f dB): %s\n", what,
                   ru_format_si(p->loop.crossover_hz, "Hz", 4, a, sizeof a),
                   p->loop.gain, p->loop.margin_db,
                   p->loop.margin_db > 0 ? "above 1, the loop starts (Barkhausen)"
                                         : "below 1, the loop does not start");
        else
            printf("%s: the phase never passes 0 degrees in the range searched: no "
                   "oscillation through this loop\n", what);
    }
    if (r->engine.envelope)
        printf("engine: envelope: %ld cycles integrated, %.4g spanned by %ld envelope "
               "steps%s\n",
               r->engine.cycles_integrated, r->engine.cycles_spanned, r->engine.env_steps,
               r->engine.fell_back ? " (an envelope step failed: the rest went cycle by "
                                     "cycle)" : "");
    printf("solver: %s, %ld steps, %ld %s evaluations, %ld Jacobians, rtol %.0e, "
           "%.3f s\n",
           ru_transient_engine_name(&r->solver), r->solver.steps, r->solver.rhs_evals,
           r->solver.integrator == RU_INTEGRATOR_IDA ? "residual" : "right-hand-side",
           r->solver.jac_evals, r->solver.rtol, r->solver.wall_s);
    if (isfinite(r->integrator_damping_per_s))
        printf("integrator damping (energy balance): %.3g /s\n", r->integrator_damping_per_s);
    for (int i = 0; i < r->nnotes; i++)
        printf("note: %s\n", r->notes[i]);
}

static void json_wav(ru_json *j, const char *path, const ru_run_report *r)
{
    if (!r->have_wav)
        return;
    ru_json_begin_object(j, "wav");
    ru_json_string(j, "path", path);
    ru_json_number(j, "seconds", r->wav.seconds);
    ru_json_number(j, "time_scale", r->wav.time_scale);
    ru_json_number(j, "tone_audio_hz", r->wav.tone_audio_hz);
    ru_json_number(j, "peak_dbfs", r->wav.peak_dbfs);
    ru_json_bool(j, "level_limited", r->wav.level_limited);
    ru_json_bool(j, "pitch_auto", r->wav.pitch_auto);
    ru_json_number(j, "pitch_hz", r->wav.pitch_hz > 0 ? r->wav.pitch_hz : NAN);
    ru_json_bool(j, "bias_removed", r->wav.bias_removed);
    ru_json_end_object(j);
}

static void json_verify(ru_json *j, const ru_run_report *r, const ru_run_report *r2);

static void print_json(const ru_run_report *r, int partial, const char *wav_path,
                       const ru_run_report *r2)
{
    ru_json j;
    ru_json_init(&j, stdout, 1);
    ru_json_begin_object(&j, NULL);
    ru_json_string(&j, "probe", r->probe);
    ru_json_number(&j, "stop_s", r->stop_s);
    ru_json_number(&j, "sample_s", r->sample_s);
    cli_json_run_body(&j, r);
    const ru_measure_result *m = &r->meas;
    ru_json_begin_object(&j, "growth_fit");
    ru_json_number(&j, "t_start_s", m->growth_fit_t0_s);
    ru_json_number(&j, "t_end_s", m->growth_fit_t1_s);
    ru_json_int(&j, "cycles", m->growth_fit_points);
    ru_json_number(&j, "rms_residual", m->growth_fit_rms);
    ru_json_number(&j, "level_v", m->growth_fit_level_v);
    ru_json_end_object(&j);
    if (r->pred.have_loop) {
        ru_json_begin_object(&j, "loop");
        if (r->pred.loop_node[0]) {
            ru_json_string(&j, "node", r->pred.loop_node);
            ru_json_string(&j, "load_side", r->pred.loop_load);
            ru_json_string(&j, "method", "Middlebrook double injection");
        } else {
            ru_json_string(&j, "part", r->pred.loop_part);
        }
        ru_json_number(&j, "crossover_hz", r->pred.loop.found ? r->pred.loop.crossover_hz : NAN);
        ru_json_number(&j, "gain_at_crossover", r->pred.loop.found ? r->pred.loop.gain : NAN);
        ru_json_number(&j, "margin_db", r->pred.loop.found ? r->pred.loop.margin_db : NAN);
        ru_json_end_object(&j);
    }
    ru_json_number(&j, "integrator_damping_per_s", r->integrator_damping_per_s);
    json_wav(&j, wav_path, r);
    json_verify(&j, r, r2);
    ru_json_bool(&j, "partial", partial);
    ru_json_number(&j, "t_reached_s", r->solver.t_reached_s);
    cli_json_notes(&j, r);
    ru_json_end_object(&j);
    ru_json_finish(&j);
}

/* The figures --verify compares, with their JSON keys. */
#define NVERIFY 5
static void verify_figures(const ru_run_report *r, double *v)
{
    v[0] = r->meas.startup_time_s;
    v[1] = r->meas.growth_rate_per_s;
    v[2] = r->meas.frequency_hz;
    v[3] = r->meas.settled_amplitude_v;
    v[4] = r->meas.thd_percent;
}

static const char *const verify_label[NVERIFY] = {"start-up time", "growth rate",
                                                  "frequency", "settled amplitude", "THD"};
static const char *const verify_key[NVERIFY] = {"startup_time_s", "growth_rate_per_s",
                                                "frequency_hz", "settled_amplitude_v",
                                                "thd_percent"};

/* How much a figure moved at the tighter tolerances, in percent (NAN: unknown). */
static double moved_percent(double a, double b)
{
    return isfinite(a) && isfinite(b) && a != 0 ? 100 * (b - a) / fabs(a) : NAN;
}

/* Reruns at 10x tighter tolerances; NULL (and *rc set) when the rerun fails. */
static ru_run_report *verify_run(const ru_circuit *c, const ru_run_request *rq,
                                 const ru_run_report *r, int *rc)
{
    ru_run_request tight = *rq;
    tight.tol_scale = rq->tol_scale * 0.1;
    tight.out_dir = NULL;
    tight.wav_path = NULL;
    tight.keep = NULL;
    tight.sample_s = r->sample_s;
    ru_run_report *r2 = malloc(sizeof *r2);
    ru_error err;
    ru_error_clear(&err);
    if (!r2) {
        *rc = 2;
        return NULL;
    }
    ru_status st = ru_analysis_run(c, &tight, r2, &err);
    if (st != RU_OK) {
        free(r2);
        *rc = cli_fail(&err);
        return NULL;
    }
    return r2;
}

static void print_verify(const ru_run_report *r, const ru_run_report *r2)
{
    double a[NVERIFY], b[NVERIFY];
    verify_figures(r, a);
    verify_figures(r2, b);
    printf("\nverify: rerun at 10x tighter tolerances (rtol %.0e):\n", r2->solver.rtol);
    for (int i = 0; i < NVERIFY; i++) {
        double m = moved_percent(a[i], b[i]);
        if (isfinite(m))
            printf("  %-20s moved %+.3g %%\n", verify_label[i], m);
        else
            printf("  %-20s -\n", verify_label[i]);
    }
}

static void json_verify(ru_json *j, const ru_run_report *r, const ru_run_report *r2)
{
    if (!r2)
        return;
    double a[NVERIFY], b[NVERIFY];
    verify_figures(r, a);
    verify_figures(r2, b);
    ru_json_begin_object(j, "verify");
    ru_json_number(j, "rtol", r2->solver.rtol);
    ru_json_begin_object(j, "moved_percent");
    for (int i = 0; i < NVERIFY; i++)
        ru_json_number(j, verify_key[i], moved_percent(a[i], b[i]));
    ru_json_end_object(j);
    ru_json_end_object(j);
}

/* --wav and its options; range checks (level above -1 dBFS, ...) are the
 * library's (ru_wav_create, before the transient runs). */
static int set_wav(const cli_opt *opts, ru_run_request *rq)
{
    rq->wav_path = cli_get(opts, "wav");
    ru_wav_opts *w = &rq->wav;
    if (!cli_value(opts, "wav-rate", "Hz", &w->rate_hz) ||
        !cli_value(opts, "wav-level", NULL, &w->level_dbfs) ||
        !cli_positive(opts, "wav-pitch", "Hz", &w->pitch_hz) ||
        !cli_positive(opts, "wav-seconds", "s", &w->max_seconds))
        return 0;
    if (cli_get(opts, "wav-real-time")) {
        if (cli_get(opts, "wav-pitch")) {
            fprintf(stderr, "ringup: --wav-pitch and --wav-real-time exclude each other\n");
            return 0;
        }
        w->auto_pitch = 0;
    }
    if (cli_get(opts, "wav-float"))
        w->format = RU_WAV_FLOAT;
    if (!rq->wav_path && (cli_get(opts, "wav-rate") || cli_get(opts, "wav-level") ||
                          cli_get(opts, "wav-pitch") || cli_get(opts, "wav-seconds") ||
                          cli_get(opts, "wav-float") || cli_get(opts, "wav-real-time"))) {
        fprintf(stderr, "ringup: the --wav-* options need --wav FILE\n");
        return 0;
    }
    return 1;
}

/* What the audio holds, and the caution to turn the volume down. */
static void print_wav(const ru_run_request *rq, const ru_run_report *r)
{
    const ru_wav_info *w = &r->wav;
    char a[40], b[40], c[40];
    printf("wrote %s: %.3f s, %s, %.0f Hz mono, peak %.1f dBFS", rq->wav_path,
           w->seconds, rq->wav.format == RU_WAV_FLOAT ? "32-bit float" : "24-bit PCM",
           rq->wav.rate_hz, w->peak_dbfs);
    if (w->time_scale != 1.0)
        printf(", time stretched %.4gx", w->time_scale);
    if (isfinite(w->tone_audio_hz))
        printf(", tone at %s", ru_format_si(w->tone_audio_hz, "Hz", 4, a, sizeof a));
    printf("\n");
    printf("caution: the start-up can be loud and sudden; turn the volume down "
           "before playing the file\n");
    if (w->pitch_auto)
        printf("note: the tone (%s) is not audible at real time, so it plays at %s "
               "(pitch chosen automatically; --wav-pitch HZ to choose, --wav-real-time "
               "to keep real time)\n",
               ru_format_si(w->tone_audio_hz * w->time_scale, "Hz", 4, a, sizeof a),
               ru_format_si(w->pitch_hz, "Hz", 4, c, sizeof c));
    if (isfinite(w->tone_audio_hz) && w->tone_audio_hz > w->passband_hz)
        printf("note: the tone lies above the audio band (%s): the file is nearly silent; "
               "use --wav-pitch\n", ru_format_si(w->passband_hz, "Hz", 3, b, sizeof b));
    else if (w->level_limited)
        printf("note: the level was held at %.1f dBFS: most of the probe's swing lies "
               "outside the audio band (%s), and it is not amplified past full scale\n",
               w->peak_dbfs, ru_format_si(w->passband_hz, "Hz", 3, b, sizeof b));
    if (w->bias_removed)
        printf("note: the bias movement (power-on step, bias settling) was removed with "
               "the DC, so the level follows the tone\n");
    if (w->truncated)
        printf("note: the audio was cut at %.0f s; use --wav-seconds\n", w->seconds);
    if (w->silent)
        printf("note: the probe carries no signal after DC removal: the file is silent\n");
}

static int set_request(const cli_opt *opts, ru_run_request *rq)
{
    ru_run_request_default(rq);
    rq->polish = cli_get(opts, "no-polish") == NULL;
    rq->out_dir = cli_get(opts, "out");
    cli_loop_opts lo;
    if (cli_loop_get(opts, &lo) != 0)
        return 0;
    rq->loop_part = lo.part;
    rq->loop_node = lo.node;
    rq->loop_load = lo.load;
    if (!cli_stop(opts, rq) || !cli_positive(opts, "sample", "s", &rq->sample_s))
        return 0;
    if (!set_wav(opts, rq))
        return 0;
    static const char *const eng[3] = {"auto", "direct", "envelope"}, /* ru_engine */
        *integ[3] = {"auto", "cvode", "ida"},                           /* ru_integrator */
        *stab[3] = {"auto", "on", "off"};                               /* ru_stab_limit */
    if (!cli_word3(opts, "engine", eng, &rq->engine) ||
        !cli_word3(opts, "integrator", integ, &rq->integrator) ||
        !cli_word3(opts, "stability-limit", stab, &rq->stab_limit))
        return 0;
    return cli_accuracy(opts, &rq->accuracy) == 0;
}

/* After SIGINT or SIGTERM: what was kept, and the exit status 128 + the signal. */
static int stopped(const ru_run_request *rq)
{
    int sig = cli_stop_signal();
    fprintf(stderr, "ringup run: stopped by %s; %s\n",
            sig == SIGINT ? "SIGINT (Ctrl-C)" : "SIGTERM",
            rq->out_dir || rq->wav_path ? "no unfinished file was kept" : "nothing was written");
    return 128 + sig;
}

int cmd_run(int argc, char **argv)
{
    cli_opt opts[] = {
        {"out", "DIR", "write DIR/wave.csv (every node voltage and inductor current)", NULL},
        {"stop", "T", "run length, e.g. 20m, or auto: until settled (default: the file's "
                      "run.stop, auto when it has none)", NULL},
        {"sample", "T", "output spacing (default: 72 samples per predicted period)", NULL},
        {"accuracy", "LEVEL", "draft, normal or precise (default: the file's)", NULL},
        CLI_TEMP_OPT,
        {"engine", "E", "auto (default), direct (every cycle) or envelope (cycles "
                        "skipped, for slow starters)", NULL},
        {"integrator", "I", "auto (default: CVODE for a small ODE, IDA for a large "
                            "circuit or ideal nodes), cvode or ida", NULL},
        {"stability-limit", "S", "CVODE's stability-limit detection: auto (default: on "
                                 "when the poles show a stiff mode near the jw axis), on "
                                 "or off", NULL},
        {"loop", "PART", "amplifier whose loop gain is reported", NULL},
        CLI_LOOP_NODE_OPTS,
        {"verify", NULL, "rerun at 10x tighter tolerances and show what moved", NULL},
        {"no-polish", NULL, "skip the periodic steady state after a settled run", NULL},
        {"wav", "FILE", "write the probe as mono audio (WAV); lower the volume before playing", NULL},
        {"wav-rate", "HZ", "audio sample rate (default 48000)", NULL},
        {"wav-float", NULL, "32-bit float samples instead of 24-bit PCM", NULL},
        {"wav-level", "DB", "peak level in dBFS, -1 at most (default -12)", NULL},
        {"wav-pitch", "HZ", "stretch time so the settled tone plays at HZ (default: "
                            "440 Hz when the tone is outside the audio band)", NULL},
        {"wav-real-time", NULL, "never choose a pitch: play the run at real time", NULL},
        {"wav-seconds", "T", "audio length cap (default: the whole run, stretched)", NULL},
        {"expect-start-within", "T", "exit 4 unless it starts within T", NULL},
        {"expect-amplitude", "LO:HI", "exit 4 unless the settled amplitude is in LO..HI", NULL},
        {"expect-thd-below", "P", "exit 4 unless THD is below P (e.g. 1%)", NULL},
        {"json", NULL, "print JSON on stdout (keys in README)", NULL},
        CLI_PLOT_OPTS,
        {NULL, NULL, NULL, NULL}};
    const char *file;
    int rc = cli_parse(argc, argv, "ringup run FILE [options]",
                       "Simulates the circuit from power-on (or its kick) with a stiff BDF "
                       "solver, measures\nstart-up time, growth rate, frequency, settled "
                       "amplitude and THD on the probe, and\ncompares them with the "
                       "small-signal prediction from the poles and the loop gain.",
                       opts, &file);
    if (rc >= 0)
        return rc;
    ru_run_request rq;
    cli_expect ex;
    struct sigaction old_sig[2];
    int catching = 0;
    if (!set_request(opts, &rq) || !cli_expect_parse(opts, &ex))
        return 1;
    ru_error werr;
    ru_error_clear(&werr);
    if (rq.wav_path && ru_outfile_probe(rq.wav_path, &werr) != RU_OK)
        return cli_fail(&werr); /* a link, a device, a read-only folder: before the run */
    int json = cli_get(opts, "json") != NULL;
    ru_circuit *c = NULL;
    if ((rc = cli_load(file, 0, &c)) != 0)
        return rc;
    cli_plot_req plots; /* checked first: a refused option leaves no new folder */
    if ((rc = cli_temp(opts, c)) != 0 || (rc = cli_plot_check(opts, &plots)) != 0)
        goto done;
    if (rq.out_dir && (rc = cli_make_dir(rq.out_dir)) != 0)
        goto done;
    ru_run_data *data = NULL;
    if ((plots.dir || plots.report) && ru_run_data_create(&data) != RU_OK) {
        rc = 2;
        goto done;
    }
    rq.keep = data;
    ru_run_report *r = calloc(1, sizeof *r);
    ru_error err;
    ru_error_clear(&err);
    cli_catch_signals(1, old_sig); /* Ctrl-C: the run stops, its temporary files go */
    catching = 1;
    rq.stop = cli_stop_flag();
    ru_status st = r ? ru_analysis_run(c, &rq, r, &err) : RU_ENOMEM;
    if (st == RU_ESTOPPED || cli_stop_signal()) {
        rc = stopped(&rq);
        free(r);
        ru_run_data_destroy(data);
        goto done;
    }
    if (st != RU_OK && st != RU_ENUMERIC) {
        rc = cli_fail(&err);
        free(r);
        ru_run_data_destroy(data);
        goto done;
    }
    int auto_sample = !(rq.sample_s > 0) && !(ru_circuit_run_opts_const(c)->sample_s > 0);
    if (st == RU_ENUMERIC) {
        char a[40];
        fprintf(stderr, "%s\nthe figures below cover the run up to t = %s%s\n", err.msg,
                ru_format_si(r->solver.t_reached_s, "s", 4, a, sizeof a),
                rq.out_dir ? "; wave.csv holds the samples up to there" : "");
        fflush(stderr);
        rc = 2;
    }
    ru_run_report *r2 = NULL;
    if (st == RU_OK && cli_get(opts, "verify") && !(r2 = verify_run(c, &rq, r, &rc))) {
        if (cli_stop_signal())
            rc = stopped(&rq);
        free(r);
        ru_run_data_destroy(data);
        goto done;
    }
    if (json)
        print_json(r, st == RU_ENUMERIC, rq.wav_path, r2);
    cli_capture cap; /* the text for the report, on the terminal too unless --json */
    cli_capture_begin(&cap, plots.report != NULL, !json);
    if (cli_capture_printing(&cap)) {
        print_text(c, r, auto_sample);
        if (r2)
            print_verify(r, r2);
    }
    char *text = cli_capture_end(&cap);
    if (json && r->have_wav)
        fprintf(stderr, "caution: the start-up can be loud and sudden; turn the volume "
                        "down before playing the file\n");
    if (st == RU_OK && !json && rq.out_dir) {
        printf("wrote %s/wave.csv\n", rq.out_dir);
    }
    if (st == RU_OK && !json && r->have_wav)
        print_wav(&rq, r);
    if (data && cli_stop_signal()) {
        rc = stopped(&rq); /* no figures after a stop */
        ru_run_data_destroy(data);
    } else if (data) {
        int prc = cli_plot_run(&plots, c, r, data, text);
        if (prc && !rc)
            rc = prc;
        else if (!prc && !json)
            printf("%s%s%s%s\n", plots.dir ? "wrote figures into " : "",
                   plots.dir ? plots.dir : "", plots.dir && plots.report ? "; report " : "",
                   plots.report ? plots.report : "");
        ru_run_data_destroy(data);
    }
    free(text);
    if (rc == 0 && !cli_expect_check(&ex, r))
        rc = 4;
    free(r);
    free(r2);
done:
    if (catching)
        cli_catch_signals(0, old_sig);
    ru_circuit_destroy(c);
    return rc;
}
