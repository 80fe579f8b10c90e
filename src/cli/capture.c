/* capture.c: the terminal text of a command, kept for its report. A command prints
 * its result with printf as always; between cli_capture_begin and cli_capture_end
 * the standard output goes to a temporary file instead (at the descriptor level, so
 * every printf is caught), and at the end the text is copied to the terminal (when
 * echo is set) and handed back. A report built from it holds exactly what the
 * terminal shows. */
#define _POSIX_C_SOURCE 200809L /* fileno, dup */
#include "cli/cli.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#define CAPTURE_MAX (16u << 20) /* longest text kept for a report (bytes) */

void cli_capture_begin(cli_capture *cap, int want, int echo)
{
    memset(cap, 0, sizeof *cap);
    cap->saved_fd = -1;
    cap->echo = echo;
    if (!want)
        return;
    fflush(stdout);
    cap->tmp = tmpfile();
    if (!cap->tmp)
        return;
    cap->saved_fd = dup(STDOUT_FILENO);
    if (cap->saved_fd < 0 || dup2(fileno(cap->tmp), STDOUT_FILENO) < 0) {
        if (cap->saved_fd >= 0)
            close(cap->saved_fd);
        cap->saved_fd = -1;
        fclose(cap->tmp);
        cap->tmp = NULL;
    }
}

int cli_capture_printing(const cli_capture *cap)
{
    return cap->echo || cap->tmp != NULL;
}

char *cli_capture_end(cli_capture *cap)
{
    if (!cap->tmp)
        return NULL;
    fflush(stdout);
    dup2(cap->saved_fd, STDOUT_FILENO);
    close(cap->saved_fd);
    cap->saved_fd = -1;
    long len = ftell(cap->tmp);
    char *text = NULL;
    if (len >= 0 && (unsigned long)len <= CAPTURE_MAX && (text = malloc((size_t)len + 1))) {
        rewind(cap->tmp);
        size_t got = fread(text, 1, (size_t)len, cap->tmp);
        text[got] = '\0';
        if (cap->echo)
            fwrite(text, 1, got, stdout);
    }
    fclose(cap->tmp);
    cap->tmp = NULL;
    return text;
}
