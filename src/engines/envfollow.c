/* envfollow.c: the envelope engine (see ringup/envfollow.h): the section, the head,
 * the phases of each advance (head cycles, envelope steps to the tail, the tail in
 * full), the public calls; the envelope steps are in envstep.c, the cycle
 * integrations in cycles.c.
 *
 * The envelope state is Y = (d, t): d = X - x_op for a section point X (n
 * entries, kept on the section by projection), t its time. The independent
 * variable is the cycle index k, from 0 at the head's last crossing.
 *
 * Invariants: one cycle integrator and one envelope CVODE object per run, no
 * global state; the envelope object exists only during the envelope phase; every
 * cycle the run integrates is counted in the stats. */
#define _POSIX_C_SOURCE 200809L

#include "ringup/envfollow.h"

#include "engines/envfollow_impl.h"
#include "engines/modes.h"

#include <cvode/cvode.h>
#include <nvector/nvector_serial.h>
#include <sundials/sundials_context.h>
#include <sunlinsol/sunlinsol_dense.h>
#include <sunmatrix/sunmatrix_dense.h>

#include <float.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>


void ru_envf_opts_for(ru_accuracy acc, ru_envf_opts *o)
{
    memset(o, 0, sizeof *o);
    o->stop_s = 10e-3;
    o->sample_s = 10e-6;
    switch (acc) {
    case RU_ACCURACY_DRAFT:
        o->growth_budget = 1e-2;
        o->rtol_cycle_max = 1e-6;
        o->rtol_env = 1e-4;
        break;
    case RU_ACCURACY_PRECISE:
        o->growth_budget = 1e-4;
        o->rtol_cycle_max = 1e-10;
        o->rtol_env = 1e-6;
        break;
    case RU_ACCURACY_NORMAL:
    default:
        o->growth_budget = 1e-3;
        o->rtol_cycle_max = 1e-8;
        o->rtol_env = 1e-5;
        break;
    }
    o->tail_cycles = 80;
    o->head_max_cycles = 200;
}

#define ENVF_DAMP_PER_RTOL 200.0 /* damping per cycle over rtol, with a margin */
#define ENVF_RTOL_FLOOR 1e-13     /* below this the damping stops falling */
#define ENVF_ENV_OVER_CYCLE 1e4   /* envelope tolerance at least this times the cycles' */

double ru_envf_rtol_cycle(const ru_envf_opts *o)
{
    double w = o->pole.im_rad_per_s, g = 0;
    if (w > 0 && isfinite(o->pole.re_per_s))
        g = 2 * 3.14159265358979323846 * fabs(o->pole.re_per_s) / w;
    double r = o->growth_budget * g / ENVF_DAMP_PER_RTOL;
    if (!(r > ENVF_RTOL_FLOOR))
        r = ENVF_RTOL_FLOOR;
    return fmin(r, o->rtol_cycle_max);
}

static double now_s(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

int ru_envf_applicable(const ru_system *s, const ru_envf_opts *o, char *why, size_t len)
{
    const char *r = NULL;
    if (ru_system_size(s) == 0)
        r = "the circuit has no states";
    else if (ru_system_algebraic_count(s) > 0)
        r = "it integrates the ODE form, and nodes without capacitance make the circuit "
            "a DAE (give them a stray capacitance, or use --engine direct)";
    else if (!isfinite(ru_system_autonomous_from(s)))
        r = "a source keeps changing (a sine, a repeating pulse) or the noise kick is on: "
            "cycles are not alike, so they cannot be skipped";
    else if (!o->x_op || !(o->pole.im_rad_per_s > 0))
        r = "there is no dominant complex pole pair to define the cycle";
    if (r && why && len)
        snprintf(why, len, "%s", r);
    return r == NULL;
}

/* ---- section -------------------------------------------------------------- */

/* q = -Im(u) of the dominant mode's left eigenvector, scaled to max |q_i s_i| = 1. */
static ru_status make_section(ru_envf *r, ru_error *err)
{
    size_t n = r->n;
    double *v = malloc(4 * n * sizeof *v);
    if (!v)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "envelope: out of memory");
    ru_pole lam;
    ru_status st = ru_mode_near(r->sys, r->x_op, r->o.pole, &lam, v, v + n, v + 2 * n,
                                v + 3 * n);
    if (st == RU_OK) {
        double m = 0;
        for (size_t i = 0; i < n; i++) {
            r->q[i] = -v[3 * n + i];
            m = fmax(m, fabs(r->q[i] * r->scale[i]));
        }
        r->qq = 0;
        for (size_t i = 0; i < n && m > 0; i++) {
            r->q[i] /= m;
            r->qq += r->q[i] * r->q[i];
        }
        if (!(m > 0 && r->qq > 0))
            st = RU_ENUMERIC;
    }
    free(v);
    if (st != RU_OK)
        return ru_error_set(err, RU_ENUMERIC, NULL, 0, 0,
                            "envelope: the dominant mode's eigenvectors were not found");
    return RU_OK;
}

