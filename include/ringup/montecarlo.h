/* ringup/montecarlo.h: Monte Carlo over part tolerances: does the oscillator start
 * on every unit, and how do start-up time, growth rate, frequency, settled
 * amplitude and THD spread?
 *
 * Each sample (unit) draws, for every toleranced quantity (the `value` of a
 * resistor, capacitor, inductor or crystal with `tol` > 0, a crystal's esr with
 * esr-tol, and every key tolerance of ringup/part.h: `tol: {beta: 30%}`, a
 * supply's level), x*(1 + d) with d
 *   - uniform in [-tol, tol] (RU_MC_UNIFORM, the default: every value in the band
 *     equally likely, worst-case-like), or
 *   - normal with sigma = tol/3 truncated at +-tol (RU_MC_NORMAL: the tolerance
 *     taken as a 3-sigma bound, common practice; the truncated variance is
 *     0.97334 sigma^2).
 * Sample 0 is the nominal circuit (nothing drawn). The generator is counter-based:
 * d is a pure function of (seed, sample index, stream): the stream is the part
 * index for its value, index | 2^32 for a crystal's esr, and index | (h << 32) for a
 * key tolerance, h the key's FNV-1a hash mod 2^31 with bit 31 set; splitmix64 used as a
 * hash as in the noise kick (src/system/noise.c), so a result does not depend on the
 * number of threads or their scheduling and any unit can be rebuilt alone.
 *
 * Memory: only the figures of each unit and its drawn values are kept (a few
 * hundred bytes per unit). At most RU_MC_MAX_SAMPLES samples. Nothing here prints.
 *
 * Units and records (ringup/units.h): ru_mc_unit_record runs one unit and gives
 * its record, one JSON line; a result is built from records alone
 * (ru_mc_result_create, ru_mc_result_add for each, ru_mc_result_finish), so the
 * units can run anywhere (threads, shards, MPI ranks, a run continued after a
 * stop) and the result is the same bit for bit. ru_mc_run does all of it here. */
#ifndef RINGUP_MONTECARLO_H
#define RINGUP_MONTECARLO_H

#include "ringup/analysis.h"
#include "ringup/circuit.h"
#include "ringup/status.h"

#include <stddef.h>
#include <stdint.h>

