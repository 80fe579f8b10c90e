/* merge.c: `ringup merge DIR_OR_FILE...`: the report of a study whose shards ran
 * apart (`--shard K/N --out DIR` on any machines): reads every unit log, checks
 * that they belong to one study (same command, same circuit file bytes, same
 * options but --shard) and that together they hold every unit exactly once, and
 * hands the records to the study's command, which prints exactly the report and
 * JSON one run of the whole study prints. */
#include "cli/cli.h"

#include "ringup/units.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

typedef struct merge_ctx {
    cli_pre *pre;
    size_t *owner;        /* per unit: 1 + the file it came from (0: not yet) */
    size_t units;
    size_t file;          /* the file being read */
    char **paths;
} merge_ctx;

static ru_status take_line(void *ctx, const char *line, size_t lineno, ru_error *err)
{
    (void)lineno;
    merge_ctx *m = ctx;
    size_t i;
    ru_status st = ru_unit_record_index(line, &i, err);
    if (st != RU_OK)
        return st;
    if (i >= m->units)
        return ru_error_set(err, RU_EINPUT, NULL, 0, 0, "unit %zu is beyond the %zu units of "
                            "the study", i, m->units);
    if (m->owner[i])
        return ru_error_set(err, RU_EINPUT, NULL, 0, 0, "unit %zu is also in %s (a shard "
                            "given twice?)", i, m->paths[m->owner[i] - 1]);
    m->owner[i] = m->file + 1;
    cli_pre *pre = m->pre;
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

static int is_shard_arg(const char *a) { return !strncmp(a, "--shard=", 8); }

/* Whether two headers describe one study (the shard aside). */
static int same_study(const ru_unitlog_header *a, const ru_unitlog_header *b)
{
    if (strcmp(a->command, b->command) || strcmp(a->file_hash, b->file_hash) ||
        a->units != b->units)
        return 0;
    int i = 0, j = 0;
    for (;;) {
        while (i < a->nargs && is_shard_arg(a->args[i]))
            i++;
        while (j < b->nargs && is_shard_arg(b->args[j]))
            j++;
        if (i == a->nargs || j == b->nargs)
            return i == a->nargs && j == b->nargs;
        if (strcmp(a->args[i++], b->args[j++]))
            return 0;
    }
}

static int push(cli_pre *pre, const char *a)
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

/* Reads path (a log, or a folder holding one) into m; 0 or an exit status. */
static int read_log(merge_ctx *m, const char *given, char *path, size_t size)
{
    struct stat st;
    if (stat(given, &st) == 0 && S_ISDIR(st.st_mode))
        snprintf(path, size, "%s/%s", given, RU_UNITLOG_NAME);
    else
        snprintf(path, size, "%s", given);
    ru_unitlog_header h;
    ru_error err;
    ru_error_clear(&err);
    cli_pre *pre = m->pre;
    if (ru_unitlog_read(path, &h, NULL, NULL, &err) != RU_OK)
        return cli_fail(&err);
    if (m->file == 0) {
        m->units = h.units;
        m->owner = calloc(h.units, sizeof *m->owner);
        pre->header = h;
        if (!m->owner)
            return 2;
    } else {
        int same = same_study(&pre->header, &h);
        ru_unitlog_header_clear(&h);
        if (!same) {
            fprintf(stderr, "ringup merge: %s belongs to another study than %s (command, "
                            "circuit file or options differ)\n", path, m->paths[0]);
            return 1;
        }
    }
    if (ru_unitlog_read(path, &h, take_line, m, &err) != RU_OK)
        return cli_fail(&err);
    ru_unitlog_header_clear(&h);
    return 0;
}

int cmd_merge(int argc, char **argv)
{
    int json = 0;
    char **given = calloc((size_t)argc, sizeof *given);
    int ngiven = 0;
    for (int i = 1; given && i < argc; i++) {
        if (!strcmp(argv[i], "--help") || !strcmp(argv[i], "-h")) {
            printf("usage: ringup merge DIR_OR_FILE... [--json]\n\nThe report of a study "
                   "run in shards (--shard K/N --out DIR): every shard's\nfolder (or its "
                   "%s) once; the report and JSON are exactly those of one\nrun of the "
                   "whole study.\n", RU_UNITLOG_NAME);
            free(given);
            return 0;
        }
        if (!strcmp(argv[i], "--json"))
            json = 1;
        else if (!strncmp(argv[i], "--", 2)) {
            fprintf(stderr, "ringup merge: unknown option '%s' (only --json)\n", argv[i]);
            free(given);
            return 1;
        } else
            given[ngiven++] = argv[i];
    }
    if (!given || ngiven == 0) {
        fprintf(stderr, "ringup merge: give the shards' folders (or their %s files)\n",
                RU_UNITLOG_NAME);
        free(given);
        return 1;
    }
    cli_pre pre;
    memset(&pre, 0, sizeof pre);
    pre.mode = CLI_MERGE;
    pre.mpi_size = 1;
    char **paths = calloc((size_t)ngiven, sizeof *paths);
    merge_ctx m = {.pre = &pre, .paths = paths};
    int rc = paths ? 0 : 2;
    for (int k = 0; rc == 0 && k < ngiven; k++) {
        m.file = (size_t)k;
        if (!(paths[k] = malloc(4200)))
            rc = 2;
        else
            rc = read_log(&m, given[k], paths[k], 4200);
    }
    int ok = rc == 0 && push(&pre, pre.header.command);
    for (int i = 0; ok && i < pre.header.nargs; i++)
        ok = is_shard_arg(pre.header.args[i]) || push(&pre, pre.header.args[i]);
    if (ok && json)
        ok = push(&pre, "--json");
    if (rc == 0 && !ok)
        rc = 2;
    if (rc == 0) {
        if (!strcmp(pre.header.command, "montecarlo"))
            rc = cli_montecarlo_study(pre.argc, pre.argv, &pre);
        else if (!strcmp(pre.header.command, "sweep"))
            rc = cli_sweep_study(pre.argc, pre.argv, &pre);
        else if (!strcmp(pre.header.command, "corners"))
            rc = cli_corners_study(pre.argc, pre.argv, &pre);
        else {
            fprintf(stderr, "ringup merge: %s: unknown study '%s'\n", paths[0],
                    pre.header.command);
            rc = 1;
        }
    }
    for (int k = 0; paths && k < ngiven; k++)
        free(paths[k]);
    free(paths);
    free(m.owner);
    free(given);
    cli_pre_free(&pre);
    return rc;
}
