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
#include "ringup/verdict.h"
#include "ringup/descfn.h"
#include "ringup/hb.h"
#include "ringup/plot.h"
#include "ringup/wav.h"

#include <signal.h>

#ifdef __cplusplus
extern "C" {
#endif

/* What a run keeps for pictures: the decimated probe waveform, the envelope, every
 * pole, the loop-gain sweep and the describing-function curve. Caller-owned; hand
 * it to a run through ru_run_request.keep. Memory is bounded (2000 trace columns,
 * one envelope point per cycle, 601 loop points, 200 curve points). */
typedef struct ru_run_data ru_run_data;

#define RU_RUN_DATA_LOOP_POINTS 1201 /* loop-gain sweep points kept, at most */
#define RU_LOOP_GRID_POINTS 201      /* its log-spaced grid before refinement */
#define RU_RUN_DATA_DF_MAX 200      /* describing-function curve points kept, at most */

/* Constructor / destructor (NULL is harmless). */
ru_status ru_run_data_create(ru_run_data **out);
void ru_run_data_destroy(ru_run_data *d);

typedef struct ru_run_data_view {
    ru_trace_view trace;        /* probe min/max per column (n = 0: none) */
    size_t nenv;                /* envelope points */
    const double *env_t_s, *env_v;
    size_t npoles;              /* every pole at the operating point (0: none) */
    const ru_pole *poles;
    int dominant;               /* index of the dominant pair (im > 0) or -1 */
    size_t nloop;               /* loop-gain sweep points (0: none) */
    const double *loop_f_hz, *loop_mag, *loop_phase_deg;
    size_t ndf;                 /* describing-function curve points (0: none) */
    const ru_df_point *df;
} ru_run_data_view;

/* Read-only view, valid until the data is destroyed or used for another run. */
void ru_run_data_get(const ru_run_data *d, ru_run_data_view *v);

typedef struct ru_run_request {
    const char *out_dir;   /* folder for wave.csv; NULL writes no file */
    double stop_s;         /* > 0 overrides the file's stop time (and its stop: auto) */
    int stop_auto;         /* 1: the automatic run length over the file's stop */
    double cap_cycles;     /* > 0 overrides the automatic length's cap in cycles */
    double cap_cpu_s;      /* > 0 overrides its cap in CPU seconds */
    double sample_s;       /* > 0 overrides the file's sample spacing */
    int accuracy;          /* -1: the file's; else an ru_accuracy */
    double tol_scale;      /* multiplies rtol and atol (1 normally; 0.1 for --verify) */
    const char *loop_part; /* overrides measure.loop/loop-node when not NULL */
    const char *loop_node; /* a node to break instead (double injection), or NULL */
    const char *loop_load; /* its load side's parts, comma-separated, or NULL */
    ru_run_data *keep;     /* filled for pictures when not NULL */
    const char *wav_path;  /* probe audio file (ringup/wav.h); NULL writes none */
    ru_wav_opts wav;       /* its rate, format, level, pitch, length; sample_s,
                              stop_s and tone_hint_hz are filled in by the run */
    int engine;            /* an ru_engine: auto (default), direct or envelope */
    const volatile sig_atomic_t *stop; /* when not NULL and *stop turns non-zero (a
                              signal handler's flag), the transient ends at its next
                              sample with RU_ESTOPPED and the report is not valid */
    int polish;            /* 1: after a settled self-sustained tone, the periodic
                              steady state from the run's end (ru_polish; 0 default) */
    int stab_limit;        /* CVODE's stability-limit detection: an ru_stab_limit */
    int integrator;        /* an ru_integrator (ringup/transient.h): AUTO (0, by size
                              and form), CVODE (refused for a DAE) or IDA */
} ru_run_request;

/* CVODE's stability-limit detection (BDF orders 3-5 are unstable for stiff modes
 * near the imaginary axis; the detection lowers the order there). AUTO turns it on
 * only when the poles at the operating point show such a mode
 * (ru_prediction.stiff_oscillatory) or none were computed. */
typedef enum { RU_STAB_AUTO, RU_STAB_ON, RU_STAB_OFF } ru_stab_limit;

/* Which time-domain engine runs: the direct transient (every cycle integrated) or
 * the envelope engine (ringup/envfollow.h: cycles skipped by envelope steps, for
 * oscillators that take thousands of cycles to start). auto picks the envelope
 * when the predicted start-up spans more than RU_ENGINE_AUTO_CYCLES cycles and the
 * circuit allows it (autonomous after power-on, one growing mode, no noise kick),
 * and says so in the notes. */
typedef enum { RU_ENGINE_AUTO, RU_ENGINE_DIRECT, RU_ENGINE_ENVELOPE } ru_engine;
#define RU_ENGINE_AUTO_CYCLES 3000.0
#define RU_AUTO_CAP_CYCLES_ENVELOPE 1e9 /* the cycle cap when cycles are skipped */

/* What the envelope engine did (engine_envelope = 1). */
typedef struct ru_engine_info {
    int envelope;                 /* 1: the envelope engine ran, 0: the direct one */
    long cycles_integrated;       /* cycles integrated (every one the solver ran) */
    double cycles_spanned;        /* cycles covered by envelope steps */
    long env_steps;               /* envelope steps */
    int fell_back;                /* 1: an envelope step failed, cycles went on */
    double rtol_cycle;            /* tolerance of the cycle integrations */
} ru_engine_info;

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
    double kick_amplitude_v;      /* start level: the dominant mode's amplitude on the
                                     probe that its growth extrapolates back to at t = 0
                                     (noise: the log-mean over noise realisations) */
    double noise_amplitude_v;     /* the dominant mode's thermal level (kT) on the probe */
    double slowest_decay_per_s;   /* smallest |real part| of the decaying poles other
                                     than the dominant pair (a bias or thermal time
                                     constant's inverse), NAN when none */
    int stiff_oscillatory;        /* a pole at least RU_STIFF_RATIO times the
                                     dominant pair's magnitude, outside BDF5's
                                     stability sector (|im| > tan(51.84 deg) |re|) */
    int start_kind;               /* what sets it: 0 preset, 1 power-on, 2 noise */
    int start_driven;             /* 1: a periodic source drives: no start level */
    double start_rms_v;           /* noise: rms of the accumulated noise (else NAN) */
    double start_log_sd;          /* noise: s.d. of ln(start level) between runs */
    double startup_time_s;        /* integral of dA / (A sigma(A)) up to the start-up
                                     level (describing function) */
    double settled_amplitude_v;   /* from the describing function (ringup/descfn.h) */
    double df_frequency_hz;       /* tone frequency where the describing function settles */
    int have_hb;                  /* the harmonic balance found a tone */
    ru_hb_tone hb;                /* its settled tone (ringup/hb.h) */
    int have_loop;                /* loop gain evaluated */
    char loop_part[RU_NAME_MAX];  /* the amplifier, or "node NAME" for a node break */
    char loop_node[RU_NAME_MAX];  /* the node broken ("" for an amplifier's loop) */
    char loop_load[RU_LOOP_LOAD_TEXT]; /* its load side's terminals ("A1 in") */
    ru_loop_summary loop;
} ru_prediction;

