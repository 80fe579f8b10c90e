/* smallsig_impl.h: private parts of the small-signal engine (oppoint.c, poles.c,
 * loopgain.c), plus two helpers for callers inside the project that the public
 * header does not offer (forced source stepping, response peak search).
 *
 * Invariants: every matrix here is n*n row-major with n = ru_system_size(s); the
 * linearisation is always taken with every source at its DC value (ep.dc = 1,
 * source_scale = 1), so poles, loop gain and response agree with each other. */
#ifndef RINGUP_SMALLSIG_IMPL_H
#define RINGUP_SMALLSIG_IMPL_H

#include "ringup/smallsig.h"

#include <stddef.h>

/* dr/dx at state x (DC evaluation) into dr and the mass matrix into M (either may
 * be NULL); both n*n row-major. */
ru_status ru_ss_linearize(const ru_system *s, const double *x, double *dr, double *M,
                          ru_error *err);

/* The linearisation of a DAE reduced to its differential variables (reduce.c):
 * J = M_dd^{-1} (G_dd + G_da K), y_a = K y_d (see reduce.c for G and S). */
typedef struct ru_reduced {
    size_t n, nd, na;   /* states, differential and algebraic variables */
    int *dvar;          /* n: the nd differential variables, then the na algebraic */
    double *J;          /* nd*nd row-major */
    double *K;          /* na*nd row-major */
    double *G, *M;      /* n*n row-major: T A S and M (kept for ru_ss_input) */
} ru_reduced;

/* At state x (DC evaluation); ru_ss_reduced_free releases it (also after a failure). */
ru_status ru_ss_reduce(const ru_system *s, const double *x, ru_reduced *r, ru_error *err);
void ru_ss_reduced_free(ru_reduced *r);

/* A reduced right vector vd (nd) as a state vector vx (n): y_a = K y_d, x = S y. */
void ru_ss_expand(const ru_system *s, const ru_reduced *r, const double *vd, double *vx);

/* A reduced left vector ud (nd) as the state-space vector ux (n) with
 * ux . dx = ud . y_d(dx) for any dx: it projects a state change on the mode. */
void ru_ss_left(const ru_system *s, const ru_reduced *r, const double *ud, double *ux);

/* The input projector of a reduced left vector ud (complex, nd entries as real
 * and imaginary parts): w (n) such that w^H b is the mode's rate ud^H y_d' caused
 * by a forcing b added to the residual rows (M x' = A x + b): with z = M_dd^{-T} ud,
 * w = T^T [z; -G_aa^{-T} G_da^T z] (y_a follows the forcing through KCL). For an
 * ODE this is M^{-T} u. RU_ENUMERIC when a block is singular. */
ru_status ru_ss_input(const ru_system *s, const ru_reduced *r, const double *ud_re,
                      const double *ud_im, double *w_re, double *w_im);

/* Name of state k for messages: the node or "i(L1)". */
const char *ru_ss_state_label(const ru_system *s, int k);

/* As ru_oppoint_solve; force_stepping = 1 skips plain Newton and goes straight to
 * source stepping (0 -> 1), so callers and tests can use that path on purpose. */
ru_status ru_oppoint_solve_ex(const ru_system *s, double *x, int use_guess,
                              int force_stepping, ru_oppoint_stats *stats,
                              ru_error *err);

#endif
