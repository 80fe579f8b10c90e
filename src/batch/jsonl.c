/* jsonl.c: one-line JSON records, built and read back (see batch/jsonl.h).
 *
 * Invariant: what jl_num writes, jv_parse reads back as the same double (17
 * significant digits round-trip through glibc's correctly rounded printf and
 * strtod), so a report rebuilt from records equals the report of the run that
 * made them. */
#include "batch/jsonl.h"

#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* ---- builder ---- */

static void put(jl_buf *b, const char *s, size_t n)
{
    if (b->failed)
        return;
    if (b->len + n + 1 > b->cap) {
        size_t cap = b->cap ? b->cap : 256;
        while (cap < b->len + n + 1)
            cap *= 2;
        char *t = realloc(b->s, cap);
        if (!t) {
            b->failed = 1;
            return;
        }
        b->s = t;
        b->cap = cap;
    }
    memcpy(b->s + b->len, s, n);
    b->len += n;
    b->s[b->len] = '\0';
}

static void putf(jl_buf *b, const char *fmt, ...)
{
    char tmp[64];
    va_list ap;
    va_start(ap, fmt);
    int n = vsnprintf(tmp, sizeof tmp, fmt, ap);
    va_end(ap);
    if (n > 0)
        put(b, tmp, (size_t)n < sizeof tmp ? (size_t)n : sizeof tmp - 1);
}

static void put_string(jl_buf *b, const char *s)
{
    put(b, "\"", 1);
    for (const unsigned char *p = (const unsigned char *)s; *p; p++) {
        if (*p == '"' || *p == '\\') {
            char e[2] = {'\\', (char)*p};
            put(b, e, 2);
        } else if (*p == '\n') {
            put(b, "\\n", 2);
        } else if (*p == '\t') {
            put(b, "\\t", 2);
        } else if (*p < 0x20) {
            putf(b, "\\u%04x", *p);
        } else {
            put(b, (const char *)p, 1);
        }
    }
    put(b, "\"", 1);
}

void jl_init(jl_buf *b)
{
    memset(b, 0, sizeof *b);
    put(b, "{", 1);
    b->first = 1;
}

void jl_key(jl_buf *b, const char *key)
{
    if (!b->first)
        put(b, ",", 1);
    b->first = 0;
    if (key) {
        put_string(b, key);
        put(b, ":", 1);
    }
}

void jl_num(jl_buf *b, const char *key, double v)
{
    jl_key(b, key);
    if (isfinite(v))
        putf(b, "%.17g", v);
    else
        put(b, "null", 4);
}

void jl_int(jl_buf *b, const char *key, long long v)
{
    jl_key(b, key);
    putf(b, "%lld", v);
}

void jl_bool(jl_buf *b, const char *key, int v)
{
    jl_key(b, key);
    put(b, v ? "true" : "false", v ? 4 : 5);
}

void jl_str(jl_buf *b, const char *key, const char *s)
{
    jl_key(b, key);
    if (s)
        put_string(b, s);
    else
        put(b, "null", 4);
}

void jl_open(jl_buf *b, const char *key, char bracket)
{
    jl_key(b, key);
    put(b, &bracket, 1);
    b->first = 1;
}

void jl_close(jl_buf *b, char bracket)
{
    put(b, &bracket, 1);
    b->first = 0;
}

ru_status jl_finish(jl_buf *b, char **line)
{
    put(b, "}\n", 2);
    if (b->failed) {
        free(b->s);
        b->s = NULL;
        *line = NULL;
        return RU_ENOMEM;
    }
    *line = b->s;
    b->s = NULL;
    return RU_OK;
}

/* ---- reader ---- */

typedef struct rd {
    const char *p, *end, *start;
    char *why;
    size_t why_size;
    int failed;
} rd;

static int fail(rd *r, const char *what)
{
    if (!r->failed && r->why && r->why_size)
        snprintf(r->why, r->why_size, "at byte %zu: %s", (size_t)(r->p - r->start) + 1, what);
    r->failed = 1;
    return 0;
}

static void blanks(rd *r)
{
    while (r->p < r->end && (*r->p == ' ' || *r->p == '\t' || *r->p == '\n' || *r->p == '\r'))
        r->p++;
}

static int value(rd *r, jv *v, int depth);

