/* yamldoc.c: one parsed YAML file for the circuit loader (ld_doc): reading the
 * bytes, parsing with libfyaml, refusing anchors, aliases and tags, places of
 * nodes, error messages with FILE:LINE:COL, and the small readers of keys and
 * values that loader.c, loader_parts.c and loader_run.c share. Nothing here knows
 * about parts or sections: it is the bottom of the loader.
 *
 * Invariants: the document is built unresolved and every anchor, alias and tag is
 * refused before any value is read, so expansion attacks cost one linear walk;
 * libfyaml's diagnostics go to our output function (never printed; its
 * collect-errors mode leaks in 0.7.12) and are returned with their place; every
 * error is RU_EINPUT with a 1-based FILE:LINE:COL, except an unreadable file
 * (RU_EIO) and out of memory (RU_ENOMEM). */
#include "circuit/loader_impl.h"

#include <errno.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

ru_status ru_ld_read_file(const char *path, char **text, size_t *len, ru_error *err)
{
    *text = NULL;
    *len = 0;
    FILE *f = fopen(path, "rb");
    if (!f)
        return ru_error_set(err, RU_EIO, path, 0, 0, "cannot open: %s", strerror(errno));
    size_t cap = 4096, n = 0;
    char *buf = malloc(cap);
    ru_status s = buf ? RU_OK : RU_ENOMEM;
    while (s == RU_OK) {
        if (n + 1 >= cap) {
            char *b = realloc(buf, cap * 2);
            if (!b) {
                s = RU_ENOMEM;
                break;
            }
            buf = b;
            cap *= 2;
        }
        size_t got = fread(buf + n, 1, cap - n - 1, f);
        n += got;
        if (got == 0) {
            if (ferror(f))
                s = ru_error_set(err, RU_EIO, path, 0, 0, "cannot read: %s",
                                 strerror(errno));
            break;
        }
    }
    fclose(f);
    if (s == RU_ENOMEM)
        ru_error_set(err, RU_ENOMEM, path, 0, 0, "out of memory reading the file");
    if (s != RU_OK) {
        free(buf);
        return s;
    }
    buf[n] = '\0';
    *text = buf;
    *len = n;
    return RU_OK;
}

/* Reads "LINE:COL: error: " back from the end of a diagnostic's first chunk
 * ("NAME:LINE:COL: error: msg\n"); returns the offset of the message or 0. */
static size_t parse_diag_head(const char *b, size_t len, int *line, int *col)
{
    static const char tag[] = ": error: ";
    size_t n = sizeof tag - 1, at = 0;
    for (size_t i = 0; i + n <= len && !at; i++)
        if (memcmp(b + i, tag, n) == 0)
            at = i;
    int v[2] = {0, 0};
    size_t i = at;
    for (int k = 1; k >= 0 && i > 0; k--) {
        int scale = 1, digits = 0;
        while (i > 0 && b[i - 1] >= '0' && b[i - 1] <= '9' && digits < 9) {
            v[k] += (b[--i] - '0') * scale;
            scale *= 10;
            digits++;
        }
        if (!digits || (k == 1 && (i == 0 || b[--i] != ':')))
            return 0;
    }
    *line = v[0];
    *col = v[1];
    return at ? at + n : 0;
}

/* libfyaml's output function: records places and messages, prints nothing. One
 * diagnostic arrives in three chunks; only the first carries "FILE:L:C: error:". */
static void diag_output(struct fy_diag *diag, void *user, const char *buf, size_t len)
{
    (void)diag;
    ld_doc *d = user;
    int line, col;
    size_t msg = parse_diag_head(buf, len, &line, &col);
    if (!msg)
        return;
    if (d->probing) {
        d->probe_line = line;
        d->probe_col = col;
        return;
    }
    size_t end = msg;
    while (end < len && buf[end] != '\n')
        end++;
    size_t used = strlen(d->err_text);
    if (d->nerr == 0) {
        d->err_line = line;
        d->err_col = col;
        snprintf(d->err_text, sizeof d->err_text, "YAML: %.*s", (int)(end - msg), buf + msg);
    } else if (used + 1 < sizeof d->err_text) {
        snprintf(d->err_text + used, sizeof d->err_text - used, "; then at %d:%d: %.*s",
                 line, col, (int)(end - msg), buf + msg);
    }
    d->nerr++;
}

void ru_ld_place(ld_doc *d, struct fy_node *n, int *line, int *col)
{
    *line = *col = 0;
    if (!n)
        return;
    struct fy_token *t = fy_node_get_scalar_token(n);
    const struct fy_mark *m = t ? fy_token_start_mark(t) : NULL;
    if (m) {
        *line = m->line + 1;
        *col = m->column + 1;
        enum fy_node_style st = fy_node_get_style(n);
        if ((fy_node_is_alias(n) || st == FYNS_SINGLE_QUOTED ||
             st == FYNS_DOUBLE_QUOTED) && *col > 1)
            (*col)--; /* the token starts after the '*' or the opening quote */
        return;
    }
    /* Collections have no public start mark in libfyaml 0.7.12: a report to our
     * diag output function carries the node's place, which we read back. */
    d->probing = 1;
    d->probe_line = d->probe_col = 0;
    fy_node_report(n, FYET_ERROR, "place");
    d->probing = 0;
    *line = d->probe_line;
    *col = d->probe_col;
}

