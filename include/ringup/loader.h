/* ringup/loader.h: reads a circuit file (our YAML format, see README) into an
 * ru_circuit, with amplifier presets from a models folder.
 *
 * Every problem is reported as RU_EINPUT with err->file/line/col at the offending
 * key or value and a message naming the part and key. YAML anchors and aliases are
 * refused before anything is resolved (no expansion attacks). Warnings (e.g. a
 * node with no DC path to ground) are attached to the circuit. */
#ifndef RINGUP_LOADER_H
#define RINGUP_LOADER_H

#include "ringup/circuit.h"
#include "ringup/status.h"

#ifdef __cplusplus
extern "C" {
#endif

/* Constructor: loads path. models_dir holds the presets (models/NAME.yaml); NULL
 * uses ru_loader_default_models_dir(). On failure *out is NULL. */
ru_status ru_circuit_load(const char *path, const char *models_dir, ru_circuit **out,
                          ru_error *err);

/* Same, from a string (name is used in messages). */
ru_status ru_circuit_load_string(const char *text, const char *name,
                                 const char *models_dir, ru_circuit **out,
                                 ru_error *err);

/* $RINGUP_MODELS when set, else the folder the build was configured with. */
const char *ru_loader_default_models_dir(void);

/* Parses a value with an optional SI prefix (p n u µ m k M G T f) and an optional
 * unit that must equal `unit` (e.g. "F", "ohm", "V", "A", "H", "s", "Hz"; NULL: no
 * unit allowed; "%" values are divided by 100). Case-sensitive: m is milli, M mega.
 * Returns RU_EINPUT with a short reason in why (if not NULL, size whylen). */
ru_status ru_value_parse(const char *text, const char *unit, double *out, char *why,
                         size_t whylen);

#ifdef __cplusplus
}
#endif
#endif
