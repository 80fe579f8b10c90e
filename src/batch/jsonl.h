/* jsonl.h: JSON lines for batch records (private to src/batch/).
 *
 * A record is one JSON object on one line. The builder writes numbers with 17
 * significant digits, so a double read back with strtod is the same double bit
 * for bit (non-finite numbers become null and read back as NAN); the reader is a
 * small strict parser for such lines (nesting at most JV_DEPTH, no duplicate
 * checks). Both hold no global state. */
#ifndef RU_BATCH_JSONL_H
#define RU_BATCH_JSONL_H

#include "ringup/status.h"

#include <stddef.h>

/* ---- building one line ---- */

typedef struct jl_buf {
    char *s;       /* the text so far (NUL-terminated), malloc'd */
    size_t len;    /* its length */
    size_t cap;    /* allocated bytes */
    int failed;    /* 1: out of memory; the text is incomplete */
    int first;     /* 1: the next item opens its container (no comma) */
} jl_buf;

void jl_init(jl_buf *b);                                  /* starts "{" */
void jl_key(jl_buf *b, const char *key);                  /* comma, "key": */
void jl_num(jl_buf *b, const char *key, double v);        /* key NULL in arrays */
void jl_int(jl_buf *b, const char *key, long long v);
void jl_bool(jl_buf *b, const char *key, int v);
void jl_str(jl_buf *b, const char *key, const char *s);
void jl_open(jl_buf *b, const char *key, char bracket);   /* '{' or '[' */
void jl_close(jl_buf *b, char bracket);                   /* '}' or ']' */
/* Closes the top object, appends '\n' and hands the text over (*line, malloc'd);
 * RU_ENOMEM when any step ran out of memory (nothing handed over). */
ru_status jl_finish(jl_buf *b, char **line);

/* ---- reading one line ---- */

#define JV_DEPTH 16

typedef enum { JV_NULL, JV_BOOL, JV_NUM, JV_STR, JV_ARR, JV_OBJ } jv_type;

typedef struct jv {
    jv_type type;
    double num;        /* JV_NUM; JV_BOOL: 0 or 1 */
    char *str;         /* JV_STR: the unescaped text */
    size_t n;          /* JV_ARR, JV_OBJ: entries */
    struct jv *item;   /* their values */
    char **key;        /* JV_OBJ: their keys */
} jv;

/* Parses text[0..len) (one JSON value, blanks around allowed). On error returns
 * RU_EINPUT with why ("at byte 17: expected ':'"); *out is NULL. */
ru_status jv_parse(const char *text, size_t len, jv **out, char *why, size_t why_size);
void jv_free(jv *v); /* NULL is harmless */

/* The value of key in an object (NULL when absent or v is not an object). */
const jv *jv_get(const jv *v, const char *key);
/* A number (null reads as NAN; anything else gives dflt). */
double jv_num(const jv *v, double dflt);
/* A string or NULL. */
const char *jv_str(const jv *v);

#endif
