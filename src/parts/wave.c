/* wave.c: source waveforms: value, slope, final value, jumps, breakpoints; and
 * their keys, checks and listing text (the supply's and the current source's).
 *
 * Pulse timing: the n-th pulse (n = 0, 1, ... ; only n = 0 when period_s is 0)
 * starts at at_s + n*period_s; within it the rising edge takes [0, edge), the top
 * [edge, width - edge), the falling edge [width - edge, width), then v0 until the
 * next pulse. Edge times are always computed by pulse_time() so that breakpoints
 * and jump tests see the same doubles. */
#include "parts/wave.h"

#include "ringup/format.h"

#include <math.h>
#include <stdio.h>

#define RU_PI 3.14159265358979323846

/* Relative time tolerance for "an edge falls on t". */
#define WAVE_TTOL 1e-12

static double pulse_time(const ru_wave *w, double k, double off)
{
    return w->at_s + k * w->period_s + off;
}

/* Time since the start of the current pulse (t >= at_s), robust to rounding at
 * the period boundary. */
static double pulse_tau(const ru_wave *w, double t)
{
    if (w->period_s <= 0)
        return t - w->at_s;
    double k = floor((t - w->at_s) / w->period_s);
    double tau = t - pulse_time(w, k, 0.0);
    if (t >= pulse_time(w, k + 1.0, 0.0))
        tau = t - pulse_time(w, k + 1.0, 0.0);
    return tau < 0 ? 0.0 : tau;
}

static double pulse_value(const ru_wave *w, double t, double *slope)
{
    *slope = 0.0;
    if (t < w->at_s)
        return w->v0;
    double tau = pulse_tau(w, t), e = w->edge_s, wd = w->width_s;
    if (tau < e) {
        *slope = (w->v1 - w->v0) / e;
        return w->v0 + (w->v1 - w->v0) * tau / e;
    }
    if (tau < wd - e)
        return w->v1;
    if (tau < wd) {
        *slope = (w->v0 - w->v1) / e;
        return w->v1 + (w->v0 - w->v1) * (tau - (wd - e)) / e;
    }
    return w->v0;
}

static double wave_eval(const ru_wave *w, double t, double *slope)
{
    *slope = 0.0;
    if (t < 0)
        return 0.0;
    switch (w->kind) {
    case RU_WAVE_DC:
        if (w->rise_s > 0 && t < w->rise_s) {
            *slope = w->value / w->rise_s;
            return w->value * t / w->rise_s;
        }
        return w->value;
    case RU_WAVE_STEP:
        if (t < w->at_s)
            return w->v0;
        if (t < w->at_s + w->edge_s) {
            *slope = (w->v1 - w->v0) / w->edge_s;
            return w->v0 + (w->v1 - w->v0) * (t - w->at_s) / w->edge_s;
        }
        return w->v1;
    case RU_WAVE_SINE: {
        if (t < w->at_s)
            return w->offset;
        double om = 2.0 * RU_PI * w->freq_hz;
        double ph = om * (t - w->at_s) + w->phase_deg * RU_PI / 180.0;
        *slope = w->amplitude * om * cos(ph);
        return w->offset + w->amplitude * sin(ph);
    }
    case RU_WAVE_PULSE:
        return pulse_value(w, t, slope);
    default:
        return 0.0;
    }
}

double ru_wave_value(const ru_wave *w, double t_s)
{
    double d;
    return wave_eval(w, t_s, &d);
}

double ru_wave_slope(const ru_wave *w, double t_s)
{
    double d;
    wave_eval(w, t_s, &d);
    return d;
}

double ru_wave_final(const ru_wave *w)
{
    switch (w->kind) {
    case RU_WAVE_DC: return w->value;
    case RU_WAVE_STEP: return w->v1;
    case RU_WAVE_SINE: return w->offset;
    case RU_WAVE_PULSE: return w->v0;
    default: return 0.0;
    }
}

double ru_wave_peak(const ru_wave *w)
{
    switch (w->kind) {
    case RU_WAVE_DC: return fabs(w->value);
    case RU_WAVE_SINE: return fabs(w->offset) + fabs(w->amplitude);
    case RU_WAVE_STEP:
    case RU_WAVE_PULSE: return fmax(fabs(w->v0), fabs(w->v1));
    default: return 0.0;
    }
}

