/* cli.h: pieces shared by the CLI's commands: option tables, loading, printing
 * errors. Only src/cli/ uses it; the library never does. */
#ifndef RU_CLI_H
#define RU_CLI_H

#include "ringup/analysis.h"
#include "ringup/circuit.h"
#include "ringup/json.h"
#include "ringup/status.h"
#include "ringup/units.h"

#include <signal.h>
#include <stdio.h>

typedef struct cli_command {
    const char *name;
    const char *summary;
    int (*fn)(int argc, char **argv); /* argv[0] is the command name */
} cli_command;

int cmd_check(int argc, char **argv);
int cmd_run(int argc, char **argv);
int cmd_poles(int argc, char **argv);
int cmd_response(int argc, char **argv);
int cmd_models(int argc, char **argv);
int cmd_compare(int argc, char **argv);
int cmd_sweep(int argc, char **argv);
int cmd_montecarlo(int argc, char **argv);
int cmd_steady(int argc, char **argv);
int cmd_margin(int argc, char **argv);
int cmd_jitter(int argc, char **argv);
int cmd_merge(int argc, char **argv);
int cmd_corners(int argc, char **argv);

/* One option of a command: "--name VALUE" (or --name=VALUE) or a flag. */
typedef struct cli_opt {
    const char *name;  /* without the dashes */
    const char *arg;   /* metavariable for help, NULL for a flag */
    const char *help;
    const char *value; /* filled by cli_parse: the value, or "1" for a given flag */
} cli_opt;

/* Parses argv[1..] into opts (terminated by a NULL name) and the one positional
 * FILE. Prints help and returns 0 for --help; returns 1 on a bad option (after a
 * message); returns -1 to go on. */
int cli_parse(int argc, char **argv, const char *usage_line, const char *about,
              cli_opt *opts, const char **file);

/* As cli_parse, for a command that takes no file (*file stays NULL). */
int cli_parse_nofile(int argc, char **argv, const char *usage_line, const char *about,
                     cli_opt *opts, const char **file);

/* The value of an option, or NULL when it was not given. */
const char *cli_get(const cli_opt *opts, const char *name);

/* Parses a value option with ru_value_parse; prints an error naming the option and
 * returns 0 when it does not parse. */
int cli_value(const cli_opt *opts, const char *name, const char *unit, double *out);

#define RU_CLI_THREADS_MAX 1024 /* most --threads */

/* A whole-number option: decimal digits only (no sign, exponent or SI prefix),
 * from lo to hi; *out is left alone when the option is absent. Prints an error
 * naming the option, the text and the range, and returns 0, when it is not. */
int cli_int(const cli_opt *opts, const char *name, unsigned long long lo,
            unsigned long long hi, unsigned long long *out);

/* As cli_value, and the value (when given) must lie from lo to hi (inclusive);
 * otherwise prints "option --NAME: 'TEXT' is outside LO to HI" and returns 0. */
int cli_range(const cli_opt *opts, const char *name, const char *unit, double lo,
              double hi, double *out);

/* Frequencies an option may name (--fmin, --fmax, --band): 1 mHz to 1 THz, far
 * outside any oscillator ringup models and far inside a double's range. */
#define RU_CLI_FREQ_MIN_HZ 1e-3
#define RU_CLI_FREQ_MAX_HZ 1e12

/* As cli_value, and the value (when given) must be positive. */
int cli_positive(const cli_opt *opts, const char *name, const char *unit, double *out);

/* Option `name` as one of three words: *out = the word's index (left alone when the
 * option is absent); 0, with a message, for any other word. */
int cli_word3(const cli_opt *opts, const char *name, const char *const words[3], int *out);

/* --stop T or --stop auto into the request (stop_s or stop_auto); returns 1, or 0
 * after a message. */
int cli_stop(const cli_opt *opts, ru_run_request *rq);

/* --temp T (deg C) applied to c (ringup/circuit.h, ru_circuit_set_temp); returns
 * 0, or 1 after a message. CLI_TEMP_OPT is its line in an option table. */
int cli_temp(const cli_opt *opts, ru_circuit *c);
#define CLI_TEMP_OPT                                                                      \
    {"temp", "T", "temperature of the circuit, e.g. 85C (default: the file's temp, else " \
                  "27 C)", NULL}

/* --accuracy draft|normal|precise into *accuracy (an ru_accuracy; unchanged when
 * the option is absent); returns 0, or 1 after a message. */
int cli_accuracy(const cli_opt *opts, int *accuracy);

/* run's design expectations (expect.c); NAN where not given. */
typedef struct cli_expect {
    double start_within_s;
    double amp_lo_v, amp_hi_v;
    double thd_below_percent;
} cli_expect;

