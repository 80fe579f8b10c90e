/* signals.c: SIGINT and SIGTERM as a request to stop cleanly. The handler only
 * records the signal in a flag that the library polls (ru_run_request.stop,
 * ru_units_job.stop): a run ends at its next sample, its temporary files are
 * removed, and the command exits 128 + the signal. A second signal ends the
 * process at once (the handler resets itself), for a user who will not wait.
 * The flag and the signal number are the CLI's only process-wide state, as a
 * signal handler needs. */
#include "cli/cli.h"

#include <string.h>

static volatile sig_atomic_t stop_flag;   /* set by the handler */
static volatile sig_atomic_t stop_signal; /* which signal set it */

static void on_signal(int sig)
{
    stop_signal = sig;
    stop_flag = 1;
}

const volatile sig_atomic_t *cli_stop_flag(void) { return &stop_flag; }

int cli_stop_signal(void) { return stop_flag ? (stop_signal ? stop_signal : SIGTERM) : 0; }

void cli_catch_signals(int on, struct sigaction old[2])
{
    if (on) {
        stop_flag = 0;
        stop_signal = 0;
        struct sigaction sa;
        memset(&sa, 0, sizeof sa);
        sa.sa_handler = on_signal;
        sa.sa_flags = SA_RESETHAND; /* a second signal ends the process at once */
        sigemptyset(&sa.sa_mask);
        sigaction(SIGINT, &sa, &old[0]);
        sigaction(SIGTERM, &sa, &old[1]);
    } else {
        sigaction(SIGINT, &old[0], NULL);
        sigaction(SIGTERM, &old[1], NULL);
    }
}
