/* ringup/circuit.h: the in-memory circuit: parts, nodes, run and measure settings.
 *
 * A circuit is built by the loader (ringup/loader.h) from a YAML file, or part by
 * part through the builder calls below (tests and programs do this). It is the one
 * place that validates values and topology: a part accepted by ru_circuit_add_part
 * has finite, physically valid values. Node 0 is ground ("gnd" or "0"); free and
 * supply-driven nodes get indices 1..ru_circuit_node_count()-1 in order of first
 * mention. Parts are plain data (ru_part), readable through a const pointer.
 *
 * Ownership: ru_circuit_create / ru_circuit_clone make a handle the caller frees
 * with ru_circuit_destroy (NULL is harmless). Strings returned are owned by the
 * circuit and live until it is destroyed. */
#ifndef RINGUP_CIRCUIT_H
#define RINGUP_CIRCUIT_H

#include "ringup/status.h"

#include <stddef.h>

#ifdef __cplusplus
extern "C" {
#endif

#define RU_NAME_MAX 64   /* longest part, node or model name, with the NUL */
#define RU_POLY_MAX 8    /* most coefficients of a poly-conductance (c_0..c_7) */
#define RU_PRESET_MAX 32 /* most nodes a preset kick may set */

typedef struct ru_circuit ru_circuit;

typedef enum {
    RU_PART_RESISTOR,  /* nodes a,b; value in ohm */
    RU_PART_CAPACITOR, /* nodes a,b; value in farad */
    RU_PART_INDUCTOR,  /* nodes a,b; value in henry; series_ohm; state i(a->b) */
    RU_PART_SUPPLY,    /* ideal voltage source: v(a) - v(b) = wave(t) */
    RU_PART_CURRENT,   /* ideal current source: wave(t) amps flow a -> b inside it */
    RU_PART_POLY,      /* poly-conductance: i(a->b) = sum coeffs[k] v^k, v = v(a)-v(b) */
    RU_PART_AMPLIFIER, /* behavioral amplifier: nodes in, out, ref (see ru_amp) */
    RU_PART_TYPE_COUNT
} ru_part_type;

/* The file spelling of a part type ("resistor", ..., "poly-conductance"). */
const char *ru_part_type_name(ru_part_type t);

typedef enum {
    RU_WAVE_DC,    /* value, ramped linearly from 0 over rise_s at power-on */
    RU_WAVE_STEP,  /* from v0 to v1 at at_s, linear edge over edge_s (0: a jump) */
    RU_WAVE_SINE,  /* offset + amplitude sin(2 pi freq (t - at_s) + phase), t >= at_s */
    RU_WAVE_PULSE  /* v0, then v1 from at_s for width_s, repeating every period_s */
} ru_wave_kind;

/* Waveform of a supply (volts) or current source (amperes). */
typedef struct ru_wave {
    ru_wave_kind kind;
    double value;     /* dc: final value */
    double rise_s;    /* dc: ramp time from 0 at t = 0 (0: at value from t = 0) */
    double v0;        /* step/pulse: value before the edge */
    double v1;        /* step/pulse: value after the edge */
    double at_s;      /* step/pulse/sine: start time */
    double edge_s;    /* step/pulse: linear transition time (0: a jump) */
    double width_s;   /* pulse: time at v1 (edges included) */
    double period_s;  /* pulse: repeat period (0: one pulse) */
    double offset;    /* sine: DC offset (also the value before at_s) */
    double amplitude; /* sine: peak amplitude */
    double freq_hz;   /* sine: frequency */
    double phase_deg; /* sine: phase at at_s */
} ru_wave;

typedef enum {
    RU_LAW_FOLLOWER_TANH, /* see ru_amp */
    RU_LAW_EXP_STAGE,
    RU_LAW_COUNT
} ru_law;

/* The file spelling of a law ("follower-tanh", "exp-stage"). */
const char *ru_law_name(ru_law law);

/* Parameters of a behavioral amplifier. Voltages of the law are taken relative to
 * the ref node: vc = v(in) - v(ref), vo = v(out) - v(ref).
 *
 * follower-tanh: a Thevenin source E = center + gain*swing*tanh((vc - center)/swing)
 *   behind rout from out to ref; the input draws no current.
 * exp-stage: a current ic = is*(exp(vc/(n*vt)) - 1)*tanh(vo/vsat) flows into out
 *   and leaves by ref (a sink at out, as a junction transistor's collector); the
 *   input draws the junction current over beta, is*(exp(vc/(n*vt)) - 1)/beta, from
 *   in to ref; vt = k*T/q at temp_c. The tanh factor is the smooth saturation of
 *   the output only: 1 when vo is well above vsat, 0 at vo = 0. The input is not
 *   reduced by it, so in saturation the junction still clamps the input as a real
 *   base-emitter junction does. */
typedef struct ru_amp {
    ru_law law;
    char model[RU_NAME_MAX]; /* preset name the values came from, "" when inline */
    double gain;             /* follower: small-signal gain (V/V) */
    double swing_v;          /* follower: soft-clipping scale (V) */
    double center_v;         /* follower: input and output center (V) */
    double rout_ohm;         /* follower: output resistance (ohm, > 0) */
    double is_a;             /* exp-stage: saturation current (A) */
    double n;                /* exp-stage: emission coefficient */
    double beta;             /* exp-stage: current gain ic/ib */
    double vsat_v;           /* exp-stage: saturation knee (V) */
    double temp_c;           /* exp-stage: junction temperature (degrees C) */
} ru_amp;

/* Fills a with the law's defaults (documented in README). */
void ru_amp_defaults(ru_amp *a, ru_law law);

/* One part. Node indices refer to ru_circuit_node_name(); 0 is ground. */
typedef struct ru_part {
    char name[RU_NAME_MAX];
    ru_part_type type;
    int node[3];             /* a,b for two-terminal parts; in,out,ref for amplifiers */
    double value;            /* R (ohm), C (farad), L (henry); unused otherwise */
    double series_ohm;       /* inductor: series resistance (ohm, >= 0) */
    double tol;              /* relative tolerance for Monte Carlo (0.01 = 1 %) */
    double coeffs[RU_POLY_MAX]; /* poly-conductance c_0.. (A/V^k) */
    int ncoeffs;             /* number of coefficients used */
    ru_wave wave;            /* supply, current */
    ru_amp amp;              /* amplifier */
    int line, col;           /* where the part is defined in its file (1-based; 0 none) */
} ru_part;

/* Fills p with zeros, the type's defaults and ground nodes. */
void ru_part_init(ru_part *p, ru_part_type type, const char *name);

typedef enum {
    RU_KICK_POWER_ON, /* everything at 0 V; supplies ramp from 0 */
    RU_KICK_PRESET,   /* as power-on, plus the preset node voltages at t = 0 */
    RU_KICK_NOISE     /* thermal noise of the resistors (a later addition) */
} ru_kick;

typedef enum {
    RU_ACCURACY_DRAFT,   /* quick look; growth rates a few tenths of a percent off */
    RU_ACCURACY_NORMAL,  /* default: growth rate within 0.1 % (see README) */
    RU_ACCURACY_PRECISE  /* for checks and --verify */
} ru_accuracy;

/* How to run the transient (the file's `run:` section). */
typedef struct ru_run_opts {
    double stop_s;                /* end time (s, > 0) */
    double sample_s;              /* output spacing (s); 0 means auto */
    ru_kick kick;
    ru_accuracy accuracy;
    int npreset;                  /* preset kick: how many nodes are set */
    int preset_node[RU_PRESET_MAX];
    double preset_v[RU_PRESET_MAX];
    unsigned long seed;           /* noise kick seed */
} ru_run_opts;

/* What to measure (the file's `measure:` section). */
typedef struct ru_measure_opts {
    int probe_pos;                /* probe node index; the probe is v(pos) - v(neg) */
    int probe_neg;                /* 0 (ground) for a single-node probe */
    char loop[RU_NAME_MAX];       /* amplifier whose loop gain is reported, "" none */
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
 * memory or the name is empty or too long. line/col record the first mention. */
int ru_circuit_node(ru_circuit *c, const char *name, int line, int col);

/* Index of an existing node, or -1. */
int ru_circuit_find_node(const ru_circuit *c, const char *name);

size_t ru_circuit_node_count(const ru_circuit *c); /* including ground */
const char *ru_circuit_node_name(const ru_circuit *c, int node);
/* Where a node was first mentioned (0,0 when unknown). */
void ru_circuit_node_place(const ru_circuit *c, int node, int *line, int *col);

/* Adds a copy of p after checking its values (finite, R/C/L > 0, nodes in range,
 * no two parts of one name). On error err names the part and what is wrong. */
ru_status ru_circuit_add_part(ru_circuit *c, const ru_part *p, ru_error *err);

size_t ru_circuit_part_count(const ru_circuit *c);
const ru_part *ru_circuit_part(const ru_circuit *c, size_t i);
/* Mutable access for batch runs that change a value; the caller keeps it valid. */
ru_part *ru_circuit_part_mut(ru_circuit *c, size_t i);
/* Index of the part with this name, or -1. */
int ru_circuit_find_part(const ru_circuit *c, const char *name);

const char *ru_circuit_title(const ru_circuit *c);
const char *ru_circuit_file(const ru_circuit *c);   /* "" when built in code */
void ru_circuit_set_file(ru_circuit *c, const char *path);

double ru_circuit_stray_f(const ru_circuit *c);
ru_status ru_circuit_set_stray_f(ru_circuit *c, double stray_f); /* > 0, finite */

ru_run_opts *ru_circuit_run_opts(ru_circuit *c);
const ru_run_opts *ru_circuit_run_opts_const(const ru_circuit *c);
ru_measure_opts *ru_circuit_measure_opts(ru_circuit *c);
const ru_measure_opts *ru_circuit_measure_opts_const(const ru_circuit *c);

/* Topology: sets *node to the first node (index >= 1) that has no DC path to ground
 * (through resistors, inductors, supplies, poly-conductances, amplifier outputs
 * and junctions) and returns 1; returns 0 when every node has one. */
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
