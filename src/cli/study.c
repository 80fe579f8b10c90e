/* study.c: the front of every batch study command (see "batch studies" in cli.h):
 * MPI start and end, --resume DIR (the command line rebuilt from the log's header,
 * the records read back), and the study options --out, --shard, --threads and the
 * arguments that define a study. Running it is study_run.c. */
#include "cli/cli.h"

#include "ringup/units.h"

#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

/* ---- --resume DIR: the command line from the log's header ---- */

/* Options that may stand beside --resume (they do not change the study). */
static int runtime_option(const char *arg, int *takes_value)
{
    static const char *const with_value[] = {"threads", "plots", "plot-format", "report"};
    const char *name = arg + 2, *eq = strchr(name, '=');
    size_t len = eq ? (size_t)(eq - name) : strlen(name);
    *takes_value = 0;
    for (size_t i = 0; i < sizeof with_value / sizeof with_value[0]; i++)
        if (strlen(with_value[i]) == len && !strncmp(name, with_value[i], len)) {
            *takes_value = !eq;
            return 1;
        }
    return len == 4 && !strncmp(name, "json", 4);
}

static ru_status keep_line(void *ctx, const char *line, size_t lineno, ru_error *err)
{
    (void)lineno;
    cli_pre *pre = ctx;
    if (pre->nlines % 256 == 0) {
        char **l = realloc(pre->lines, (pre->nlines + 256) * sizeof *l);
        if (!l)
            return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "out of memory");
        pre->lines = l;
    }
    if (!(pre->lines[pre->nlines] = strdup(line)))
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "out of memory");
    pre->nlines++;
    return RU_OK;
}

static int push_arg(cli_pre *pre, const char *a)
{
    char **v = realloc(pre->argv, (size_t)(pre->argc + 2) * sizeof *v);
    if (!v)
        return 0;
    pre->argv = v;
    if (!(v[pre->argc] = strdup(a)))
        return 0;
    v[++pre->argc] = NULL;
    return 1;
}

/* Splits argv into --resume DIR and the runtime options beside it. */
static int resume_args(int argc, char **argv, const char **dir, int *rest, int *nrest)
{
    *dir = NULL;
    *nrest = 0;
    for (int i = 1; i < argc; i++) {
        const char *a = argv[i];
        int tv;
        if (!strncmp(a, "--resume=", 9)) {
            *dir = a + 9;
        } else if (!strcmp(a, "--resume") && i + 1 < argc) {
            *dir = argv[++i];
        } else if (!strncmp(a, "--", 2) && runtime_option(a, &tv)) {
            rest[(*nrest)++] = i;
            if (tv && i + 1 < argc)
                rest[(*nrest)++] = ++i;
        } else {
            fprintf(stderr, "ringup %s: --resume DIR continues the study as it began (the "
                            "circuit file and the study's options come from "
                            "DIR/%s); beside it give only --threads, --json, --plots, "
                            "--plot-format or --report (not '%s')\n",
                    argv[0], RU_UNITLOG_NAME, a);
            return 1;
        }
    }
    if (!*dir || !**dir) {
        fprintf(stderr, "ringup %s: --resume needs a folder (DIR, holding %s)\n", argv[0],
                RU_UNITLOG_NAME);
        return 1;
    }
    return 0;
}

static int open_resume(int argc, char **argv, cli_pre *pre)
{
    const char *dir;
    int *rest = calloc((size_t)argc + 1, sizeof *rest), nrest = 0;
    if (!rest)
        return 2;
    int rc = resume_args(argc, argv, &dir, rest, &nrest);
    char path[4200];
    ru_error err;
    ru_error_clear(&err);
    if (rc == 0) {
        snprintf(pre->dir, sizeof pre->dir, "%s", dir);
        snprintf(path, sizeof path, "%s/%s", dir, RU_UNITLOG_NAME);
        if (ru_unitlog_resume(path, &pre->header, keep_line, pre, &pre->log, &err) != RU_OK)
            rc = cli_fail(&err);
    }
    if (rc == 0 && strcmp(pre->header.command, argv[0]) != 0) {
        fprintf(stderr, "%s: holds a %s study, not %s: continue it with ringup %s --resume "
                        "%s\n", path, pre->header.command, argv[0], pre->header.command, dir);
        rc = 1;
    }
    int ok = rc == 0 && push_arg(pre, argv[0]);
    for (int i = 0; ok && i < pre->header.nargs; i++)
        ok = push_arg(pre, pre->header.args[i]);
    for (int i = 0; ok && i < nrest; i++)
        ok = push_arg(pre, argv[rest[i]]);
    if (rc == 0 && !ok) {
        fprintf(stderr, "ringup %s: out of memory\n", argv[0]);
        rc = 2;
    }
    pre->mode = CLI_RESUME;
    free(rest);
    return rc;
}

