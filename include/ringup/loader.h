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

/* Same, from len bytes that need not end in NUL (a NUL inside is refused at its
 * place, as in a file). */
ru_status ru_circuit_load_buffer(const char *text, size_t len, const char *name,
                                 const char *models_dir, ru_circuit **out,
                                 ru_error *err);

/* $RINGUP_MODELS when set, else the folder the build was configured with. */
const char *ru_loader_default_models_dir(void);

/* Batch `compare`: replaces the law (amplifier) or values (diode, thermal
 * resistor) of part `part` by those of preset models_dir/MODEL.yaml (NULL
 * models_dir: the default). The part's own inline keys from its file are dropped:
 * its values become the law's defaults, then the preset's keys, as if the part had
 * been written `model: MODEL` with no other value keys; its nodes stay. Errors
 * (RU_EINPUT, message naming the part and the model): no such part; a part type
 * without presets; a bad or missing preset name; a preset of a law that does not
 * fit the part's type (an opamp preset for a diode); values the preset gives that
 * the part check refuses. A preset file's own errors carry its FILE:LINE:COL. On
 * error the circuit is unchanged. */
ru_status ru_circuit_apply_model(ru_circuit *c, const char *part, const char *model,
                                 const char *models_dir, ru_error *err);

#define RU_MODEL_PARAMS_MAX 16

/* One parameter of a preset, as ru_models_list reports it. */
typedef struct ru_model_param {
    char name[16]; /* the key as written in a file ("gbw") */
    double value;  /* in the key's unit (temperatures in deg C); points: how many */
    char unit[8];  /* "Hz", "V", "V/s", "ohm", "C", "K/W", ...; "" a plain number */
} ru_model_param;

/* One preset of the models folder. */
typedef struct ru_model_info {
    char name[RU_NAME_MAX];  /* file name without .yaml */
    char law[32];            /* amplifier law, "diode" or "thermal-resistor" */
    char kind[8];            /* thermal-resistor: "lamp" or "ntc"; else "" */
    char description[256];   /* the preset's description ("" when none) */
    size_t nparams;          /* entries of params */
    ru_model_param params[RU_MODEL_PARAMS_MAX]; /* every key of the law, with the
                                                   value in force (preset or default) */
} ru_model_info;

/* Constructor: every preset (*.yaml) of models_dir (NULL: the default), sorted by
 * name. *out is an array of *n entries freed with ru_models_free. A preset that
 * does not load fails the call with its FILE:LINE:COL (RU_EINPUT); an unreadable
 * folder is RU_EIO. */
ru_status ru_models_list(const char *models_dir, ru_model_info **out, size_t *n,
                         ru_error *err);

/* Destructor; NULL is harmless. */
void ru_models_free(ru_model_info *models);

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
