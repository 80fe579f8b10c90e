/* hash.h: counter-based random numbers (private), shared by the noise kick
 * (noise.c) and Monte Carlo (montecarlo.c). splitmix64 (Steele, Lea and Flood,
 * "Fast splittable pseudorandom number generators", OOPSLA 2014; constants from
 * memory) used as a hash of a counter: a value is a pure function of its inputs, so
 * results never depend on thread scheduling and any draw can be rebuilt alone. */
#ifndef RU_HASH_H
#define RU_HASH_H

#include <math.h>
#include <stdint.h>

static inline uint64_t ru_splitmix64(uint64_t z)
{
    z += 0x9e3779b97f4a7c15ULL;
    z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
    z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
    return z ^ (z >> 31);
}

/* Hash of four counters (seed, stream, index, sub-index). */
static inline uint64_t ru_hash4(uint64_t a, uint64_t b, uint64_t c, uint64_t d)
{
    return ru_splitmix64(a ^ ru_splitmix64(b ^ ru_splitmix64(c ^ ru_splitmix64(d))));
}

/* Uniform in (0, 1), never 0 or 1 (53 bits of h). */
static inline double ru_hash_uniform(uint64_t h)
{
    return ((double)(h >> 11) + 0.5) * (1.0 / 9007199254740992.0);
}

/* Standard normal from one hash by Box-Muller (the second uniform from a rehash). */
static inline double ru_hash_normal(uint64_t h)
{
    double u1 = ru_hash_uniform(h), u2 = ru_hash_uniform(ru_splitmix64(h));
    return sqrt(-2.0 * log(u1)) * cos(2.0 * M_PI * u2);
}

#endif
