/* loader_impl.h: private helpers shared by the circuit-file loader's sources
 * (loader.c: the top level; loader_run.c: run and measure; loader_parts.c: the
 * parts; loader_preset.c: preset files; loader_keys.c: keys and lists as the
 * part descriptors list them; yamldoc.c: the parsed document and its readers).
 *
 * Invariants: an ld_doc holds one parsed YAML file whose anchors, aliases and
 * tags have been refused before anything reads a value; every error goes through
 * ru_ld_fail, which fills err with RU_EINPUT and the node's 1-based place. */
#ifndef RU_LOADER_IMPL_H
#define RU_LOADER_IMPL_H

#include "ringup/circuit.h"
#include "ringup/loader.h"
#include "ringup/status.h"

#include "circuit/yamltree.h"
#include "parts/desc.h"

/* One parsed YAML file. */
typedef struct ld_doc {
    char file[RU_ERROR_FILE];   /* name used in messages */
    ru_yaml *tree;              /* the document (owns every node) */
    const ru_ynode *root;       /* its root mapping */
} ld_doc;

/* A part being read: the file, the circuit, and where presets live. */
typedef struct ld_ctx {
    ld_doc *d;                  /* the circuit file */
    ru_circuit *c;              /* circuit being filled */
    const char *models_dir;     /* folder of models/NAME.yaml presets */
    ru_error *err;              /* caller's error record */
} ld_ctx;

/* Reads a whole regular file of at most RU_YAML_BYTES_MAX bytes: RU_EIO with the
 * OS reason when it cannot be opened or read, RU_EINPUT for a directory, FIFO,
 * device or socket and for a file over the limit. *text is malloc'd. */
ru_status ru_ld_read_file(const char *path, char **text, size_t *len, ru_error *err);

/* Parses text into d (root must be a mapping; no anchors, aliases or tags).
 * Call ru_ld_close(d) afterwards in every case. */
ru_status ru_ld_open(ld_doc *d, const char *text, size_t len, const char *name,
                     ru_error *err);
void ru_ld_close(ld_doc *d);

/* 1-based place of a node (0,0 when unknown). */
void ru_ld_place(const ld_doc *d, const ru_ynode *n, int *line, int *col);

/* Fills err with RU_EINPUT at node n and returns RU_EINPUT. */
ru_status ru_ld_fail(const ld_doc *d, const ru_ynode *n, ru_error *err, const char *fmt, ...)
#if defined(__GNUC__)
    __attribute__((format(printf, 4, 5)))
#endif
    ;

/* The value node of pair p, or NULL when the value is empty ("key:"). */
const ru_ynode *ru_ld_val(const ru_ypair *p);

/* The scalar text of a key node ("" for a non-scalar). */
const char *ru_ld_key(const ru_ypair *p);

/* The pair with key `key` in mapping map, or NULL. */
const ru_ypair *ru_ld_find(const ru_ynode *map, const char *key);

/* Scalar text of pair p's value, or an error naming who and the key. */
ru_status ru_ld_scalar(const ld_doc *d, const ru_ypair *p, const char *who,
                       ru_error *err, const char **text);

/* Pair p's value parsed by ru_value_parse with unit (NULL: plain number). */
ru_status ru_ld_value(const ld_doc *d, const ru_ypair *p, const char *who,
                      const char *unit, ru_error *err, double *out);

/* Whether s is a valid part or node name (letters, digits, _ and .). */
int ru_ld_valid_name(const char *s);

/* ": " after a non-empty who, else "" (message prefixes). */
const char *ru_ld_sep(const char *who);

/* Every key of map must be in allowed (NULL-terminated): else "unknown key". */
ru_status ru_ld_only_keys(const ld_doc *d, const ru_ynode *map, const char *who,
                          const char *const *allowed, ru_error *err);

/* The value of pair p as a mapping, or an error naming who and the key. */
ru_status ru_ld_need_mapping(const ld_doc *d, const ru_ypair *p, const char *who,
                             ru_error *err, const ru_ynode **map);

/* The `run:` and `measure:` sections (loader_run.c), read after the parts. */
ru_status ru_ld_run(ld_doc *d, ru_circuit *c, const ru_ypair *p, ru_error *err);
ru_status ru_ld_measure(ld_doc *d, ru_circuit *c, const ru_ypair *p, ru_error *err);

/* The `corners:` section (loader_corners.c), read after the parts and temp. */
ru_status ru_ld_corners(ld_doc *d, ru_circuit *c, const ru_ypair *p, ru_error *err);

/* Reads a preset document's values into part (the record of the preset's kind,
 * its defaults first; part keeps its own type); *type gets the type the preset
 * fits, *kind the spelling of its kind (static text: a law, "diode", ...); info
 * (may be NULL) gets the listing (loader_preset.c). */
ru_status ru_ld_preset_values(ld_doc *pd, const char *who, ru_part *part,
                              ru_part_type *type, const char **kind, ru_model_info *info,
                              ru_error *err);

/* Loads models_dir/NAME.yaml into part (which must be of the type the preset is
 * for): the part's values of that type are replaced by defaults < preset, and the
 * model name is recorded. *missing: 1 when the file cannot be read, 2 when the
 * preset is for another part type (why says which; err is not set), else 0. */
ru_status ru_ld_preset_into(const char *models_dir, const char *name, ru_part *part,
                            int *missing, char *why, size_t whylen, ru_error *err);

/* Whether name is a valid preset name (letters, digits, -, _ and ., not
 * starting with '.'). */
int ru_ld_valid_preset_name(const char *name);

/* ---- keys as the part descriptors list them (loader_keys.c) ---- */

#define RU_LD_KEYS_MAX 24 /* most keys allowed on one part or preset */

/* Appends key (ignored when NULL), or every key and list key of v, to the
 * NULL-terminated list (at most RU_LD_KEYS_MAX - 1 entries). */
void ru_ld_add_key(const char **list, const char *key);
void ru_ld_add_keys(const char **list, const ru_variant *v);

/* Every key of map must be in allowed; a key some other type, variant or law has
 * "does not apply to `what`", anything else is an unknown key. */
ru_status ru_ld_check_keys(const ld_doc *d, const ru_ynode *map, const char *who,
                           const char *const *allowed, const char *what, ru_error *err);

/* The numeric keys recs present in map into part ("sig" units are sig); a missing
 * required key is an error at place. */
ru_status ru_ld_read_keys(const ld_doc *d, const ru_ynode *map, const ru_ynode *place,
                          const char *who, const ru_keyrec *recs, const char *sig,
                          ru_part *part, ru_error *err);

/* The list keys (NULL: none) present in map into part; a list is required while
 * part holds fewer entries than its minimum. */
ru_status ru_ld_read_lists(const ld_doc *d, const ru_ynode *map, const ru_ynode *place,
                           const char *who, const ru_listrec *lists, ru_part *part,
                           ru_error *err);

/* "dc, step, sine, pulse": the names of d's variants, for messages. */
void ru_ld_variant_names(const ru_part_desc *d, char *buf, size_t size);

/* Reads the `parts:` mapping into ctx->c. */
ru_status ru_ld_parts(ld_ctx *ctx, const ru_ypair *parts);

/* A part's `tol:` (loader_tol.c): a mapping of per-key tolerances, or a plain
 * fraction on a source's level; a plain tol of a part with its own tol key is
 * left to ru_ld_read_keys. */
ru_status ru_ld_read_tol(ld_ctx *x, const ru_ynode *map, const char *who, ru_part *part);

#endif
