/* study_run.c: running a batch study (see "batch studies" in cli.h): the records
 * already there (resume, merge) first, then the units left, each record appended
 * to DIR/units.jsonl and handed to the command as it comes in; SIGINT and SIGTERM
 * stop the study cleanly (running units end at their next sample and are not
 * counted; a second signal ends the process at once); the progress bar; MPI rank 0
 * serves the other ranks while its own threads run units.
 * The stop flag is signals.c's. */
#include "cli/cli.h"

#include "ringup/units.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

const volatile sig_atomic_t *cli_study_stop_flag(void) { return cli_stop_flag(); }

typedef struct run_ctx {
    cli_study *s;
    ru_unitlog *log;        /* NULL: no --out */
    cli_progress *bar;      /* NULL: no bar */
    size_t done_here;       /* records that came in during this run */
    size_t failed_here;
} run_ctx;

static ru_status accept(void *ctx, size_t i, const char *line, ru_error *err)
{
    (void)i;
    run_ctx *r = ctx;
    ru_status st = r->log ? ru_unitlog_append(r->log, line, err) : RU_OK;
    int failed = 0;
    if (st == RU_OK)
        st = r->s->add(r->s->ctx, line, &failed, err);
    if (st != RU_OK)
        return st;
    r->done_here++;
    r->failed_here += (size_t)failed;
    r->s->done++;
    r->s->failed += (size_t)failed;
    if (r->bar)
        cli_progress_update(r->bar, r->done_here, r->s->failed);
    return RU_OK;
}

static ru_status run_one(void *ctx, size_t i, char **line, ru_error *err)
{
    run_ctx *r = ctx;
    return r->s->run(r->s->ctx, i, line, err);
}

/* The records read back (resume, merge) into the command, marking their units. */
static int take_records(cli_study *s, unsigned char *skip)
{
    cli_pre *pre = s->pre;
    for (size_t k = 0; pre && k < pre->nlines; k++) {
        ru_error err;
        ru_error_clear(&err);
        size_t i;
        int failed = 0;
        ru_status st = ru_unit_record_index(pre->lines[k], &i, &err);
        if (st == RU_OK && i >= s->count)
            st = ru_error_set(&err, RU_EINPUT, NULL, 0, 0, "unit %zu is beyond the %zu units "
                              "of the study", i, s->count);
        if (st == RU_OK && !ru_units_in_shard(i, s->shard_k, s->shard_n))
            st = ru_error_set(&err, RU_EINPUT, NULL, 0, 0, "unit %zu is not in shard %u/%u",
                              i, s->shard_k, s->shard_n);
        if (st == RU_OK)
            st = s->add(s->ctx, pre->lines[k], &failed, &err);
        if (st != RU_OK) {
            fprintf(stderr, "%s%s%s: record %zu: %s\n", pre->mode == CLI_RESUME ? pre->dir : "",
                    pre->mode == CLI_RESUME ? "/" : "", pre->mode == CLI_RESUME ? RU_UNITLOG_NAME
                                                                       : "merged records",
                    k + 1, err.msg);
            return 1;
        }
        skip[i] = 1;
        s->done++;
        s->failed += (size_t)failed;
    }
    return 0;
}

/* The checks that the records belong to this study: same file bytes, same size. */
static int check_header(const cli_study *s, const char *hash)
{
    const ru_unitlog_header *h = &s->pre->header;
    const char *where = s->pre->mode == CLI_RESUME ? s->pre->dir : "the merged logs";
    if (strcmp(h->file_hash, hash) != 0) {
        fprintf(stderr, "%s: has changed since the study in %s began (its records would "
                        "not belong to it): start a new study in another folder\n", s->file,
                where);
        return 1;
    }
    if (h->units != s->count) {
        fprintf(stderr, "%s: holds a study of %zu units, this one has %zu\n", where, h->units,
                s->count);
        return 1;
    }
    return 0;
}

static int open_log(cli_study *s, const char *hash, ru_unitlog **log)
{
    char path[4200];
    ru_error err;
    ru_error_clear(&err);
    int rc = cli_make_dir(s->out_dir);
    if (rc)
        return rc;
    snprintf(path, sizeof path, "%s/%s", s->out_dir, RU_UNITLOG_NAME);
    ru_unitlog_header h;
    memset(&h, 0, sizeof h);
    snprintf(h.command, sizeof h.command, "%s", s->command);
    snprintf(h.file_hash, sizeof h.file_hash, "%s", hash);
    h.units = s->count;
    h.shard_k = s->shard_k;
    h.shard_n = s->shard_n;
    h.nargs = s->nargs;
    for (int i = 0; i < s->nargs; i++)
        h.args[i] = s->args[i];
    if (ru_unitlog_create(path, &h, log, &err) != RU_OK)
        return cli_fail(&err);
    return 0;
}

/* Rank 0's part before the units run: the records there, the log, the checks. */
static int prepare(cli_study *s, unsigned char *skip, ru_unitlog **log)
{
    char hash[24];
    ru_error err;
    ru_error_clear(&err);
    if (ru_file_hash(s->file, hash, &err) != RU_OK)
        return cli_fail(&err);
    cli_pre *pre = s->pre;
    if (pre && pre->mode != CLI_FRESH && check_header(s, hash))
        return 1;
    if (take_records(s, skip))
        return 1;
    if (pre && pre->mode == CLI_RESUME) {
        *log = pre->log;
        pre->log = NULL;
        return 0;
    }
    return s->out_dir && (!pre || pre->mode == CLI_FRESH) ? open_log(s, hash, log) : 0;
}

