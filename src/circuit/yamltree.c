/* yamltree.c: builds our YAML document tree (yamltree.h) from libyaml's events.
 *
 * One pass over the events: scalars become nodes at once; a collection's
 * children wait on one shared stack until its end event, then move into an
 * array of their own. Every node, array and string lives in one arena freed
 * with the tree. Anchors, tags, directives and a second document are refused at
 * their event; once an anchor is seen nothing more is built, but the events are
 * still read to the end so that an alias (the reason anchors are refused: an
 * alias may expand a small file into billions of values) is named first.
 * Duplicate keys are found per mapping with an open-addressing hash table over
 * the key texts, so a mapping of n keys costs O(n). */
#include "circuit/yamltree.h"

#include <stdarg.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <yaml.h>

/* ---- arena ------------------------------------------------------------------ */

typedef struct arena_block {
    struct arena_block *next;
    size_t used, cap;
    max_align_t data[]; /* cap bytes */
} arena_block;

#define ARENA_BLOCK (64u << 10)

struct ru_yaml {
    arena_block *blocks;   /* newest first */
    const ru_ynode *root;  /* NULL: no document, or an empty one */
};

static void *arena_alloc(ru_yaml *y, size_t n)
{
    n = (n + sizeof(max_align_t) - 1) / sizeof(max_align_t) * sizeof(max_align_t);
    arena_block *b = y->blocks;
    if (!b || b->cap - b->used < n) {
        size_t cap = n > ARENA_BLOCK ? n : ARENA_BLOCK;
        b = malloc(sizeof *b + cap);
        if (!b)
            return NULL;
        b->used = 0;
        b->cap = cap;
        b->next = y->blocks;
        y->blocks = b;
    }
    void *p = (char *)b->data + b->used;
    b->used += n;
    return p;
}

void ru_yaml_destroy(ru_yaml *y)
{
    if (!y)
        return;
    for (arena_block *b = y->blocks, *next; b; b = next) {
        next = b->next;
        free(b);
    }
    free(y);
}

const ru_ynode *ru_yaml_root(const ru_yaml *y) { return y ? y->root : NULL; }

/* ---- the builder ------------------------------------------------------------ */

typedef struct open_coll {
    ru_ynode *node;        /* the collection being filled */
    size_t first;          /* its first child on the child stack */
} open_coll;

typedef struct builder {
    ru_yaml *y;
    const char *file;
    ru_error *err;
    open_coll open[RU_YAML_DEPTH_MAX]; /* collections not yet ended */
    int depth;
    ru_ynode **kids;       /* children waiting for their collection's end */
    size_t nkids, capkids;
    size_t nodes;          /* nodes made so far */
    int docs;              /* documents started */
    int anchor_line, anchor_col; /* first anchor seen (0: none) */
    char anchor[80];       /* its name, cut to fit */
    uint32_t *slots;       /* duplicate-key table: index+1 into the mapping, 0 free */
    size_t nslots;
    const char *text;      /* the input, for a look at the place of a syntax error */
    size_t len;
} builder;

static int line_of(yaml_mark_t m) { return (int)m.line + 1; }
static int col_of(yaml_mark_t m) { return (int)m.column + 1; }

#if defined(__GNUC__)
__attribute__((format(printf, 4, 5)))
#endif
static ru_status fail_at(builder *b, int line, int col, const char *fmt, ...)
{
    char msg[RU_ERROR_TEXT];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(msg, sizeof msg, fmt, ap);
    va_end(ap);
    return ru_error_set(b->err, RU_EINPUT, b->file, line, col, "%s", msg);
}

static ru_status no_memory(builder *b)
{
    return ru_error_set(b->err, RU_ENOMEM, b->file, 0, 0, "out of memory reading the YAML");
}

/* A tag as written: libyaml hands back "tag:yaml.org,2002:str" for "!!str". */
static ru_status refuse_tag(builder *b, const unsigned char *tag, yaml_mark_t at)
{
    static const char std[] = "tag:yaml.org,2002:";
    const char *t = (const char *)tag;
    char shown[80];
    if (strncmp(t, std, sizeof std - 1) == 0)
        snprintf(shown, sizeof shown, "!!%.60s", t + sizeof std - 1);
    else
        snprintf(shown, sizeof shown, "%.60s", t);
    return fail_at(b, line_of(at), col_of(at),
                   "tag %s is not allowed (the circuit format uses no YAML tags)", shown);
}

/* Records the first anchor (it is refused when no alias follows). */
static void note_anchor(builder *b, const unsigned char *anchor, yaml_mark_t at)
{
    if (!anchor || b->anchor_line)
        return;
    b->anchor_line = line_of(at);
    b->anchor_col = col_of(at);
    snprintf(b->anchor, sizeof b->anchor, "%.64s", (const char *)anchor);
}