ru_status ru_ld_fail(ld_doc *d, struct fy_node *n, ru_error *err, const char *fmt, ...)
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

struct fy_node *ru_ld_val(struct fy_node_pair *p)
{
    struct fy_node *v = fy_node_pair_value(p);
    if (v && fy_node_get_type(v) == FYNT_SCALAR && !fy_node_is_alias(v) &&
        !fy_node_get_scalar_token(v))
        return NULL; /* an empty value ("key:" with nothing after it) */
    return v;
}

const char *ru_ld_key(struct fy_node_pair *p)
{
    struct fy_node *k = fy_node_pair_key(p);
    if (!k || fy_node_get_type(k) != FYNT_SCALAR)
        return "";
    const char *s = fy_node_get_scalar0(k);
    return s ? s : "";
}

struct fy_node_pair *ru_ld_find(struct fy_node *map, const char *key)
{
    void *it = NULL;
    struct fy_node_pair *p;
    while ((p = fy_node_mapping_iterate(map, &it)) != NULL)
        if (strcmp(ru_ld_key(p), key) == 0)
            return p;
    return NULL;
}

/* "part R1: " or "" as a message prefix. */
const char *ru_ld_sep(const char *who) { return who && who[0] ? ": " : ""; }

ru_status ru_ld_scalar(ld_doc *d, struct fy_node_pair *p, const char *who,
                       ru_error *err, const char **text)
{
    struct fy_node *v = ru_ld_val(p);
    if (!v)
        return ru_ld_fail(d, fy_node_pair_key(p), err, "%s%skey %s has no value", who,
                          ru_ld_sep(who), ru_ld_key(p));
    if (fy_node_get_type(v) != FYNT_SCALAR)
        return ru_ld_fail(d, v, err, "%s%skey %s needs a single value, not a %s", who,
                          ru_ld_sep(who), ru_ld_key(p),
                          fy_node_get_type(v) == FYNT_MAPPING ? "mapping" : "list");
    const char *s = fy_node_get_scalar0(v);
    *text = s ? s : "";
    return RU_OK;
}

