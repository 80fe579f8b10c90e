/* ringup/circuit.h: the in-memory circuit: parts, nodes, run and measure settings.
 *
 * A circuit is built by the loader (ringup/loader.h) from a YAML file, or part by
 * part through the builder calls below (tests and programs do this). It is the one
 * place that validates values and topology: a part accepted by ru_circuit_add_part
 * has finite, physically valid values. Node 0 is ground ("gnd" or "0"); free and
 * supply-driven nodes get indices 1..ru_circuit_node_count()-1 in order of first
 * mention. Parts are plain data (ru_part, ringup/part.h), readable through a const
 * pointer.
 *
 * Ownership: ru_circuit_create / ru_circuit_clone make a handle the caller frees
 * with ru_circuit_destroy (NULL is harmless). Strings returned are owned by the
 * circuit and live until it is destroyed. */
#ifndef RINGUP_CIRCUIT_H
#define RINGUP_CIRCUIT_H

#include "ringup/part.h"
#include "ringup/status.h"

#include <stddef.h>

#ifdef __cplusplus
extern "C" {
#endif

#define RU_PRESET_MAX 32 /* most nodes a preset kick may set */
#define RU_PARTS_MAX 10000 /* most parts of a circuit (README "Limits") */
#define RU_NODES_MAX 2000  /* most nodes besides ground (README "Limits") */
#define RU_TITLE_MAX 255   /* longest title, in bytes */

typedef struct ru_circuit ru_circuit;

typedef enum {
    RU_KICK_POWER_ON, /* everything at 0 V; supplies ramp from 0 */
    RU_KICK_PRESET,   /* as power-on, plus the preset node voltages at t = 0 */
    RU_KICK_NOISE     /* Johnson-Nyquist noise of the resistors (ru_system_set_noise) */
} ru_kick;

typedef enum {
    RU_ACCURACY_DRAFT,   /* quick look; growth rates a few tenths of a percent off */
    RU_ACCURACY_NORMAL,  /* default: growth rate within 0.1 % (see README) */
    RU_ACCURACY_PRECISE  /* for checks and --verify */
} ru_accuracy;

/* How to run the transient (the file's `run:` section). */
typedef struct ru_run_opts {
    double stop_s;                /* end time (s, > 0) when stop_auto is 0 */
    int stop_auto;                /* 1: `stop: auto` (the default): run until settled */
    double sample_s;              /* output spacing (s); 0 means auto */
    ru_kick kick;
    ru_accuracy accuracy;
    int npreset;                  /* preset kick: how many nodes are set */
    int preset_node[RU_PRESET_MAX];
    double preset_v[RU_PRESET_MAX];
    unsigned long seed;           /* noise kick seed */
    int noise;                    /* power-on: 1 (default) adds the resistors' thermal
                                     noise (`kick: {power-on: {noise: off}}` for 0) */
} ru_run_opts;

#define RU_LOOP_LOAD_MAX 8 /* parts named on the load side of a node break */

/* What to measure (the file's `measure:` section). */
typedef struct ru_measure_opts {
    int probe_pos;                /* probe node index; the probe is v(pos) - v(neg) */
    int probe_neg;                /* 0 (ground) for a single-node probe */
    char loop[RU_NAME_MAX];       /* amplifier whose loop gain is reported, "" none */
    char loop_node[RU_NAME_MAX];  /* node broken for the loop gain instead, "" none */
    char loop_load[RU_LOOP_LOAD_MAX][RU_NAME_MAX]; /* parts on the load side of the
                                     break ("" the control inputs at loop_node) */
    int nloop_load;               /* entries of loop_load */
    double startup_level;         /* start-up threshold, fraction of settled (0.9) */
    double growth_lo;             /* growth-fit window, fraction of settled (0.01) */
    double growth_hi;             /* (0.10) */
} ru_measure_opts;

/* Constructor: an empty circuit with default settings (stray 1 pF, stop 10 ms,
 * auto sample, power-on kick, normal accuracy, startup 90 %, growth 1 %..10 %). */
ru_status ru_circuit_create(const char *title, ru_circuit **out);

/* Constructor: a deep copy (for batch runs that vary values). */
ru_status ru_circuit_clone(const ru_circuit *c, ru_circuit **out);

/* Destructor; NULL is harmless. */
void ru_circuit_destroy(ru_circuit *c);

/* Index of a node, added if new ("gnd" and "0" are 0). Returns -1 when out of
 * memory, the name is empty or too long, or the circuit already has RU_NODES_MAX
 * nodes besides ground. line/col record the first mention. */
int ru_circuit_node(ru_circuit *c, const char *name, int line, int col);

/* " (did you mean NAME?)" into buf when a node (or part) name of the circuit is
 * a likely misspelling of name, else ""; returns buf. For messages. */
const char *ru_circuit_suggest_node(const ru_circuit *c, const char *name, char *buf,
                                    size_t size);
const char *ru_circuit_suggest_part(const ru_circuit *c, const char *name, char *buf,
                                    size_t size);

/* Index of an existing node, or -1. */
int ru_circuit_find_node(const ru_circuit *c, const char *name);

size_t ru_circuit_node_count(const ru_circuit *c); /* including ground */
const char *ru_circuit_node_name(const ru_circuit *c, int node);
/* Where a node was first mentioned (0,0 when unknown). */
void ru_circuit_node_place(const ru_circuit *c, int node, int *line, int *col);

/* Adds a copy of p after checking its values (finite, R/C/L > 0, nodes in range,
 * no two parts of one name). On error err names the part and what is wrong. */
ru_status ru_circuit_add_part(ru_circuit *c, const ru_part *p, ru_error *err);

/* Replaces part i by p after the same checks (p keeps or changes its name; it
 * must not take another part's name). For batch runs that swap a model. */
ru_status ru_circuit_replace_part(ru_circuit *c, size_t i, const ru_part *p,
                                  ru_error *err);

size_t ru_circuit_part_count(const ru_circuit *c);
const ru_part *ru_circuit_part(const ru_circuit *c, size_t i);
/* Mutable access for batch runs that change a value; the caller keeps it valid
 * and never changes its name (use ru_circuit_replace_part for that). */
ru_part *ru_circuit_part_mut(ru_circuit *c, size_t i);
/* Index of the part with this name, or -1. */
int ru_circuit_find_part(const ru_circuit *c, const char *name);
/* Index of the part named name whose loop the system can break for the return
 * ratio (an amplifier), or RU_EINPUT with "loop part NAME is not an amplifier of
 * this circuit" in err. */
ru_status ru_circuit_loop_part(const ru_circuit *c, const char *name, int *part,
                               ru_error *err);

const char *ru_circuit_title(const ru_circuit *c);
const char *ru_circuit_file(const ru_circuit *c);   /* "" when built in code */
void ru_circuit_set_file(ru_circuit *c, const char *path);

/* Stray capacitance from a free node to ground (F): the circuit's default (1 pF
 * unless the file's `stray:` says otherwise), and one node's own value, which is
 * that default unless the node has one of its own. 0 is allowed: a node with no
 * capacitance at all is algebraic (its voltage follows from KCL at every instant;
 * see ringup/system.h). Setters take finite values >= 0 (RU_ERANGE otherwise; a
 * node must exist and not be ground). */
/* The circuit's temperature (deg C; the file's `temp`, else RU_TEMP_REF_C), which
 * every part with a temperature key (a law's or diode's `temp`, a thermal
 * resistor's `tamb`) follows unless the part gives its own, and from which the
 * resistors', capacitors' and inductors' `tempco` move their values (values are
 * given at RU_TEMP_REF_C); the resistors' thermal noise is at it too. set_temp
 * moves every such part from the present temperature to temp_c: RU_EINPUT (nothing
 * changed) at or below absolute zero or when a tempco would take a value to 0. */
#define RU_TEMP_REF_C 27.0
double ru_circuit_temp_c(const ru_circuit *c);
ru_status ru_circuit_set_temp(ru_circuit *c, double temp_c, ru_error *err);

double ru_circuit_stray_f(const ru_circuit *c);
ru_status ru_circuit_set_stray_f(ru_circuit *c, double stray_f);
double ru_circuit_node_stray_f(const ru_circuit *c, int node);
ru_status ru_circuit_set_node_stray_f(ru_circuit *c, int node, double stray_f);
/* 1 when the node has a stray value of its own. */
int ru_circuit_node_stray_set(const ru_circuit *c, int node);

/* 1 when the run starts from thermal noise: `kick: noise`, or power-on with noise on. */
int ru_run_opts_noise(const ru_run_opts *ro);

/* The file's `corners:` section (ringup corners): factors whose levels are
 * combined, each the circuit's temperature, every supply's level, or one
 * toleranced quantity (a part's value or PART.KEY). */
#define RU_CORNER_FACTORS 16  /* most factors */
#define RU_CORNER_LEVELS 8    /* most levels of one factor */
typedef enum {
    RU_CORNER_TEMP,     /* levels are temperatures (deg C) */
    RU_CORNER_SUPPLY,   /* levels are relative deviations of every supply's level */
    RU_CORNER_QUANTITY  /* levels are relative deviations of part.key */
} ru_corner_kind;
typedef struct ru_corner_factor {
    ru_corner_kind kind;
    char name[RU_NAME_MAX + RU_KEY_MAX]; /* "temp", "supply", "R1", "Q1.beta" */
    int part;                  /* QUANTITY: the part's index */
    char key[RU_KEY_MAX];      /* QUANTITY: its numeric key ("value", "beta") */
    int nlevels;
    double level[RU_CORNER_LEVELS]; /* deg C, or a fraction (-0.05: 5 % low) */
    int line, col;             /* where the file names it (0 for a default) */
} ru_corner_factor;

/* The factors of the file's `corners:` (0 when it has none) and adding one (the
 * loader; RU_ERANGE when there are RU_CORNER_FACTORS already). */
int ru_circuit_corner_count(const ru_circuit *c);
const ru_corner_factor *ru_circuit_corner(const ru_circuit *c, int i);
ru_status ru_circuit_add_corner(ru_circuit *c, const ru_corner_factor *f);

ru_run_opts *ru_circuit_run_opts(ru_circuit *c);
const ru_run_opts *ru_circuit_run_opts_const(const ru_circuit *c);
ru_measure_opts *ru_circuit_measure_opts(ru_circuit *c);
const ru_measure_opts *ru_circuit_measure_opts_const(const ru_circuit *c);

/* Topology: sets *node to the first node (index >= 1) that has no DC path to ground
 * (through resistors, inductors, supplies, poly-conductances, diodes, thermal
 * resistors and amplifier outputs to ref; amplifier inputs do not conduct) and
 * returns 1; returns 0 when every node has one. */
int ru_circuit_find_floating_node(const ru_circuit *c, int *node);

/* Warnings gathered while loading (e.g. a node without a DC path); each is a
 * complete "FILE:LINE:COL: warning: ..." line without newline. */
ru_status ru_circuit_add_warning(ru_circuit *c, const char *text);
size_t ru_circuit_warning_count(const ru_circuit *c);
const char *ru_circuit_warning(const ru_circuit *c, size_t i);

#ifdef __cplusplus
}
#endif
#endif