static ru_status push_kid(builder *b, ru_ynode *n)
{
    if (b->nkids == b->capkids) {
        size_t cap = b->capkids ? 2 * b->capkids : 64;
        ru_ynode **k = realloc(b->kids, cap * sizeof *k);
        if (!k)
            return no_memory(b);
        b->kids = k;
        b->capkids = cap;
    }
    b->kids[b->nkids++] = n;
    return RU_OK;
}

/* A new node at mark `at`, counted against the limit. */
static ru_status new_node(builder *b, ru_yaml_type type, yaml_mark_t at, ru_ynode **out)
{
    if (b->nodes >= RU_YAML_NODES_MAX) {
        return fail_at(b, line_of(at), col_of(at),
                       "the file holds more than %d values (the limit of the circuit format)",
                       RU_YAML_NODES_MAX);
    }
    ru_ynode *n = arena_alloc(b->y, sizeof *n);
    if (!n)
        return no_memory(b);
    memset(n, 0, sizeof *n);
    n->type = type;
    n->line = line_of(at);
    n->col = col_of(at);
    n->text = "";
    b->nodes++;
    *out = n;
    return RU_OK;
}

/* Hangs a finished node under the open collection, or makes it the root. */
static ru_status attach(builder *b, ru_ynode *n)
{
    if (b->depth > 0)
        return push_kid(b, n);
    b->y->root = n;
    return RU_OK;
}

static ru_status on_scalar(builder *b, const yaml_event_t *e)
{
    size_t len = e->data.scalar.length;
    if (len > RU_YAML_SCALAR_MAX) {
        return fail_at(b, line_of(e->start_mark), col_of(e->start_mark),
                       "a value of %zu bytes is longer than the circuit format allows (%d)",
                       len, RU_YAML_SCALAR_MAX);
    }
    if (memchr(e->data.scalar.value, '\0', len))
        return fail_at(b, line_of(e->start_mark), col_of(e->start_mark),
                       "a value holds a NUL character (\\0 is not allowed)");
    ru_ynode *n = NULL;
    ru_status s = new_node(b, RU_YAML_SCALAR, e->start_mark, &n);
    char *text = s == RU_OK ? arena_alloc(b->y, len + 1) : NULL;
    if (s == RU_OK && !text)
        s = no_memory(b);
    if (s != RU_OK)
        return s;
    memcpy(text, e->data.scalar.value, len);
    text[len] = '\0';
    n->text = text;
    n->len = len;
    yaml_scalar_style_t st = e->data.scalar.style;
    n->style = st == YAML_PLAIN_SCALAR_STYLE ? RU_YAML_PLAIN
               : (st == YAML_LITERAL_SCALAR_STYLE || st == YAML_FOLDED_SCALAR_STYLE)
                   ? RU_YAML_BLOCK : RU_YAML_QUOTED;
    n->empty = n->style == RU_YAML_PLAIN && len == 0;
    return attach(b, n);
}

static ru_status on_start(builder *b, const yaml_event_t *e, ru_yaml_type type)
{
    if (b->depth == RU_YAML_DEPTH_MAX) {
        return fail_at(b, line_of(e->start_mark), col_of(e->start_mark),
                       "mappings and lists nest deeper than %d levels", RU_YAML_DEPTH_MAX);
    }
    ru_ynode *n = NULL;
    ru_status s = new_node(b, type, e->start_mark, &n);
    if (s != RU_OK)
        return s;
    b->open[b->depth].node = n;
    b->open[b->depth].first = b->nkids;
    b->depth++;
    return RU_OK;
}

static uint64_t text_hash(const char *s, size_t n)
{
    uint64_t h = 1469598103934665603ULL; /* FNV-1a (Fowler, Noll, Vo; from memory) */
    for (size_t i = 0; i < n; i++)
        h = (h ^ (unsigned char)s[i]) * 1099511628211ULL;
    return h;
}

