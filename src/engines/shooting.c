/* shooting.c: the periodic steady state by shooting Newton for autonomous
 * oscillators, with the period as an unknown and a phase condition (see
 * ringup/steady.h for the equations), its start (a given state, the describing
 * function's balance, or a transient), continuation from transients of growing
 * length when Newton fails, the guard against the trivial DC solution, the Floquet
 * multipliers and the accuracy estimate of the period.
 *
 * Newton works in scaled unknowns: state i in units of its typical size scale_i,
 * the period as a fraction of the current one, so the matrix is dimensionless. The
 * integration tolerance of an iteration follows the residual (1 % of it, between
 * RU_SS_RTOL_LOOSE and the final rtol): far from the cycle the integrations are
 * cheap, and the last iterations, whose monodromy matrix gives the Floquet
 * multipliers, run at the final tolerance. */

#include "engines/floquet.h"
#include "engines/pss_int.h"
#include "engines/steady_impl.h"
#include "ringup/descfn.h"
#include "ringup/smallsig.h"

#include <lapacke.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#define RU_SS_RTOL 1e-10        /* default final tolerance */
#define RU_SS_RTOL_LOOSE 1e-6   /* loosest tolerance of a Newton iteration */
#define RU_SS_NEWTON_MAX 40
#define RU_SS_GRID 1024
#define RU_SS_WARMUP 3.0        /* periods integrated before the first Newton */
#define RU_SS_TRANSIENT_MAX 3000.0
#define RU_SS_CONV 50.0         /* converged: residual below this many final rtols */
#define RU_SS_TRAP 1e-2         /* fraction of the start's distance from the operating
                                   point that means Newton fell onto it */
#define RU_SS_DEAD 1e-6         /* a transient that decays to this fraction: no tone */
#define RU_SS_NEWTON_ROUND 15   /* Newton iterations before a longer transient */

void ru_steady_opts_default(ru_steady_opts *o)
{
    memset(o, 0, sizeof *o);
    o->probe_pos = 1;
    o->rtol = RU_SS_RTOL;
    o->max_newton = RU_SS_NEWTON_MAX;
    o->grid = RU_SS_GRID;
    o->max_transient_periods = RU_SS_TRANSIENT_MAX;
}

void ru_steady_destroy(ru_steady *st)
{
    if (!st)
        return;
    free(st->x0);
    free(st->phi);
    free(st->scale);
    free(st->probe_g);
    free(st->mult);
    free(st->grid_x);
    free(st->grid_probe);
    free(st);
}

void ru_steady_get(const ru_steady *st, ru_steady_view *v)
{
    *v = st->v;
}

static double cpu_now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_THREAD_CPUTIME_ID, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

static ru_steady *steady_alloc(size_t n, size_t ngrid)
{
    ru_steady *st = calloc(1, sizeof *st);
    if (!st)
        return NULL;
    st->n = n;
    st->x0 = calloc(n, sizeof *st->x0);
    st->phi = calloc(n * n, sizeof *st->phi);
    st->scale = calloc(n, sizeof *st->scale);
    st->probe_g = calloc(n, sizeof *st->probe_g);
    st->mult = calloc(n, sizeof *st->mult);
    st->grid_x = calloc(ngrid * n, sizeof *st->grid_x);
    st->grid_probe = calloc(ngrid, sizeof *st->grid_probe);
    if (!st->x0 || !st->phi || !st->scale || !st->probe_g || !st->mult || !st->grid_x ||
        !st->grid_probe) {
        ru_steady_destroy(st);
        return NULL;
    }
    st->v.n = n;
    st->v.ngrid = ngrid;
    return st;
}

