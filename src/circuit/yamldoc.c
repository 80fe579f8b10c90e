/* yamldoc.c: one parsed YAML file for the circuit loader (ld_doc): reading the
 * bytes (regular files only, at most RU_YAML_BYTES_MAX), the document tree of
 * yamltree.c, places of nodes, error messages with FILE:LINE:COL, and the small
 * readers of keys and values that loader.c, loader_parts.c and loader_run.c
 * share. Nothing here knows about parts or sections: it is the bottom of the
 * loader.
 *
 * Invariants: the tree refuses anchors, aliases, tags, directives and duplicate
 * keys while parsing, so nothing read here can expand; every error is RU_EINPUT
 * with a 1-based FILE:LINE:COL (a whole-file problem such as the size has no
 * line), except an unreadable file (RU_EIO) and out of memory (RU_ENOMEM). */
#define _POSIX_C_SOURCE 200809L /* open, fstat, O_CLOEXEC */
#include "circuit/loader_impl.h"

#include "base/suggest.h"

#include <errno.h>
#include <fcntl.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

/* What kind of file st is, for the message refusing it. */
static const char *file_kind(const struct stat *st)
{
    return S_ISDIR(st->st_mode)    ? "a directory"
           : S_ISFIFO(st->st_mode) ? "a pipe (FIFO)"
           : S_ISCHR(st->st_mode)  ? "a character device"
           : S_ISBLK(st->st_mode)  ? "a block device"
           : S_ISSOCK(st->st_mode) ? "a socket"
                                   : "not a regular file";
}

ru_status ru_ld_read_file(const char *path, char **text, size_t *len, ru_error *err)
{
    *text = NULL;
    *len = 0;
    /* O_NONBLOCK: opening a FIFO must not wait for a writer; it is refused below */
    int fd = open(path, O_RDONLY | O_NOCTTY | O_NONBLOCK | O_CLOEXEC);
    if (fd < 0)
        return ru_error_set(err, RU_EIO, path, 0, 0, "cannot open: %s", strerror(errno));
    struct stat st;
    ru_status s = RU_OK;
    if (fstat(fd, &st) != 0)
        s = ru_error_set(err, RU_EIO, path, 0, 0, "cannot read: %s", strerror(errno));
    else if (!S_ISREG(st.st_mode))
        s = ru_error_set(err, RU_EINPUT, path, 0, 0,
                         "%s is not a circuit file: only regular files are read",
                         file_kind(&st));
    else if ((unsigned long long)st.st_size > RU_YAML_BYTES_MAX)
        s = ru_error_set(err, RU_EINPUT, path, 0, 0,
                         "the file is %lld bytes, over the limit of %u bytes (4 MiB)",
                         (long long)st.st_size, RU_YAML_BYTES_MAX);
    /* read at most one byte past the limit, whatever the size said (it may grow) */
    size_t cap = s == RU_OK ? (size_t)st.st_size + 2 : 0, n = 0;
    char *buf = s == RU_OK ? malloc(cap) : NULL;
    if (s == RU_OK && !buf)
        s = ru_error_set(err, RU_ENOMEM, path, 0, 0, "out of memory reading the file");
    while (s == RU_OK) {
        if (n + 1 >= cap) {
            size_t ncap = cap * 2 < RU_YAML_BYTES_MAX + 2 ? cap * 2 : RU_YAML_BYTES_MAX + 2;
            char *b = ncap > cap ? realloc(buf, ncap) : NULL;
            if (!b) {
                s = ncap > cap ? ru_error_set(err, RU_ENOMEM, path, 0, 0,
                                              "out of memory reading the file")
                               : ru_error_set(err, RU_EINPUT, path, 0, 0,
                                              "the file is over the limit of %u bytes (4 MiB)",
                                              RU_YAML_BYTES_MAX);
                break;
            }
            buf = b;
            cap = ncap;
        }
        ssize_t got = read(fd, buf + n, cap - n - 1);
        if (got < 0 && errno == EINTR)
            continue;
        if (got < 0)
            s = ru_error_set(err, RU_EIO, path, 0, 0, "cannot read: %s", strerror(errno));
        if (got <= 0)
            break;
        n += (size_t)got;
    }
    close(fd);
    if (s != RU_OK) {
        free(buf);
        return s;
    }
    buf[n] = '\0';
    *text = buf;
    *len = n;
    return RU_OK;
}

void ru_ld_place(const ld_doc *d, const ru_ynode *n, int *line, int *col)
{
    (void)d;
    *line = n ? n->line : 0;
    *col = n ? n->col : 0;
}

ru_status ru_ld_fail(const ld_doc *d, const ru_ynode *n, ru_error *err, const char *fmt,
                     ...)
{
    int line, col;
    ru_ld_place(d, n, &line, &col);
    char msg[RU_ERROR_TEXT];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(msg, sizeof msg, fmt, ap);
    va_end(ap);
    return ru_error_set(err, RU_EINPUT, d->file, line, col, "%s", msg);
}

const ru_ynode *ru_ld_val(const ru_ypair *p)
{
    return p->value->empty ? NULL : p->value; /* "key:" with nothing after it */
}