static int near_time(double t, double edge)
{
    return fabs(t - edge) <= WAVE_TTOL * fmax(fabs(t), fabs(edge));
}

static double pulse_jump(const ru_wave *w, double t)
{
    if (w->edge_s > 0 || t < w->at_s * (1.0 - WAVE_TTOL))
        return 0.0;
    double k = 0.0;
    if (w->period_s > 0)
        k = floor((t - w->at_s) / w->period_s + 0.5);
    if (near_time(t, pulse_time(w, k, 0.0)))
        return w->v1 - w->v0;
    if (w->period_s > 0)
        k = floor((t - w->at_s - w->width_s) / w->period_s + 0.5);
    if (k >= 0 && near_time(t, pulse_time(w, k, w->width_s)))
        return w->v0 - w->v1;
    return 0.0;
}

double ru_wave_jump(const ru_wave *w, double t_s)
{
    if (!(t_s > 0))
        return 0.0;
    switch (w->kind) {
    case RU_WAVE_STEP:
        if (w->edge_s == 0 && near_time(t_s, w->at_s))
            return w->v1 - w->v0;
        return 0.0;
    case RU_WAVE_SINE:
        if (near_time(t_s, w->at_s))
            return w->amplitude * sin(w->phase_deg * RU_PI / 180.0);
        return 0.0;
    case RU_WAVE_PULSE:
        return pulse_jump(w, t_s);
    default:
        return 0.0;
    }
}

/* Smallest of the candidates after t. */
static double first_after(double t, const double *cand, int n)
{
    double best = INFINITY;
    for (int i = 0; i < n; i++)
        if (cand[i] > t && cand[i] < best)
            best = cand[i];
    return best;
}

static double pulse_next(const ru_wave *w, double t)
{
    double off[4] = {0.0, w->edge_s, w->width_s - w->edge_s, w->width_s};
    double k0 = 0.0;
    if (w->period_s > 0 && t > w->at_s)
        k0 = floor((t - w->at_s) / w->period_s);
    double cand[8];
    int n = 0;
    for (int j = 0; j < 4; j++)
        cand[n++] = pulse_time(w, k0, off[j]);
    if (w->period_s > 0)
        for (int j = 0; j < 4; j++)
            cand[n++] = pulse_time(w, k0 + 1.0, off[j]);
    return first_after(t, cand, n);
}

double ru_wave_next_breakpoint(const ru_wave *w, double t_s)
{
    switch (w->kind) {
    case RU_WAVE_DC: {
        double c[1] = {w->rise_s};
        return first_after(t_s, c, w->rise_s > 0 ? 1 : 0);
    }
    case RU_WAVE_STEP: {
        double c[2] = {w->at_s, w->at_s + w->edge_s};
        return first_after(t_s, c, 2);
    }
    case RU_WAVE_SINE: {
        double c[1] = {w->at_s};
        return first_after(t_s, c, 1);
    }
    case RU_WAVE_PULSE:
        return pulse_next(w, t_s);
    default:
        return INFINITY;
    }
}

double ru_wave_constant_from(const ru_wave *w)
{
    switch (w->kind) {
    case RU_WAVE_DC: return w->rise_s > 0 ? w->rise_s : 0.0;
    case RU_WAVE_STEP: return w->at_s + w->edge_s;
    case RU_WAVE_SINE: return w->amplitude == 0 ? 0.0 : INFINITY;
    case RU_WAVE_PULSE:
        if (w->v0 == w->v1)
            return 0.0;
        return w->period_s > 0 ? INFINITY : w->at_s + w->width_s;
    default: return INFINITY;
    }
}

void ru_wave_eval(const ru_wave *w, double t_s, int dc, double scale, double *v,
                  double *dvdt)
{
    if (dc == 1) {
        *v = scale * ru_wave_final(w);
        *dvdt = 0.0;
        return;
    }
    *v = scale * ru_wave_value(w, t_s);
    *dvdt = dc ? 0.0 : scale * ru_wave_slope(w, t_s); /* 2: frozen at t */
}

/* ---- keys, checks and listing ----------------------------------------------- */

