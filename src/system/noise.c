/* noise.c: counter-based Gaussian knots and their linear interpolation (see
 * noise.h); the knots come from hash.h, a hash of (seed, source, knot). */
#include "system/noise.h"

#include "base/hash.h"

#include <math.h>

static double knot(const ru_noise *nz, uint64_t id, int64_t k)
{
    return ru_hash_normal(ru_hash4(nz->seed, id, (uint64_t)k, 0));
}

double ru_noise_unit(const ru_noise *nz, uint64_t id, double t_s)
{
    double q = t_s / nz->dt_s, f = floor(q);
    int64_t k = (int64_t)f;
    double w = q - f;
    return (1.0 - w) * knot(nz, id, k) + w * knot(nz, id, k + 1);
}