static void put_utf8(char *out, size_t *n, unsigned cp)
{
    if (cp < 0x80) {
        out[(*n)++] = (char)cp;
    } else if (cp < 0x800) {
        out[(*n)++] = (char)(0xC0 | (cp >> 6));
        out[(*n)++] = (char)(0x80 | (cp & 0x3F));
    } else if (cp < 0x10000) {
        out[(*n)++] = (char)(0xE0 | (cp >> 12));
        out[(*n)++] = (char)(0x80 | ((cp >> 6) & 0x3F));
        out[(*n)++] = (char)(0x80 | (cp & 0x3F));
    } else {
        out[(*n)++] = (char)(0xF0 | (cp >> 18));
        out[(*n)++] = (char)(0x80 | ((cp >> 12) & 0x3F));
        out[(*n)++] = (char)(0x80 | ((cp >> 6) & 0x3F));
        out[(*n)++] = (char)(0x80 | (cp & 0x3F));
    }
}

static int hex4(rd *r, unsigned *cp)
{
    *cp = 0;
    for (int i = 0; i < 4; i++, r->p++) {
        if (r->p >= r->end)
            return fail(r, "unfinished \\u escape");
        char c = *r->p;
        int d = c >= '0' && c <= '9' ? c - '0' : c >= 'a' && c <= 'f' ? c - 'a' + 10
                : c >= 'A' && c <= 'F' ? c - 'A' + 10 : -1;
        if (d < 0)
            return fail(r, "bad \\u escape");
        *cp = *cp * 16 + (unsigned)d;
    }
    return 1;
}

static int escape(rd *r, char *out, size_t *n)
{
    char c = *r->p++;
    const char *from = "\"\\/bfnrt", *to = "\"\\/\b\f\n\r\t";
    const char *k = c ? strchr(from, c) : NULL;
    if (k) {
        out[(*n)++] = to[k - from];
        return 1;
    }
    if (c != 'u')
        return fail(r, "bad escape in a string");
    unsigned cp;
    if (!hex4(r, &cp))
        return 0;
    if (cp >= 0xD800 && cp < 0xDC00) { /* a surrogate pair */
        unsigned lo;
        if (r->end - r->p < 6 || r->p[0] != '\\' || r->p[1] != 'u')
            return fail(r, "lone surrogate in a string");
        r->p += 2;
        if (!hex4(r, &lo) || lo < 0xDC00 || lo > 0xDFFF)
            return fail(r, "bad surrogate pair in a string");
        cp = 0x10000 + ((cp - 0xD800) << 10) + (lo - 0xDC00);
    } else if (cp >= 0xDC00 && cp < 0xE000) {
        return fail(r, "lone surrogate in a string");
    }
    put_utf8(out, n, cp);
    return 1;
}

/* A string at r->p (the opening quote) into a malloc'd copy. */
static int string(rd *r, char **out)
{
    r->p++;
    const char *q = r->p;
    while (q < r->end && *q != '"')
        q += *q == '\\' && q + 1 < r->end ? 2 : 1;
    if (q >= r->end)
        return fail(r, "unfinished string");
    char *s = malloc((size_t)(q - r->p) + 1); /* escapes never grow the text */
    size_t n = 0;
    if (!s)
        return fail(r, "out of memory");
    while (r->p < q) {
        unsigned char c = (unsigned char)*r->p;
        if (c < 0x20) {
            free(s);
            return fail(r, "control character in a string");
        }
        if (c == '\\') {
            r->p++;
            if (!escape(r, s, &n)) {
                free(s);
                return 0;
            }
        } else {
            s[n++] = (char)c;
            r->p++;
        }
    }
    r->p++;
    s[n] = '\0';
    *out = s;
    return 1;
}

static int number(rd *r, jv *v)
{
    const char *q = r->p;
    if (q < r->end && *q == '-')
        q++;
    if (q >= r->end || !(*q >= '0' && *q <= '9'))
        return fail(r, "expected a value");
    if (*q == '0')
        q++;
    else
        while (q < r->end && *q >= '0' && *q <= '9')
            q++;
    if (q < r->end && *q == '.') {
        q++;
        if (q >= r->end || !(*q >= '0' && *q <= '9'))
            return fail(r, "bad number");
        while (q < r->end && *q >= '0' && *q <= '9')
            q++;
    }
    if (q < r->end && (*q == 'e' || *q == 'E')) {
        q++;
        if (q < r->end && (*q == '+' || *q == '-'))
            q++;
        if (q >= r->end || !(*q >= '0' && *q <= '9'))
            return fail(r, "bad number");
        while (q < r->end && *q >= '0' && *q <= '9')
            q++;
    }
    char tmp[64];
    size_t len = (size_t)(q - r->p);
    if (len >= sizeof tmp)
        return fail(r, "number too long");
    memcpy(tmp, r->p, len);
    tmp[len] = '\0';
    v->type = JV_NUM;
    v->num = strtod(tmp, NULL);
    r->p = q;
    return 1;
}