#define W(f) offsetof(ru_part, wave.f)
static const ru_keyrec wave_dc[] = {{"value", "sig", W(value), 1, 0.0},
                                    {"rise", "s", W(rise_s), 0, 0.0},
                                    {NULL, NULL, 0, 0, 0.0}};
static const ru_keyrec wave_step[] = {{"from", "sig", W(v0), 0, 0.0},
                                      {"to", "sig", W(v1), 1, 0.0},
                                      {"at", "s", W(at_s), 0, 0.0},
                                      {"edge", "s", W(edge_s), 0, 0.0},
                                      {NULL, NULL, 0, 0, 0.0}};
static const ru_keyrec wave_sine[] = {{"offset", "sig", W(offset), 0, 0.0},
                                      {"amplitude", "sig", W(amplitude), 1, 0.0},
                                      {"freq", "Hz", W(freq_hz), 1, 0.0},
                                      {"phase", NULL, W(phase_deg), 0, 0.0},
                                      {"at", "s", W(at_s), 0, 0.0},
                                      {NULL, NULL, 0, 0, 0.0}};
static const ru_keyrec wave_pulse[] = {{"from", "sig", W(v0), 0, 0.0},
                                       {"to", "sig", W(v1), 1, 0.0},
                                       {"at", "s", W(at_s), 0, 0.0},
                                       {"width", "s", W(width_s), 1, 0.0},
                                       {"period", "s", W(period_s), 0, 0.0},
                                       {"edge", "s", W(edge_s), 0, 0.0},
                                       {NULL, NULL, 0, 0, 0.0}};
#undef W
static const ru_variant wave_variants[RU_WAVE_KINDS] = {
    {"dc", wave_dc, NULL}, {"step", wave_step, NULL},
    {"sine", wave_sine, NULL}, {"pulse", wave_pulse, NULL}};

const ru_variant *ru_wave_variant(int i)
{
    return i >= 0 && i < RU_WAVE_KINDS ? &wave_variants[i] : NULL;
}

int ru_wave_variant_of(const ru_part *p) { return (int)p->wave.kind; }

void ru_wave_set_variant(ru_part *p, int i) { p->wave.kind = (ru_wave_kind)i; }

ru_status ru_wave_check(const ru_part *p, const ru_part_env *env, ru_error *err)
{
    const ru_wave *w = &p->wave;
    double all[] = {w->value, w->rise_s, w->v0, w->v1, w->at_s, w->edge_s,
                    w->width_s, w->period_s, w->offset, w->amplitude, w->freq_hz,
                    w->phase_deg};
    if (!ru_part_finite(all, (int)(sizeof all / sizeof all[0])))
        return ru_part_fail(env, p, err, "waveform values must be finite");
    if (w->rise_s < 0)
        return ru_part_bad(env, p, err, "rise must not be negative", w->rise_s);
    if (w->at_s < 0)
        return ru_part_bad(env, p, err, "start time must not be negative", w->at_s);
    if (w->edge_s < 0)
        return ru_part_bad(env, p, err, "edge time must not be negative", w->edge_s);
    if (w->kind == RU_WAVE_SINE && w->freq_hz <= 0)
        return ru_part_bad(env, p, err, "sine frequency must be positive", w->freq_hz);
    if (w->kind == RU_WAVE_PULSE) {
        if (w->width_s <= 0)
            return ru_part_bad(env, p, err, "pulse width must be positive", w->width_s);
        if (w->width_s < 2 * w->edge_s)
            return ru_part_bad(env, p, err, "pulse width must hold both edges", w->width_s);
        if (w->period_s < 0 || (w->period_s > 0 && w->period_s <= w->width_s))
            return ru_part_bad(env, p, err,
                               "pulse period must be 0 (one pulse) or longer than the width",
                               w->period_s);
    }
    return RU_OK;
}

void ru_wave_describe(const ru_part *p, const char *u, char *buf, size_t size)
{
    const ru_wave *w = &p->wave;
    if (w->kind == RU_WAVE_DC)
        ru_format_si(w->value, u, 4, buf, size);
    else if (w->kind == RU_WAVE_SINE)
        snprintf(buf, size, "sine %g %s at %g Hz", w->amplitude, u, w->freq_hz);
    else
        snprintf(buf, size, "%s %g -> %g %s", w->kind == RU_WAVE_STEP ? "step" : "pulse",
                 w->v0, w->v1, u);
}
