/* csv.c: the CSV waveform writer (ringup/wavefile.h), a sink for ru_transient_run.
 *
 * Invariants:
 * - Columns are fixed at open: time_s, every node but ground in circuit node order
 *   (free and driven, through ru_system_node_voltage), then i(NAME) for every
 *   inductor in part order.
 * - Rows go through a stdio stream with one fixed buffer allocated at open, so a
 *   run of any length writes in constant memory (no per-row allocation).
 * - Data goes to "<path>.tmp.<pid>-<i>" in the same folder (ringup/outfile.h: a
 *   final path that is a link, a device or a FIFO is refused) and
 *   is renamed onto path only by ru_csv_close(keep = 1 or 2); every other end
 *   removes it. The first write error is kept and returned by ru_csv_close.
 *
 * Digits. Values are written with %.10g: 10 significant digits round to within
 * 5e-10 relative, 20x below the tightest solver tolerance (precise rtol 1e-10 is the
 * step error target, the global error is larger), so the file never hides solver
 * accuracy; 17 digits would add 40 % to the file for no information. Time uses
 * %.12g so that sample times of a 1e9-sample run stay distinct and evenly spaced
 * to 1e-3 of a spacing. */
#define _POSIX_C_SOURCE 200809L

#include "ringup/wavefile.h"

#include "ringup/outfile.h"

#include <errno.h>
#include <fcntl.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#define RU_CSV_BUF 65536   /* stdio buffer (bytes) */

typedef struct csv_col {
    int node;  /* node index, or -1 for an inductor current */
    int state; /* state index of the inductor current (node == -1) */
} csv_col;

struct ru_csv {
    const ru_system *sys;
    FILE *fp;                  /* stream on the temporary file, NULL once closed */
    char *buf;                 /* fixed stdio buffer (RU_CSV_BUF bytes) */
    char *path;                /* final name */
    char *tmp;                 /* temporary name in the same folder */
    csv_col *cols;             /* data columns after time_s */
    size_t ncols;
    ru_status st;              /* first failure, RU_OK while all is well */
    char msg[RU_ERROR_TEXT];   /* its message */
    int dc;                    /* 1: driven nodes at their final values */
};

/* Records the first I/O failure (errno e) on the writer. */
static ru_status csv_fail(ru_csv *w, int e, const char *what)
{
    if (w->st == RU_OK) {
        char eb[128] = "unknown error";
        if (strerror_r(e, eb, sizeof eb) != 0)
            snprintf(eb, sizeof eb, "error %d", e);
        w->st = RU_EIO;
        snprintf(w->msg, sizeof w->msg, "cannot %s '%s': %s", what, w->path, eb);
    }
    return w->st;
}

/* Writes one header field, quoted (RFC 4180) when it holds , " or a line break. */
static void put_name(FILE *fp, const char *name, const char *prefix,
                     const char *suffix)
{
    int quote = strpbrk(name, ",\"\r\n") != NULL;
    fputc(',', fp);
    if (quote)
        fputc('"', fp);
    fputs(prefix, fp);
    for (const char *p = name; *p; p++) {
        if (*p == '"')
            fputc('"', fp);
        fputc(*p, fp);
    }
    fputs(suffix, fp);
    if (quote)
        fputc('"', fp);
}

static ru_status build_columns(ru_csv *w)
{
    const ru_circuit *c = ru_system_circuit(w->sys);
    size_t nn = ru_circuit_node_count(c), np = ru_circuit_part_count(c);
    size_t ncur = 0;
    for (size_t p = 0; p < np; p++)
        ncur += (size_t)ru_part_currents(ru_circuit_part(c, p));
    w->cols = malloc((nn + ncur + 1) * sizeof *w->cols);
    if (!w->cols)
        return RU_ENOMEM;
    for (size_t i = 1; i < nn; i++)
        w->cols[w->ncols++] = (csv_col){(int)i, -1};
    for (size_t p = 0; p < np; p++) { /* branch currents: inductors', crystals' main arm */
        const ru_part *q = ru_circuit_part(c, p);
        int st = ru_system_part_state(w->sys, (int)p);
        for (int k = 0, nk = st >= 0 ? ru_part_currents(q) : 0; k < nk; k++)
            w->cols[w->ncols++] = (csv_col){-1, st + k};
    }
    return RU_OK;
}

static void write_header(ru_csv *w)
{
    const ru_circuit *c = ru_system_circuit(w->sys);
    fputs("time_s", w->fp);
    for (size_t i = 0; i < w->ncols; i++) {
        if (w->cols[i].node >= 0) {
            put_name(w->fp, ru_circuit_node_name(c, w->cols[i].node), "", "");
            continue;
        }
        put_name(w->fp, ru_system_state_name(w->sys, (size_t)w->cols[i].state), "", "");
    }
    fputc('\n', w->fp);
}

/* Creates the temporary file next to the final one (ringup/outfile.h). */
static ru_status open_tmp(ru_csv *w)
{
    int fd = -1;
    ru_error e2;
    ru_error_clear(&e2);
    if (ru_outfile_tmp(w->path, &fd, &w->tmp, &e2) != RU_OK) {
        w->st = e2.code ? e2.code : RU_EIO;
        snprintf(w->msg, sizeof w->msg, "%s", e2.msg);
        return w->st;
    }
    w->fp = fdopen(fd, "w");
    if (!w->fp) {
        int e = errno;
        close(fd);
        unlink(w->tmp);
        return csv_fail(w, e, "open a stream for");
    }
    setvbuf(w->fp, w->buf, _IOFBF, RU_CSV_BUF);
    return RU_OK;
}

