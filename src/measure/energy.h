/* energy.h: the energy balance that estimates the integrator's own numerical
 * damping from the output samples (energy.c). */
#ifndef RU_ENERGY_H
#define RU_ENERGY_H

#include "ringup/status.h"
#include "ringup/system.h"

/* Energy balance over the output samples: stored energy
 *   E = sum over capacitors C (v_a - v_b)^2 / 2 + stray + sum over inductors L i^2 / 2
 * against the integral of its rate of change dE/dt given by the model equations at
 * each sample (the power the other parts deliver). An exact solution keeps the two
 * equal; the integrator's numerical damping makes E fall short. The estimate
 *   sigma_num = -(E_end - E_start - integral dE/dt) / (2 integral E dt)
 * is in the units of a growth rate (1/s): it costs one right-hand-side evaluation
 * per sample, no solver step. It runs over the samples after the last breakpoint. */
typedef struct ru_energy_balance ru_energy_balance;
ru_status ru_energy_balance_create(const ru_system *s, double stop_s,
                                   ru_energy_balance **out);
void ru_energy_balance_destroy(ru_energy_balance *e);
/* Measures the stored energy from a reference state instead of zero (the operating
 * point: C (v - v_op)^2/2 + L (i - i_op)^2/2). The balance holds for any such
 * quadratic form, and without the energy the bias stores the estimate is not
 * diluted by it: it reads the damping of the oscillation. Call before pushing. */
ru_status ru_energy_balance_set_ref(ru_energy_balance *e, const double *x_ref);
void ru_energy_balance_push(ru_energy_balance *e, double t_s, const double *x);
/* sigma_num in 1/s (positive: the integrator removes energy), NAN when unknown. */
double ru_energy_balance_damping(const ru_energy_balance *e);

#endif
