/* ringup/json.h: a small streaming JSON writer for the CLI's --json output.
 *
 * Keys are written as given (the project's keys are snake_case with the unit in the
 * name); non-finite numbers are written as null, since JSON has no NaN. Nesting is
 * tracked so commas are placed correctly; the writer holds no global state. */
#ifndef RINGUP_JSON_H
#define RINGUP_JSON_H

#include <stdio.h>

#ifdef __cplusplus
extern "C" {
#endif

#define RU_JSON_DEPTH 32

typedef struct ru_json {
    FILE *fp;                  /* destination */
    int depth;                 /* current nesting depth */
    int count[RU_JSON_DEPTH];  /* items written at each depth */
    int pretty;                /* 1: indent two spaces per level */
} ru_json;

void ru_json_init(ru_json *j, FILE *fp, int pretty);
void ru_json_begin_object(ru_json *j, const char *key); /* key NULL inside arrays/top */
void ru_json_end_object(ru_json *j);
void ru_json_begin_array(ru_json *j, const char *key);
void ru_json_end_array(ru_json *j);
void ru_json_number(ru_json *j, const char *key, double v); /* non-finite -> null */
void ru_json_int(ru_json *j, const char *key, long v);
void ru_json_bool(ru_json *j, const char *key, int v);
void ru_json_string(ru_json *j, const char *key, const char *s); /* NULL -> null */
void ru_json_null(ru_json *j, const char *key);
/* Ends the document with a newline. */
void ru_json_finish(ru_json *j);

#ifdef __cplusplus
}
#endif
#endif