/* A periodic source makes the circuit driven, not autonomous. */
static ru_status check_autonomous(const ru_system *s, ru_error *err)
{
    const ru_circuit *c = ru_system_circuit(s);
    for (size_t i = 0; i < ru_system_size(s); i++) /* the shooting integrates the ODE */
        if (ru_system_state_kind(s, i) != RU_STATE_DIFFERENTIAL)
            return ru_error_set(err, RU_EINPUT, ru_circuit_file(c), 0, 0,
                                "node %s has no capacitance to ground (stray 0): the periodic "
                                "steady state is found for an ODE only; give the node a "
                                "stray capacitance (`stray: {nodes: {%s: 1p}}`)",
                                ru_system_state_name(s, i), ru_system_state_name(s, i));
    for (size_t i = 0; i < ru_circuit_part_count(c); i++) {
        const ru_part *p = ru_circuit_part(c, i);
        if (!ru_part_is_source(p))
            continue;
        if (p->wave.kind == RU_WAVE_SINE ||
            (p->wave.kind == RU_WAVE_PULSE && p->wave.period_s > 0))
            return ru_error_set(err, RU_EINPUT, ru_circuit_file(c), p->line, p->col,
                                "part %s: a periodic %s drives the circuit; the periodic "
                                "steady state is found for a self-sustained "
                                "(autonomous) oscillator only",
                                p->name, p->wave.kind == RU_WAVE_SINE ? "sine" : "pulse");
    }
    return RU_OK;
}

static ru_status setup_probe(const ru_system *s, ru_steady *st, const ru_steady_opts *o,
                             ru_error *err)
{
    int kp = ru_system_node_state(s, o->probe_pos), kn = ru_system_node_state(s, o->probe_neg);
    if (kp < 0 && kn < 0)
        return ru_error_set(err, RU_EINPUT, ru_circuit_file(ru_system_circuit(s)), 0, 0,
                            "the probe is not a free node: it cannot show a tone");
    if (kp >= 0)
        st->probe_g[kp] += 1.0;
    if (kn >= 0)
        st->probe_g[kn] -= 1.0;
    return RU_OK;
}

/* ---- Newton ---- */

typedef struct newton {
    const ru_system *s;
    ru_steady *st;
    size_t n, m;            /* states, unknowns n + 1 */
    const double *x_op;     /* operating point or NULL */
    double *x, T;           /* iterate */
    double *xref, *nvec;    /* phase hyperplane: point, unit normal (scaled) */
    double *xT, *phi, *fT, *R, *J, *dz, *xtry, *Rtry, *phitry;
    lapack_int *piv;
    double res;             /* max |R| (scaled) at the iterate */
} newton;

static void newton_free(newton *nw)
{
    free(nw->x);
    free(nw->xref);
    free(nw->piv);
}

static ru_status newton_init(newton *nw, const ru_system *s, ru_steady *st,
                             const double *x_op)
{
    memset(nw, 0, sizeof *nw);
    nw->s = s;
    nw->st = st;
    nw->n = st->n;
    nw->m = st->n + 1;
    nw->x_op = x_op;
    size_t n = nw->n, m = nw->m;
    nw->x = malloc((7 * n + 3 * m + m * m + 2 * n * n) * sizeof(double));
    nw->xref = malloc(2 * n * sizeof(double));
    nw->piv = malloc(m * sizeof *nw->piv);
    if (!nw->x || !nw->xref || !nw->piv)
        return RU_ENOMEM;
    nw->nvec = nw->xref + n;
    nw->xT = nw->x + n;
    nw->fT = nw->xT + n;
    nw->xtry = nw->fT + n;
    nw->R = nw->xtry + n;
    nw->Rtry = nw->R + m;
    nw->dz = nw->Rtry + m;
    nw->J = nw->dz + m;
    nw->phi = nw->J + m * m;
    nw->phitry = nw->phi + n * n;
    return RU_OK;
}

