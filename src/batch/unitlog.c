/* unitlog.c: DIR/units.jsonl, the log of a study's finished units (see
 * ringup/units.h, "the unit log").
 *
 * Invariants: one writer at a time (an exclusive flock held from create or resume
 * to close); every record goes out in one write() on an O_APPEND descriptor, and
 * a write that fails part way is cut back off, so the file holds whole lines
 * only; a line left without its newline by a crash is dropped when the log is
 * read and cut off when it is continued. */
#include "ringup/units.h"

#include "batch/jsonl.h"

#include <errno.h>
#include <fcntl.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/file.h>
#include <sys/stat.h>
#include <unistd.h>

#define LOG_MAX_BYTES ((size_t)1 << 31) /* a log larger than this is refused */

struct ru_unitlog {
    int fd;
    char path[4096];
    off_t size;         /* bytes of whole lines written */
    ru_status status;   /* first write error */
};

void ru_unitlog_header_clear(ru_unitlog_header *h)
{
    for (int i = 0; i < h->nargs && i < RU_UNITLOG_ARGS; i++)
        free(h->args[i]);
    memset(h, 0, sizeof *h);
}

ru_status ru_file_hash(const char *path, char out[24], ru_error *err)
{
    FILE *fp = fopen(path, "rb");
    if (!fp)
        return ru_error_set(err, RU_EIO, path, 0, 0, "cannot read: %s", strerror(errno));
    uint64_t h = 1469598103934665603ULL; /* FNV-1a 64 offset basis */
    int c;
    while ((c = getc(fp)) != EOF) {
        h ^= (uint64_t)(unsigned char)c;
        h *= 1099511628211ULL; /* FNV prime */
    }
    int bad = ferror(fp);
    fclose(fp);
    if (bad)
        return ru_error_set(err, RU_EIO, path, 0, 0, "cannot read the file");
    snprintf(out, 24, "%016llx", (unsigned long long)h);
    return RU_OK;
}

static ru_status write_all(int fd, const char *s, size_t n)
{
    while (n > 0) {
        ssize_t w = write(fd, s, n);
        if (w < 0 && errno == EINTR)
            continue;
        if (w <= 0)
            return RU_EIO;
        s += w;
        n -= (size_t)w;
    }
    return RU_OK;
}

static ru_status header_line(const ru_unitlog_header *h, char **line)
{
    jl_buf b;
    jl_init(&b);
    jl_int(&b, "ringup_units", 1);
    jl_str(&b, "command", h->command);
    jl_int(&b, "units", (long long)h->units);
    jl_open(&b, "shard", '[');
    jl_int(&b, NULL, h->shard_k);
    jl_int(&b, NULL, h->shard_n);
    jl_close(&b, ']');
    jl_str(&b, "file_hash", h->file_hash);
    jl_open(&b, "args", '[');
    for (int i = 0; i < h->nargs; i++)
        jl_str(&b, NULL, h->args[i]);
    jl_close(&b, ']');
    return jl_finish(&b, line);
}

static ru_status lock_fd(int fd, int exclusive, const char *path, ru_error *err)
{
    if (flock(fd, (exclusive ? LOCK_EX : LOCK_SH) | LOCK_NB) == 0)
        return RU_OK;
    return ru_error_set(err, RU_EIO, path, 0, 0,
                        errno == EWOULDBLOCK ? "in use by a run that is still going"
                                             : "cannot lock the unit log");
}

ru_status ru_unitlog_create(const char *path, const ru_unitlog_header *h,
                            ru_unitlog **out, ru_error *err)
{
    *out = NULL;
    ru_unitlog *log = calloc(1, sizeof *log);
    char *line = NULL;
    if (!log || header_line(h, &line) != RU_OK) {
        free(log);
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "out of memory");
    }
    snprintf(log->path, sizeof log->path, "%s", path);
    log->fd = open(path, O_WRONLY | O_CREAT | O_EXCL | O_APPEND | O_CLOEXEC, 0644);
    ru_status s = RU_OK;
    if (log->fd < 0)
        s = ru_error_set(err, RU_EIO, path, 0, 0,
                         errno == EEXIST ? "exists already: continue that study with "
                                           "--resume, or choose another folder"
                                         : "cannot create: %s",
                         strerror(errno));
    else if ((s = lock_fd(log->fd, 1, path, err)) == RU_OK &&
             (s = write_all(log->fd, line, strlen(line))) != RU_OK)
        ru_error_set(err, s, path, 0, 0, "cannot write: %s", strerror(errno));
    free(line);
    if (s != RU_OK) {
        if (log->fd >= 0) {
            close(log->fd);
            unlink(path);
        }
        free(log);
        return s;
    }
    struct stat st;
    log->size = fstat(log->fd, &st) == 0 ? st.st_size : 0;
    *out = log;
    return RU_OK;
}

