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
 * the eigenvalue found. RU_ENUMERIC when there is no complex pair. For a DAE the
 * pair is the reduced linearisation's (reduce.c): v carries the algebraic states
 * that follow from the differential ones, and u is the projector on the mode in
 * state space (u^H dx / u^H v is the mode's share of a change dx, whatever dx
 * does to the algebraic states, which follow). */
ru_status ru_mode_near(const ru_system *s, const double *x_op, ru_pole near,
                       ru_pole *lambda, double *v_re, double *v_im, double *u_re,
                       double *u_im);

/* The input projector of the mode whose left vector (in state space, as
 * ru_mode_near gives it) is u: w with w^H b the mode's rate u^H x' caused by a
 * forcing b added to the residual, M x' = A x + b; w = M^{-T} u for an ODE, and
 * for a DAE through the algebraic states that follow the forcing (reduce.c). */
ru_status ru_mode_input(const ru_system *s, const double *x_op, const double *u_re,
                        const double *u_im, double *w_re, double *w_im);

#endif
