/* ringup/corners.h: corners, the combinations of extreme conditions a design must
 * survive (`ringup corners`): the circuit's temperature, every supply's level,
 * and each toleranced quantity at chosen levels.
 *
 * The factors are those of the file's `corners:` section (ringup/circuit.h,
 * ru_corner_factor), or, when it has none, every quantity Monte Carlo draws
 * (ringup/montecarlo.h: toleranced values and key tolerances) at its two ends,
 * -tol and +tol. Unit 0 is the nominal circuit; units 1 .. N are the corners, the
 * levels counted in mixed radix with the first factor slowest (unit 1 takes every
 * factor's first level), so N is the product of the level counts. A corner's
 * circuit is a pure function of the circuit and the unit index, so units run in
 * any order, on threads, shards or MPI ranks (ringup/units.h). */
#ifndef RINGUP_CORNERS_H
#define RINGUP_CORNERS_H

#include "ringup/circuit.h"
#include "ringup/status.h"

#include <stddef.h>

#ifdef __cplusplus
extern "C" {
#endif

#define RU_CORNERS_MAX 4096 /* most corners (the nominal unit aside) */

typedef struct ru_corners ru_corners;

/* Constructor: the plan for c. RU_EINPUT when c has nothing to vary (no corners:
 * section, no tolerance) or more than RU_CORNERS_MAX corners (the message gives
 * the count); RU_ENOMEM. */
ru_status ru_corners_create(const ru_circuit *c, ru_corners **out, ru_error *err);

/* Destructor; NULL is harmless. */
void ru_corners_destroy(ru_corners *k);

size_t ru_corners_factor_count(const ru_corners *k);
const ru_corner_factor *ru_corners_factor(const ru_corners *k, size_t f);

/* Units: 1 (nominal) + the corners. */
size_t ru_corners_unit_count(const ru_corners *k);

/* The level index of factor f in unit u (-1 for the nominal unit 0). */
int ru_corners_level(const ru_corners *k, size_t u, size_t f);

/* The level's value (deg C or a fraction) and its text ("85 C", "-10 %"). */
double ru_corners_level_value(const ru_corners *k, size_t u, size_t f);
void ru_corners_level_text(const ru_corners *k, size_t u, size_t f, char *buf, size_t size);

/* "temp 85 C, supply -10 %, R1 -5 %" ("nominal" for unit 0). */
void ru_corners_describe(const ru_corners *k, size_t u, char *buf, size_t size);

/* Constructor: a clone of c at unit u's levels (temperature set, supplies scaled,
 * quantities moved). RU_EINPUT when a level makes a value the part refuses (the
 * message names it); on error *out is NULL. */
ru_status ru_corners_circuit(const ru_circuit *c, const ru_corners *k, size_t u,
                             ru_circuit **out, ru_error *err);

#ifdef __cplusplus
}
#endif
#endif