/* Reads --expect-*; returns 0 after a message when one is malformed or out of range. */
int cli_expect_parse(const cli_opt *opts, cli_expect *e);

/* Prints each missed expectation to stderr; returns 1 when all are met. */
int cli_expect_check(const cli_expect *e, const ru_run_report *r);

/* Prints the error as FILE:LINE:COL: message and returns its exit status. */
int cli_fail(const ru_error *err);

/* Loads a circuit file (models from $RINGUP_MODELS or the build's folder), prints
 * its warnings to stderr unless quiet; returns 0 or an exit status. */
int cli_load(const char *file, int quiet, ru_circuit **out);

/* The run keys of DESIGN.md (measured, predicted, solver) into an open object. */
void cli_json_run_body(ru_json *j, const ru_run_report *r);

/* The harmonic balance's settled tone as the object "harmonic_balance". */
void cli_json_hb(ru_json *j, const ru_hb_tone *h);

/* `poles --amplitude` (poles_amp.c): the describing function's curve, a short
 * table at shares of the settled amplitude (the crossing of the jw axis marked) and
 * the harmonic balance's tone. */
#define CLI_AMP_CURVE 200
#define CLI_AMP_ROWS 12
typedef struct cli_amp {
    ru_df_point curve[CLI_AMP_CURVE]; /* the sweep, every point */
    size_t ncurve;
    ru_df_point rows[CLI_AMP_ROWS];   /* the table */
    size_t nrows;
    int crossing;                     /* row where sigma = 0, or -1 */
    ru_df_result df;
    int have_hb;
    ru_hb_tone hb;
    char hb_note[RU_ERROR_TEXT + 32];
} cli_amp;
ru_status cli_amp_compute(const ru_system *s, const double *x_op, int pos, int neg,
                          cli_amp *t, ru_error *err);
void cli_amp_print(const cli_amp *t, const char *probe);
void cli_amp_json(ru_json *j, const cli_amp *t);

/* The run's `notes` array (why a figure is null, self-checks) into an open object. */
void cli_json_notes(ru_json *j, const ru_run_report *r);

/* The terminal text of a command, kept for its report (capture.c). Between begin
 * and end, stdout goes to a temporary file when want is set (else straight to the
 * terminal); end copies it to the terminal when echo is set and returns it
 * (malloc'd; NULL when nothing was captured). Use:
 *     cli_capture_begin(&cap, report != NULL, !json);
 *     if (cli_capture_printing(&cap)) print_text(...);
 *     char *text = cli_capture_end(&cap); */
typedef struct cli_capture {
    FILE *tmp;     /* the captured text, NULL when not capturing */
    int saved_fd;  /* the terminal's descriptor while capturing */
    int echo;      /* copy the text to the terminal at the end */
} cli_capture;
void cli_capture_begin(cli_capture *cap, int want, int echo);
int cli_capture_printing(const cli_capture *cap); /* 1: print the text now */
char *cli_capture_end(cli_capture *cap);

/* A text table whose columns fit their contents (table.c): add rows (the header
 * first), print, free. cli_table_add_text adds a row of a first cell and one free
 * text (an error) that spans the rest. Out of memory drops rows, never crashes. */
#define CLI_TABLE_COLS 16
typedef struct cli_table_row {
    char *cell[CLI_TABLE_COLS];
    char *text; /* free text after the first cell, or NULL */
} cli_table_row;
typedef struct cli_table {
    size_t ncols, nrows, cap;
    cli_table_row *rows;
} cli_table;
void cli_table_init(cli_table *t, size_t ncols);
void cli_table_add(cli_table *t, const char *const *cells);
void cli_table_add_text(cli_table *t, const char *first, const char *text);
void cli_table_print(const cli_table *t, FILE *fp, const char *indent);
void cli_table_free(cli_table *t);

/* --plots DIR, --plot-format FMT, --report FILE of a command. */
typedef struct cli_plot_req {
    const char *dir;     /* NULL: no figure files */
    const char *format;  /* png (default), svg, pdf */
    const char *report;  /* NULL: no report */
} cli_plot_req;

/* The options every plotting command offers (append to its table). */
#define CLI_PLOT_OPTS                                                               \
    {"plots", "DIR", "write the figures into DIR", NULL},                         \
        {"plot-format", "FMT", "png (default), svg or pdf", NULL},                \
        {"report", "FILE", "one-file report: FILE.pdf (pages) or FILE.html", NULL}

/* The loop a command reports (loopopt.c): --loop PART, or --loop-node NODE with
 * --loop-load PARTS (comma-separated); all NULL: the file's measure section. */
