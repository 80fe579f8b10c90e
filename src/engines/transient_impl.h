/* transient_impl.h: what the two integrators of the time-domain engine share
 * (transient.c: CVODE and the public calls; dae.c: IDA): option checks, the
 * breakpoint list, time formatting for messages (tr_common.c), and the IDA run's
 * calls, which transient.c forwards to when IDA runs.
 *
 * Invariants: breakpoints are sorted, merged within eps_t and lie in
 * (eps_t, t_final + eps_t]. */
#ifndef RINGUP_TRANSIENT_IMPL_H
#define RINGUP_TRANSIENT_IMPL_H

#include "ringup/transient.h"

#define RU_TR_BP_LOCAL 64      /* breakpoints held without a heap list */
#define RU_TR_STALL_STEPS 1000 /* steps without progress in t before giving up */
#define RU_TR_MAX_ERR_FAILS 20 /* error-test failures allowed in one step */

/* Writes t with an SI prefix ("1.234 ms"). */
void ru_tr_fmt_time(double t, char *buf, size_t size);

/* RU_ENUMERIC with "solver failed at t = T: " and why, else the solver's own message
 * (msg), else its return flag's name (flag_name, freed here; NULL: fallback). */
ru_status ru_tr_fail_numeric(double t, const char *why, const char *msg, char *flag_name,
                             const char *fallback, ru_error *err);

/* RU_ERANGE with a message for missing or out-of-range options or state. */
ru_status ru_tr_check_opts(const ru_system *s, const ru_transient_opts *o,
                           const double *x0, ru_sample_fn fn, ru_error *err);

/* The breakpoints in (eps_t, t_final + eps_t] into local (nlocal entries) or, when
 * there are more, a heap list (*bp != local: the caller frees it). */
ru_status ru_tr_breakpoints(const ru_system *s, double t_final, double eps_t,
                            double *local, size_t nlocal, double **bp, size_t *nbp,
                            ru_error *err);

/* The IDA run (dae.c): the same contract as ru_transient_create and its calls. */
typedef struct ru_dae ru_dae;
ru_status ru_dae_create(const ru_system *s, const ru_transient_opts *o, const double *x0,
                        ru_sample_fn fn, void *user, ru_dae **out, ru_error *err);
void ru_dae_destroy(ru_dae *r);
ru_status ru_dae_advance(ru_dae *r, double t_until_s, ru_error *err);
double ru_dae_time(const ru_dae *r);
int ru_dae_done(const ru_dae *r);
void ru_dae_stats(const ru_dae *r, ru_solver_stats *stats);

#endif