/* Sets the phase hyperplane through x with normal f(x) (scaled, unit length). */
static ru_status newton_anchor(newton *nw, const double *x, ru_error *err)
{
    static const ru_eval_point ep = {.t_s = 0, .dc = 1, .source_scale = 1};
    const double *sc = nw->st->scale;
    memcpy(nw->xref, x, nw->n * sizeof *x);
    if (ru_system_eval(nw->s, &ep, x, nw->nvec, NULL) != RU_OK)
        return ru_error_set(err, RU_ENUMERIC, NULL, 0, 0,
                            "periodic steady state: the circuit equations are not finite "
                            "at the start state");
    double nn = 0.0;
    for (size_t i = 0; i < nw->n; i++) {
        nw->nvec[i] /= sc[i];
        nn += nw->nvec[i] * nw->nvec[i];
    }
    nn = sqrt(nn);
    if (!(nn > 0) || !isfinite(nn))
        return ru_error_set(err, RU_ENOCONVERGE, NULL, 0, 0,
                            "periodic steady state: the start state does not move (it is "
                            "an equilibrium)");
    for (size_t i = 0; i < nw->n; i++)
        nw->nvec[i] /= nn;
    return RU_OK;
}

/* Residual (and, with phi, the monodromy matrix) at state x, period T. */
static ru_status newton_eval(newton *nw, const double *x, double T, double rtol,
                             double *R, double *phi, double *res, ru_error *err)
{
    static const ru_eval_point ep = {.t_s = 0, .dc = 1, .source_scale = 1};
    const double *sc = nw->st->scale;
    ru_pint_req q = {.t_end_s = T,
                     .rtol = rtol,
                     .atol_rel = rtol * RU_STEADY_ATOL_OVER_RTOL,
                     .scale = sc,
                     .sens = phi != NULL};
    ru_pint_out out;
    ru_status rs = ru_pint_run(nw->s, &q, x, nw->xT, phi, &out, err);
    nw->st->v.steps += out.steps;
    if (rs != RU_OK)
        return rs;
    if (ru_system_eval(nw->s, &ep, nw->xT, nw->fT, NULL) != RU_OK)
        return ru_error_set(err, RU_ENUMERIC, NULL, 0, 0,
                            "periodic steady state: the equations are not finite");
    double r = 0.0, ph = 0.0;
    for (size_t i = 0; i < nw->n; i++) {
        R[i] = (nw->xT[i] - x[i]) / sc[i];
        r = fmax(r, fabs(R[i]));
        ph += nw->nvec[i] * (x[i] - nw->xref[i]) / sc[i];
    }
    R[nw->n] = ph;
    *res = fmax(r, fabs(ph));
    return RU_OK;
}

/* Newton's matrix at the iterate (from nw->phi, nw->fT), factored; dz = -J^-1 R. */
static ru_status newton_step(newton *nw, const double *R, double *dz)
{
    size_t n = nw->n, m = nw->m;
    const double *sc = nw->st->scale;
    double *J = nw->J;
    for (size_t i = 0; i < n; i++) {
        for (size_t j = 0; j < n; j++)
            J[i * m + j] = nw->phi[i * n + j] * sc[j] / sc[i] - (i == j);
        J[i * m + n] = nw->fT[i] * nw->T / sc[i];
        J[n * m + i] = nw->nvec[i];
    }
    J[n * m + n] = 0.0;
    for (size_t i = 0; i < m; i++)
        dz[i] = -R[i];
    lapack_int info = LAPACKE_dgesv(LAPACK_ROW_MAJOR, (lapack_int)m, 1, J, (lapack_int)m,
                                    nw->piv, dz, 1);
    return info == 0 ? RU_OK : RU_ENUMERIC;
}

/* Largest scaled distance of x from the operating point (INFINITY without one). */
static double op_distance(const newton *nw, const double *x)
{
    if (!nw->x_op)
        return INFINITY;
    double d = 0.0;
    for (size_t i = 0; i < nw->n; i++)
        d = fmax(d, fabs(x[i] - nw->x_op[i]) / nw->st->scale[i]);
    return d;
}