static int wants_resume(int argc, char **argv)
{
    for (int i = 1; i < argc; i++)
        if (!strcmp(argv[i], "--resume") || !strncmp(argv[i], "--resume=", 9))
            return 1;
    return 0;
}

void cli_pre_free(cli_pre *pre)
{
    for (int i = 0; i < pre->argc; i++)
        free(pre->argv[i]);
    free(pre->argv);
    for (size_t i = 0; i < pre->nlines; i++)
        free(pre->lines[i]);
    free(pre->lines);
    if (pre->log)
        ru_unitlog_close(pre->log, NULL);
    ru_unitlog_header_clear(&pre->header);
    memset(pre, 0, sizeof *pre);
}

int cli_study_main(int argc, char **argv, cli_study_fn fn)
{
    cli_pre pre;
    memset(&pre, 0, sizeof pre);
    int rc = cli_mpi_start(&pre.mpi_rank, &pre.mpi_size);
    if (rc)
        return rc;
    int resume = wants_resume(argc, argv);
    if (resume && pre.mpi_rank == 0)
        rc = open_resume(argc, argv, &pre);
    if (pre.mpi_size > 1 && resume) /* the other ranks run what rank 0 rebuilt */
        cli_mpi_bcast_argv(&pre.argc, &pre.argv, &rc);
    if (resume)
        pre.mode = CLI_RESUME;
    if (rc == 0)
        rc = resume ? fn(pre.argc, pre.argv, &pre) : fn(argc, argv, &pre);
    cli_pre_free(&pre);
    cli_mpi_end();
    return rc;
}

/* ---- the study's options ---- */

int cli_study_options(const cli_opt *opts, cli_study *s)
{
    const char *out = cli_get(opts, "out"), *shard = cli_get(opts, "shard");
    unsigned long long threads = 0;
    s->shard_k = s->shard_n = 1;
    s->out_dir = s->pre && s->pre->mode == CLI_RESUME ? s->pre->dir : out;
    if (!cli_int(opts, "threads", 1, RU_CLI_THREADS_MAX, &threads))
        return 1;
    s->threads = (int)threads;
    if (shard) {
        unsigned k = 0, n = 0;
        char tail;
        if (sscanf(shard, "%u/%u%c", &k, &n, &tail) != 2 || k < 1 || n < 1 || k > n ||
            n > 100000) {
            fprintf(stderr, "ringup: --shard wants K/N, whole numbers with 1 <= K <= N <= "
                            "100000 (e.g. --shard 3/8), not '%s'\n", shard);
            return 1;
        }
        s->shard_k = k;
        s->shard_n = n;
        if (!s->out_dir && (!s->pre || s->pre->mode != CLI_MERGE)) {
            fprintf(stderr, "ringup: --shard K/N needs --out DIR (the shard's records go "
                            "to DIR/%s for ringup merge)\n", RU_UNITLOG_NAME);
            return 1;
        }
    }
    if (s->pre && s->pre->mode == CLI_MERGE)
        s->shard_k = s->shard_n = 1;
    return 0;
}

int cli_study_add_arg(cli_study *s, const char *arg)
{
    if (s->nargs >= RU_UNITLOG_ARGS || !(s->args[s->nargs] = strdup(arg)))
        return 0;
    s->nargs++;
    return 1;
}

int cli_study_add_args(cli_study *s, const cli_opt *opts, const char *const *names)
{
    for (const char *const *n = names; *n; n++) {
        for (const cli_opt *o = opts; o->name; o++) {
            if (strcmp(o->name, *n) || !o->value)
                continue;
            char a[4200];
            if (o->arg)
                snprintf(a, sizeof a, "--%s=%s", o->name, o->value);
            else
                snprintf(a, sizeof a, "--%s", o->name);
            if (!cli_study_add_arg(s, a))
                return 0;
        }
    }
    return 1;
}

void cli_study_free(cli_study *s)
{
    for (int i = 0; i < s->nargs; i++)
        free(s->args[i]);
    s->nargs = 0;
}