/* The second of two equal scalar keys of a mapping, with the first's place. */
static ru_status check_duplicates(builder *b, const ru_ypair *pairs, size_t n)
{
    if (n < 2)
        return RU_OK;
    size_t need = 4;
    while (need < 2 * n)
        need *= 2;
    if (need > b->nslots) {
        uint32_t *t = realloc(b->slots, need * sizeof *t);
        if (!t)
            return no_memory(b);
        b->slots = t;
        b->nslots = need;
    }
    memset(b->slots, 0, need * sizeof *b->slots);
    for (size_t i = 0; i < n; i++) {
        const ru_ynode *k = pairs[i].key;
        if (k->type != RU_YAML_SCALAR)
            continue;
        size_t at = (size_t)text_hash(k->text, k->len) & (need - 1);
        for (; b->slots[at]; at = (at + 1) & (need - 1)) {
            const ru_ynode *o = pairs[b->slots[at] - 1].key;
            if (o->len == k->len && memcmp(o->text, k->text, k->len) == 0) {
                return fail_at(b, k->line, k->col, "duplicate key %.64s (first given at %d:%d)",
                               k->text, o->line, o->col);
            }
        }
        b->slots[at] = (uint32_t)i + 1;
    }
    return RU_OK;
}

static ru_status on_end(builder *b)
{
    open_coll *oc = &b->open[--b->depth];
    ru_ynode *n = oc->node;
    size_t count = b->nkids - oc->first;
    ru_ynode **kids = b->kids ? b->kids + oc->first : NULL; /* none made yet */
    ru_status s = RU_OK;
    if (n->type == RU_YAML_MAPPING) {
        n->n = count / 2; /* libyaml always pairs a key with a value */
        ru_ypair *pairs = arena_alloc(b->y, (n->n ? n->n : 1) * sizeof *pairs);
        if (!pairs)
            return no_memory(b);
        for (size_t i = 0; i < n->n; i++) {
            pairs[i].key = kids[2 * i];
            pairs[i].value = kids[2 * i + 1];
        }
        n->pairs = pairs;
        s = check_duplicates(b, pairs, n->n);
    } else {
        n->n = count;
        const ru_ynode **items = arena_alloc(b->y, (count ? count : 1) * sizeof *items);
        if (!items)
            return no_memory(b);
        for (size_t i = 0; i < count; i++)
            items[i] = kids[i];
        n->items = items;
    }
    b->nkids = oc->first;
    return s == RU_OK ? attach(b, n) : s;
}

static ru_status on_document(builder *b, const yaml_event_t *e)
{
    int version = e->data.document_start.version_directive != NULL;
    if (version || e->data.document_start.tag_directives.start !=
                       e->data.document_start.tag_directives.end)
        return fail_at(b, line_of(e->start_mark), col_of(e->start_mark),
                       "the %s directive is not allowed (the circuit format uses none)",
                       version ? "%YAML" : "%TAG");
    b->docs++;
    return RU_OK;
}

/* A second document is refused at its first node (or at its `---` when empty). */
static ru_status second_document(builder *b, yaml_parser_t *p, const yaml_event_t *start)
{
    yaml_event_t e;
    yaml_mark_t at = start->start_mark;
    if (yaml_parser_parse(p, &e)) {
        if (e.type == YAML_SCALAR_EVENT || e.type == YAML_MAPPING_START_EVENT ||
            e.type == YAML_SEQUENCE_START_EVENT || e.type == YAML_ALIAS_EVENT)
            if (!(e.type == YAML_SCALAR_EVENT && e.data.scalar.length == 0 &&
                  e.data.scalar.style == YAML_PLAIN_SCALAR_STYLE))
                at = e.start_mark;
        yaml_event_delete(&e);
    }
    return fail_at(b, line_of(at), col_of(at), "the file holds more than one YAML document");
}

/* libyaml's own message at its place: "YAML: problem (context at L:C)". An
 * unexpected end of the text is placed where the unfinished thing began, and a
 * colon inside a plain scalar ("{value:}", where YAML 1.1 wants "value: }") at
 * the start of that scalar, the key the user meant. */
/* The character at a mark (line, and column in characters) is a tab. */
static int tab_at(const builder *b, yaml_mark_t m)
{
    size_t i = 0, line = 0, col = 0;
    while (i < b->len && line < m.line)
        if (b->text[i++] == '\n')
            line++;
    for (; i < b->len && b->text[i] != '\n'; i++) {
        if (((unsigned char)b->text[i] & 0xC0) == 0x80)
            continue; /* a UTF-8 continuation byte: the same character */
        if (col++ == m.column)
            return b->text[i] == '\t';
    }
    return 0;
}