static ru_status bad_header(const char *path, const char *what, ru_error *err)
{
    return ru_error_set(err, RU_EINPUT, path, 1, 0, "not a ringup unit log: %s", what);
}

static ru_status parse_header(const char *path, const char *text, size_t len,
                              ru_unitlog_header *h, ru_error *err)
{
    memset(h, 0, sizeof *h);
    jv *root = NULL;
    char why[128];
    if (jv_parse(text, len, &root, why, sizeof why) != RU_OK)
        return bad_header(path, why, err);
    const jv *shard = jv_get(root, "shard"), *args = jv_get(root, "args");
    const char *cmd = jv_str(jv_get(root, "command")), *hash = jv_str(jv_get(root, "file_hash"));
    double units = jv_num(jv_get(root, "units"), NAN);
    ru_status s = RU_OK;
    if (jv_num(jv_get(root, "ringup_units"), 0) != 1 || !cmd || !hash || !shard ||
        shard->type != JV_ARR || shard->n != 2 || !args || args->type != JV_ARR ||
        args->n > RU_UNITLOG_ARGS || !(units >= 1 && units <= 1e9 && units == floor(units)))
        s = bad_header(path, "the first line is not its header", err);
    if (s == RU_OK) {
        double k = jv_num(&shard->item[0], NAN), n = jv_num(&shard->item[1], NAN);
        if (!(n >= 1 && n <= 1e6 && k >= 1 && k <= n && k == floor(k) && n == floor(n)))
            s = bad_header(path, "bad shard in the header", err);
        h->shard_k = (unsigned)k;
        h->shard_n = (unsigned)n;
        h->units = (size_t)units;
        snprintf(h->command, sizeof h->command, "%s", cmd);
        snprintf(h->file_hash, sizeof h->file_hash, "%s", hash);
    }
    for (size_t i = 0; s == RU_OK && i < args->n; i++) {
        const char *a = jv_str(&args->item[i]);
        if (!a || !(h->args[i] = strdup(a)))
            s = bad_header(path, "bad arguments in the header", err);
        else
            h->nargs++;
    }
    jv_free(root);
    if (s != RU_OK)
        ru_unitlog_header_clear(h);
    return s;
}

/* Reads fd's whole content (malloc'd, NUL-terminated). */
static ru_status slurp(int fd, const char *path, char **text, size_t *len, ru_error *err)
{
    struct stat st;
    if (fstat(fd, &st) != 0 || (size_t)st.st_size > LOG_MAX_BYTES)
        return ru_error_set(err, RU_EIO, path, 0, 0, "cannot read (or larger than 2 GB)");
    char *buf = malloc((size_t)st.st_size + 1);
    size_t n = 0;
    if (!buf)
        return ru_error_set(err, RU_ENOMEM, path, 0, 0, "out of memory reading the log");
    while (n < (size_t)st.st_size) {
        ssize_t r = pread(fd, buf + n, (size_t)st.st_size - n, (off_t)n);
        if (r < 0 && errno == EINTR)
            continue;
        if (r <= 0)
            break;
        n += (size_t)r;
    }
    buf[n] = '\0';
    *text = buf;
    *len = n;
    return RU_OK;
}

/* The header and the whole lines of an open log; *whole is the length of the
 * text up to the last newline. */