typedef enum { NW_CONVERGED, NW_FAILED, NW_TRAPPED } nw_result;

/* Iterates from nw->x, nw->T; *iters counts iterations (shared budget). */
static nw_result newton_solve(newton *nw, double rtol_final, int max_iters, int *iters,
                              ru_error *err)
{
    size_t n = nw->n;
    double d0 = op_distance(nw, nw->x), rtol = RU_SS_RTOL_LOOSE;
    int at_final = 0, stalls = 0;
    if (newton_eval(nw, nw->x, nw->T, rtol, nw->R, nw->phi, &nw->res, err) != RU_OK)
        return NW_FAILED;
    while (*iters < max_iters) {
        if (rtol <= rtol_final && nw->res < RU_SS_CONV * rtol_final)
            return NW_CONVERGED;
        double want = fmax(rtol_final, fmin(RU_SS_RTOL_LOOSE, 0.01 * nw->res));
        if (want < rtol) { /* tighten first, at the same iterate */
            rtol = want;
            if (newton_eval(nw, nw->x, nw->T, rtol, nw->R, nw->phi, &nw->res, err) != RU_OK)
                return NW_FAILED;
            continue;
        }
        (*iters)++;
        if (newton_step(nw, nw->R, nw->dz) != RU_OK) {
            ru_error_set(err, RU_ENOCONVERGE, NULL, 0, 0,
                         "periodic steady state: Newton's matrix is singular (the "
                         "multiplier 1 is not simple)");
            return NW_FAILED;
        }
        double big = 0.0;
        for (size_t i = 0; i < n; i++)
            big = fmax(big, fabs(nw->dz[i]));
        double lam = fmin(1.0, fmin(0.5 / fmax(big, 1e-300), 0.2 / fmax(fabs(nw->dz[n]), 1e-300)));
        double rtry = INFINITY, Ttry = nw->T;
        for (int half = 0; half < 5; half++, lam *= 0.5) {
            for (size_t i = 0; i < n; i++)
                nw->xtry[i] = nw->x[i] + lam * nw->dz[i] * nw->st->scale[i];
            Ttry = nw->T * (1.0 + lam * nw->dz[n]);
            if (newton_eval(nw, nw->xtry, Ttry, rtol, nw->Rtry, nw->phitry, &rtry, err) ==
                    RU_OK &&
                rtry < nw->res * (1.0 - 0.1 * lam))
                break;
        }
        if (!(rtry < INFINITY))
            return NW_FAILED;
        at_final = rtol <= rtol_final;
        stalls = (at_final && rtry > 0.5 * nw->res) ? stalls + 1 : 0;
        memcpy(nw->x, nw->xtry, n * sizeof *nw->x);
        memcpy(nw->R, nw->Rtry, nw->m * sizeof *nw->R);
        memcpy(nw->phi, nw->phitry, n * n * sizeof *nw->phi);
        nw->T = Ttry;
        nw->res = rtry;
        if (op_distance(nw, nw->x) < RU_SS_TRAP * d0)
            return NW_TRAPPED;
        if (stalls >= 3) /* at the integration's noise floor */
            return nw->res < 1e3 * RU_SS_CONV * rtol_final ? NW_CONVERGED : NW_FAILED;
    }
    ru_error_set(err, RU_ENOCONVERGE, NULL, 0, 0,
                 "periodic steady state: Newton did not converge in %d iterations "
                 "(residual %.3g of the states' scale)",
                 max_iters, nw->res);
    return NW_FAILED;
}

/* ---- start, continuation, results ---- */

