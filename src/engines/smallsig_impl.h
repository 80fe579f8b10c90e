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

/* Name of state k for messages: the node or "i(L1)". */
const char *ru_ss_state_label(const ru_system *s, int k);

/* As ru_oppoint_solve; force_stepping = 1 skips plain Newton and goes straight to
 * source stepping (0 -> 1), so callers and tests can use that path on purpose. */
ru_status ru_oppoint_solve_ex(const ru_system *s, double *x, int use_guess,
                              int force_stepping, ru_oppoint_stats *stats,
                              ru_error *err);

#endif
