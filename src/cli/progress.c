/* progress.c: the progress bar of a batch study on the terminal: units done of
 * the run's total, a bar, the percentage, the time left at the pace so far and the
 * failed runs. Drawn on stderr at most five times a second and erased at the end;
 * study_run.c starts it only when stdout and stderr are terminals and not --json. */
#include "cli/cli.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <time.h>

#define BAR_WIDTH 24

struct cli_progress {
    size_t total;      /* units this run is to do */
    double t0_s;       /* when it started (monotonic clock) */
    double drawn_s;    /* when it was last drawn */
    size_t done;       /* units done in this run */
    size_t failed;     /* failed runs of the study so far */
};

static double now_s(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

static void span(double s, char *buf, size_t size)
{
    if (s < 60)
        snprintf(buf, size, "%.0fs", s);
    else if (s < 3600)
        snprintf(buf, size, "%.0fm%02.0fs", floor(s / 60), fmod(s, 60));
    else
        snprintf(buf, size, "%.0fh%02.0fm", floor(s / 3600), fmod(s / 60, 60));
}

static void draw(cli_progress *p, double t)
{
    char bar[BAR_WIDTH + 1], eta[32] = "--";
    size_t fill = p->total ? p->done * BAR_WIDTH / p->total : 0;
    for (size_t i = 0; i < BAR_WIDTH; i++)
        bar[i] = i < fill ? '#' : '.';
    bar[BAR_WIDTH] = '\0';
    if (p->done > 0)
        span((t - p->t0_s) / (double)p->done * (double)(p->total - p->done), eta, sizeof eta);
    fprintf(stderr, "\r  %zu/%zu units [%s] %3.0f%%  ETA %s  %zu failed\033[K", p->done,
            p->total, bar, p->total ? 100.0 * (double)p->done / (double)p->total : 100.0, eta,
            p->failed);
    fflush(stderr);
    p->drawn_s = t;
}

cli_progress *cli_progress_start(size_t total, size_t failed)
{
    cli_progress *p = calloc(1, sizeof *p);
    if (!p)
        return NULL;
    p->total = total;
    p->failed = failed;
    p->t0_s = now_s();
    draw(p, p->t0_s);
    return p;
}

void cli_progress_update(cli_progress *p, size_t done, size_t failed)
{
    p->done = done;
    p->failed = failed;
    double t = now_s();
    if (t - p->drawn_s >= 0.2 || done == p->total)
        draw(p, t);
}

void cli_progress_end(cli_progress *p)
{
    if (!p)
        return;
    fputs("\r\033[K", stderr);
    fflush(stderr);
    free(p);
}
