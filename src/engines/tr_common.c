/* tr_common.c: option checks, the breakpoint list, time formatting, the choice of
 * integrator and its name, shared by the two integrators of the time-domain
 * engine (see transient_impl.h). */
#include "engines/transient_impl.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>

ru_status ru_tr_fail_numeric(double t, const char *why, const char *msg, char *flag_name,
                             const char *fallback, ru_error *err)
{
    char tb[48];
    ru_tr_fmt_time(t, tb, sizeof tb);
    const char *text = why ? why : msg && msg[0] ? msg : flag_name ? flag_name : fallback;
    ru_error_set(err, RU_ENUMERIC, NULL, 0, 0, "solver failed at t = %s: %s", tb, text);
    free(flag_name);
    return RU_ENUMERIC;
}

void ru_tr_fmt_time(double t, char *buf, size_t size)
{
    double a = fabs(t);
    if (a >= 1.0 || a == 0.0 || !isfinite(a))
        snprintf(buf, size, "%.6g s", t);
    else if (a >= 1e-3)
        snprintf(buf, size, "%.6g ms", t * 1e3);
    else if (a >= 1e-6)
        snprintf(buf, size, "%.6g us", t * 1e6);
    else
        snprintf(buf, size, "%.6g ns", t * 1e9);
}

ru_status ru_tr_check_opts(const ru_system *s, const ru_transient_opts *o,
                           const double *x0, ru_sample_fn fn, ru_error *err)
{
    if (!s || !o || !fn || (!x0 && ru_system_size(s) > 0))
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0,
                            "transient: missing system, options, state or sink");
    if (!(isfinite(o->stop_s) && o->stop_s > 0))
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0,
                            "transient: stop time must be finite and > 0 (got %g s)",
                            o->stop_s);
    if (!(isfinite(o->sample_s) && o->sample_s > 0 && o->stop_s / o->sample_s < 1e15))
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0,
                            "transient: sample spacing must be > 0 and at most 1e15 "
                            "samples per run (got %g s for stop %g s)",
                            o->sample_s, o->stop_s);
    if (!(isfinite(o->rtol) && o->rtol > 0 && o->rtol < 1) ||
        !(isfinite(o->atol_rel) && o->atol_rel > 0) || o->max_steps < 0 ||
        !(isfinite(o->max_step_s) && o->max_step_s >= 0))
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0,
                            "transient: tolerances must be in (0, 1) and max_steps "
                            ">= 0 (rtol %g, atol_rel %g, max_steps %ld)",
                            o->rtol, o->atol_rel, o->max_steps);
    for (size_t i = 0; i < ru_system_size(s); i++)
        if (!isfinite(x0[i]))
            return ru_error_set(err, RU_ERANGE, NULL, 0, 0,
                                "transient: initial state %s is not finite",
                                ru_system_state_name(s, i));
    return RU_OK;
}

ru_status ru_tr_breakpoints(const ru_system *s, double t_final, double eps_t,
                            double *local, size_t nlocal, double **bp, size_t *nbp,
                            ru_error *err)
{
    size_t cnt = ru_system_breakpoints(s, t_final, local, nlocal);
    double *b = local;
    if (cnt > nlocal) {
        b = malloc(cnt * sizeof *b);
        if (!b)
            return ru_error_set(err, RU_ENOMEM, NULL, 0, 0,
                                "transient: no memory for %zu breakpoints", cnt);
        cnt = ru_system_breakpoints(s, t_final, b, cnt);
    }
    size_t m = 0;
    for (size_t i = 0; i < cnt; i++) {
        double t = b[i];
        if (!isfinite(t) || t <= eps_t || t > t_final + eps_t)
            continue;
        if (m > 0 && t <= b[m - 1] + eps_t)
            continue;
        b[m++] = t;
    }
    *bp = b;
    *nbp = m;
    return RU_OK;
}

/* Which integrator runs (see transient.h). */
void ru_transient_plan(const ru_system *s, const ru_transient_opts *o,
                       ru_integrator *integrator, ru_linsol *linsol)
{
    if (o->integrator == RU_INTEGRATOR_CVODE || o->integrator == RU_INTEGRATOR_IDA)
        *integrator = o->integrator;
    else if (ru_system_algebraic_count(s) > 0 || ru_system_size(s) > RU_TR_CVODE_MAX)
        *integrator = RU_INTEGRATOR_IDA;
    else
        *integrator = RU_INTEGRATOR_CVODE;
    *linsol = RU_LINSOL_DENSE;
    if (*integrator == RU_INTEGRATOR_IDA &&
        (o->linsol == RU_LINSOL_KLU ||
         (o->linsol != RU_LINSOL_DENSE && ru_system_size(s) > RU_TR_DENSE_MAX)))
        *linsol = RU_LINSOL_KLU;
}

const char *ru_transient_engine_name(const ru_solver_stats *st)
{
    if (st->integrator == RU_INTEGRATOR_IDA)
        return st->linsol == RU_LINSOL_KLU ? "IDA, KLU sparse" : "IDA, dense";
    return st->stab_lim_det ? "CVODE, dense, stability limit" : "CVODE, dense";
}