static int word(rd *r, const char *w)
{
    size_t n = strlen(w);
    if ((size_t)(r->end - r->p) < n || memcmp(r->p, w, n) != 0)
        return fail(r, "expected a value");
    r->p += n;
    return 1;
}

/* Appends one entry to an array or object being read. */
static int grow(rd *r, jv *v, size_t *cap, int with_key)
{
    if (v->n < *cap)
        return 1;
    size_t nc = *cap ? 2 * *cap : 8;
    jv *it = realloc(v->item, nc * sizeof *it);
    if (!it)
        return fail(r, "out of memory");
    v->item = it;
    if (with_key) {
        char **k = realloc(v->key, nc * sizeof *k);
        if (!k)
            return fail(r, "out of memory");
        v->key = k;
    }
    *cap = nc;
    return 1;
}

static int container(rd *r, jv *v, int depth, int obj)
{
    v->type = obj ? JV_OBJ : JV_ARR;
    r->p++;
    size_t cap = 0;
    blanks(r);
    if (r->p < r->end && *r->p == (obj ? '}' : ']')) {
        r->p++;
        return 1;
    }
    for (;;) {
        blanks(r);
        if (!grow(r, v, &cap, obj))
            return 0;
        jv *e = &v->item[v->n];
        memset(e, 0, sizeof *e);
        if (obj) {
            v->key[v->n] = NULL;
            if (r->p >= r->end || *r->p != '"')
                return fail(r, "expected a key");
            if (!string(r, &v->key[v->n]))
                return 0;
            v->n++; /* counted now so that jv_free releases the key */
            blanks(r);
            if (r->p >= r->end || *r->p != ':')
                return fail(r, "expected ':'");
            r->p++;
            if (!value(r, e, depth + 1))
                return 0;
        } else {
            v->n++;
            if (!value(r, e, depth + 1))
                return 0;
        }
        blanks(r);
        if (r->p < r->end && *r->p == ',') {
            r->p++;
            continue;
        }
        if (r->p < r->end && *r->p == (obj ? '}' : ']')) {
            r->p++;
            return 1;
        }
        return fail(r, obj ? "expected ',' or '}'" : "expected ',' or ']'");
    }
}

static int value(rd *r, jv *v, int depth)
{
    if (depth > JV_DEPTH)
        return fail(r, "nested too deep");
    blanks(r);
    if (r->p >= r->end)
        return fail(r, "expected a value");
    switch (*r->p) {
    case '{': return container(r, v, depth, 1);
    case '[': return container(r, v, depth, 0);
    case '"': v->type = JV_STR; return string(r, &v->str);
    case 't': v->type = JV_BOOL; v->num = 1; return word(r, "true");
    case 'f': v->type = JV_BOOL; v->num = 0; return word(r, "false");
    case 'n': v->type = JV_NULL; return word(r, "null");
    default: return number(r, v);
    }
}

static void release(jv *v)
{
    free(v->str);
    for (size_t i = 0; i < v->n; i++) {
        release(&v->item[i]);
        if (v->key)
            free(v->key[i]);
    }
    free(v->item);
    free(v->key);
}

void jv_free(jv *v)
{
    if (!v)
        return;
    release(v);
    free(v);
}

ru_status jv_parse(const char *text, size_t len, jv **out, char *why, size_t why_size)
{
    *out = NULL;
    rd r = {.p = text, .end = text + len, .start = text, .why = why, .why_size = why_size};
    jv *v = calloc(1, sizeof *v);
    if (!v)
        return RU_ENOMEM;
    if (value(&r, v, 0)) {
        blanks(&r);
        if (r.p != r.end)
            fail(&r, "text after the value");
    }
    if (r.failed) {
        jv_free(v);
        return RU_EINPUT;
    }
    *out = v;
    return RU_OK;
}

const jv *jv_get(const jv *v, const char *key)
{
    if (!v || v->type != JV_OBJ)
        return NULL;
    for (size_t i = 0; i < v->n; i++)
        if (!strcmp(v->key[i], key))
            return &v->item[i];
    return NULL;
}

double jv_num(const jv *v, double dflt)
{
    if (v && (v->type == JV_NUM || v->type == JV_BOOL))
        return v->num;
    if (v && v->type == JV_NULL)
        return NAN;
    return dflt;
}

const char *jv_str(const jv *v)
{
    return v && v->type == JV_STR ? v->str : NULL;
}