/* Merged records must hold every unit. */
static int check_complete(const cli_study *s, const unsigned char *skip)
{
    size_t missing = 0;
    for (size_t i = 0; i < s->count; i++)
        missing += !skip[i];
    if (!missing)
        return 0;
    fprintf(stderr, "ringup merge: %zu of the %zu units are in none of the files:", missing,
            s->count);
    size_t shown = 0;
    for (size_t i = 0; i < s->count && shown < 10; i++)
        if (!skip[i])
            fprintf(stderr, " %zu", i), shown++;
    fprintf(stderr, "%s (a shard not run or not finished? continue it with --resume)\n",
            missing > shown ? " ..." : "");
    return 1;
}

static int run_units(cli_study *s, const unsigned char *skip, ru_unitlog *log)
{
    run_ctx r = {.s = s, .log = log};
    int mpi = s->pre && s->pre->mpi_size > 1;
    ru_units_job job = {.count = s->count, .shard_k = s->shard_k, .shard_n = s->shard_n,
                        .skip = skip, .threads = s->threads ? s->threads : mpi ? 1 : 0,
                        .stop = cli_stop_flag(), .run = run_one, .accept = accept, .ctx = &r,
                        .serve = mpi ? cli_mpi_serve : NULL};
    ru_units_summary sum;
    ru_error err;
    ru_error_clear(&err);
    size_t todo = 0;
    for (size_t i = 0; i < s->count; i++)
        todo += !skip[i] && ru_units_in_shard(i, s->shard_k, s->shard_n);
    if (!s->json && isatty(STDOUT_FILENO) && isatty(STDERR_FILENO) && todo > 0)
        r.bar = cli_progress_start(todo, s->failed);
    ru_status st = ru_units_run(&job, &sum, &err);
    cli_progress_end(r.bar);
    s->todo = sum.todo;
    if (st != RU_OK)
        return cli_fail(&err);
    if (sum.stopped) {
        s->stop_signal = cli_stop_signal();
    } else if (sum.done < sum.todo) {
        fprintf(stderr, "ringup %s: %zu units were not done (see the messages above)\n",
                s->command, sum.todo - sum.done);
        return 2;
    }
    return 0;
}

int cli_study_run(cli_study *s)
{
    cli_pre *pre = s->pre;
    int rank0 = !pre || pre->mpi_rank == 0, rc = 0;
    unsigned char *skip = calloc(s->count ? s->count : 1, 1);
    ru_unitlog *log = NULL;
    if (!skip) {
        fprintf(stderr, "ringup %s: out of memory\n", s->command);
        return 2;
    }
    if (rank0)
        rc = prepare(s, skip, &log);
    if (pre && pre->mpi_size > 1 && !cli_mpi_all_ok(rc == 0) && rc == 0)
        rc = 1; /* another rank could not set up: it said why */
    if (rc == 0 && pre && pre->mode == CLI_MERGE)
        rc = check_complete(s, skip);
    else if (rc == 0) {
        struct sigaction old[2];
        cli_catch_signals(1, old);
        if (rank0) {
            rc = run_units(s, skip, log);
        } else {
            s->worker = 1;
            rc = cli_mpi_work(s);
        }
        cli_catch_signals(0, old);
    }
    if (log) {
        ru_error err;
        ru_error_clear(&err);
        if (ru_unitlog_close(log, &err) != RU_OK && rc == 0)
            rc = cli_fail(&err);
    }
    free(skip);
    return rc;
}

static size_t shard_units(const cli_study *s)
{
    size_t units = 0;
    for (size_t i = 0; i < s->count; i++)
        units += ru_units_in_shard(i, s->shard_k, s->shard_n);
    return units;
}

int cli_study_finish(const cli_study *s)
{
    if (s->worker)
        return 0;
    if (s->stop_signal) {
        fprintf(stderr, "ringup %s: stopped by %s after %zu of %zu units; the report covers "
                        "those.",
                s->command, s->stop_signal == SIGINT ? "SIGINT (Ctrl-C)" : "SIGTERM", s->done,
                shard_units(s));
        if (s->out_dir)
            fprintf(stderr, " Continue with: ringup %s --resume %s\n", s->command, s->out_dir);
        else
            fprintf(stderr, " (Without --out DIR the finished units were not kept.)\n");
        return 128 + s->stop_signal;
    }
    if (s->done > 0 && s->failed == s->done)
        return 2; /* every unit's run failed */
    return 0;
}

void cli_study_shard_summary(const cli_study *s)
{
    size_t units = shard_units(s);
    if (s->json) {
        ru_json j;
        ru_json_init(&j, stdout, 1);
        ru_json_begin_object(&j, NULL);
        ru_json_string(&j, "command", s->command);
        ru_json_begin_array(&j, "shard");
        ru_json_int(&j, NULL, (long)s->shard_k);
        ru_json_int(&j, NULL, (long)s->shard_n);
        ru_json_end_array(&j);
        ru_json_int(&j, "units", (long)s->count);
        ru_json_int(&j, "shard_units", (long)units);
        ru_json_int(&j, "units_done", (long)s->done);
        ru_json_int(&j, "failed_count", (long)s->failed);
        ru_json_string(&j, "log", s->out_dir);
        ru_json_end_object(&j);
        ru_json_finish(&j);
        return;
    }
    printf("%s: shard %u of %u: %zu of its %zu units done (%zu failed) of the %zu units of "
           "the study\nrecords in %s/%s; when every shard is done, ringup merge their "
           "folders for the report\n",
           s->file, s->shard_k, s->shard_n, s->done, units, s->failed, s->count, s->out_dir,
           RU_UNITLOG_NAME);
}
