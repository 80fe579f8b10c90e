/* envtime.h: the start-up time of an envelope equation dA/dt = sigma(A) A (private
 * to the engines): t = integral of d(ln A) / sigma, by adaptive Simpson in u = ln A,
 * shared by the describing function (descfn_curve.c) and the harmonic balance
 * (hb_tone.c). */
#ifndef RU_ENVTIME_H
#define RU_ENVTIME_H

/* 1 / sigma at A = e^u; sets *fail to nonzero to stop (its value is returned). */
typedef double (*ru_envtime_fn)(void *user, double u, int *fail);

/* integral over [u_lo, u_hi] of f(u) du to rel relative tolerance (depth 40) into
 * *out; returns 0, or the first nonzero fail value f set. */
int ru_envtime_integrate(ru_envtime_fn f, void *user, double u_lo, double u_hi,
                         double rel, double *out);

#endif