/* Floquet multipliers, recovery, waveform, period accuracy into st. */
static ru_status finish(newton *nw, const ru_steady_opts *o, ru_error *err)
{
    ru_steady *st = nw->st;
    ru_steady_view *v = &st->v;
    size_t n = nw->n;
    memcpy(st->x0, nw->x, n * sizeof *st->x0);
    memcpy(st->phi, nw->phi, n * n * sizeof *st->phi);
    v->period_s = nw->T;
    v->frequency_hz = 1.0 / nw->T;
    v->transient_periods = st->transient_s / nw->T;
    ru_status rs = ru_floquet_multipliers(st->phi, st->scale, n, st->mult);
    if (rs != RU_OK)
        return ru_error_set(err, rs, NULL, 0, 0, "Floquet multipliers: LAPACK failed");
    v->phase_multiplier_error = hypot(st->mult[0].re - 1.0, st->mult[0].im);
    double tau;
    ru_floquet_recovery(st->mult, n, nw->T, &tau, &v->recovery_oscillates,
                        &v->recovery_ring_hz);
    v->recovery_time_s = tau;
    v->recovery_cycles = tau / nw->T;
    /* accuracy: the residual at rtol/10, one Newton correction with the final matrix */
    double res2 = 0.0;
    double *R2 = nw->Rtry, *dz = nw->dz, *dz2 = nw->Rtry + 0; /* reuse scratch */
    memcpy(nw->phitry, nw->R, nw->m * sizeof *nw->R);          /* R at rtol */
    if ((rs = newton_eval(nw, nw->x, nw->T, st->rtol * 0.1, R2, NULL, &res2, err)) != RU_OK)
        return rs;
    for (size_t i = 0; i < nw->m; i++)
        dz[i] = nw->phitry[i] - R2[i]; /* R(rtol) - R(rtol/10) */
    if (newton_step(nw, dz, dz2) == RU_OK)
        v->period_rel_error = fabs(dz2[n]);
    else
        v->period_rel_error = NAN;
    (void)o;
    return ru_steady_wave(nw->s, st, err);
}

/* Warm-up, Newton, and continuation from ever longer transients. */
static ru_status solve(const ru_system *s, const ru_steady_opts *o, const double *x_op,
                       newton *nw, int kind, ru_error *err)
{
    ru_steady *st = nw->st;
    static const double more[] = {20.0, 100.0, 400.0, 1500.0, 6000.0};
    double *xbase = nw->xtry, Tbase = nw->T, swing = NAN, drift = INFINITY;
    memcpy(xbase, nw->x, st->n * sizeof *xbase);
    double cap = o->max_transient_periods > 0 ? o->max_transient_periods
                                               : RU_SS_TRANSIENT_MAX;
    int iters = 0, max_iters = o->max_newton > 0 ? o->max_newton : RU_SS_NEWTON_MAX;
    int trapped = 0;
    double d_start = op_distance(nw, xbase);
    ru_error last;
    ru_error_clear(&last);
    for (size_t a = kind == 2 ? 1 : 0; a <= sizeof more / sizeof more[0]; a++) {
        double per = a == 0 ? RU_SS_WARMUP : fmin(more[a - 1], cap - st->transient_s / Tbase);
        if (a > 0 && per <= 0)
            break;
        ru_status rs = ru_steady_track(s, st, xbase, &Tbase, per, &swing, &drift, err);
        if (rs != RU_OK)
            return rs;
        if (x_op && op_distance(nw, xbase) < RU_SS_DEAD * d_start) {
            snprintf(st->note, sizeof st->note,
                     "the tone dies out in a transient of %.4g s: no self-sustained "
                     "oscillation",
                     st->transient_s);
            return RU_OK;
        }
        if ((kind == 2 || a > 0) && drift > 0.01 && a < sizeof more / sizeof more[0])
            continue; /* still growing or dying: Newton would start far from a cycle */
        memcpy(nw->x, xbase, st->n * sizeof *nw->x);
        nw->T = Tbase;
        if ((rs = newton_anchor(nw, nw->x, err)) != RU_OK)
            return rs;
        int cap_iters = iters + RU_SS_NEWTON_ROUND < max_iters ? iters + RU_SS_NEWTON_ROUND
                                                               : max_iters;
        nw_result r = newton_solve(nw, st->rtol, cap_iters, &iters, &last);
        st->v.newton_iterations = iters;
        if (r == NW_CONVERGED) {
            st->v.found = 1;
            return finish(nw, o, err);
        }
        trapped |= r == NW_TRAPPED;
        if (iters >= max_iters)
            break;
    }
    if (trapped)
        return ru_error_set(err, RU_ENOCONVERGE, NULL, 0, 0,
                            "periodic steady state: Newton fell onto the DC operating point "
                            "(the trivial periodic solution) and continuation did not "
                            "lead to a limit cycle");
    if (last.code != RU_OK)
        return ru_error_set(err, RU_ENOCONVERGE, NULL, 0, 0, "%s (after %.4g s of "
                            "transient)", last.msg, st->transient_s);
    return ru_error_set(err, RU_ENOCONVERGE, NULL, 0, 0,
                        "periodic steady state: no convergence after %.4g s of "
                        "transient and %d Newton iterations",
                        st->transient_s, iters);
}

