/* desc.h: the part descriptor (private): everything the rest of the library knows
 * about one part type, in one record per family (src/parts/<family>.c), reached
 * through one table (ru_part_desc_get, parts.c).
 *
 * A descriptor holds the type's file spelling; its terminals (ru_term); its keys
 * (ru_keyrec: spelling, unit, place in ru_part, default, required) and list keys
 * (ru_listrec), per variant when a selector key (`wave`, `law`, `kind`) chooses
 * among several; its value checks; how it conducts at DC (the floating-node
 * check); its capacitances (the mass matrix); its internal states (names, rest,
 * tolerance scale); its stamps into the residual and Jacobian (parts/stamp.h);
 * the loop it breaks for the return ratio; and the value text `check` prints.
 * The loader, the circuit checks, PART.KEY, the system builder and the CLI's
 * listings read only this.
 *
 * Invariants: key offsets point at a double inside ru_part; tables end with a
 * record whose key is NULL; descriptors and their tables are constant data, so
 * any thread may read them. Adding a part type: DEVELOPERS.md. */
#ifndef RU_PARTS_DESC_H
#define RU_PARTS_DESC_H

#include "ringup/part.h"
#include "ringup/status.h"
#include "parts/stamp.h"

#include <stddef.h>

/* A numeric key: one double of ru_part. */
typedef struct ru_keyrec {
    const char *key;  /* spelling in the file */
    const char *unit; /* expected unit (NULL: a plain number; "%": a fraction, written
                         5% or 0.05); "sig": the descriptor's sig_unit (V or A) */
    size_t offset;    /* byte offset of the double in ru_part */
    int required;     /* 1: the key must be given (dflt unused) */
    double dflt;      /* its value when not given */
} ru_keyrec;

/* A list key: numbers (width 1) or pairs (width 2) into double arrays of ru_part
 * with an int count; the loader reads them, PART.KEY refuses them. */
typedef struct ru_listrec {
    const char *key;     /* spelling in the file */
    const char *unit;    /* unit of every number (NULL: plain) */
    int width;           /* 1: [a, b, ...]; 2: [[x, y], ...] */
    int min, max;        /* entries allowed */
    size_t offset[2];    /* byte offsets of the arrays (column 0, column 1) */
    size_t count_offset; /* byte offset of the int count */
    int increasing;      /* 1: column 0 must increase strictly */
    const char *what;    /* "numbers (c0 first)", "pairs [vin, vout]" */
    const char *item;    /* one number, for messages: "a number", "a voltage" */
    const char *entry;   /* one entry of width 2, for messages: "a pair [vin, vout]" */
    const char *col0;    /* column 0's name in messages ("vin") */
    const ru_keyrec *fields; /* non-NULL: every entry is a mapping of these keys
                                (width and offset unused); a field's offset is that
                                of an array of max doubles in ru_part, entry i
                                going to element i */
} ru_listrec;

/* One variant of a type (a wave kind, an amplifier law, a thermal kind), or the
 * type itself when it has no selector. */
typedef struct ru_variant {
    const char *name;         /* "dc", "follower-tanh", "ntc"; the type name when alone */
    const ru_keyrec *keys;    /* its numeric keys */
    const ru_listrec *lists;  /* its list keys, NULL: none */
} ru_variant;

/* When a terminal key is absent from a part. */
enum {
    RU_TERM_REQUIRED, /* an error */
    RU_TERM_GND,      /* ground (node 0) */
    RU_TERM_SAME,     /* node -1: the same node as terminal same_as */
    RU_TERM_NONE      /* node -1: not connected (a terminal only some variants use) */
};

/* A terminal key: a node name (count 1) or a list of count node names. */
typedef struct ru_term {
    const char *key; /* "nodes", "control", "in", ... (NULL ends the table) */
    int count;       /* nodes: 1 a name; 2 or more a list [a, b] */
    int first;       /* index of its first node in ru_part.node[] */
    int absent;      /* RU_TERM_* */
    int same_as;     /* for RU_TERM_SAME: the node[] index it stands for */
} ru_term;

/* A key that names other parts, e.g. inductors: [L1, L2]: count part names of one
 * type, kept as text in ru_part (char [count][RU_NAME_MAX] at offset) and found
 * by name when the circuit is compiled (the loader checks them once every part is
 * read: ru_ld_part_refs). */
typedef struct ru_refterm {
    const char *key;   /* "inductors" */
    int count;         /* names in the list */
    ru_part_type type; /* the type each named part must have */
    size_t offset;     /* byte offset of the names in ru_part */
} ru_refterm;

/* A mutual inductance between two inductors' branch states (their rows are rates,
 * di/dt = (v - R i)/L, unit mass): the mass entries that make those rows
 * L^-1 (L_a di_a/dt + M di_b/dt) = (v_a - R_a i_a)/L_a, i.e. M/L_a on a's row in
 * b's column and M/L_b on b's row in a's column, and k = M/sqrt(L_a L_b). */