static ru_status syntax_error(builder *b, const yaml_parser_t *p)
{
    const char *problem = p->problem ? p->problem : "the text could not be parsed";
    yaml_mark_t at = p->problem_mark;
    char msg[RU_ERROR_TEXT];
    if (p->context && strstr(problem, "unexpected ':'") &&
        strstr(p->context, "plain scalar")) {
        at = p->context_mark;
        snprintf(msg, sizeof msg,
                 "YAML: found unexpected ':' %s (write a space after the colon that ends "
                 "a key)",
                 p->context);
    } else if (p->context && strstr(problem, "end of stream")) {
        at = p->context_mark;
        snprintf(msg, sizeof msg, "YAML: %s %s", problem, p->context);
    } else if (tab_at(b, at)) {
        snprintf(msg, sizeof msg, "YAML: a tab here cannot start a token (YAML indents with "
                                  "spaces, never tabs)");
    } else if (p->context) {
        snprintf(msg, sizeof msg, "YAML: %s (%s that starts at %d:%d)", problem, p->context,
                 line_of(p->context_mark), col_of(p->context_mark));
    } else {
        snprintf(msg, sizeof msg, "YAML: %s", problem);
    }
    return fail_at(b, line_of(at), col_of(at), "%s", msg);
}

/* One event into the tree (or, after an anchor, only watched for an alias). */
static ru_status on_event(builder *b, yaml_parser_t *p, const yaml_event_t *e)
{
    const unsigned char *anchor = NULL, *tag = NULL;
    if (e->type == YAML_SCALAR_EVENT) {
        anchor = e->data.scalar.anchor;
        tag = e->data.scalar.tag;
    } else if (e->type == YAML_SEQUENCE_START_EVENT) {
        anchor = e->data.sequence_start.anchor;
        tag = e->data.sequence_start.tag;
    } else if (e->type == YAML_MAPPING_START_EVENT) {
        anchor = e->data.mapping_start.anchor;
        tag = e->data.mapping_start.tag;
    }
    if (e->type == YAML_ALIAS_EVENT)
        return fail_at(b, line_of(e->start_mark), col_of(e->start_mark),
                       "alias *%s is not allowed (the circuit format has no anchors or "
                       "aliases; write the value out)",
                       (const char *)e->data.alias.anchor);
    note_anchor(b, anchor, e->start_mark);
    if (b->anchor_line)
        return RU_OK; /* nothing more is built; an alias may still come */
    if (tag)
        return refuse_tag(b, tag, e->start_mark);
    switch (e->type) {
    case YAML_DOCUMENT_START_EVENT:
        return b->docs ? second_document(b, p, e) : on_document(b, e);
    case YAML_SCALAR_EVENT:
        return on_scalar(b, e);
    case YAML_SEQUENCE_START_EVENT:
        return on_start(b, e, RU_YAML_SEQUENCE);
    case YAML_MAPPING_START_EVENT:
        return on_start(b, e, RU_YAML_MAPPING);
    case YAML_SEQUENCE_END_EVENT:
    case YAML_MAPPING_END_EVENT:
        return on_end(b);
    default:
        return RU_OK;
    }
}

static ru_status run_parser(builder *b, yaml_parser_t *p)
{
    for (;;) {
        yaml_event_t e;
        if (!yaml_parser_parse(p, &e)) {
            if (p->error == YAML_MEMORY_ERROR)
                return no_memory(b);
            if (b->anchor_line)
                break; /* the anchor came first */
            return syntax_error(b, p);
        }
        ru_status s = on_event(b, p, &e);
        int end = e.type == YAML_STREAM_END_EVENT;
        yaml_event_delete(&e);
        if (s != RU_OK)
            return s;
        if (end)
            break;
    }
    if (b->anchor_line) {
        return fail_at(b, b->anchor_line, b->anchor_col,
                       "anchor &%s is not allowed (the circuit format has no anchors or "
                       "aliases)",
                       b->anchor);
    }
    return RU_OK;
}

ru_status ru_yaml_parse(const char *text, size_t len, const char *file, ru_yaml **out,
                        ru_error *err)
{
    *out = NULL;
    ru_status s = ru_yaml_check_text(text, len, file, err);
    if (s != RU_OK)
        return s;
    builder b;
    memset(&b, 0, sizeof b);
    b.file = file;
    b.err = err;
    b.text = text;
    b.len = len;
    b.y = calloc(1, sizeof *b.y);
    if (!b.y)
        return no_memory(&b);
    yaml_parser_t p;
    if (!yaml_parser_initialize(&p)) {
        ru_yaml_destroy(b.y);
        return no_memory(&b);
    }
    yaml_parser_set_input_string(&p, (const unsigned char *)text, len);
    s = run_parser(&b, &p);
    yaml_parser_delete(&p);
    free(b.kids);
    free(b.slots);
    const ru_ynode *r = b.y->root;
    if (r && r->type == RU_YAML_SCALAR && r->empty)
        b.y->root = NULL; /* "---" alone, or only comments */
    if (s != RU_OK) {
        ru_yaml_destroy(b.y);
        return s;
    }
    *out = b.y;
    return RU_OK;
}