ru_status ru_ld_value(ld_doc *d, struct fy_node_pair *p, const char *who,
                      const char *unit, ru_error *err, double *out)
{
    const char *text;
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

/* First alias, anchor and tag found in a walk of the unresolved tree. */
typedef struct ref_find {
    struct fy_node *alias, *anchor, *tag;
} ref_find;

static void find_refs(struct fy_node *n, ref_find *r)
{
    if (!n || r->alias)
        return;
    if (fy_node_is_alias(n)) {
        r->alias = n;
        return;
    }
    if (!r->anchor && fy_node_get_anchor(n))
        r->anchor = n;
    if (!r->tag && fy_node_get_tag_token(n))
        r->tag = n;
    void *it = NULL;
    if (fy_node_get_type(n) == FYNT_MAPPING) {
        struct fy_node_pair *p;
        while (!r->alias && (p = fy_node_mapping_iterate(n, &it)) != NULL) {
            find_refs(fy_node_pair_key(p), r);
            find_refs(fy_node_pair_value(p), r);
        }
    } else if (fy_node_get_type(n) == FYNT_SEQUENCE) {
        struct fy_node *c;
        while (!r->alias && (c = fy_node_sequence_iterate(n, &it)) != NULL)
            find_refs(c, r);
    }
}

/* Refuses aliases (named first), anchors and tags, before anything resolves. */
static ru_status refuse_refs(ld_doc *d, struct fy_node *root, ru_error *err)
{
    ref_find r = {NULL, NULL, NULL};
    find_refs(root, &r);
    if (r.alias)
        return ru_ld_fail(d, r.alias, err,
                          "alias *%s is not allowed (the circuit format has no anchors "
                          "or aliases; write the value out)",
                          fy_node_get_scalar0(r.alias));
    if (r.anchor) {
        size_t len = 0;
        const char *a = fy_anchor_get_text(fy_node_get_anchor(r.anchor), &len);
        return ru_ld_fail(d, r.anchor, err,
                          "anchor &%.*s is not allowed (the circuit format has no "
                          "anchors or aliases)",
                          (int)(len < 64 ? len : 64), a ? a : "");
    }
    if (r.tag) {
        struct fy_token *t = fy_node_get_tag_token(r.tag);
        const struct fy_mark *m = fy_token_start_mark(t);
        size_t len = 0;
        const char *tag = t ? fy_token_get_text(t, &len) : NULL;
        return ru_error_set(err, RU_EINPUT, d->file, m ? m->line + 1 : 0,
                            m ? m->column + 1 : 0,
                            "tag %.*s is not allowed (the circuit format uses no YAML "
                            "tags)",
                            (int)(len < 64 ? len : 64), tag ? tag : "");
    }
    return RU_OK;
}

/* libfyaml's diagnostics as one error at the first one's place. */
static ru_status yaml_errors(ld_doc *d, ru_error *err)
{
    if (!d->nerr)
        return ru_error_set(err, RU_EINPUT, d->file, 0, 0,
                            "YAML: the text could not be parsed");
    return ru_error_set(err, RU_EINPUT, d->file, d->err_line, d->err_col, "%s",
                        d->err_text);
}

static struct fy_diag *quiet_diag(ld_doc *d)
{
    struct fy_diag_cfg dc;
    fy_diag_cfg_default(&dc);
    dc.fp = NULL;
    dc.output_fn = diag_output;
    dc.user = d;
    dc.colorize = false;
    return fy_diag_create(&dc);
}

ru_status ru_ld_open(ld_doc *d, const char *text, size_t len, const char *name,
                     ru_error *err)
{
    memset(d, 0, sizeof *d);
    snprintf(d->file, sizeof d->file, "%s", name ? name : "");
    d->diag = quiet_diag(d);
    struct fy_parse_cfg cfg = {.flags = FYPCF_QUIET, .diag = d->diag};
    d->parser = d->diag ? fy_parser_create(&cfg) : NULL;
    if (!d->parser || fy_parser_set_string(d->parser, text, len) != 0)
        return ru_error_set(err, RU_ENOMEM, d->file, 0, 0, "cannot start the YAML parser");
    d->doc = fy_parse_load_document(d->parser);
    if (!d->doc || d->nerr) {
        if (d->nerr)
            return yaml_errors(d, err);
        return ru_error_set(err, RU_EINPUT, d->file, 1, 1,
                            "the file is empty: expected a mapping with a parts: section");
    }
    d->root = fy_document_root(d->doc);
    ru_status s = refuse_refs(d, d->root, err);
    if (s != RU_OK)
        return s;
    struct fy_document *more = fy_parse_load_document(d->parser);
    if (more || d->nerr) {
        if (more) {
            struct fy_node *r2 = fy_document_root(more);
            ru_status s2 = r2 ? ru_ld_fail(d, r2, err,
                                           "the file holds more than one YAML document")
                              : ru_error_set(err, RU_EINPUT, d->file, 0, 0,
                                             "the file holds more than one YAML document");
            fy_parse_document_destroy(d->parser, more);
            return s2;
        }
        return yaml_errors(d, err);
    }
    if (!d->root)
        return ru_error_set(err, RU_EINPUT, d->file, 1, 1,
                            "the file is empty: expected a mapping with a parts: section");
    if (fy_node_get_type(d->root) != FYNT_MAPPING)
        return ru_ld_fail(d, d->root, err,
                          "the file must be a mapping (title:, stray:, parts:, run:, "
                          "measure:), not a %s",
                          fy_node_get_type(d->root) == FYNT_SEQUENCE ? "list" : "scalar");
    return RU_OK;
}

void ru_ld_close(ld_doc *d)
{
    if (d->doc)
        fy_parse_document_destroy(d->parser, d->doc);
    if (d->parser)
        fy_parser_destroy(d->parser);
    if (d->diag)
        fy_diag_unref(d->diag);
    memset(d, 0, sizeof *d);
}

/* Every key of map must be in allowed (NULL-terminated). */
ru_status ru_ld_only_keys(ld_doc *d, struct fy_node *map, const char *who,
                           const char *const *allowed, ru_error *err)
{
    void *it = NULL;
    struct fy_node_pair *p;
    while ((p = fy_node_mapping_iterate(map, &it)) != NULL) {
        struct fy_node *k = fy_node_pair_key(p);
        if (!k || fy_node_get_type(k) != FYNT_SCALAR)
            return ru_ld_fail(d, k, err, "%s%skeys must be plain names", who, ru_ld_sep(who));
        int ok = 0;
        for (size_t i = 0; allowed[i] && !ok; i++)
            ok = strcmp(ru_ld_key(p), allowed[i]) == 0;
        if (!ok)
            return ru_ld_fail(d, k, err, "%s%sunknown key %s", who, ru_ld_sep(who),
                              ru_ld_key(p));
    }
    return RU_OK;
}

/* The value of pair p as a mapping, or an error. */
ru_status ru_ld_need_mapping(ld_doc *d, struct fy_node_pair *p, const char *who,
                              ru_error *err, struct fy_node **map)
{
    struct fy_node *v = ru_ld_val(p);
    if (!v || fy_node_get_type(v) != FYNT_MAPPING)
        return ru_ld_fail(d, v ? v : fy_node_pair_key(p), err,
                          "%s%skey %s needs a mapping of keys and values", who, ru_ld_sep(who),
                          ru_ld_key(p));
    *map = v;
    return RU_OK;
}
