/* verdict.c: started / no-start / latched / undecided / driven, and whether that is
 * certain (ringup/verdict.h has the definition; README states it for users).
 *
 * The judgement reads the measurement's figures of the tone at the end of the run
 * (the last 10 %: mean envelope, drift, quarter spread, cycles, DC motion) and of its
 * history (lowest point before the window, peak, first cycle), against three levels:
 * the physical seed (thermal noise or kick), the solver's noise floor and the
 * probe's voltage scale. The predicted poles enter only as a time scale: a window
 * shorter than the dominant pair's decay time cannot tell a slow ring-down from a
 * held tone, and a run shorter than the predicted start-up cannot show a start, so
 * those cases are undecided rather than guessed. */
#include "ringup/verdict.h"

#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <string.h>

#define BAND 0.005        /* the measurement's settle band: drift beyond it moves */
#define DC_STILL 1e-3     /* DC still: moves <= 1e-3 of the probe's scale in the window */
#define LATCH_AWAY 0.05   /* latched: some state >= 5 % of its scale from the op */
#define EMERGE_PERIODS 3  /* emerged: the first cycle shows after 3 periods */
#define HELD_ABOVE 1.2    /* held: came down from >= 1.2x ... */
#define HELD_SLOWER 0.1   /* ... and the window's rate is < 1/10 of the descent's */
#define DRIVE_MATCH 0.01  /* a tone within 1 % of k f_drive or f_drive / k is driven */
#define DRIVE_ORDERS 10   /* k = 1..10 */
#define EXPECT_MULT 3.0   /* a start is overdue after 3x the predicted start-up */

const char *ru_verdict_name(ru_verdict v)
{
    static const char *const names[] = {"started", "no-start", "latched", "undecided",
                                        "driven"};
    return (unsigned)v <= RU_VERDICT_DRIVEN ? names[v] : "undecided";
}

void ru_verdict_input_default(ru_verdict_input *in)
{
    memset(in, 0, sizeof *in);
    in->growth_per_s = in->period_s = in->t_expect_s = in->slow_per_s = NAN;
    in->op_distance = in->state_motion = NAN;
    in->dc_scale_v = 1.0;
    in->final = 1;
}

typedef struct facts {
    double amp, drift, t_run;
    int tone;          /* enough cycles in the window to speak of a tone */
    int above_floor;   /* well above the solver's noise floor */
    int above_seed;    /* well above the physical start level */
    int decaying, growing, dc_still;
    int still;         /* the probe's DC and every state sit still (no tone case) */
    int lhp, rhp;      /* the poles' sign, when known */
    int window_long;   /* the window spans the poles' decay time (or they grow) */
    int overdue;       /* a predicted start is overdue (or no start is predicted) */
    int cycles_ok;     /* enough cycles in the window to be certain */
} facts;

static void gather(const ru_verdict_input *in, facts *f)
{
    const ru_measure_result *m = in->meas;
    memset(f, 0, sizeof *f);
    f->amp = m->settled_amplitude_v;
    f->drift = m->envelope_drift;
    f->t_run = m->t_last_s - m->t_first_s;
    f->tone = m->window_points >= 1 && isfinite(f->amp) && f->amp > 0;
    f->above_floor = f->tone && f->amp >= RU_VERDICT_FLOOR_RATIO * in->floor_v;
    f->above_seed = f->tone && (!(in->seed_v > 0) || f->amp >= RU_VERDICT_SEED_RATIO * in->seed_v);
    f->decaying = f->tone && f->drift < -BAND;
    f->growing = f->tone && f->drift > BAND;
    f->dc_still = !isfinite(m->dc_motion_v) || fabs(m->dc_motion_v) <= DC_STILL * in->dc_scale_v;
    f->still = f->dc_still && !(in->state_motion > DC_STILL);
    f->lhp = isfinite(in->growth_per_s) && in->growth_per_s < 0;
    f->rhp = isfinite(in->growth_per_s) && in->growth_per_s > 0;
    f->window_long = !f->lhp || m->window_s * fabs(in->growth_per_s) >= 1.0;
    f->overdue = !f->rhp || (in->final && isfinite(in->t_expect_s) &&
                             f->t_run >= EXPECT_MULT * in->t_expect_s);
    f->cycles_ok = m->window_points >= RU_VERDICT_CERTAIN_CYCLES &&
                   !(in->slow_per_s > 0 && m->window_s * in->slow_per_s < 1.0);
}

static int driven_at(const ru_verdict_input *in, double f_hz)
{
    if (!(isfinite(f_hz) && f_hz > 0))
        return 0;
    for (size_t i = 0; i < in->ndrive && i < RU_VERDICT_DRIVES; i++)
        for (int k = 1; k <= DRIVE_ORDERS; k++) {
            double d = in->drive_hz[i];
            if (fabs(f_hz / (k * d) - 1) <= DRIVE_MATCH || fabs(f_hz * k / d - 1) <= DRIVE_MATCH)
                return 1;
        }
    return 0;
}

static void set(ru_verdict_result *o, ru_verdict v, int certain, int tone,
                const char *fmt, ...)
