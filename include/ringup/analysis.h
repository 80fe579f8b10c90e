/* ringup/analysis.h: one start-up analysis of a circuit, end to end.
 *
 * ru_analysis_run compiles the circuit, finds the operating point, the poles and
 * (when a loop part is named) the loop gain, runs the transient with the CSV and
 * measurement sinks, and compares what was measured with what the small-signal
 * engine predicted. It is what `ringup run` prints; batch commands call it once
 * per variant, in parallel (it touches no shared state). */
#ifndef RINGUP_ANALYSIS_H
#define RINGUP_ANALYSIS_H

#include "ringup/circuit.h"
#include "ringup/measure.h"
#include "ringup/smallsig.h"
#include "ringup/status.h"
#include "ringup/transient.h"
#include "ringup/wav.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef struct ru_run_request {
    const char *out_dir;   /* folder for wave.csv; NULL writes no file */
    double stop_s;         /* > 0 overrides the file's stop time */
    double sample_s;       /* > 0 overrides the file's sample spacing */
    int accuracy;          /* -1: the file's; else an ru_accuracy */
    double tol_scale;      /* multiplies rtol and atol (1 normally; 0.1 for --verify) */
    const char *loop_part; /* overrides measure.loop when not NULL */
    const char *wav_path;  /* probe audio file (ringup/wav.h); NULL writes none */
    ru_wav_opts wav;       /* its rate, format, level, pitch, length; sample_s,
                              stop_s and tone_hint_hz are filled in by the run */
} ru_run_request;

/* Fills rq with "use the file's settings". */
void ru_run_request_default(ru_run_request *rq);

#define RU_MAX_NOTES 12

/* What the small-signal engine predicts before the transient runs. */
typedef struct ru_prediction {
    int have_op;                  /* operating point found */
    ru_oppoint_stats op;          /* its Newton statistics */
    int have_poles;               /* poles computed and a complex pair found */
    ru_pole dominant;             /* dominant pair (im > 0 member) */
    double growth_rate_per_s;     /* = dominant.re_per_s */
    double frequency_hz;          /* = dominant.im_rad_per_s / (2 pi) */
    double kick_amplitude_v;      /* dominant-mode amplitude on the probe at t = 0 */
    double startup_time_s;        /* from growth rate, kick size and settled level */
    double settled_amplitude_v;   /* from the describing function (ringup/descfn.h) */
    double df_frequency_hz;       /* tone frequency where the describing function settles */
    int have_loop;                /* loop gain evaluated */
    char loop_part[RU_NAME_MAX];
    ru_loop_summary loop;
} ru_prediction;

typedef struct ru_run_report {
    double stop_s;                /* run length used */
    double sample_s;              /* sample spacing used */
    char probe[2 * RU_NAME_MAX + 2]; /* "out" or "a-b" */
    double startup_level;         /* start-up threshold used (fraction of settled) */
    ru_solver_stats solver;
    ru_measure_result meas;
    ru_prediction pred;
    double growth_mismatch;       /* (measured - predicted)/predicted growth rate */
    double integrator_damping_per_s; /* estimated numerical damping (NAN unknown) */
    int nnotes;
    char notes[RU_MAX_NOTES][RU_NOTE_MAX * 2]; /* self-check remarks, one line each */
    int partial;                  /* 1: the transient stopped early (numerical failure) */
    int have_wav;                 /* 1: the WAV file was written */
    ru_wav_info wav;              /* what the WAV export did */
} ru_run_report;

/* Runs the analysis. Returns RU_OK, RU_EINPUT (bad probe, etc.), RU_ERANGE (WAV
 * options, checked before the transient), RU_EIO (csv, wav),
 * or RU_ENUMERIC (report keeps what was measured up to the failure). */
ru_status ru_analysis_run(const ru_circuit *c, const ru_run_request *rq,
                          ru_run_report *rep, ru_error *err);

#ifdef __cplusplus
}
#endif
#endif