/* ---- the head ---------------------------------------------------------------- */

/* max_i |a_i - b_i| / s_i */
static double sdist(const ru_envf *r, const double *a, const double *b)
{
    double m = 0;
    for (size_t i = 0; i < r->n; i++)
        m = fmax(m, fabs(a[i] - b[i]) / r->scale[i]);
    return m;
}

/* Whether the change from cycle to cycle (X_{k-2}, X_{k-1}, X_k in xa, xb, xc)
 * varies smoothly: the second difference small against the first. */
static int smooth(const ru_envf *r)
{
    double d1 = sdist(r, r->xb, r->xa), d2 = sdist(r, r->xc, r->xb), dd = 0;
    for (size_t i = 0; i < r->n; i++)
        dd = fmax(dd, fabs((r->xc[i] - r->xb[i]) - (r->xb[i] - r->xa[i])) / r->scale[i]);
    double amp = sdist(r, r->xc, r->x_op);
    return dd <= ENVF_SMOOTH * fmax(d1, d2) + r->o.rtol_env * amp;
}

/* Full integration from where the run stands until t_until (measured, sampled). */
static ru_status full_to(ru_envf *r, double t_until, ru_error *err)
{
    ru_status st = RU_OK;
    if (r->on_sec && (st = ru_cyc_start(r->cyc, r->t_now, r->x_now, 1, err)) != RU_OK)
        return st;
    ru_cyc_req rq = {.t_end_s = t_until, .measure = 1, .sample = ru_envf_on_sample,
                     .cycle = ru_envf_on_cycle, .user = r};
    r->kind = RU_ENVF_FULL;
    st = ru_cyc_advance(r->cyc, &rq, &r->t_now, r->x_now, err);
    r->on_sec = 0;
    return st;
}

/* Full integration to the next crossing, or t_until if that comes first;
 * *crossed = 1 at a crossing (the run then stands on the section). */
static ru_status next_crossing(ru_envf *r, double t_until, int *crossed, ru_error *err)
{
    ru_status st = RU_OK;
    if (r->on_sec && (st = ru_cyc_start(r->cyc, r->t_now, r->x_now, 1, err)) != RU_OK)
        return st;
    ru_cyc_req rq = {.crossings = 1, .t_end_s = t_until, .measure = 1,
                     .sample = ru_envf_on_sample, .cycle = ru_envf_on_cycle, .user = r};
    r->kind = RU_ENVF_FULL;
    st = ru_cyc_advance(r->cyc, &rq, &r->t_now, r->x_now, err);
    *crossed = st == RU_OK && r->t_now < t_until * (1 - 1e-12);
    r->on_sec = 0; /* the integrator stands at the crossing: it goes on from there */
    return st;
}

/* One head cycle: integrate to the next crossing, keep the last three crossing
 * states and decide whether cycles may be skipped from here. */
static ru_status head_step(ru_envf *r, double t_until, int *crossed, ru_error *err)
{
    ru_status st = next_crossing(r, t_until, crossed, err);
    if (st != RU_OK || !*crossed)
        return st;
    double t = r->t_now, *old = r->xa; /* rotate: xa <- xb <- xc <- new */
    r->xa = r->xb;
    r->xb = r->xc;
    r->xc = old;
    memcpy(r->xc, r->x_now, r->n * sizeof *r->xc);
    if (isfinite(r->head_tlast) && t - r->head_tlast > 0.5 * r->period &&
        t - r->head_tlast < 2 * r->period)
        r->period = t - r->head_tlast;
    r->head_tlast = t;
    ru_cyc_set_period(r->cyc, r->period);
    if (t > ru_system_autonomous_from(r->sys))
        r->head_after++;
    if ((r->head_after >= 3 && smooth(r)) || r->head_after > r->o.head_max_cycles)
        r->head_done = r->on_sec = 1;
    return RU_OK;
}

