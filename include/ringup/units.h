/* ringup/units.h: a batch study as numbered units whose results are JSON lines.
 *
 * A study (Monte Carlo, sweep, corners) is units 0..count-1, and unit i is a pure
 * function of the study's inputs and i. Each finished unit becomes one line of
 * JSON, its record; a study's report is built from its records alone, so a run in
 * one process, a run continued after a stop, shards run anywhere and merged, and
 * MPI ranks all give the same report bit for bit (numbers in records carry 17
 * significant digits: they read back as the same doubles).
 *
 * Three pieces:
 *   - the runner (ru_units_run): hands unit indices out one at a time to worker
 *     threads (dynamic load balancing: units may differ in cost a hundredfold),
 *     and through ru_units_take / ru_units_give to workers elsewhere (other MPI
 *     ranks, served on the calling thread); records are accepted one at a time;
 *   - the unit log (DIR/units.jsonl): a header line naming the study, then one
 *     record per line, each written with a single append so the file only ever
 *     holds whole lines (a line cut short by a crash is dropped on resume);
 *   - run records: a batch item (status, error, report) as a line and back.
 *
 * Shards: with shard_n > 1 only the units i with i % shard_n == shard_k - 1 run
 * (round robin, so slow and fast units spread over the shards). The library keeps
 * no global state; the stop flag is the caller's (a signal handler sets it). */
#ifndef RINGUP_UNITS_H
#define RINGUP_UNITS_H

#include "ringup/batch.h"
#include "ringup/status.h"

#include <signal.h>
#include <stddef.h>
#include <stdint.h>

