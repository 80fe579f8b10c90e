/* yamltree.h: our own small YAML document tree (private to the circuit layer),
 * built from libyaml's events: mappings, sequences and scalars, each with the
 * 1-based line and column of its start. The circuit file needs nothing more, so
 * everything else YAML can say is refused while parsing, with its place, before
 * anything is built on it: anchors, aliases, tags, directives, a second document,
 * duplicate keys (both places named), nesting deeper than RU_YAML_DEPTH_MAX,
 * scalars longer than RU_YAML_SCALAR_MAX, more than RU_YAML_NODES_MAX values.
 * Before libyaml sees a byte, the text itself is checked: at most
 * RU_YAML_BYTES_MAX bytes, UTF-8 only (no UTF-16 or UTF-32), no NUL byte and no
 * control character YAML does not allow, each refused at its line and column.
 *
 * Invariants: a tree is immutable once built and owns all its memory (one arena,
 * freed by ru_yaml_destroy); scalar text is NUL-terminated and holds no NUL;
 * mapping keys that are scalars are unique within their mapping. Time and memory
 * are linear in the input (duplicate keys are found with a hash table). */
#ifndef RU_YAMLTREE_H
#define RU_YAMLTREE_H

#include "ringup/status.h"

#include <stddef.h>

#define RU_YAML_BYTES_MAX (4u << 20) /* largest input: 4 MiB */
#define RU_YAML_DEPTH_MAX 32         /* deepest nesting of mappings and lists */
#define RU_YAML_SCALAR_MAX 4096      /* longest scalar, in bytes */
#define RU_YAML_NODES_MAX 1000000    /* most values (scalars and collections) */

typedef enum { RU_YAML_SCALAR, RU_YAML_MAPPING, RU_YAML_SEQUENCE } ru_yaml_type;

/* How a scalar was written (a place for quoted ones is at the opening quote). */
typedef enum { RU_YAML_PLAIN, RU_YAML_QUOTED, RU_YAML_BLOCK } ru_yaml_style;

typedef struct ru_ynode ru_ynode;

/* One key: value entry of a mapping. */
typedef struct ru_ypair {
    const ru_ynode *key;   /* never NULL; usually a scalar */
    const ru_ynode *value; /* never NULL (an empty value is an empty plain scalar) */
} ru_ypair;

struct ru_ynode {
    ru_yaml_type type;
    ru_yaml_style style;   /* scalars only */
    int line, col;         /* 1-based start (a quoted scalar: its opening quote) */
    int empty;             /* 1: a plain scalar with no text ("key:" alone) */
    const char *text;      /* scalars: the value, NUL-terminated; else "" */
    size_t len;            /* scalars: bytes of text */
    size_t n;              /* mappings: pairs; sequences: items; scalars: 0 */
    const ru_ypair *pairs; /* mappings: n pairs in file order */
    const ru_ynode *const *items; /* sequences: n items in file order */
};

typedef struct ru_yaml ru_yaml;

/* Checks the text (size, encoding, NUL and control bytes) and parses it into a
 * tree. file names the input in messages. On failure (RU_EINPUT with a place in
 * err, or RU_ENOMEM) *out is NULL. An input without a document, or whose
 * document is empty, gives a tree whose root is NULL. */
ru_status ru_yaml_parse(const char *text, size_t len, const char *file, ru_yaml **out,
                        ru_error *err);

/* The document's root node (NULL for an empty file). */
const ru_ynode *ru_yaml_root(const ru_yaml *y);

/* Frees the tree and every node; NULL is harmless. */
void ru_yaml_destroy(ru_yaml *y);

/* The text checks of ru_yaml_parse alone (RU_EINPUT with the place). */
ru_status ru_yaml_check_text(const char *text, size_t len, const char *file,
                             ru_error *err);

#endif