typedef struct ru_mutual {
    double k;      /* coupling coefficient */
    double m_h;    /* mutual inductance M (H) */
    double ab, ba; /* M/L_a, M/L_b */
} ru_mutual;

/* The circuit as a check sees it (the parts layer does not know ru_circuit). */
typedef struct ru_part_env {
    const char *file;      /* for messages */
    size_t nnodes;         /* nodes including ground */
    const char *(*node_name)(const void *user, int node);
    const void *user;
} ru_part_env;

/* A capacitance c_f between nodes a and b (b may be ground). */
typedef struct ru_cap {
    int a, b;
    double c_f;
} ru_cap;

#define RU_PART_CAPS_MAX 4   /* most capacitances of one part */
#define RU_PART_LINKS_MAX 4  /* most DC links of one part */
#define RU_PART_STATES_MAX 10 /* most states of one part */
#define RU_PART_STORES_MAX 10 /* most quadratic stores of one part's own states */

/* A store of one of the part's own states: energy coef * x^2 / 2 (an inductance's
 * L i^2 / 2, a motional capacitance's cm vm^2 / 2). */
typedef struct ru_store {
    int state;   /* offset from the part's first state */
    double coef; /* H for a current, F for a voltage */
} ru_store;

/* What a state's tolerance scale may depend on (system.c). */
typedef struct ru_scale_env {
    double v_scale;    /* node-voltage scale (V) */
    double c_total_f;  /* every capacitance of the circuit and the strays (F) */
    double i_source_a; /* largest current-source peak (A) */
} ru_scale_env;

enum { RU_SOURCE_NONE, RU_SOURCE_VOLTAGE, RU_SOURCE_CURRENT };
enum { RU_STATES_BRANCH, RU_STATES_INTERNAL }; /* numbered with the inductor currents, or after them */

typedef struct ru_part_desc {
    ru_part_type type;
    const char *name;        /* file spelling */
    const ru_term *terms;    /* terminal keys, in node[] order */
    /* keys */
    const char *selector;    /* key naming the variant ("wave"), NULL: one variant */
    int nvariants;
    const ru_variant *(*variant)(int i);   /* variant i (0..nvariants-1) */
    int (*variant_of)(const ru_part *p);   /* p's variant */
    void (*set_variant)(ru_part *p, int i); /* sets the field that names it */
    size_t record, record_size; /* the sub-struct its keys live in (reset to zero
                                   with the defaults; 0, 0: none) */
    const char *sig_unit;    /* what unit "sig" stands for (sources), else NULL */
    int presets;             /* 1: takes `model: NAME` (models/NAME.yaml) */
    size_t model;            /* presets: offset of the char[RU_NAME_MAX] that names
                                the preset in ru_part */
    int preset_by_variant;   /* presets: a preset's `law:` names the variant (an
                                amplifier law); 0: it names the type, and the
                                selector key, if any, may follow in the preset */
    int selector_or_model;   /* 1: exactly one of the selector and model is given */
    /* checks beyond the generic ones (terminals in range, value/series/tol
       finite, tol in [0, 1)); NULL: none */
    ru_status (*check)(const ru_part *p, const ru_part_env *env, ru_error *err);
    /* topology: node pairs it joins at DC (the floating-node check) */
    int (*dc_links)(const ru_part *p, int links[RU_PART_LINKS_MAX][2]);
    /* node pairs it ties with a conductance at every instant, which fixes the
       voltage of a node without capacitance (the check of ideal nodes, system);
       NULL: as dc_links (an inductor conducts only at DC and ties none) */
    int (*kcl_links)(const ru_part *p, int links[RU_PART_LINKS_MAX][2]);
    int source;              /* RU_SOURCE_*: p->wave drives a voltage or a current */
    int (*caps)(const ru_part *p, ru_cap out[RU_PART_CAPS_MAX]); /* NULL: none */
    /* the energy its own states store (NULL: none), beside its capacitances */
    int (*stores)(const ru_part *p, ru_store out[RU_PART_STORES_MAX]);
    /* how many of its first states are branch currents through it (a, b) that a
       wave file lists as columns (NULL: none) */
    int (*currents)(const ru_part *p);
    /* its small-signal impedance at w (rad/s) in closed form, 1 when it has one
       (NULL: none; margin then measures it from the circuit) */
    int (*impedance)(const ru_part *p, double w, double *re_ohm, double *im_ohm);
    /* margin: the part left in the circuit when the branch whose impedance
       margin gives is taken out (a crystal keeps c0 and its other arms; NULL: an
       open, nothing is left) into out; 1 when something is left */
    int (*margin_rest)(const ru_part *p, ru_part *out);
    int output_term;         /* 1 + the node[] index of the output a probe defaults
                                to (an amplifier's out); 0: none */
    /* states */
    int state_group;         /* RU_STATES_* */
    int (*nstates)(const ru_part *p); /* NULL: none */
    void (*state_name)(const ru_part *p, int k, char *buf, size_t size);
    double (*state_rest)(const ru_part *p, int k);   /* NULL: 0 */
    double (*state_scale)(const ru_part *p, int k, const ru_scale_env *e);
    /* residual and Jacobian; index is the part's index (its noise stream), state0
       its first state (-1 without) */
    void (*stamp)(const ru_part *p, ru_stamp *st, int index, int state0);
    /* parts it names (NULL: none) and, for a coupling of two of them, its mutual
       inductance given the two named parts (NULL: not a coupling) */
    const ru_refterm *refs;
    void (*mutual)(const ru_part *p, const ru_part *a, const ru_part *b, ru_mutual *out);
    /* the loop it can break (NULL: none): b gets d(controlled)/d(control) on the
       rows it controls, g the control voltage's weights (see ringup/system.h) */
    void (*loop)(const ru_part *p, const ru_stamp *st, int state0, double *b, double *g);
    /* the value `check` prints ("10 kohm", "sine 1 V at 1000 Hz") */
    void (*describe)(const ru_part *p, char *buf, size_t size);
} ru_part_desc;