#if defined(__GNUC__)
    __attribute__((format(printf, 5, 6)))
#endif
    ;

static void set(ru_verdict_result *o, ru_verdict v, int certain, int tone,
                const char *fmt, ...)
{
    o->verdict = v;
    o->certain = certain;
    o->tone_figures = tone;
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(o->note, sizeof o->note, fmt, ap);
    va_end(ap);
}

/* How the tone got where it is: grew from a lower point, emerged from below what the
 * probe shows, or came down onto a size it holds. 0 when none (it was there from its
 * first cycle). */
static const char *how_it_got_there(const ru_verdict_input *in, const facts *f)
{
    const ru_measure_result *m = in->meas;
    double period = isfinite(in->period_s) && in->period_s > 0 ? in->period_s
                    : isfinite(m->frequency_hz) && m->frequency_hz > 0 ? 1 / m->frequency_hz
                                                                       : NAN;
    if (isfinite(m->trough_v) && f->amp >= RU_VERDICT_GROWTH * m->trough_v)
        return "grew";
    if (isfinite(period) && m->first_cycle_t_s - m->t_first_s > EMERGE_PERIODS * period)
        return "emerged";
    double rate_w = fabs(f->drift) / m->window_s;
    if (m->settled && m->peak_envelope_v >= HELD_ABOVE * f->amp &&
        isfinite(m->decay_before_per_s) && m->decay_before_per_s < 0 &&
        rate_w <= HELD_SLOWER * fabs(m->decay_before_per_s))
        return "held";
    return NULL;
}

/* A tone well above the floor and the seed, not decaying. */
static void judge_tone(const ru_verdict_input *in, const facts *f, ru_verdict_result *o)
{
    const ru_measure_result *m = in->meas;
    const char *how = how_it_got_there(in, f);
    int certain_tone = m->settled && f->cycles_ok;
    if (!how && f->growing) {
        set(o, RU_VERDICT_UNDECIDED, 0, 1,
            "the tone (%.3g V) grows slowly at the end (%+.2g %% over the last 10 %%) "
            "and has not yet grown %.3gx: run longer",
            f->amp, 100 * f->drift, RU_VERDICT_GROWTH);
        return;
    }
    if (!how) {
        set(o, RU_VERDICT_NO_START, f->window_long && f->cycles_ok && f->dc_still, 1,
            "the tone kept the size it had at its first cycle (%.3g V) and never grew: "
            "a ring the start left in the circuit, not a start-up (its amplitude, "
            "frequency and THD are given)",
            f->amp);
        return;
    }
    if (!f->window_long) {
        set(o, RU_VERDICT_UNDECIDED, 0, 1,
            "the last 10 %% of the run (%.3g s) is shorter than the poles' decay time "
            "(%.3g s): a slow ring-down cannot be told from a held tone; run longer",
            m->window_s, 1 / fabs(in->growth_per_s));
        return;
    }
    const char *what = !strcmp(how, "grew") ? "grown from" : NULL;
    if (what)
        set(o, RU_VERDICT_STARTED, certain_tone, 1,
            "started: a self-sustained tone of %.4g V %s, %s %.3g V",
            f->amp, m->settled ? "held at the end" : "still growing at the end", what,
            m->trough_v);
    else if (!strcmp(how, "emerged"))
        set(o, RU_VERDICT_STARTED, certain_tone, 1,
            "started: a self-sustained tone of %.4g V %s, emerged from below what the "
            "probe shows (first cycle at %.3g s)",
            f->amp, m->settled ? "held at the end" : "still growing at the end",
            m->first_cycle_t_s);
    else
        set(o, RU_VERDICT_STARTED, certain_tone, 1,
            "started: a self-sustained tone of %.4g V held at the end after coming "
            "down from %.3g V (a limiter holds it; a ring-down would keep falling)",
            f->amp, m->peak_envelope_v);
}

/* A small tone, or none: no-start, latched or undecided. */
/* "the envelope decays 12 % over ..." for a slow decay; a fast one, whose change
 * over the window exceeds half its mean there, is said as a multiple, never as a
 * percentage above 100. */
static const char *decay_phrase(double drift, char *buf, size_t size)
{
    if (-drift <= 0.5)
        snprintf(buf, size, "the envelope decays %.3g %% over the last 10 %% of the run",
                 -100 * drift);
    else
        snprintf(buf, size, "the envelope decays fast: over the last 10 %% of the run "
                            "it falls by %.2gx its mean there", -drift);
    return buf;
}

