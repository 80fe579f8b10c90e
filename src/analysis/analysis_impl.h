/* analysis_impl.h: private pieces of the start-up analysis: the kept data, the
 * notes, the small-signal prediction and the self-checks that compare prediction
 * with measurement. */
#ifndef RU_ANALYSIS_IMPL_H
#define RU_ANALYSIS_IMPL_H

#include "ringup/analysis.h"
#include "ringup/system.h"
#include "ringup/transient.h"
#include "measure/energy.h"
#include "ringup/wavefile.h"


struct ru_run_data {
    ru_trace *trace;          /* probe waveform, decimated (NULL before a run) */
    double *env_t_s, *env_v;  /* copy of the envelope */
    size_t nenv;
    ru_pole *poles;           /* every pole */
    size_t npoles;
    int dominant;
    double loop_f_hz[RU_RUN_DATA_LOOP_POINTS], loop_mag[RU_RUN_DATA_LOOP_POINTS],
        loop_phase_deg[RU_RUN_DATA_LOOP_POINTS];
    size_t nloop;
    ru_df_point df[RU_RUN_DATA_DF_MAX];
    size_t ndf;
};

/* Empties d for a new run (frees what the last run kept). */
void ru_run_data_reset(ru_run_data *d);

/* Appends a self-check remark (printf format) to the report; extra ones are dropped. */
void ru_report_note(ru_run_report *rep, const char *fmt, ...)
#if defined(__GNUC__)
    __attribute__((format(printf, 2, 3)))
#endif
    ;

/* Operating point, poles, kick size on the probe and loop gain into rep->pred;
 * the operating point into x_op (n states) when not NULL and it was found. The
 * loop: rq's loop_part or loop_node (with loop_load), else the file's measure
 * section. Failures of the small-signal engine become notes; RU_EINPUT only for a
 * loop that cannot be named (not an amplifier, no such node, a break with an
 * empty side). */
ru_status ru_predict(const ru_circuit *c, const ru_system *s, const ru_run_request *rq,
                     int probe_pos, int probe_neg, ru_run_report *rep, ru_run_data *keep,
                     double *x_op, ru_error *err);

/* The describing function's amplitude, the harmonic balance's tone and the
 * start-up time into rep->pred (predict_tone.c); failures become notes. */
void ru_predict_tone(const ru_system *s, const double *x_op, int pos, int neg,
                     ru_run_report *rep, ru_run_data *keep);

/* After a run that settled (verdict started): the periodic steady state from its
 * last state x_end into rep->polish (polish.c); failures become notes. */
void ru_polish_run(const ru_circuit *c, const double *x_end, ru_run_report *rep);

/* After the transient: the comparison of measured against predicted figures. */
void ru_selfcheck(ru_run_report *rep);

/* The state when the run passes t_s (the start of the settled window), kept by the
 * sink: whether the circuit sits still is read from it and the last state. */
typedef struct ru_state_mark {
    double t_s;             /* when to take it (s) */
    double *x;              /* n states, owned by the run */
    int have;               /* 1: taken */
} ru_state_mark;

/* What the verdict needs to know about the run besides its figures (judge.c). */
typedef struct ru_judge_ctx {
    const ru_circuit *c;
    const ru_system *sys;
    int probe_pos, probe_neg;
    const double *x_op;     /* operating point (n states), NULL when not found */
    const double *x_end;    /* the state at the last sample, NULL when none */
    ru_state_mark *mark;    /* the state at the window's start, NULL when none */
    double rtol, atol_rel;  /* the tolerances the transient used */
    int relative;           /* 1: its error weights were relative to x_op */
    double seed_v;          /* physical start level on the probe (V; 0 unknown) */
    int seed_is_kick;       /* 1: a preset kick */
} ru_judge_ctx;

/* What the time-domain sinks need: the probe, the writers and the energy balance
 * (analysis.c builds it; the envelope run adds its own on top, envrun.c). */
typedef struct ru_run_sink {
    const ru_system *sys;
    int probe_pos, probe_neg;
    ru_csv *csv;            /* NULL when no file is written */
    ru_measure *meas;
    ru_energy_balance *energy;
    ru_wav *wav;            /* NULL when no audio is written */
    ru_trace *trace;        /* NULL when no picture is wanted */
    double *x_last;         /* the state at the last sample (n entries) */
    int have_last;
    ru_state_mark mark;     /* the state at the settled window's start */
    const volatile sig_atomic_t *stop; /* the request's stop flag, or NULL */
} ru_run_sink;