ru_status ru_steady_solve(const ru_system *s, const double *x_op, const ru_steady_opts *o,
                          ru_steady **out, ru_error *err)
{
    *out = NULL;
    double cpu0 = cpu_now();
    size_t n = ru_system_size(s);
    size_t ng = o->grid ? o->grid : RU_SS_GRID;
    ru_status rs = check_autonomous(s, err);
    if (rs != RU_OK)
        return rs;
    if (n < 2)
        return ru_error_set(err, RU_EINPUT, ru_circuit_file(ru_system_circuit(s)), 0, 0,
                            "the circuit has %zu state%s: a tone needs at least two", n,
                            n == 1 ? "" : "s");
    if (ng < 64 || ng > (1u << 20) || (o->x_start && !(o->period_start_s > 0)))
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0,
                            "periodic steady state: bad options (grid %zu, start period "
                            "%g s)", ng, o->period_start_s);
    ru_steady *st = steady_alloc(n, ng);
    newton nw;
    memset(&nw, 0, sizeof nw);
    if (!st || newton_init(&nw, s, st, x_op) != RU_OK) {
        ru_steady_destroy(st);
        newton_free(&nw);
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "out of memory");
    }
    st->rtol = o->rtol > 0 ? o->rtol : RU_SS_RTOL;
    st->v.note = st->note;
    st->v.start = "";
    ru_system_state_scale(s, st->scale);
    for (size_t i = 0; i < n; i++)
        if (!(st->scale[i] > 0) || !isfinite(st->scale[i]))
            st->scale[i] = 1.0;
    rs = setup_probe(s, st, o, err);
    if (rs == RU_OK) {
        double z = 0.0;
        for (size_t i = 0; i < n; i++)
            z += st->probe_g[i] * (x_op ? x_op[i] : 0.0);
        st->probe_offset = ru_system_node_voltage_dc(s, o->probe_pos, x_op ? x_op : st->x0) -
                           ru_system_node_voltage_dc(s, o->probe_neg, x_op ? x_op : st->x0) -
                           z;
        int kind = ru_steady_start(s, o, x_op, st, nw.x, &nw.T);
        if (kind == 0)
            snprintf(st->note, sizeof st->note,
                     "no self-sustained tone: the operating point is stable (every pole "
                     "left of the jw axis) and the describing function finds no amplitude");
        else
            rs = solve(s, o, x_op, &nw, kind, err);
    }
    newton_free(&nw);
    st->v.cpu_s = cpu_now() - cpu0;
    st->v.x0 = st->x0;
    st->v.monodromy = st->phi;
    st->v.multipliers = st->mult;
    st->v.grid_x = st->grid_x;
    st->v.grid_probe = st->grid_probe;
    if (rs != RU_OK) {
        ru_steady_destroy(st);
        return rs;
    }
    *out = st;
    return RU_OK;
}