/* ---- the run ----------------------------------------------------------------- */

/* From a section point: envelope steps to the tail of this stretch, then the tail in
 * full to t_until. */
static ru_status skip_to(ru_envf *r, double t_until, ru_error *err)
{
    double t_tail = t_until - r->o.tail_cycles * r->period, t_end = r->t_now;
    ru_status st = ru_envf_skip(r, r->t_now, t_tail, &t_end, r->x_now, err);
    if (st != RU_OK)
        return st;
    r->t_now = t_end;
    r->on_sec = 1;
    return full_to(r, t_until, err);
}

ru_status ru_envf_advance(ru_envf *r, double t_until_s, ru_error *err)
{
    double w0 = now_s();
    ru_status st = RU_OK;
    t_until_s = fmin(t_until_s, r->o.stop_s);
    while (st == RU_OK && r->t_now < t_until_s * (1 - 1e-12)) {
        int crossed = 0;
        if (!r->head_done) {
            st = head_step(r, t_until_s, &crossed, err);
            continue;
        }
        if (!r->on_sec) { /* after a tail: reach the section again */
            if ((st = next_crossing(r, t_until_s, &crossed, err)) != RU_OK || !crossed)
                break;
            r->on_sec = 1;
        }
        double left = (t_until_s - r->t_now) / r->period;
        if (r->st.fell_back || left < r->o.tail_cycles + ENVF_MIN_SKIP)
            st = full_to(r, t_until_s, err);
        else
            st = skip_to(r, t_until_s, err);
    }
    r->wall_s += now_s() - w0;
    return st;
}

double ru_envf_time(const ru_envf *r) { return r->t_now; }

int ru_envf_done(const ru_envf *r) { return r->t_now >= r->o.stop_s * (1 - 1e-12); }

void ru_envf_get_stats(const ru_envf *r, ru_envf_stats *out)
{
    *out = r->st;
    ru_cyc_counts k;
    ru_cyc_get_counts(r->cyc, &k);
    out->solver.steps = k.steps;
    out->solver.rhs_evals = k.rhs_evals;
    out->solver.jac_evals = k.jac_evals;
    out->solver.err_fails = k.err_fails;
    out->solver.newton_fails = k.newton_fails;
    out->solver.samples = k.samples;
    out->solver.rtol = r->rtol_cycle;
    out->solver.t_reached_s = r->t_now;
    out->solver.wall_s = r->wall_s;
    out->cycles_integrated = k.crossings;
    if (!out->note[0] && !(out->cycles_spanned > 0))
        snprintf(out->note, sizeof out->note,
                 "no cycles skipped: the run was too short for envelope steps");
}

static ru_status check_opts(const ru_system *s, const ru_envf_opts *o, const double *x0,
                            ru_error *err)
{
    char why[200];
    if (!s || !o || !x0)
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0, "envelope: missing argument");
    if (!ru_envf_applicable(s, o, why, sizeof why))
        return ru_error_set(err, RU_EINPUT, NULL, 0, 0,
                            "the envelope engine cannot run this circuit: %s", why);
    if (!(isfinite(o->stop_s) && o->stop_s > 0 && isfinite(o->sample_s) &&
          o->sample_s > 0 && o->rtol_cycle_max > 0 && o->rtol_cycle_max < 1 &&
          o->growth_budget >= 0 && o->rtol_env > 0 && o->rtol_env < 1 &&
          o->tail_cycles >= 4 && o->head_max_cycles >= 3 && o->point_dt_s >= 0))
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0, "envelope: bad settings");
    for (size_t i = 0; i < ru_system_size(s); i++)
        if (!isfinite(x0[i]) || !isfinite(o->x_op[i]))
            return ru_error_set(err, RU_ERANGE, NULL, 0, 0,
                                "envelope: initial state or operating point not finite");
    return RU_OK;
}