ru_status ru_csv_open(const ru_system *s, const char *path, ru_csv **out, ru_error *err)
{
    if (out)
        *out = NULL;
    if (!s || !path || !path[0] || !out)
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0,
                            "CSV writer: missing system, path or handle");
    ru_csv *w = calloc(1, sizeof *w);
    ru_status st = RU_ENOMEM;
    if (w) {
        w->sys = s;
        w->path = strdup(path);
        w->buf = malloc(RU_CSV_BUF);
        if (w->path && w->buf)
            st = build_columns(w);
    }
    if (st == RU_OK)
        st = open_tmp(w);
    if (st == RU_OK) {
        write_header(w);
        *out = w;
        return RU_OK;
    }
    if (st == RU_ENOMEM)
        ru_error_set(err, st, NULL, 0, 0, "CSV writer for '%s': out of memory", path);
    else
        ru_error_set(err, st, NULL, 0, 0, "%s", w->msg);
    ru_csv_close(w, 0, NULL);
    return st;
}

ru_status ru_csv_open_table(const char *path, const char *const *cols, size_t ncols,
                            ru_csv **out, ru_error *err)
{
    if (out)
        *out = NULL;
    if (!path || !path[0] || !out || !cols || ncols == 0)
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0,
                            "CSV writer: missing path, columns or handle");
    ru_csv *w = calloc(1, sizeof *w);
    ru_status st = RU_ENOMEM;
    if (w) {
        w->path = strdup(path);
        w->buf = malloc(RU_CSV_BUF);
        w->ncols = ncols;
        if (w->path && w->buf)
            st = open_tmp(w);
    }
    if (st == RU_OK) {
        fputs(cols[0], w->fp); /* the project's own column names: no quoting */
        for (size_t i = 1; i < ncols; i++)
            put_name(w->fp, cols[i], "", "");
        fputc('\n', w->fp);
        *out = w;
        return RU_OK;
    }
    if (st == RU_ENOMEM)
        ru_error_set(err, st, NULL, 0, 0, "CSV writer for '%s': out of memory", path);
    else
        ru_error_set(err, st, NULL, 0, 0, "%s", w->msg);
    ru_csv_close(w, 0, NULL);
    return st;
}

ru_status ru_csv_row(ru_csv *w, const double *v, size_t n)
{
    if (!w || !w->fp || w->sys)
        return RU_ERANGE;
    if (w->st != RU_OK)
        return w->st;
    if (n != w->ncols) {
        w->st = RU_ERANGE;
        snprintf(w->msg, sizeof w->msg, "CSV writer for '%s': row has %zu values, the "
                 "table %zu columns", w->path, n, w->ncols);
        return w->st;
    }
    int bad = 0;
    for (size_t i = 0; i < n && !bad; i++)
        bad = fprintf(w->fp, i ? ",%.10g" : "%.12g", v[i]) < 0;
    if (!bad)
        bad = fputc('\n', w->fp) == EOF;
    return bad ? csv_fail(w, errno, "write") : RU_OK;
}

ru_status ru_csv_sample(void *user, double t_s, const double *x, size_t n)
{
    ru_csv *w = user;
    if (!w || !w->fp)
        return RU_ERANGE;
    if (w->st != RU_OK)
        return w->st;
    if (n != ru_system_size(w->sys)) {
        w->st = RU_ERANGE;
        snprintf(w->msg, sizeof w->msg, "CSV writer for '%s': sample has %zu states, "
                 "the system %zu", w->path, n, ru_system_size(w->sys));
        return w->st;
    }
    int bad = fprintf(w->fp, "%.12g", t_s) < 0;
    for (size_t i = 0; i < w->ncols && !bad; i++) {
        const csv_col *c = &w->cols[i];
        double v = c->node < 0 ? x[c->state]
                   : w->dc     ? ru_system_node_voltage_dc(w->sys, c->node, x)
                               : ru_system_node_voltage(w->sys, c->node, t_s, x);
        bad = fprintf(w->fp, ",%.10g", v) < 0;
    }
    if (!bad)
        bad = fputc('\n', w->fp) == EOF;
    return bad ? csv_fail(w, errno, "write") : RU_OK;
}

/* Flushes, syncs and closes the stream; records a failure. */
static void finish_stream(ru_csv *w)
{
    if (!w->fp)
        return;
    if (fflush(w->fp) != 0 || ferror(w->fp))
        csv_fail(w, errno, "write");
    else if (fsync(fileno(w->fp)) != 0)
        csv_fail(w, errno, "sync");
    if (fclose(w->fp) != 0)
        csv_fail(w, errno, "close");
    w->fp = NULL;
}

void ru_csv_set_dc(ru_csv *w, int dc)
{
    if (w)
        w->dc = dc != 0;
}

ru_status ru_csv_close(ru_csv *w, int keep, ru_error *err)
{
    if (!w)
        return RU_OK;
    finish_stream(w);
    if (w->tmp && w->st == RU_OK && keep != 0 && rename(w->tmp, w->path) != 0)
        csv_fail(w, errno, "rename the finished file to");
    else if (w->tmp && w->st == RU_OK && keep != 0)
        w->tmp[0] = '\0'; /* renamed: nothing left to remove */
    if (w->tmp && w->tmp[0])
        unlink(w->tmp);
    ru_status st = w->st;
    if (st != RU_OK)
        ru_error_set(err, st, NULL, 0, 0, "%s", w->msg);
    free(w->tmp);
    free(w->path);
    free(w->cols);
    free(w->buf);
    free(w);
    return st;
}