#ifdef __cplusplus
extern "C" {
#endif

#define RU_MC_MAX_SAMPLES 10000

typedef enum {
    RU_MC_UNIFORM, /* d uniform in [-tol, tol] */
    RU_MC_NORMAL   /* d normal, sigma tol/3, truncated at +-tol */
} ru_mc_dist;

/* The figures summarised over the started units (index into the arrays below). */
typedef enum {
    RU_MC_STARTUP,   /* start-up time (s) */
    RU_MC_GROWTH,    /* measured growth rate (1/s) */
    RU_MC_FREQUENCY, /* frequency (Hz) */
    RU_MC_AMPLITUDE, /* settled amplitude (V peak) */
    RU_MC_THD,       /* THD (%) */
    RU_MC_NFIG
} ru_mc_figure;

/* The JSON key of a figure ("startup_time_s", "growth_rate_per_s",
 * "frequency_hz", "settled_amplitude_v", "thd_percent"). */
const char *ru_mc_figure_key(ru_mc_figure f);

/* The relative deviation d of part `part` in sample `sample` (see above); 0 when
 * tol <= 0. |d| <= tol always. */
double ru_mc_deviation(uint64_t seed, uint64_t sample, uint64_t part, ru_mc_dist dist,
                       double tol);

/* Constructor: a clone of c with the values of sample `sample` drawn (sample 0:
 * the nominal values). On error *out is NULL. */
ru_status ru_mc_sample_circuit(const ru_circuit *c, uint64_t seed, size_t sample,
                               ru_mc_dist dist, ru_circuit **out, ru_error *err);

typedef struct ru_mc_opts {
    size_t samples;          /* units, 1..RU_MC_MAX_SAMPLES (sample 0 is nominal) */
    uint64_t seed;           /* generator seed */
    ru_mc_dist dist;         /* how deviations are drawn */
    int threads;             /* parallel runs (<= 0: one per processor) */
    ru_run_request request;  /* how each unit runs (stop, accuracy, the stop flag;
                                keep, out_dir and wav_path must be NULL) */
} ru_mc_opts;

/* Fills o with: 100 samples, seed 1, uniform, one thread per processor, the
 * file's run settings. */
void ru_mc_opts_default(ru_mc_opts *o);

/* What is kept of one unit. */
typedef struct ru_mc_unit {
    size_t index;                   /* sample index (0: nominal) */
    ru_status status;               /* RU_OK, or why the run failed */
    char error[256];                /* the message when status is not RU_OK */
    int started;                    /* 1: it started (0 also when the run failed) */
    int settled;                    /* 1: its tone settled by the end of its run */
    ru_verdict verdict;             /* the run's verdict (undecided when it failed) */
    double fig[RU_MC_NFIG];         /* measured figures (NAN: not known) */
    double predicted_growth_per_s;  /* dominant poles' real part (NAN: none) */
} ru_mc_unit;

/* Summary of one figure over the started units whose figure is known. */
typedef struct ru_mc_stats {
    size_t n;        /* values summarised (0: the rest is NAN) */
    double min, mean, max;
    double std;      /* sample standard deviation (n - 1 in the denominator) */
    double p05, p95; /* 5th and 95th percentiles, linear between order statistics
                        (position q (n - 1), as numpy.percentile's default) */
} ru_mc_stats;

/* Fills s from x[0..n-1] (NAN entries skipped). */
void ru_mc_stats_of(const double *x, size_t n, ru_mc_stats *s);

typedef struct ru_mc_result ru_mc_result;

/* Checks the options against the circuit (the errors of ru_mc_run below). */
ru_status ru_mc_check(const ru_circuit *c, const ru_mc_opts *o, ru_error *err);

/* Builds and runs unit i (0..samples-1) and returns its record in *line (malloc'd,
 * one JSON line: "unit", "status", "error" for a failed run, "started", the five
 * figures by their keys, "predicted_growth_rate_per_s", "values" {part: drawn
 * value}; numbers with 17 digits). A unit whose run fails is still a record.
 * RU_ESTOPPED when o->request.stop ended the run (no record); RU_ENOMEM. Safe to
 * call from several threads at once. */
ru_status ru_mc_unit_record(const ru_circuit *c, const ru_mc_opts *o, size_t i,
                            char **line, ru_error *err);

/* Constructor: a result with no unit in yet (same checks as ru_mc_run). */
ru_status ru_mc_result_create(const ru_circuit *c, const ru_mc_opts *o,
                              ru_mc_result **out, ru_error *err);

/* Adds one record. RU_EINPUT (nothing added) for a line that is not a record of
 * this study: bad JSON, an index beyond the samples, a unit already in, values
 * of other parts. */
ru_status ru_mc_result_add(ru_mc_result *r, const char *line, ru_error *err);

/* Computes the statistics over the units in so far (call after the last add). */
void ru_mc_result_finish(ru_mc_result *r);

/* Runs the Monte Carlo. RU_ERANGE for a sample count out of range or a request
 * that would write files; RU_EINPUT when no part has a tolerance; RU_ENOMEM.
 * A unit whose run fails is recorded as not started with its message; it does
 * not stop the others. */
ru_status ru_mc_run(const ru_circuit *c, const ru_mc_opts *o, ru_mc_result **out,
                    ru_error *err);

/* Destructor; NULL is harmless. */
void ru_mc_result_destroy(ru_mc_result *r);

size_t ru_mc_sample_count(const ru_mc_result *r); /* units of the study */
size_t ru_mc_done_count(const ru_mc_result *r);   /* units whose record is in */
int ru_mc_unit_done(const ru_mc_result *r, size_t i);
size_t ru_mc_started_count(const ru_mc_result *r);
size_t ru_mc_settled_count(const ru_mc_result *r); /* started units that settled */
size_t ru_mc_failed_count(const ru_mc_result *r); /* runs that ended in an error */
const ru_mc_unit *ru_mc_get_unit(const ru_mc_result *r, size_t i);
const ru_mc_stats *ru_mc_get_stats(const ru_mc_result *r, ru_mc_figure f);

/* The quantities drawn, in circuit order (per part: its value, then its key
 * tolerances in file order): their count, the k-th's name ("RS" for a value,
 * "Q1.beta" for a key), its PART.KEY ("RS.value", "Q1.beta"; ringup/params.h
 * reads its nominal value and unit), and the value drawn for it in unit i (in
 * the key's unit). */
size_t ru_mc_tol_count(const ru_mc_result *r);
const char *ru_mc_tol_name(const ru_mc_result *r, size_t k);
const char *ru_mc_tol_param(const ru_mc_result *r, size_t k);
double ru_mc_value(const ru_mc_result *r, size_t i, size_t k);

/* The indices of the started units (of those in), latest start-up first (NAN start-up times
 * last); at most max of them into idx; returns how many. */
size_t ru_mc_latest(const ru_mc_result *r, size_t *idx, size_t max);

#ifdef __cplusplus
}
#endif
#endif