/* The descriptor of a type, NULL for an unknown one. */
const ru_part_desc *ru_part_desc_get(ru_part_type type);

/* A part's capacitances (mass-matrix entries) and the stores of its own states
 * (energy), from its descriptor (the rest of what the engines ask of a part is in
 * ringup/part.h). */
int ru_part_caps(const ru_part *p, ru_cap out[RU_PART_CAPS_MAX]);
int ru_part_stores(const ru_part *p, ru_store out[RU_PART_STORES_MAX]);
/* Its descriptor's margin_rest (0 without one: the part taken out leaves an open). */
int ru_part_margin_rest(const ru_part *p, ru_part *out);

/* The descriptor spelled name, NULL when none is. */
const ru_part_desc *ru_part_desc_find(const char *name);

/* p's variant (never NULL for a part of a known type with a valid variant). */
const ru_variant *ru_part_variant(const ru_part *p);

/* Index of the variant spelled name, or -1. */
int ru_part_variant_find(const ru_part_desc *d, const char *name);

/* Resets p's record to zero and the defaults of variant i (every variant's
 * defaults in order, then variant i's: a key another variant shares keeps its
 * own default) and sets the variant. */
void ru_part_reset(ru_part *p, int i);

/* The double a key names in p. */
static inline double *ru_key_slot(ru_part *p, const ru_keyrec *k)
{
    return (double *)((char *)p + k->offset);
}

/* The unit a key is written in for part type d ("" for a plain number). */
const char *ru_key_unit(const ru_part_desc *d, const ru_keyrec *k);

/* Error helpers for checks: "part NAME: " fmt at the part's place (RU_EINPUT), and
 * "part NAME: what (got v)". */
ru_status ru_part_fail(const ru_part_env *env, const ru_part *p, ru_error *err,
                       const char *fmt, ...)
#if defined(__GNUC__)
    __attribute__((format(printf, 4, 5)))
#endif
    ;
ru_status ru_part_bad(const ru_part_env *env, const ru_part *p, ru_error *err,
                      const char *what, double v);

/* Whether v[0..n-1] are all finite. */
int ru_part_finite(const double *v, int n);

/* The generic check of p's key tolerances (part_keys.c): each names a numeric key
 * of p's variant once, from 0 up to 1. */
ru_status ru_part_check_key_tols(const ru_part *p, const ru_part_env *env, ru_error *err);

/* The two-terminal check: node[0] and node[1] differ. */
ru_status ru_part_check_two(const ru_part *p, const ru_part_env *env, ru_error *err);

/* The resistor's, capacitor's and inductor's check: value > 0, series >= 0, two
 * distinct nodes. */
ru_status ru_part_check_rlc(const ru_part *p, const ru_part_env *env, ru_error *err);

/* dc_links of a two-terminal part that conducts: node[0] to node[1]. */
int ru_part_links_two(const ru_part *p, int links[RU_PART_LINKS_MAX][2]);

/* Terminals of a two-terminal part: nodes: [a, b]. */
extern const ru_term ru_terms_two[];

/* A variant list of one entry, for types without a selector. */
int ru_part_variant_zero(const ru_part *p);
void ru_part_set_variant_none(ru_part *p, int i);

/* The descriptors, one per family file. */
extern const ru_part_desc ru_part_resistor, ru_part_capacitor, ru_part_inductor,
    ru_part_supply, ru_part_current, ru_part_poly, ru_part_amplifier, ru_part_diode,
    ru_part_thermal, ru_part_transconductor, ru_part_crystal, ru_part_coupling;

#endif
