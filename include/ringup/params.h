/* ringup/params.h: one numeric value of a part by name, `PART.KEY`, and the sweep
 * specification `PART.KEY=LO:HI:N` of `ringup sweep`.
 *
 * Keys and units are those of the circuit file (README, "Parts"): the part
 * descriptors' key tables are read, as the loader does, so `R1.value` (ohm),
 * `C1.tol` (a fraction, written `5%` or `0.05`), `L1.series` (ohm),
 * `VS.value`/`VS.rise` and the other wave keys, every amplifier-law key
 * (`A1.gain`, `Q1.is`, `U1.gbw`, ...), diode keys, thermal-resistor keys
 * (temperatures in deg C, as in the file) and a transconductor's `G1.gm` (S):
 * every numeric key. Lists (`coeffs`, `points`) and names (`type`, `wave`,
 * `law`, `kind`, `model`, nodes) are not
 * values and are refused. The part name may itself contain '.', so the key is what
 * follows the last '.'.
 *
 * A value set through ru_circuit_set_param goes through the same checks as a
 * loaded part (ru_circuit_replace_part): an impossible value (a negative
 * resistance, a tolerance of 100 %) is RU_EINPUT with a message naming the part,
 * and the circuit is left unchanged. Nothing here prints or keeps state. */
#ifndef RINGUP_PARAMS_H
#define RINGUP_PARAMS_H

#include "ringup/circuit.h"
#include "ringup/status.h"

#include <stddef.h>

#ifdef __cplusplus
extern "C" {
#endif

#define RU_PARAM_NAME_MAX (RU_NAME_MAX + 16) /* "PART.KEY" with the NUL */
#define RU_SWEEP_MAX 1000                    /* most points of one sweep */

/* Sets PART.KEY to value (in the key's unit; "%" keys take a fraction). Errors
 * (RU_EINPUT): no such part; a key the part does not have at its type, wave, law
 * or kind (the message lists the keys it has); a value the part checks refuse. */
ru_status ru_circuit_set_param(ru_circuit *c, const char *part_dot_key, double value,
                               ru_error *err);

/* Reads PART.KEY into *value (same errors for names as the setter). */
ru_status ru_circuit_get_param(const ru_circuit *c, const char *part_dot_key,
                               double *value, ru_error *err);

/* The unit PART.KEY is written in, as in the circuit file: "ohm", "F", "H", "V",
 * "A", "s", "Hz", "C", "V/s", "K/W", "J/K", "K", "S", "%" or "" (a plain number).
 * *unit points to static text. Same errors as the getter. */
ru_status ru_circuit_param_unit(const ru_circuit *c, const char *part_dot_key,
                                const char **unit, ru_error *err);

/* A parsed `PART.KEY=LO:HI:N`. */
typedef struct ru_sweep_spec {
    char param[RU_PARAM_NAME_MAX]; /* "R1.value" */
    const char *unit;              /* the key's unit (static text, "" plain) */
    double lo, hi;                 /* first and last value (key's unit; % as fraction) */
    size_t n;                      /* number of points, 1..RU_SWEEP_MAX (1: lo only) */
    int log;                       /* 1: geometric spacing (lo, hi of one sign, not 0) */
} ru_sweep_spec;

/* Parses text "PART.KEY=LO:HI:N" against circuit c (the part and key must exist
 * there; LO and HI take SI prefixes and the key's unit, e.g. `R1.value=8k:12k:5`,
 * `C1.value=10nF:22nF:4`, `A1.gain=0.95:0.999:6`). log asks for geometric spacing.
 * RU_EINPUT with a message naming what is wrong (err->file empty). Values are not
 * checked against the part here: an impossible one fails its own variant. */
ru_status ru_sweep_parse(const ru_circuit *c, const char *text, int log,
                         ru_sweep_spec *out, ru_error *err);

/* Point i (0..n-1) of the sweep: lo + (hi - lo) i/(n-1), or lo (hi/lo)^(i/(n-1))
 * with log; the last point is hi exactly. */
double ru_sweep_value(const ru_sweep_spec *s, size_t i);

/* Constructor of one variant: a clone of c with the sweep's parameter at point i.
 * On error (the value refused by the part checks, out of memory) *out is NULL. */
ru_status ru_sweep_variant(const ru_circuit *c, const ru_sweep_spec *s, size_t i,
                           ru_circuit **out, ru_error *err);

#ifdef __cplusplus
}
#endif
#endif