#define CLI_LOOP_NODE_OPTS                                                          \
    {"loop-node", "NODE",                                                         \
     "break the loop at NODE instead (Middlebrook's double injection, loads kept)", \
     NULL},                                                                        \
        {"loop-load", "PARTS",                                                    \
         "parts on the far side of the --loop-node break (default: the inputs "   \
         "at NODE)",                                                              \
         NULL}

typedef struct cli_loop_opts {
    const char *part, *node, *load;
} cli_loop_opts;

/* Reads the loop options (--loop, --loop-node, --loop-load where the command has
 * them); returns 0, or 1 after a message when they contradict each other. */
int cli_loop_get(const cli_opt *opts, cli_loop_opts *lo);

struct ru_loop;
/* "loop gain of A1" or "loop gain at node p (load side: A1 in), double injection". */
void cli_loop_title(const struct ru_loop *l, char *buf, size_t size);

/* The loop's identity in JSON: "part": NAME, or "node", "load" and "method". */
void cli_loop_json_id(ru_json *j, const struct ru_loop *l);

/* Reads and checks the plot options before any simulation work (an unknown
 * format or an unwritable folder is refused at once); returns 0 or an exit status. */
int cli_plot_check(const cli_opt *opts, cli_plot_req *pr);

/* Figures and report of a run (data from ru_run_request.keep); text is the
 * terminal text the report holds (cli_capture_end; NULL: none). */
int cli_plot_run(const cli_plot_req *pr, const ru_circuit *c, const ru_run_report *r,
                 const ru_run_data *data, const char *text);

/* The comparison figures of batch items (one envelope per item, THD and start-up
 * bars), each labelled labels[i]; items without kept data are left out. */
struct ru_batch_item;
int cli_plot_items(const cli_plot_req *pr, const ru_circuit *c,
                   const struct ru_batch_item *items, size_t n, const char *const *labels,
                   const char *text);

/* Figures and a report of any prepared set; the report holds text (the command's
 * terminal text, NULL: none) before the figures. */
int cli_plot_set(const cli_plot_req *pr, const char *title, const ru_plot_set *set,
                 const char *text);

/* "NAME TYPE NODES VALUE" for a listing (no newline). */
void cli_part_line(const ru_circuit *c, const ru_part *p, char *buf, size_t size);

/* "NAME, TYPE (NODES): VALUE" for running text (a report), no padding. */
void cli_part_text(const ru_circuit *c, const ru_part *p, char *buf, size_t size);

/* BASE/NAME (NAME with '/', '\\' and spaces made '_') into buf, created; returns 0 or
 * an exit status. For batch commands' --out: one folder per variant. */
int cli_variant_dir(const char *base, const char *name, char *buf, size_t size);

/* One batch row's keys: `error` when it failed, else the run keys and notes. */
struct ru_batch_item;
void cli_json_item(ru_json *j, const struct ru_batch_item *it);

/* Creates folder dir (and parents) if missing; returns 0 or exit status 3. */
int cli_make_dir(const char *dir);

/* ---- batch studies (study.c, progress.c, mpi.c): montecarlo, sweep, corners ----
 * A study is numbered units whose records are JSON lines (ringup/units.h). These
 * pieces give every study command the same --out DIR (records streamed to
 * DIR/units.jsonl), --resume DIR, --shard K/N, --threads, a clean stop on SIGINT
 * or SIGTERM, the progress bar, `ringup merge` and MPI ranks. */

#define CLI_STUDY_OPTS                                                                  \
    {"out", "DIR", "stream every finished unit to DIR/units.jsonl", NULL},              \
        {"resume", "DIR", "continue the study stopped in DIR (file and options from "    \
                          "DIR/units.jsonl)", NULL},                                      \
        {"shard", "K/N", "run only shard K of N (units i with i mod N = K-1) into "      \
                         "--out DIR; combine shards with ringup merge", NULL},           \
        {"threads", "N", "parallel runs (default: one per processor; 1 per MPI rank)",   \
         NULL}

/* What `--resume DIR` or `ringup merge` hands a study command: the command line
 * rebuilt from the log header, the records already there, the open log. */
typedef struct cli_pre {
    int mode;               /* CLI_FRESH, CLI_RESUME or CLI_MERGE */
    int argc;               /* the rebuilt command line (owned) */
    char **argv;
    ru_unitlog_header header; /* resume and merge: the study's header */
    ru_unitlog *log;        /* resume: the log, open and locked */
    char dir[4096];         /* resume: DIR */
    size_t nlines;          /* records read (owned) */
    char **lines;
    int mpi_rank, mpi_size; /* MPI: this rank and the ranks (1: no MPI) */
} cli_pre;

