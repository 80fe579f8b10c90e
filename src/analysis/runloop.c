/* runloop.c: how long a run goes. A fixed `stop` runs to it in one chunk; `stop: auto`
 * (the default) runs in chunks, measuring and judging after each (ringup/verdict.h),
 * until the verdict is certain (a start settled over enough cycles, a decay or a
 * latch that longer running cannot change) or a cap is reached: a multiple of the
 * predicted start-up time, a number of cycles of the predicted tone, and CPU
 * seconds of the run's thread, all kept in the report.
 *
 * The loop drives any time-domain engine through ru_run_engine (the direct
 * transient here; another engine plugs in the same way). Every sink streams, so
 * memory does not grow with the number of chunks. */
#define _POSIX_C_SOURCE 200809L

#include "analysis/analysis_impl.h"

#include "ringup/format.h"

#include <math.h>
#include <stdio.h>
#include <string.h>
#include <time.h>

#define FIRST_MULT 1.5      /* first chunk: 1.5x the predicted start-up time */
#define DECAY_FIRST 10.0    /* with decaying poles: 10 decay times first ... */
#define DECAY_CAP 30.0      /* ... and 30 at most */
#define MIN_FIRST_PERIODS 50.0
#define MIN_CAP_PERIODS 200.0
#define GROW 1.5            /* each chunk takes the run 1.5x further ... */
#define GROW_PERIODS 20.0   /* ... and at least 20 periods */
#define BP_FIRST 1.2        /* the first chunk reaches past the power-on ramps */
#define BP_CAP 20.0         /* the cap is at least 20x their end */
#define UNKNOWN_CAP 100.0   /* no poles: up to 100x the file's stop time */
#define SLOW_FIRST 3.0      /* the first chunk spans 3 of the slowest time constants */
#define SLOW_CAP 30.0       /* the cap at least 30 (bias and thermal settling) */
#define SEED_GUESS 1e-6     /* start level guessed as 1e-6 of the tone when unknown */