#ifdef __cplusplus
extern "C" {
#endif

/* ---- the runner ---- */

typedef struct ru_units ru_units;

typedef struct ru_units_job {
    size_t count;               /* units 0..count-1 in the whole study */
    unsigned shard_k, shard_n;  /* run shard k (1..n) of n; n <= 1: every unit */
    const unsigned char *skip;  /* count flags, 1: already done (resume); or NULL */
    int threads;                /* local worker threads (<= 0: one per processor) */
    const volatile sig_atomic_t *stop; /* non-zero: no unit is handed out any more */
    /* Runs unit i and returns its record (malloc'd, one line ending in '\n').
     * Called from worker threads at once: must touch no shared mutable state. A
     * unit whose analysis fails is still a record (with its error); a non-OK
     * return means no record: RU_ESTOPPED (stopped, the unit is not done) or a
     * failure of the study itself (out of memory), which stops the study. */
    ru_status (*run)(void *ctx, size_t i, char **line, ru_error *err);
    /* Takes the record of unit i; called one at a time (under the runner's lock),
     * in the order units finish. A non-OK return (a disk error) stops the study. */
    ru_status (*accept)(void *ctx, size_t i, const char *line, ru_error *err);
    void *ctx;
    /* Optional: runs on the calling thread while the workers run, to serve
     * workers elsewhere through ru_units_take and ru_units_give; it returns when
     * ru_units_take has said "no more" to every one of them. */
    void (*serve)(void *sctx, ru_units *u);
    void *sctx;
} ru_units_job;

/* What a study run did. */
typedef struct ru_units_summary {
    size_t todo;      /* units this run was to do (its shard, less the skipped) */
    size_t done;      /* records accepted */
    int stopped;      /* 1: the stop flag ended it early */
} ru_units_summary;

/* Runs the job. RU_OK when every unit to do was accepted or the stop flag ended
 * it (summary->stopped); otherwise the first error of the study (from run or
 * accept; err says which unit) after the units in flight have finished. */
ru_status ru_units_run(const ru_units_job *job, ru_units_summary *summary, ru_error *err);

/* The next unit to run, for a worker elsewhere: 1 and *i, or 0 when there is
 * none (all handed out, stopped, or the study failed). Thread-safe. */
int ru_units_take(ru_units *u, size_t *i);

/* The record of a unit handed out by ru_units_take (line NULL: it was not done,
 * e.g. stopped there). Accepts it as a local record is accepted. */
void ru_units_give(ru_units *u, size_t i, const char *line);

/* Whether unit i belongs to shard k of n (1-based k; n <= 1: every unit). */
int ru_units_in_shard(size_t i, unsigned shard_k, unsigned shard_n);

/* ---- the unit log ---- */

#define RU_UNITLOG_NAME "units.jsonl"
#define RU_UNITLOG_ARGS 64 /* most arguments a study is defined by */

/* The first line of a unit log: which study the records belong to. */
typedef struct ru_unitlog_header {
    char command[32];          /* "montecarlo", "sweep", "corners" */
    size_t units;              /* units in the whole study */
    unsigned shard_k, shard_n; /* the shard this log holds (1 of 1: all) */
    char file_hash[24];        /* FNV-1a 64 of the circuit file's bytes, hex */
    int nargs;                 /* the arguments that define the study (FILE, ...) */
    char *args[RU_UNITLOG_ARGS]; /* malloc'd copies (ru_unitlog_header_clear) */
} ru_unitlog_header;

/* Frees the argument copies; the header is left empty. */
void ru_unitlog_header_clear(ru_unitlog_header *h);

/* FNV-1a 64 of a file's bytes as 16 hex digits (RU_EIO when it cannot be read). */
ru_status ru_file_hash(const char *path, char out[24], ru_error *err);

typedef struct ru_unitlog ru_unitlog;

/* Called for each record line of a log (text without the newline, its 1-based
 * line number in the file). A non-OK return stops the reading with that status. */
typedef ru_status (*ru_unitlog_line_fn)(void *ctx, const char *line, size_t lineno,
                                        ru_error *err);

/* Constructor: creates the log at path with its header and locks it (one writer
 * at a time). Refuses (RU_EIO) a path that exists: a study is never overwritten;
 * continue it with ru_unitlog_resume. */
ru_status ru_unitlog_create(const char *path, const ru_unitlog_header *h,
                            ru_unitlog **out, ru_error *err);

/* Constructor: opens an existing log to continue it. Reads the header into *h,
 * hands every whole record line to fn, cuts off a last line without its newline
 * (a write cut short), and leaves the log ready for appends. RU_EINPUT for a file
 * that is not a unit log; RU_EIO when locked by another run or unreadable. */
ru_status ru_unitlog_resume(const char *path, ru_unitlog_header *h, ru_unitlog_line_fn fn,
                            void *ctx, ru_unitlog **out, ru_error *err);

/* Reads a log without changing it (for merging): header into *h, record lines
 * to fn (NULL: the header only); a last line without its newline is skipped. */
ru_status ru_unitlog_read(const char *path, ru_unitlog_header *h, ru_unitlog_line_fn fn,
                          void *ctx, ru_error *err);

/* Appends one record line (ending in '\n') with a single write. */
ru_status ru_unitlog_append(ru_unitlog *log, const char *line, ru_error *err);

/* Destructor: flushes to disk (fsync) and closes; NULL is harmless. Returns the
 * first write error met, if any. */
ru_status ru_unitlog_close(ru_unitlog *log, ru_error *err);

/* The unit index of a record line ("unit" key), or RU_EINPUT. */
ru_status ru_unit_record_index(const char *line, size_t *index, ru_error *err);

/* ---- run records ---- */

/* The record of one analysed unit: "unit", "status", "error" (file, line, col,
 * message) or the report's figures, prediction, solver statistics and notes.
 * extra_key/extra (may be NULL) add one array of numbers under that key (a
 * sweep's values). *line is malloc'd. */
ru_status ru_unit_record_of_item(size_t index, const ru_batch_item *it,
                                 const char *extra_key, const double *extra,
                                 size_t nextra, char **line);

/* Reads a run record back into it->status, it->error and it->report (the rest
 * of *it is left alone) and its index. RU_EINPUT for a line that is not one. */
ru_status ru_unit_item_of_record(const char *line, size_t *index, ru_batch_item *it,
                                 ru_error *err);

#ifdef __cplusplus
}
#endif
#endif
