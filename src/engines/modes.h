/* modes.h: the dominant oscillation mode at an operating point (private): its
 * eigenvalue with right and left eigenvectors, shared by the start-up prediction
 * (kick size by modal projection) and the describing-function analysis (its
 * starting guess). */
#ifndef RU_MODES_H
#define RU_MODES_H

#include "ringup/smallsig.h"
#include "ringup/system.h"

/* The complex eigenpair of J = M^{-1} dr/dx at x_op closest to `near` (a pole with
 * im > 0). Right vector v = v_re + j v_im, left vector u = u_re + j u_im (u^H J =
 * lambda u^H); arrays of n entries, any of the u arrays may be NULL. *lambda gets
 * the eigenvalue found. RU_ENUMERIC when there is no complex pair. */
ru_status ru_mode_near(const ru_system *s, const double *x_op, ru_pole near,
                       ru_pole *lambda, double *v_re, double *v_im, double *u_re,
                       double *u_im);

#endif
