/* floquet.h: Floquet analysis of a monodromy matrix (private): the multipliers,
 * the amplitude-recovery time they imply, and the left eigenvector of the phase
 * multiplier (the periodic adjoint's value at t = 0, the start of the perturbation
 * projection vector). Matrices are n*n row-major; scale holds each state's typical
 * size, used to balance the matrix (D^-1 Phi D has the same eigenvalues). */
#ifndef RU_FLOQUET_H
#define RU_FLOQUET_H

#include "ringup/steady.h"

#include <stddef.h>

/* The n eigenvalues of phi: the one closest to 1 first, then by modulus, largest
 * first. RU_ENUMERIC when LAPACK fails, RU_ENOMEM. */
ru_status ru_floquet_multipliers(const double *phi, const double *scale, size_t n,
                                 ru_multiplier *mult);

/* Recovery from the multipliers sorted as above, for period T: tau = -T / ln|mu2|
 * (INFINITY when |mu2| >= 1, 0 when mu2 = 0, NAN when n < 2), whether mu2 is
 * complex and its ring frequency arg(mu2) / (2 pi T). */
void ru_floquet_recovery(const ru_multiplier *mult, size_t n, double period_s,
                         double *tau_s, int *rings, double *ring_hz);

/* v with v^T phi = v^T (the left eigenvector of the multiplier 1) and v . f0 = 1,
 * where f0 = f(x0) is the flow at the orbit's start (the right eigenvector): the
 * bordered system [phi^T - I, f0; f0^T, 0] [v; m] = [0; 1], in balanced
 * coordinates. RU_ENUMERIC when the multiplier 1 is not simple. */
ru_status ru_floquet_phase_vector(const double *phi, const double *scale, size_t n,
                                  const double *f0, double *v);

#endif