enum { CLI_FRESH, CLI_RESUME, CLI_MERGE };

/* A study command's own part, called by cli_study_main and by merge. */
typedef int (*cli_study_fn)(int argc, char **argv, cli_pre *pre);

/* The front of a study command: under mpirun, starts MPI; with --resume DIR, opens
 * the log (rank 0) and rebuilds the command line from its header (only --threads,
 * --json, --plots, --plot-format and --report may be given beside it); then calls
 * fn and closes MPI. Returns fn's exit status. */
int cli_study_main(int argc, char **argv, cli_study_fn fn);

void cli_pre_free(cli_pre *pre);

/* One study run, set up by the command. */
typedef struct cli_study {
    /* in: the study */
    const char *command;     /* "montecarlo" */
    const char *file;        /* the circuit file (its bytes are hashed) */
    size_t count;            /* units */
    int nargs;               /* the arguments that define it (FILE first; owned) */
    char *args[RU_UNITLOG_ARGS];
    int json;                /* --json: no progress bar */
    /* in: the command's callbacks (run: thread-safe; add: one at a time) */
    ru_status (*run)(void *ctx, size_t i, char **line, ru_error *err);
    ru_status (*add)(void *ctx, const char *line, int *failed, ru_error *err);
    void *ctx;
    /* in: the study options (cli_study_options fills them) */
    const char *out_dir;     /* --out DIR, or NULL */
    unsigned shard_k, shard_n; /* --shard K/N (1/1: all) */
    int threads;             /* --threads (0: default) */
    cli_pre *pre;
    /* out */
    int worker;              /* 1: an MPI rank other than 0 (prints nothing) */
    size_t done;             /* records in, before and now */
    size_t failed;           /* of them, failed runs */
    size_t todo;             /* units of this run's shard */
    int stop_signal;         /* the signal that stopped it, or 0 */
    const volatile sig_atomic_t *stop; /* the stop flag for run requests */
} cli_study;

/* Reads --out, --shard, --threads into s (and checks --resume against them);
 * returns 0 or 1 after a message. */
int cli_study_options(const cli_opt *opts, cli_study *s);

/* Adds one argument (a copy) to s->args; 0 when there is no room or memory. */
int cli_study_add_arg(cli_study *s, const char *arg);

/* Adds "--name=value" (or "--name") of every named option that was given. */
int cli_study_add_args(cli_study *s, const cli_opt *opts, const char *const *names);

/* Frees s->args. */
void cli_study_free(cli_study *s);

/* The stop flag a command puts into its run requests before cli_study_run. */
const volatile sig_atomic_t *cli_study_stop_flag(void);

/* SIGINT and SIGTERM as a clean stop (signals.c): cli_catch_signals(1, old)
 * clears the flag and installs the handler (old keeps the previous actions),
 * cli_catch_signals(0, old) puts them back; the flag for the library; the
 * signal that set it, or 0. */
void cli_catch_signals(int on, struct sigaction old[2]);
const volatile sig_atomic_t *cli_stop_flag(void);
int cli_stop_signal(void);

/* Runs what is left of the study (records from pre first): the log, signals,
 * progress bar, MPI. Returns 0 or an exit status after a message. */
int cli_study_run(cli_study *s);

/* After the report: prints how a stopped run can go on, and gives the exit
 * status (128 + signal when stopped, 2 when every unit in failed, else 0). */
int cli_study_finish(const cli_study *s);

/* A shard's short summary instead of a report (text or JSON). */
void cli_study_shard_summary(const cli_study *s);

/* The progress bar on the terminal (progress.c). */
typedef struct cli_progress cli_progress;
cli_progress *cli_progress_start(size_t total, size_t already);
void cli_progress_update(cli_progress *p, size_t done, size_t failed);
void cli_progress_end(cli_progress *p);

/* MPI (mpi.c; without MPI in the build, size 1 and nothing to do). */
int cli_mpi_start(int *rank, int *size);        /* 0, or an exit status */
void cli_mpi_end(void);
int cli_mpi_all_ok(int ok);                     /* 1 when every rank says ok */
int cli_mpi_bcast_argv(int *argc, char ***argv, int *rc); /* rank 0's to all */
void cli_mpi_serve(void *unused, ru_units *u);  /* rank 0: hands units to ranks */
int cli_mpi_work(cli_study *s);                 /* other ranks: run handed units */

/* Study commands' own parts, for merge. */
int cli_montecarlo_study(int argc, char **argv, cli_pre *pre);
int cli_sweep_study(int argc, char **argv, cli_pre *pre);
int cli_corners_study(int argc, char **argv, cli_pre *pre);

#endif
