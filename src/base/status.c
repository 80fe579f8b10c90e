/* status.c: texts and exit codes of ru_status, and the ru_error helpers. */
#include "ringup/status.h"

#include <stdarg.h>
#include <stdio.h>
#include <string.h>

static const char *const status_text[] = {
#define RU_X_TEXT(code, text, exitc) text,
    RU_STATUS_LIST(RU_X_TEXT)
#undef RU_X_TEXT
};

static const int status_exit[] = {
#define RU_X_EXIT(code, text, exitc) exitc,
    RU_STATUS_LIST(RU_X_EXIT)
#undef RU_X_EXIT
};

const char *ru_status_str(ru_status s)
{
    if ((int)s < 0 || s >= RU_STATUS_COUNT)
        return "unknown status";
    return status_text[s];
}

int ru_status_exit_code(ru_status s)
{
    if ((int)s < 0 || s >= RU_STATUS_COUNT)
        return 2;
    return status_exit[s];
}

void ru_error_clear(ru_error *err)
{
    if (!err)
        return;
    memset(err, 0, sizeof *err);
}

/* A message is one line: a control character that came in with the user's text
 * (a line break inside a block scalar, a tab) is written as an escape. */
static void one_line(const char *in, char *out, size_t size)
{
    size_t k = 0;
    for (const unsigned char *q = (const unsigned char *)in; *q && k + 5 < size; q++) {
        if (*q == '\n' || *q == '\t' || *q == '\r') {
            out[k++] = '\\';
            out[k++] = *q == '\n' ? 'n' : *q == '\t' ? 't' : 'r';
        } else if (*q < 0x20 || *q == 0x7f) {
            k += (size_t)snprintf(out + k, size - k, "\\x%02X", *q);
        } else {
            out[k++] = (char)*q;
        }
    }
    out[k] = '\0';
}

ru_status ru_error_set(ru_error *err, ru_status code, const char *file, int line,
                       int col, const char *fmt, ...)
{
    if (!err)
        return code;
    err->code = code;
    snprintf(err->file, sizeof err->file, "%s", file ? file : "");
    err->line = line;
    err->col = col;
    char raw[RU_ERROR_TEXT];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(raw, sizeof raw, fmt, ap);
    va_end(ap);
    one_line(raw, err->msg, sizeof err->msg);
    return code;
}

void ru_error_format(const ru_error *err, char *buf, size_t size)
{
    if (!buf || size == 0)
        return;
    if (!err) {
        buf[0] = '\0';
        return;
    }
    if (err->file[0] && err->line > 0 && err->col > 0)
        snprintf(buf, size, "%s:%d:%d: %s", err->file, err->line, err->col, err->msg);
    else if (err->file[0] && err->line > 0)
        snprintf(buf, size, "%s:%d: %s", err->file, err->line, err->msg);
    else if (err->file[0])
        snprintf(buf, size, "%s: %s", err->file, err->msg);
    else
        snprintf(buf, size, "%s", err->msg);
}
