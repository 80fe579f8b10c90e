/* descfn_impl.h: the one-harmonic balance shared by descfn.c (its equations, the
 * analytic Jacobian and the damped Newton solve) and descfn_curve.c (the handle:
 * continuation in amplitude, the sigma(A) curve, its zero and the start-up
 * integral). Private to the engines layer.
 *
 * Unknowns u = [x0 (n), Xr (n), Xi (n), sigma, w]: 3n + 2 reals, for a probe
 * amplitude amp_v held fixed; x(theta) = x0 + Xr cos(theta) - Xi sin(theta). */
#ifndef RU_DESCFN_IMPL_H
#define RU_DESCFN_IMPL_H

#include "ringup/descfn.h"
#include "ringup/smallsig.h"

#include <lapacke.h>

#define RU_DF_SAMPLES 64      /* angles per cycle */
#define RU_DF_NEWTON_MAX 40   /* Newton iterations per amplitude */

typedef struct ru_df_hb {
    const ru_system *s;
    size_t n, m;          /* states, unknowns (3n + 2) */
    int kp, kn;           /* probe states (-1: ground or driven) */
    double amp_v;         /* the probe amplitude being balanced */
    double *M;            /* mass matrix n*n */
    double *x, *r, *D;    /* scratch: state, residual, dr/dx at one angle */
    double *S[6];         /* sums of D weighted by 1, c, s, cc, cs, ss */
    double *F, *Jac;      /* balance residual m, its Jacobian m*m */
    double *rowscale;     /* 1 / largest |Jac| entry of each row */
    double *du, *ut;      /* Newton step and trial point (m) */
    lapack_int *piv;
} ru_df_hb;

/* Workspace for system s with probe states kp, kn; RU_ENOMEM. */
ru_status ru_df_hb_init(ru_df_hb *h, const ru_system *s, int kp, int kn);
void ru_df_hb_free(ru_df_hb *h);

/* Probe value of a state vector (v[kp] - v[kn], ground and driven read 0). */
double ru_df_hb_probe(const ru_df_hb *h, const double *v);

/* Damped Newton for amplitude h->amp_v from the guess u (overwritten with the
 * solution); vscale is the voltage scale of convergence. RU_ENOCONVERGE. */
ru_status ru_df_hb_solve(ru_df_hb *h, double *u, double vscale);

/* Linear-limit guess at h->amp_v: x0 = x_op, X = A v / v_probe for the dominant
 * mode near `dom`, (sigma, w) its eigenvalue. RU_EINPUT when the probe does not
 * see the mode. */
ru_status ru_df_hb_guess(ru_df_hb *h, const double *x_op, ru_pole dom, double *u);

/* Scales the oscillating part of u to a new amplitude (continuation predictor). */
void ru_df_hb_rescale(ru_df_hb *h, double *u, double amp_new_v);

/* The smallest amplitude a handle solved (its linear limit, V). */
struct ru_df;
double ru_df_min_amplitude(const struct ru_df *d);

#endif