/* One sample to every sink of k (an ru_sample_fn). */
ru_status ru_run_sink_sample(void *user, double t_s, const double *x, size_t n);

/* Judges the run as it stands in rep->meas (final: the run ends here). */
void ru_judge(const ru_judge_ctx *j, const ru_run_report *rep, int final,
              ru_verdict_result *out);

/* The final verdict: judged, applied to rep->meas, rep->verdict and its notes. */
void ru_judge_final(const ru_judge_ctx *j, ru_run_report *rep);

/* A time-domain engine as the run loop drives it (runloop.c): advance delivers the
 * samples up to a time to the sinks it was made with; time is the last sample's;
 * done says the horizon is reached; stats reads the counters so far. */
typedef struct ru_run_engine {
    void *self;
    ru_status (*advance)(void *self, double t_until_s, ru_error *err);
    double (*time)(const void *self);
    int (*done)(const void *self);
    void (*stats)(const void *self, ru_solver_stats *st);
} ru_run_engine;

/* The direct transient (ringup/transient.h) as a run engine. */
void ru_run_engine_transient(ru_transient *tr, ru_run_engine *e);

/* Plans the run length into rep->stop, and the horizon into rep->stop_s: the fixed
 * stop, or for stop: auto the first chunk and the caps (from the prediction in
 * rep->pred, the power-on ramps and the request). */
void ru_stop_plan(const ru_circuit *c, const ru_system *sys, const ru_run_request *rq,
                  ru_run_report *rep);

/* Runs the engine to the plan in rep->stop: one chunk for a fixed stop, else chunks
 * judged in turn (the measurement m is finished after each) until the verdict is
 * certain or a cap is reached; rep->stop_s becomes the run's length. */
ru_status ru_runloop(const ru_run_engine *e, ru_measure *m, const ru_judge_ctx *jc,
                     ru_run_report *rep, ru_error *err);

/* For each crystal part once the run measured a frequency: a note with that
 * frequency in ppm from fs and from the load frequency, the motional current and
 * the drive power from the last state x_end (a warning above drive-limit).
 * crystal_notes.c. */
void ru_crystal_notes(const ru_circuit *c, const ru_system *s, const double *x_op,
                      const double *x_end, ru_run_report *rep);

/* The envelope engine follows deterministic cycles, so it runs with the thermal
 * noise off; where the noise sets the start level (rep->pred.start_kind noise), x0
 * gains the dominant mode at that level on the probe instead (envrun.c). Says so
 * in a note. */
void ru_envrun_noise_start(const ru_system *s, ru_run_report *rep, int probe_pos,
                           int probe_neg, const double *x_op, double *x0);

/* Picks the engine (rq->engine, the prediction, what the circuit allows) into
 * rep->engine with a note; RU_EINPUT when the envelope engine was asked for and
 * cannot run this circuit (err says why). envrun.c. */
ru_status ru_engine_choose(const ru_circuit *c, const ru_system *s,
                           const ru_run_request *rq, ru_run_report *rep,
                           const double *x_op, ru_error *err);

/* The envelope engine's run (envrun.c): its samples through k (integrated stretches
 * to the measurement; cycles computed alone as envelope points and to wave.csv),
 * envelope.csv in rq->out_dir, the run loop, the WAV from the envelope and the
 * cycle shape. */
ru_status ru_envrun(const ru_system *s, const ru_run_request *rq, ru_run_report *rep,
                    ru_run_sink *k, const double *x0, const double *x_op,
                    const ru_judge_ctx *jc, ru_error *err);

/* Picks the engine (rq->engine, the prediction, what the circuit allows) into
 * rep->engine with a note; RU_EINPUT when the envelope engine was asked for and
 * cannot run this circuit (err says why). envrun.c. */
ru_status ru_engine_choose(const ru_circuit *c, const ru_system *s,
                           const ru_run_request *rq, ru_run_report *rep,
                           const double *x_op, ru_error *err);

/* The envelope engine's run (envrun.c): its samples through k (integrated stretches
 * to the measurement; cycles computed alone as envelope points and to wave.csv),
 * envelope.csv in rq->out_dir, the run loop, the WAV from the envelope and the
 * cycle shape. */
ru_status ru_envrun(const ru_system *s, const ru_run_request *rq, ru_run_report *rep,
                    ru_run_sink *k, const double *x0, const double *x_op,
                    const ru_judge_ctx *jc, ru_error *err);

#endif
