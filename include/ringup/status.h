/* ringup/status.h: status codes and the caller-owned error record.
 *
 * Every fallible library call returns ru_status (RU_OK == 0) and, where the caller
 * passes one, fills an ru_error with the place (file, 1-based line and column, 0 when
 * unknown) and a sentence that names the part and key at fault. The library never
 * prints and never exits; the CLI turns codes into exit statuses. */
#ifndef RINGUP_STATUS_H
#define RINGUP_STATUS_H

#include <stddef.h>

#ifdef __cplusplus
extern "C" {
#endif

/* One list for codes and texts (X-macro): code, short text, CLI exit status. */
#define RU_STATUS_LIST(X)                                                  \
    X(RU_OK, "ok", 0)                                                      \
    X(RU_EINPUT, "bad input", 1)                                           \
    X(RU_ENOMEM, "out of memory", 2)                                       \
    X(RU_ENUMERIC, "numerical failure", 2)                                 \
    X(RU_ENOCONVERGE, "did not converge", 2)                               \
    X(RU_EIO, "file input/output failed", 3)                               \
    X(RU_ERANGE, "argument out of range", 1)                               \
    X(RU_EEXPECT, "design expectation not met", 4)                         \
    X(RU_ESTOPPED, "stopped on request", 130)

typedef enum {
#define RU_X_ENUM(code, text, exitc) code,
    RU_STATUS_LIST(RU_X_ENUM)
#undef RU_X_ENUM
    RU_STATUS_COUNT
} ru_status;

/* Short English text of a status code; never NULL. */
const char *ru_status_str(ru_status s);

/* Process exit status the CLI uses for a code (0 done, 1 bad input, 2 numerical,
 * 3 file I/O, 4 expectation not met, 130 stopped by a signal: 128 + SIGINT). */
int ru_status_exit_code(ru_status s);

#define RU_ERROR_TEXT 512
#define RU_ERROR_FILE 256

/* Caller-owned error record. line/col are 1-based; 0 means "not known". */
typedef struct ru_error {
    ru_status code;            /* the status that was returned */
    char file[RU_ERROR_FILE];  /* source file of the fault, "" when none */
    int line;                  /* 1-based line, 0 when unknown */
    int col;                   /* 1-based column, 0 when unknown */
    char msg[RU_ERROR_TEXT];   /* what is wrong, one sentence, no trailing newline */
} ru_error;

/* Clears an error record (code RU_OK, empty texts). NULL is harmless. */
void ru_error_clear(ru_error *err);

/* Fills err (if not NULL) and returns code, so a caller can write
 * `return ru_error_set(err, RU_EINPUT, file, line, col, "...", ...);`. */
ru_status ru_error_set(ru_error *err, ru_status code, const char *file, int line,
                       int col, const char *fmt, ...)
#if defined(__GNUC__)
    __attribute__((format(printf, 6, 7)))
#endif
    ;

/* Formats "FILE:LINE:COL: message" (parts omitted when unknown) into buf. */
void ru_error_format(const ru_error *err, char *buf, size_t size);

#ifdef __cplusplus
}
#endif
#endif