const char *ru_ld_key(const ru_ypair *p)
{
    return p->key->type == RU_YAML_SCALAR ? p->key->text : "";
}

const ru_ypair *ru_ld_find(const ru_ynode *map, const char *key)
{
    for (size_t i = 0; i < map->n; i++)
        if (map->pairs[i].key->type == RU_YAML_SCALAR &&
            strcmp(map->pairs[i].key->text, key) == 0)
            return &map->pairs[i];
    return NULL;
}

/* "part R1: " or "" as a message prefix. */
const char *ru_ld_sep(const char *who) { return who && who[0] ? ": " : ""; }

ru_status ru_ld_scalar(const ld_doc *d, const ru_ypair *p, const char *who, ru_error *err,
                       const char **text)
{
    const ru_ynode *v = ru_ld_val(p);
    if (!v)
        return ru_ld_fail(d, p->key, err, "%s%skey %s has no value", who, ru_ld_sep(who),
                          ru_ld_key(p));
    if (v->type != RU_YAML_SCALAR)
        return ru_ld_fail(d, v, err, "%s%skey %s needs a single value, not a %s", who,
                          ru_ld_sep(who), ru_ld_key(p),
                          v->type == RU_YAML_MAPPING ? "mapping" : "list");
    *text = v->text;
    return RU_OK;
}

ru_status ru_ld_value(const ld_doc *d, const ru_ypair *p, const char *who, const char *unit,
                      ru_error *err, double *out)
{
    const char *text = NULL;
    ru_status s = ru_ld_scalar(d, p, who, err, &text);
    if (s != RU_OK)
        return s;
    char why[160];
    if (ru_value_parse(text, unit, out, why, sizeof why) != RU_OK)
        return ru_ld_fail(d, ru_ld_val(p), err, "%s%skey %s: %s", who, ru_ld_sep(who),
                          ru_ld_key(p), why);
    return RU_OK;
}

int ru_ld_valid_name(const char *s)
{
    size_t n = strlen(s);
    if (n == 0 || n >= RU_NAME_MAX)
        return 0;
    for (size_t i = 0; i < n; i++) {
        char ch = s[i];
        int ok = (ch >= 'a' && ch <= 'z') || (ch >= 'A' && ch <= 'Z') ||
                 (ch >= '0' && ch <= '9') || ch == '_' || ch == '.';
        if (!ok)
            return 0;
    }
    return 1;
}

ru_status ru_ld_open(ld_doc *d, const char *text, size_t len, const char *name,
                     ru_error *err)
{
    memset(d, 0, sizeof *d);
    snprintf(d->file, sizeof d->file, "%s", name ? name : "");
    ru_status s = ru_yaml_parse(text, len, d->file, &d->tree, err);
    if (s != RU_OK)
        return s;
    d->root = ru_yaml_root(d->tree);
    if (!d->root)
        return ru_error_set(err, RU_EINPUT, d->file, 1, 1,
                            "the file is empty: expected a mapping with a parts: section");
    if (d->root->type != RU_YAML_MAPPING)
        return ru_ld_fail(d, d->root, err,
                          "the file must be a mapping (title:, stray:, parts:, run:, "
                          "measure:), not a %s",
                          d->root->type == RU_YAML_SEQUENCE ? "list" : "scalar");
    return RU_OK;
}

void ru_ld_close(ld_doc *d)
{
    ru_yaml_destroy(d->tree);
    memset(d, 0, sizeof *d);
}

/* Every key of map must be in allowed (NULL-terminated). */
ru_status ru_ld_only_keys(const ld_doc *d, const ru_ynode *map, const char *who,
                          const char *const *allowed, ru_error *err)
{
    for (size_t i = 0; i < map->n; i++) {
        const ru_ypair *p = &map->pairs[i];
        if (p->key->type != RU_YAML_SCALAR)
            return ru_ld_fail(d, p->key, err, "%s%skeys must be plain names", who,
                              ru_ld_sep(who));
        if (!ru_ld_key(p)[0])
            return ru_ld_fail(d, p->key, err, "%s%san empty key ('') names nothing", who,
                              ru_ld_sep(who));
        int ok = 0;
        for (size_t k = 0; allowed[k] && !ok; k++)
            ok = strcmp(ru_ld_key(p), allowed[k]) == 0;
        if (!ok) {
            size_t n = 0;
            while (allowed[n])
                n++;
            char dym[RU_NAME_MAX + 24];
            return ru_ld_fail(d, p->key, err, "%s%sunknown key %s%s", who, ru_ld_sep(who),
                              ru_ld_key(p),
                              ru_suggest_text(ru_ld_key(p), allowed, n, dym, sizeof dym));
        }
    }
    return RU_OK;
}

/* The value of pair p as a mapping, or an error. */
ru_status ru_ld_need_mapping(const ld_doc *d, const ru_ypair *p, const char *who,
                             ru_error *err, const ru_ynode **map)
{
    const ru_ynode *v = ru_ld_val(p);
    if (!v || v->type != RU_YAML_MAPPING)
        return ru_ld_fail(d, v ? v : p->key, err, "%s%skey %s needs a mapping of keys and values",
                          who, ru_ld_sep(who), ru_ld_key(p));
    *map = v;
    return RU_OK;
}
