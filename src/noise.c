/* noise.c: counter-based Gaussian knots and their linear interpolation (see
 * noise.h). The generator is splitmix64 (Steele, Lea and Flood, "Fast splittable
 * pseudorandom number generators", OOPSLA 2014; constants from memory), used as a
 * hash of (seed, source, knot); Box-Muller turns two uniforms into a Gaussian. */
#include "noise.h"

#include <math.h>

static uint64_t splitmix64(uint64_t z)
{
    z += 0x9e3779b97f4a7c15ULL;
    z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
    z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
    return z ^ (z >> 31);
}

/* Uniform in (0, 1), never 0 (53 bits). */
static double uniform(uint64_t h)
{
    return ((double)(h >> 11) + 0.5) * (1.0 / 9007199254740992.0);
}

static double knot(const ru_noise *nz, uint64_t id, int64_t k)
{
    uint64_t h = splitmix64(nz->seed ^ splitmix64(id ^ splitmix64((uint64_t)k)));
    double u1 = uniform(h), u2 = uniform(splitmix64(h));
    return sqrt(-2.0 * log(u1)) * cos(2.0 * M_PI * u2);
}

double ru_noise_unit(const ru_noise *nz, uint64_t id, double t_s)
{
    double q = t_s / nz->dt_s, f = floor(q);
    int64_t k = (int64_t)f;
    double w = q - f;
    return (1.0 - w) * knot(nz, id, k) + w * knot(nz, id, k + 1);
}