/* How long the run went, and why it ended there (stop: auto runs in chunks until the
 * verdict is certain or a cap is reached; a fixed stop runs to it). */
typedef struct ru_stop_info {
    int automatic;                /* 1: stop auto */
    double first_s;               /* the first chunk (s) */
    double cap_s;                 /* time cap (s), also the horizon of the solver */
    double cap_basis_s;           /* the predicted (or estimated) start-up time (s),
                                     NAN when none */
    char cap_why[RU_NOTE_MAX];    /* what set the time cap, in words */
    double cap_cycles;            /* cap in cycles of the predicted tone (0: none) */
    double cap_cpu_s;             /* cap in CPU seconds of the run's thread */
    double cpu_s;                 /* CPU seconds the transient took */
    int chunks;                   /* chunks run */
    char reason[RU_NOTE_MAX];     /* why it ended ("settled", "time cap", ...) */
} ru_stop_info;

#define RU_AUTO_CAP_MULT 10.0     /* time cap: 10x the predicted start-up time */
#define RU_AUTO_CAP_CYCLES 1e5    /* cap in cycles of the predicted tone */
#define RU_AUTO_CAP_CPU_S 60.0    /* cap in CPU seconds */

/* The settled figures polished by the periodic steady state (ru_run_request.polish):
 * shooting Newton (ringup/tone.h) started from the run's last state and measured
 * period after the verdict said started and settled. Figures NAN unless have. */
typedef struct ru_polish {
    int tried;                    /* 1: the run settled, so the steady state was sought */
    int have;                     /* 1: found */
    double frequency_hz, period_s, period_rel_error;
    double amplitude_v;           /* (max - min)/2 of the probe over the period */
    double fundamental_v, dc_level_v, thd_percent;
    double harmonics_dbc[RU_HARMONICS - 1]; /* [0] is the 2nd */
    double recovery_time_s, recovery_cycles; /* the amplitude's 1/e recovery */
    int newton_iterations;
    double cpu_s;                 /* processor time of the solve */
    char note[RU_NOTE_MAX];       /* why not found, when tried */
} ru_polish;

typedef struct ru_run_report {
    double stop_s;                /* run length used (the last sample's time) */
    ru_stop_info stop;            /* the run length's plan and why it ended */
    double sample_s;              /* sample spacing used */
    char probe[2 * RU_NAME_MAX + 2]; /* "out" or "a-b" */
    double startup_level;         /* start-up threshold used (fraction of settled) */
    ru_solver_stats solver;
    ru_measure_result meas;       /* figures, made to follow the verdict */
    ru_verdict verdict;           /* started, no-start, latched, undecided, driven */
    double seed_v;                /* physical start level on the probe (V; 0 unknown) */
    int noise_on;                 /* 1: the run started from the resistors' thermal noise */
    double floor_v;               /* the solver's noise floor on the probe (V) */
    ru_prediction pred;
    double growth_mismatch;       /* (measured - predicted)/predicted growth rate */
    double integrator_damping_per_s; /* estimated numerical damping (NAN unknown) */
    int nnotes;
    char notes[RU_MAX_NOTES][RU_NOTE_MAX * 2]; /* self-check remarks, one line each */
    int partial;                  /* 1: the transient stopped early (numerical failure) */
    int have_wav;                 /* 1: the WAV file was written */
    ru_wav_info wav;              /* what the WAV export did */
    ru_engine_info engine;        /* which engine ran and what it did */
    ru_polish polish;             /* the steady state's figures (request.polish) */
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