static double thread_cpu_s(void)
{
    struct timespec ts;
    if (clock_gettime(CLOCK_THREAD_CPUTIME_ID, &ts) != 0)
        return 0.0;
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

/* The end of the power-on ramps and edges: the last of at most 8 breakpoints (a
 * pulse train has more: its edges are a drive, not power-on), 0 when none. */
static double ramps_end(const ru_system *sys)
{
    double bp[9];
    size_t n = ru_system_breakpoints(sys, 1e6, bp, 9);
    return n > 0 && n <= 8 ? bp[n - 1] : 0.0;
}

/* The predicted start-up time, or an estimate from the growth rate: from the thermal
 * level (else 1e-6 of the tone) to the describing function's amplitude (else 1 V). */
static double startup_basis(const ru_prediction *p)
{
    if (isfinite(p->startup_time_s) && p->startup_time_s > 0)
        return p->startup_time_s;
    if (!(p->have_poles && p->growth_rate_per_s > 0))
        return NAN;
    double amp = isfinite(p->settled_amplitude_v) ? p->settled_amplitude_v : 1.0;
    double a0 = isfinite(p->noise_amplitude_v) && p->noise_amplitude_v > 0
                    ? p->noise_amplitude_v
                    : SEED_GUESS * amp;
    return amp > a0 ? log(amp / a0) / p->growth_rate_per_s : NAN;
}

/* Raises *cap to v and says why when v is larger. */
static void cap_at_least(double *cap, double v, char *why, size_t size, const char *fmt,
                         double x)
{
    if (!(v > *cap))
        return;
    *cap = v;
    char t[40];
    ru_format_si(x, "s", 4, t, sizeof t);
    snprintf(why, size, fmt, t);
}

void ru_stop_plan(const ru_circuit *c, const ru_system *sys, const ru_run_request *rq,
                  ru_run_report *rep)
{
    const ru_run_opts *ro = ru_circuit_run_opts_const(c);
    const ru_prediction *p = &rep->pred;
    ru_stop_info *si = &rep->stop;
    memset(si, 0, sizeof *si);
    si->cap_basis_s = NAN;
    si->automatic = rq->stop_s > 0 ? 0 : rq->stop_auto ? 1 : ro->stop_auto;
    if (!si->automatic) {
        si->first_s = si->cap_s = rq->stop_s > 0 ? rq->stop_s : ro->stop_s;
        rep->stop_s = si->cap_s;
        return;
    }
    double period = p->have_poles && p->frequency_hz > 0 ? 1.0 / p->frequency_hz : NAN;
    double sig = p->have_poles ? p->growth_rate_per_s : NAN, tb = ramps_end(sys);
    double basis = startup_basis(p), first = 0, cap = 0;
    char *why = si->cap_why;
    size_t wn = sizeof si->cap_why;
    si->cap_basis_s = basis;
    if (isfinite(basis)) {
        first = FIRST_MULT * basis;
        cap_at_least(&cap, RU_AUTO_CAP_MULT * basis, why, wn,
                     isfinite(p->startup_time_s) ? "10x the predicted start-up time %s"
                                                 : "10x the start-up time the growth "
                                                   "rate gives from the noise, %s",
                     basis);
    } else if (sig < 0) {
        first = DECAY_FIRST / -sig;
        cap_at_least(&cap, DECAY_CAP / -sig, why, wn, "30 decay times of the poles, %s",
                     1 / -sig);
    } else {
        first = ro->stop_s;
        cap_at_least(&cap, UNKNOWN_CAP * ro->stop_s, why, wn,
                     "100x the file's stop time %s (nothing predicted)", ro->stop_s);
    }
    if (isfinite(period)) {
        first = fmax(first, MIN_FIRST_PERIODS * period);
        cap_at_least(&cap, MIN_CAP_PERIODS * period, why, wn, "200 periods of %s", period);
    }
    first = fmax(first, BP_FIRST * tb);
    cap_at_least(&cap, BP_CAP * tb, why, wn, "20x the end of the power-on ramps at %s", tb);
    if (isfinite(p->slowest_decay_per_s) && p->slowest_decay_per_s > 0) {
        first = fmax(first, SLOW_FIRST / p->slowest_decay_per_s);
        cap_at_least(&cap, SLOW_CAP / p->slowest_decay_per_s, why, wn,
                     "30 of the slowest time constant, %s", 1 / p->slowest_decay_per_s);
    }
    si->cap_cycles = rq->cap_cycles > 0     ? rq->cap_cycles
                     : rep->engine.envelope ? RU_AUTO_CAP_CYCLES_ENVELOPE
                                            : RU_AUTO_CAP_CYCLES;
    if (isfinite(period) && si->cap_cycles * period < cap) {
        cap = si->cap_cycles * period;
        snprintf(why, wn, "%.3g cycles", si->cap_cycles);
    } else if (!isfinite(period)) {
        si->cap_cycles = 0;
    }
    si->cap_cpu_s = rq->cap_cpu_s > 0 ? rq->cap_cpu_s : RU_AUTO_CAP_CPU_S;
    si->first_s = fmin(first, cap);
    si->cap_s = cap;
    rep->stop_s = cap;
}

ru_status ru_runloop(const ru_run_engine *e, ru_measure *m, const ru_judge_ctx *jc,
                     ru_run_report *rep, ru_error *err)
{
    ru_stop_info *si = &rep->stop;
    double cpu0 = thread_cpu_s(), t = si->first_s;
    double period = rep->pred.have_poles && rep->pred.frequency_hz > 0
                        ? 1.0 / rep->pred.frequency_hz : 0.0;
    ru_status st = RU_OK;
    for (;;) {
        if (jc->mark) { /* the state where this chunk's settled window begins */
            jc->mark->t_s = 0.9 * t;
            jc->mark->have = 0;
        }
        st = e->advance(e->self, t, err);
        si->chunks++;
        si->cpu_s = thread_cpu_s() - cpu0;
        if (st != RU_OK)
            break;
        if (!si->automatic) {
            snprintf(si->reason, sizeof si->reason, "the stop time");
            break;
        }
        if (e->done(e->self)) {
            snprintf(si->reason, sizeof si->reason, "reached the time cap (%.200s)",
                     si->cap_why);
            break;
        }
        ru_verdict_result v;
        if ((st = ru_measure_finish(m, &rep->meas)) != RU_OK)
            break;
        ru_judge(jc, rep, 0, &v);
        double now = e->time(e->self);
        if (v.certain) {
            snprintf(si->reason, sizeof si->reason, "%s%s is certain",
                     ru_verdict_name(v.verdict),
                     v.verdict == RU_VERDICT_STARTED || v.verdict == RU_VERDICT_DRIVEN
                         ? " and settled" : "");
            break;
        }
        if (si->cpu_s >= si->cap_cpu_s) {
            snprintf(si->reason, sizeof si->reason,
                     "reached the cap of %.3g s of CPU time", si->cap_cpu_s);
            break;
        }
        t = fmin(fmax(GROW * now, now + GROW_PERIODS * period), si->cap_s);
    }
    rep->stop_s = si->automatic ? e->time(e->self) : si->cap_s;
    return st;
}

/* ---- the direct transient as a run engine ----------------------------------------- */

static ru_status tr_advance(void *self, double t_s, ru_error *err)
{
    return ru_transient_advance(self, t_s, err);
}
static double tr_time(const void *self) { return ru_transient_time(self); }
static int tr_done(const void *self) { return ru_transient_done(self); }
static void tr_stats(const void *self, ru_solver_stats *st) { ru_transient_stats(self, st); }

void ru_run_engine_transient(ru_transient *tr, ru_run_engine *e)
{
    e->self = tr;
    e->advance = tr_advance;
    e->time = tr_time;
    e->done = tr_done;
    e->stats = tr_stats;
}