static ru_status walk(int fd, const char *path, ru_unitlog_header *h, ru_unitlog_line_fn fn,
                      void *ctx, size_t *whole, ru_error *err)
{
    char *text = NULL;
    size_t len = 0;
    ru_status s = slurp(fd, path, &text, &len, err);
    if (s != RU_OK)
        return s;
    char *nl = memchr(text, '\n', len);
    s = nl ? parse_header(path, text, (size_t)(nl - text), h, err)
           : bad_header(path, len ? "its header line is incomplete" : "it is empty", err);
    size_t lineno = 1, pos = nl ? (size_t)(nl - text) + 1 : len;
    while (s == RU_OK && pos < len) {
        char *end = memchr(text + pos, '\n', len - pos);
        if (!end)
            break; /* cut short: not a record */
        *end = '\0';
        lineno++;
        if (fn && end > text + pos) {
            s = fn(ctx, text + pos, lineno, err);
            if (s != RU_OK && err && !err->file[0]) {
                char msg[RU_ERROR_TEXT];
                snprintf(msg, sizeof msg, "%s", err->msg);
                ru_error_set(err, s, path, (int)lineno, 0, "%s", msg);
            }
        }
        pos = (size_t)(end - text) + 1;
    }
    *whole = pos;
    free(text);
    if (s != RU_OK)
        ru_unitlog_header_clear(h);
    return s;
}

ru_status ru_unitlog_resume(const char *path, ru_unitlog_header *h, ru_unitlog_line_fn fn,
                            void *ctx, ru_unitlog **out, ru_error *err)
{
    *out = NULL;
    memset(h, 0, sizeof *h);
    ru_unitlog *log = calloc(1, sizeof *log);
    if (!log)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "out of memory");
    snprintf(log->path, sizeof log->path, "%s", path);
    log->fd = open(path, O_RDWR | O_APPEND | O_CLOEXEC);
    ru_status s = RU_OK;
    size_t whole = 0;
    if (log->fd < 0)
        s = ru_error_set(err, RU_EIO, path, 0, 0, "cannot open: %s", strerror(errno));
    else if ((s = lock_fd(log->fd, 1, path, err)) == RU_OK &&
             (s = walk(log->fd, path, h, fn, ctx, &whole, err)) == RU_OK &&
             ftruncate(log->fd, (off_t)whole) != 0)
        s = ru_error_set(err, RU_EIO, path, 0, 0, "cannot cut off an unfinished line: %s",
                         strerror(errno));
    if (s != RU_OK) {
        if (log->fd >= 0)
            close(log->fd);
        free(log);
        return s;
    }
    log->size = (off_t)whole;
    *out = log;
    return RU_OK;
}

ru_status ru_unitlog_read(const char *path, ru_unitlog_header *h, ru_unitlog_line_fn fn,
                          void *ctx, ru_error *err)
{
    memset(h, 0, sizeof *h);
    int fd = open(path, O_RDONLY | O_CLOEXEC);
    if (fd < 0)
        return ru_error_set(err, RU_EIO, path, 0, 0, "cannot open: %s", strerror(errno));
    size_t whole = 0;
    ru_status s = lock_fd(fd, 0, path, err);
    if (s == RU_OK)
        s = walk(fd, path, h, fn, ctx, &whole, err);
    close(fd);
    return s;
}

ru_status ru_unitlog_append(ru_unitlog *log, const char *line, ru_error *err)
{
    if (log->status != RU_OK)
        return ru_error_set(err, log->status, log->path, 0, 0, "an earlier write failed");
    size_t n = strlen(line);
    if (write_all(log->fd, line, n) != RU_OK) {
        int e = errno;
        if (ftruncate(log->fd, log->size) != 0) /* leave whole lines only */
            log->status = RU_EIO;
        return ru_error_set(err, RU_EIO, log->path, 0, 0, "cannot write: %s", strerror(e));
    }
    log->size += (off_t)n;
    return RU_OK;
}

ru_status ru_unitlog_close(ru_unitlog *log, ru_error *err)
{
    if (!log)
        return RU_OK;
    ru_status s = log->status;
    if (fsync(log->fd) != 0 && s == RU_OK)
        s = ru_error_set(err, RU_EIO, log->path, 0, 0, "cannot flush to disk: %s",
                         strerror(errno));
    if (close(log->fd) != 0 && s == RU_OK)
        s = ru_error_set(err, RU_EIO, log->path, 0, 0, "cannot close: %s", strerror(errno));
    free(log);
    return s;
}
