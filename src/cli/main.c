/* main.c: the ringup command-line tool, a thin layer over the library.
 *
 * It parses arguments, calls the library through include/ringup/, prints (a table
 * for people or JSON with --json), and picks the exit status: 0 done, 1 bad input,
 * 2 numerical failure, 3 file I/O, 4 a design expectation was not met. */
#include "cli/cli.h"

#include <errno.h>
#include <stdio.h>
#include <string.h>

static const cli_command commands[] = {
    {"check", "validate a circuit file and list its parts, nodes and states", cmd_check},
    {"run", "simulate the start-up and measure it against the prediction", cmd_run},
    {"poles", "operating point, poles and loop gain (small-signal prediction)", cmd_poles},
    {"response", "frequency response of the network between two nodes", cmd_response},
    {"compare", "the same circuit with several amplifier models, in parallel", cmd_compare},
    {"sweep", "one part value over a range, in parallel: one row per value", cmd_sweep},
    {"montecarlo", "part values drawn within their tolerances: does every unit start?",
     cmd_montecarlo},
    {"corners", "every combination of temperature, supply and tolerance ends: the worst "
                "case of each figure", cmd_corners},
    {"merge", "the report of a study run in shards (--shard K/N): exactly one run's",
     cmd_merge},
    {"models", "list the amplifier and part presets", cmd_models},
    {"steady", "the periodic steady state: exact settled tone, Floquet multipliers",
     cmd_steady},
    {"margin", "negative resistance seen by a part (crystal margin, drive level)",
     cmd_margin},
    {"jitter", "phase noise and jitter of the settled tone (PPV), Leeson beside it",
     cmd_jitter},
};

static void usage(FILE *fp)
{
    fprintf(fp, "usage: ringup COMMAND FILE [options]\n\n"
                "Start-up, amplitude and distortion of electronic oscillators.\n\n"
                "commands:\n");
    for (size_t i = 0; i < sizeof commands / sizeof commands[0]; i++)
        fprintf(fp, "  %-10s %s\n", commands[i].name, commands[i].summary);
    fprintf(fp, "\n`ringup COMMAND --help` shows a command's options.\n"
                "Exit status: 0 done, 1 bad input, 2 numerical failure, 3 file I/O,\n"
                "4 a design expectation (--expect-...) was not met.\n");
}

/* What went to stdout must have arrived: a full disk or /dev/full behind stdout is
 * a file I/O failure (3), never a silent 0. */
static int finish(int rc)
{
    int bad = fflush(stdout) != 0 || ferror(stdout);
    int e = errno;
    bad = fclose(stdout) != 0 || bad;
    if (bad) {
        fprintf(stderr, "ringup: cannot write the output: %s\n", strerror(e ? e : errno));
        return rc ? rc : 3;
    }
    return rc;
}

static int dispatch(int argc, char **argv);

int main(int argc, char **argv) { return finish(dispatch(argc, argv)); }

static int dispatch(int argc, char **argv)
{
    if (argc < 2) {
        usage(stderr);
        return 1;
    }
    if (!strcmp(argv[1], "--help") || !strcmp(argv[1], "-h") || !strcmp(argv[1], "help")) {
        usage(stdout);
        return 0;
    }
    if (!strcmp(argv[1], "--version")) {
        printf("ringup %s\n", RU_VERSION);
        return 0;
    }
    for (size_t i = 0; i < sizeof commands / sizeof commands[0]; i++)
        if (!strcmp(argv[1], commands[i].name))
            return commands[i].fn(argc - 1, argv + 1);
    fprintf(stderr, "ringup: unknown command '%s'\n\n", argv[1]);
    usage(stderr);
    return 1;
}
