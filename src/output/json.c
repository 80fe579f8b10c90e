/* json.c: the streaming JSON writer (see ringup/json.h). */
#include "ringup/json.h"

#include <math.h>

void ru_json_init(ru_json *j, FILE *fp, int pretty)
{
    j->fp = fp;
    j->depth = 0;
    j->count[0] = 0;
    j->pretty = pretty;
}

static void put_string(FILE *fp, const char *s)
{
    fputc('"', fp);
    for (const unsigned char *p = (const unsigned char *)s; *p; p++) {
        switch (*p) {
        case '"': fputs("\\\"", fp); break;
        case '\\': fputs("\\\\", fp); break;
        case '\n': fputs("\\n", fp); break;
        case '\r': fputs("\\r", fp); break;
        case '\t': fputs("\\t", fp); break;
        default:
            if (*p < 0x20)
                fprintf(fp, "\\u%04x", *p);
            else
                fputc(*p, fp);
        }
    }
    fputc('"', fp);
}

static void indent(ru_json *j)
{
    if (!j->pretty)
        return;
    fputc('\n', j->fp);
    for (int i = 0; i < j->depth; i++)
        fputs("  ", j->fp);
}

/* Comma, indentation and key before an item at the current depth. */
static void item(ru_json *j, const char *key)
{
    if (j->count[j->depth]++ > 0)
        fputc(',', j->fp);
    if (j->depth > 0)
        indent(j);
    if (key) {
        put_string(j->fp, key);
        fputs(j->pretty ? ": " : ":", j->fp);
    }
}

static void open_nested(ru_json *j, const char *key, char c)
{
    item(j, key);
    fputc(c, j->fp);
    if (j->depth + 1 < RU_JSON_DEPTH)
        j->depth++;
    j->count[j->depth] = 0;
}

static void close_nested(ru_json *j, char c)
{
    int had = j->count[j->depth] > 0;
    if (j->depth > 0)
        j->depth--;
    if (had)
        indent(j);
    fputc(c, j->fp);
}

void ru_json_begin_object(ru_json *j, const char *key) { open_nested(j, key, '{'); }
void ru_json_end_object(ru_json *j) { close_nested(j, '}'); }
void ru_json_begin_array(ru_json *j, const char *key) { open_nested(j, key, '['); }
void ru_json_end_array(ru_json *j) { close_nested(j, ']'); }

void ru_json_number(ru_json *j, const char *key, double v)
{
    item(j, key);
    if (isfinite(v))
        fprintf(j->fp, "%.10g", v);
    else
        fputs("null", j->fp);
}

void ru_json_int(ru_json *j, const char *key, long v)
{
    item(j, key);
    fprintf(j->fp, "%ld", v);
}

void ru_json_bool(ru_json *j, const char *key, int v)
{
    item(j, key);
    fputs(v ? "true" : "false", j->fp);
}

void ru_json_string(ru_json *j, const char *key, const char *s)
{
    item(j, key);
    if (s)
        put_string(j->fp, s);
    else
        fputs("null", j->fp);
}

void ru_json_null(ru_json *j, const char *key)
{
    item(j, key);
    fputs("null", j->fp);
}

void ru_json_finish(ru_json *j)
{
    fputc('\n', j->fp);
    fflush(j->fp);
}