static ru_status run_alloc(ru_envf *r, ru_error *err)
{
    size_t n = r->n;
    r->x_op = malloc(n * sizeof *r->x_op);
    r->q = malloc(n * sizeof *r->q);
    r->scale = malloc(n * sizeof *r->scale);
    r->xa = calloc(n, sizeof *r->xa);
    r->xb = calloc(n, sizeof *r->xb);
    r->xc = calloc(n, sizeof *r->xc);
    r->x_now = calloc(n, sizeof *r->x_now);
    if (!r->x_op || !r->q || !r->scale || !r->xa || !r->xb || !r->xc || !r->x_now)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "envelope: out of memory");
    memcpy(r->x_op, r->o.x_op, n * sizeof *r->x_op);
    r->o.x_op = r->x_op;
    ru_system_state_scale(r->sys, r->scale);
    for (size_t i = 0; i < n; i++)
        if (!(isfinite(r->scale[i]) && r->scale[i] > 0))
            r->scale[i] = 1.0;
    return RU_OK;
}

ru_status ru_envf_create(const ru_system *s, const ru_envf_opts *o, const double *x0,
                         const ru_envf_sink *sink, ru_envf **out, ru_error *err)
{
    *out = NULL;
    ru_status st = check_opts(s, o, x0, err);
    if (st != RU_OK)
        return st;
    ru_envf *r = calloc(1, sizeof *r);
    if (!r)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "envelope: out of memory");
    r->sys = s;
    r->o = *o;
    if (sink)
        r->sink = *sink;
    r->n = ru_system_size(s);
    r->st.t_skip_from_s = r->st.t_skip_to_s = NAN;
    r->period = 2 * 3.14159265358979323846 / o->pole.im_rad_per_s;
    r->rtol_cycle = ru_envf_rtol_cycle(o);
    /* The cycle map is known only to the cycle integrations' own error, which does
     * not vary smoothly with the section point (the step sequence changes): asking
     * the envelope steps for less than a few hundred times that makes them resolve
     * that noise, and they shrink to a few cycles. Measured on a 32.768 kHz crystal
     * around an inverter at normal (rtol_cycle 2.9e-9): the first 0.4 s with
     * rtol_env 1e-6 took 7 cycles a step and 18 s CPU, with 1e-5 96 cycles and 1.4 s
     * (the same envelope within 0.15 %); the whole start-up to settled needed more
     * than 120 s at 3e3 rtol_cycle and 16 s at 1e4 (2.9e-5). On a Q = 1e4 tank the
     * amplitude after 3000 cycles of growth moves by 9e-4 (3e-4 of the start-up). */
    r->o.rtol_env = fmax(r->o.rtol_env, ENVF_ENV_OVER_CYCLE * r->rtol_cycle);
    r->delta_rel = sqrt(r->rtol_cycle);
    r->head_tlast = NAN;
    if ((st = run_alloc(r, err)) == RU_OK && (st = make_section(r, err)) == RU_OK) {
        ru_cyc_cfg cc = {.sys = s, .rtol = r->rtol_cycle, .x_op = r->x_op, .q = r->q,
                         .period_s = r->period, .sample_s = o->sample_s,
                         .probe_pos = o->probe_pos, .probe_neg = o->probe_neg};
        if ((st = ru_cyc_create(&cc, &r->cyc, err)) == RU_OK)
            st = ru_cyc_start(r->cyc, 0.0, x0, 0, err);
    }
    if (st != RU_OK) {
        ru_envf_destroy(r);
        return st;
    }
    *out = r;
    return RU_OK;
}

void ru_envf_destroy(ru_envf *r)
{
    if (!r)
        return;
    ru_envf_env_free(r);
    ru_cyc_destroy(r->cyc);
    free(r->x_op);
    free(r->q);
    free(r->scale);
    free(r->xa);
    free(r->xb);
    free(r->xc);
    free(r->x_now);
    free(r);
}

ru_status ru_envf_run(const ru_system *s, const ru_envf_opts *o, const double *x0,
                      const ru_envf_sink *sink, ru_envf_stats *stats, ru_error *err)
{
    ru_envf *r = NULL;
    ru_status st = ru_envf_create(s, o, x0, sink, &r, err);
    if (st == RU_OK)
        st = ru_envf_advance(r, o->stop_s, err);
    if (stats && r)
        ru_envf_get_stats(r, stats);
    else if (stats)
        memset(stats, 0, sizeof *stats);
    ru_envf_destroy(r);
    return st;
}