static void judge_quiet(const ru_verdict_input *in, const facts *f, ru_verdict_result *o)
{
    const ru_measure_result *m = in->meas;
    char dp[160];
    if (!f->tone && isfinite(in->op_distance) && in->op_distance >= LATCH_AWAY &&
        f->still) {
        set(o, RU_VERDICT_LATCHED, 1, 0,
            "latched: no oscillation; the circuit sits still at a DC state %.3g of its "
            "scale away from its operating point (probe at %.4g V): it ran to a rail "
            "or another stable state",
            in->op_distance, m->dc_level_v);
        return;
    }
    if (!f->still) {
        if (f->dc_still)
            set(o, RU_VERDICT_UNDECIDED, 0, 0,
                "no sustained tone yet and the circuit's state still moves (%.3g of "
                "its scale over the last 10 %% of the run): run longer",
                in->state_motion);
        else
            set(o, RU_VERDICT_UNDECIDED, 0, 0,
                "no sustained tone yet and the DC level still moves (%.3g V over the "
                "last 10 %% of the run): the bias is still settling; run longer",
                m->dc_motion_v);
        return;
    }
    if (f->rhp && !f->overdue) {
        set(o, RU_VERDICT_UNDECIDED, 0, 0,
            "no sustained tone yet, but the poles say it grows (%.4g /s): run longer%s",
            in->growth_per_s, f->growing ? " (the envelope is rising)" : "");
        return;
    }
    if (f->tone && !f->above_floor && !f->lhp && !f->decaying) {
        set(o, RU_VERDICT_UNDECIDED, 0, 0,
            "the tone at the end (%.3g V) is within %gx of the solver's noise floor "
            "(%.3g V): too small to tell from numerical noise; use accuracy precise",
            f->amp, RU_VERDICT_FLOOR_RATIO, in->floor_v);
        return;
    }
    int certain = f->window_long && (!f->rhp || f->overdue);
    if (!f->tone)
        set(o, RU_VERDICT_NO_START, certain, 0,
            "no oscillation in the last 10 %% of the run%s",
            f->rhp ? ", although the poles predict growth" : "");
    else if (f->decaying) /* a visible decay needs no long window to be sure */
        set(o, RU_VERDICT_NO_START, !f->rhp || f->overdue, 0, "%s%s",
            decay_phrase(f->drift, dp, sizeof dp),
            f->rhp ? ", although the poles predict growth" : "");
    else
        set(o, RU_VERDICT_NO_START, certain, 0,
            "the tone at the end (%.3g V) stays at the level noise and the start give "
            "it (seed %.3g V, solver floor %.3g V)%s",
            f->amp, in->seed_v, in->floor_v,
            f->rhp ? ", although the poles predict growth" : "");
}

void ru_verdict_judge(const ru_verdict_input *in, ru_verdict_result *o)
{
    memset(o, 0, sizeof *o);
    const ru_measure_result *m = in->meas;
    facts f;
    gather(in, &f);
    o->settled = m->settled;
    if (f.tone && in->ndrive > 0 && driven_at(in, m->frequency_hz)) {
        set(o, RU_VERDICT_DRIVEN, m->settled && f.cycles_ok, 1,
            "driven: the tone (%.4g Hz) follows a driving waveform in the circuit, so "
            "it is not a start-up; its amplitude, frequency and THD are given",
            m->frequency_hz);
        return;
    }
    if (f.tone && in->seed_is_kick && !f.above_seed && !f.decaying && f.above_floor) {
        set(o, RU_VERDICT_UNDECIDED, m->settled && f.cycles_ok, 1,
            "the preset kick (%.3g V) is not small against the tone at the end (%.3g V): "
            "the run shows the tone is held, not that it starts; use a smaller kick or "
            "power-on",
            in->seed_v, f.amp);
        return;
    }
    if (f.tone && f.above_floor && f.above_seed && !f.decaying) {
        judge_tone(in, &f, o);
        return;
    }
    if (f.decaying && !f.dc_still) {
        set(o, RU_VERDICT_UNDECIDED, 0, 0,
            "the tone decays while the DC level still moves (%.3g V over the last 10 %% "
            "of the run): the bias is still settling; run longer",
            m->dc_motion_v);
        return;
    }
    if (f.decaying && f.rhp && !f.overdue) {
        char dp[160];
        set(o, RU_VERDICT_UNDECIDED, 0, 0,
            "%s although the poles say it grows (%.4g /s): run longer",
            decay_phrase(f.drift, dp, sizeof dp), in->growth_per_s);
        return;
    }
    judge_quiet(in, &f, o);
}

void ru_verdict_apply(const ru_verdict_result *v, ru_measure_result *m)
{
    m->started = v->verdict == RU_VERDICT_STARTED;
    m->settled = v->tone_figures && v->settled;
    if (!(m->started && m->settled)) {
        m->startup_time_s = NAN;
        m->settling_time_s = NAN;
    }
    if (!m->started) {
        m->growth_rate_per_s = m->growth_fit_t0_s = m->growth_fit_t1_s = NAN;
        m->growth_fit_rms = m->growth_fit_level_v = NAN;
        m->growth_fit_points = 0;
        snprintf(m->growth_note, RU_NOTE_MAX, "%s", v->note);
    }
    if (!v->tone_figures) {
        m->settled_amplitude_v = m->frequency_hz = m->thd_percent = NAN;
        m->fundamental_v = NAN;
        for (int k = 0; k < RU_HARMONICS - 1; k++)
            m->harmonics_dbc[k] = NAN;
        snprintf(m->thd_note, RU_NOTE_MAX, "%s", v->note);
        snprintf(m->settle_note, RU_NOTE_MAX, "%s", v->note);
    }
}
