/* envrun.c: the envelope engine in a run: which engine runs (ru_engine_choose), the
 * sinks of an envelope run (integrated stretches to the measurement, cycles
 * computed alone as envelope points, every sample to wave.csv, one row per computed
 * cycle to envelope.csv), the engine under the run loop, and the WAV made from the
 * envelope and the shape of the last integrated cycle.
 *
 * Invariants: the measurement sees samples only of stretches integrated in full,
 * and the points in time order between them; rows kept for the WAV grow with the
 * computed cycles only (a few thousand), never with the cycles skipped. */
#include "analysis/analysis_impl.h"

#include "engines/modes.h"
#include "engines/startlevel.h"
#include "ringup/envfollow.h"
#include "ringup/format.h"

#include <complex.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define PI 3.14159265358979323846
#define POINT_GROWTH 0.05  /* envelope points every 5 % of growth at the poles' rate */
#define SHAPE_POINTS 256   /* the WAV's cycle shape, points per period */

/* ---- the choice ---------------------------------------------------------------- */

/* Whether the envelope engine can follow this run; the reason in why when not. */
static int possible(const ru_circuit *c, const ru_system *s, const ru_run_report *rep,
                    const double *x_op, char *why, size_t len)
{
    const ru_prediction *p = &rep->pred;
    if (ru_circuit_run_opts_const(c)->kick == RU_KICK_NOISE) {
        snprintf(why, len, "the noise kick keeps every cycle different (use power-on or "
                           "a preset kick)");
        return 0;
    }
    if (!p->have_op || !p->have_poles) {
        snprintf(why, len, "it needs an operating point and a dominant pole pair");
        return 0;
    }
    ru_envf_opts o;
    ru_envf_opts_for(RU_ACCURACY_NORMAL, &o);
    o.x_op = x_op;
    o.pole = p->dominant;
    if (!ru_envf_applicable(s, &o, why, len))
        return 0;
    size_t n = ru_system_size(s);
    ru_pole *poles = malloc(n * sizeof *poles);
    int growing = 0;
    if (poles && ru_poles_compute(s, x_op, poles, NULL) == RU_OK)
        for (size_t i = 0; i < ru_poles_count(s); i++)
            growing += poles[i].im_rad_per_s > 0 && poles[i].re_per_s > 0;
    free(poles);
    if (growing > 1) {
        snprintf(why, len, "%d oscillation modes grow at the operating point; one Poincare "
                           "section follows only one", growing);
        return 0;
    }
    return 1;
}

/* Cycles of the predicted tone until start-up: the predicted start-up time, else the
 * growth from the noise level (1e-6 of the tone when unknown) to the settled size. */
static double cycles_to_start(const ru_prediction *p)
{
    if (!(p->have_poles && p->frequency_hz > 0 && p->growth_rate_per_s > 0))
        return NAN;
    if (isfinite(p->startup_time_s) && p->startup_time_s > 0)
        return p->startup_time_s * p->frequency_hz;
    double amp = isfinite(p->settled_amplitude_v) ? p->settled_amplitude_v : 1.0;
    double a0 = p->noise_amplitude_v > 0 ? p->noise_amplitude_v : 1e-6 * amp;
    return amp > a0 ? log(amp / a0) / p->growth_rate_per_s * p->frequency_hz : NAN;
}

ru_status ru_engine_choose(const ru_circuit *c, const ru_system *s,
                           const ru_run_request *rq, ru_run_report *rep,
                           const double *x_op, ru_error *err)
{
    memset(&rep->engine, 0, sizeof rep->engine);
    if (rq->engine == RU_ENGINE_DIRECT)
        return RU_OK;
    char why[RU_NOTE_MAX];
    int ok = possible(c, s, rep, x_op, why, sizeof why);
    double cyc = cycles_to_start(&rep->pred);
    if (rq->engine == RU_ENGINE_ENVELOPE) {
        if (!ok)
            return ru_error_set(err, RU_EINPUT, ru_circuit_file(c), 0, 0,
                                "--engine envelope: %s", why);
        rep->engine.envelope = 1;
        ru_report_note(rep, "engine: envelope (asked for); cycles are skipped by "
                            "envelope steps");
        return RU_OK;
    }
    if (!(cyc > RU_ENGINE_AUTO_CYCLES))
        return RU_OK;
    if (!ok) {
        ru_report_note(rep, "the start-up spans about %.3g cycles, but the envelope "
                            "engine cannot skip them: %s; every cycle is integrated",
                       cyc, why);
        return RU_OK;
    }
    rep->engine.envelope = 1;
    ru_report_note(rep, "engine: envelope: the start-up spans about %.3g cycles "
                        "(predicted), more than %.0f, so cycles are skipped by envelope "
                        "steps (--engine direct integrates every one)",
                   cyc, RU_ENGINE_AUTO_CYCLES);
    return RU_OK;
}

/* The mode's phasor at a node (0 for ground and driven nodes). */
static double complex mode_at(const ru_system *s, const double *v, int node)
{
    size_t n = ru_system_size(s);
    int k = node > 0 ? ru_system_node_state(s, node) : -1;
    return k >= 0 ? v[k] + I * v[n + k] : 0;
}

void ru_envrun_noise_start(const ru_system *s, ru_run_report *rep, int probe_pos,
                           int probe_neg, const double *x_op, double *x0)
{
    const ru_prediction *p = &rep->pred;
    size_t n = ru_system_size(s);
    ru_start_level sl;
    ru_error e;
    ru_error_clear(&e);
    double *v = x_op && p->have_poles ? malloc(2 * n * sizeof *v) : NULL;
    double k = 0, vp = 0;
    ru_pole lam;
    /* the noise's share: what the log-mean level has beyond the ramp's, added in
     * quadrature (the noise's phase is random: the mean square matches) */
    if (v && ru_start_level_compute(s, x_op, p->dominant, probe_pos, probe_neg, 1e6,
                                    ru_circuit_temp_c(ru_system_circuit(s)), &sl, &e) == RU_OK &&
        sl.noise_rms_v > 0 && sl.level_v > sl.det_v)
        k = sqrt(sl.level_v * sl.level_v - sl.det_v * sl.det_v);
    if (k > 0 && ru_mode_near(s, x_op, p->dominant, &lam, v, v + n, NULL, NULL) == RU_OK)
        vp = cabs(mode_at(s, v, probe_pos) - mode_at(s, v, probe_neg));
    if (vp > 0) { /* dx = 2 Re(z v): probe amplitude 2 |z| |v_probe| */
        double z = k / (2 * vp);
        for (size_t i = 0; i < n; i++)
            x0[i] += 2 * z * v[i];
        ru_report_note(rep, "the envelope engine follows deterministic cycles, so the "
                            "thermal noise is off; the dominant mode starts with the "
                            "noise's share of the start level instead (%.3g V on the "
                            "probe, beside the power-on ramp's %.3g V)",
                       k, sl.det_v);
    } else {
        ru_report_note(rep, "the envelope engine follows deterministic cycles, so the "
                            "thermal noise is off; the power-on ramp sets the start");
    }
    free(v);
}

/* ---- the sinks ----------------------------------------------------------------- */

typedef struct env_sink {
    ru_run_sink *k;
    ru_csv *rows;              /* envelope.csv, NULL when no file */
    int want_wav;
    double *rt, *ra, *rf;      /* rows kept for the WAV: time, amplitude, frequency */
    size_t nr, cap;
    double *ring;              /* probe samples of the integrated stretches (last ones) */
    size_t cap_ring, nring, head;
    double ring_t_last;        /* time of the newest one */
    double last_t0, last_t1;   /* the last cycle integrated in full */
    double sample_s;
} env_sink;

static ru_status keep_row(env_sink *e, const ru_envf_cycle *cy)
{
    if (e->nr == e->cap) {
        size_t cap = e->cap ? 2 * e->cap : 256;
        double *a = realloc(e->rt, cap * sizeof *a);
        if (!a)
            return RU_ENOMEM;
        e->rt = a;
        if (!(a = realloc(e->ra, cap * sizeof *a)))
            return RU_ENOMEM;
        e->ra = a;
        if (!(a = realloc(e->rf, cap * sizeof *a)))
            return RU_ENOMEM;
        e->rf = a;
        e->cap = cap;
    }
    e->rt[e->nr] = cy->t_s;
    e->ra[e->nr] = cy->amplitude_v;
    e->rf[e->nr] = 1.0 / cy->period_s;
    e->nr++;
    return RU_OK;
}

static ru_status env_cycle(void *user, const ru_envf_cycle *cy)
{
    env_sink *e = user;
    ru_status st = RU_OK;
    if (e->k->stop && *e->k->stop)
        return RU_ESTOPPED;
    if (e->rows) {
        double v[5] = {cy->t_s, cy->amplitude_v, 1.0 / cy->period_s, cy->dc_v,
                       cy->kind == RU_ENVF_POINT ? 1.0 : 0.0};
        if ((st = ru_csv_row(e->rows, v, 5)) != RU_OK)
            return st;
    }
    if (cy->kind == RU_ENVF_FULL) {
        e->last_t0 = cy->t_start_s;
        e->last_t1 = cy->t_start_s + cy->period_s;
    }
    if (e->want_wav && cy->amplitude_v > 0 && (st = keep_row(e, cy)) != RU_OK)
        return st;
    if (cy->kind == RU_ENVF_POINT && cy->amplitude_v > 0)
        return ru_measure_push_point(e->k->meas, cy->t_s, cy->amplitude_v);
    return RU_OK;
}

static ru_status env_sample(void *user, double t, const double *x, size_t n, int flags)
{
    env_sink *e = user;
    ru_run_sink *k = e->k;
    ru_status st = RU_OK;
    if (k->stop && *k->stop)
        return RU_ESTOPPED;
    if (k->csv && (st = ru_csv_sample(k->csv, t, x, n)) != RU_OK)
        return st;
    double v = ru_system_node_voltage(k->sys, k->probe_pos, t, x) -
               ru_system_node_voltage(k->sys, k->probe_neg, t, x);
    if (k->trace && (st = ru_trace_push(k->trace, t, v)) != RU_OK)
        return st;
    if (flags & RU_ENVF_ALONE)
        return RU_OK;
    if ((st = ru_measure_push(k->meas, t, v)) != RU_OK)
        return st;
    if (e->ring) {
        if (flags & RU_ENVF_FIRST)
            e->nring = e->head = 0;
        e->ring[e->head] = v;
        e->head = (e->head + 1) % e->cap_ring;
        e->nring += e->nring < e->cap_ring;
        e->ring_t_last = t;
    }
    memcpy(k->x_last, x, n * sizeof *x);
    k->have_last = 1;
    if (!k->mark.have && t >= k->mark.t_s) {
        memcpy(k->mark.x, x, n * sizeof *x);
        k->mark.have = 1;
    }
    return RU_OK;
}

/* ---- the engine under the run loop ---------------------------------------------- */

static ru_status ev_advance(void *self, double t_s, ru_error *err)
{
    return ru_envf_advance(self, t_s, err);
}
static double ev_time(const void *self) { return ru_envf_time(self); }
static int ev_done(const void *self) { return ru_envf_done(self); }
static void ev_stats(const void *self, ru_solver_stats *st)
{
    ru_envf_stats es;
    ru_envf_get_stats(self, &es);
    *st = es.solver;
}

/* ---- the WAV: the envelope times the last cycle's shape ------------------------------ */

/* The last integrated cycle from the ring, mean removed, scaled to amplitude 1, on
 * SHAPE_POINTS phases from its opening crossing. 0 when the ring does not hold it. */
static int cycle_shape(const env_sink *e, double *shape)
{
    double dt = e->sample_s, T = e->last_t1 - e->last_t0;
    double t_old = e->ring_t_last - dt * (double)(e->nring - 1);
    if (!(T > 4 * dt) || e->nring < 8 || e->last_t0 < t_old ||
        e->last_t1 > e->ring_t_last + dt)
        return 0;
    size_t start = e->nring < e->cap_ring ? 0 : e->head;
    double lo = INFINITY, hi = -INFINITY, mean = 0;
    for (int j = 0; j < SHAPE_POINTS; j++) {
        double u = (e->last_t0 + T * j / SHAPE_POINTS - t_old) / dt;
        size_t i = (size_t)floor(u);
        if (i + 1 >= e->nring)
            i = e->nring - 2;
        double f = fmin(u - (double)i, 1.0);
        double a = e->ring[(start + i) % e->cap_ring], b = e->ring[(start + i + 1) % e->cap_ring];
        shape[j] = a + f * (b - a);
        mean += shape[j] / SHAPE_POINTS;
    }
    for (int j = 0; j < SHAPE_POINTS; j++) {
        shape[j] -= mean;
        lo = fmin(lo, shape[j]);
        hi = fmax(hi, shape[j]);
    }
    if (!(hi > lo))
        return 0;
    for (int j = 0; j < SHAPE_POINTS; j++)
        shape[j] /= 0.5 * (hi - lo);
    return 1;
}

/* Samples at the run's spacing from 0 to its end: amplitude interpolated in log
 * between computed cycles, phase the integral of their frequency. */
static ru_status synth_wav(const env_sink *e, ru_wav *w, double t_end)
{
    double shape[SHAPE_POINTS];
    if (e->nr < 2 || !cycle_shape(e, shape))
        return RU_OK; /* nothing to play: the WAV step reports the silence */
    double ph = 0, dt = e->sample_s;
    size_t i = 0;
    for (double k = 0;; k++) {
        double t = k * dt;
        if (t > t_end)
            break;
        while (i + 1 < e->nr && e->rt[i + 1] <= t)
            i++;
        double a, f;
        if (t <= e->rt[0] || i + 1 >= e->nr) {
            a = t <= e->rt[0] ? e->ra[0] : e->ra[e->nr - 1];
            f = t <= e->rt[0] ? e->rf[0] : e->rf[e->nr - 1];
        } else {
            double u = (t - e->rt[i]) / (e->rt[i + 1] - e->rt[i]);
            a = exp(log(e->ra[i]) + u * (log(e->ra[i + 1]) - log(e->ra[i])));
            f = e->rf[i] + u * (e->rf[i + 1] - e->rf[i]);
        }
        double p = ph / (2 * PI) * SHAPE_POINTS;
        int j = (int)floor(p);
        double fr = p - j, s0 = shape[j % SHAPE_POINTS], s1 = shape[(j + 1) % SHAPE_POINTS];
        ru_status st = ru_wav_push(w, t, a * (s0 + fr * (s1 - s0)));
        if (st != RU_OK)
            return st;
        ph = fmod(ph + 2 * PI * f * dt, 2 * PI);
    }
    return RU_OK;
}

/* ---- the run ------------------------------------------------------------------ */

static void envf_opts(const ru_system *s, const ru_run_request *rq,
                      const ru_run_report *rep, const ru_run_sink *k, const double *x_op,
                      ru_envf_opts *o)
{
    const ru_run_opts *ro = ru_circuit_run_opts_const(ru_system_circuit(s));
    ru_envf_opts_for(rq->accuracy >= 0 ? (ru_accuracy)rq->accuracy : ro->accuracy, o);
    o->stop_s = rep->stop_s;
    o->sample_s = rep->sample_s;
    o->growth_budget *= rq->tol_scale;
    o->rtol_cycle_max *= rq->tol_scale;
    o->rtol_env *= rq->tol_scale;
    o->x_op = x_op;
    o->pole = rep->pred.dominant;
    o->probe_pos = k->probe_pos;
    o->probe_neg = k->probe_neg;
    double sig = rep->pred.growth_rate_per_s, T = 1.0 / rep->pred.frequency_hz;
    o->point_dt_s = fmax(2 * T, sig > 0 ? POINT_GROWTH / sig : rep->stop_s / 400);
}

static ru_status open_rows(const ru_run_request *rq, env_sink *e, ru_error *err)
{
    static const char *const cols[5] = {"time_s", "amplitude_v", "frequency_hz", "dc_v",
                                        "alone"};
    if (!rq->out_dir)
        return RU_OK;
    char path[4096];
    snprintf(path, sizeof path, "%s/envelope.csv", rq->out_dir);
    return ru_csv_open_table(path, cols, 5, &e->rows, err);
}

static void fill_info(const ru_envf *ev, ru_run_report *rep)
{
    ru_envf_stats es;
    ru_envf_get_stats(ev, &es);
    rep->solver = es.solver;
    rep->engine.cycles_integrated = es.cycles_integrated;
    rep->engine.cycles_spanned = es.cycles_spanned;
    rep->engine.env_steps = es.env_steps;
    rep->engine.fell_back = es.fell_back;
    rep->engine.rtol_cycle = es.solver.rtol;
    if (es.fell_back || !(es.cycles_spanned > 0))
        ru_report_note(rep, "envelope engine: %s", es.note);
}

ru_status ru_envrun(const ru_system *s, const ru_run_request *rq, ru_run_report *rep,
                    ru_run_sink *k, const double *x0, const double *x_op,
                    const ru_judge_ctx *jc, ru_error *err)
{
    env_sink e = {.k = k, .want_wav = k->wav != NULL, .sample_s = rep->sample_s};
    ru_energy_balance_destroy(k->energy); /* needs every sample: not for skipped runs */
    k->energy = NULL;
    if (e.want_wav) {
        double per = 1.0 / rep->pred.frequency_hz;
        e.cap_ring = (size_t)ceil(3 * per / rep->sample_s) + 16;
        if (!(e.ring = malloc(e.cap_ring * sizeof *e.ring)))
            return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "out of memory");
    }
    ru_envf_opts o;
    envf_opts(s, rq, rep, k, x_op, &o);
    ru_envf_sink sk = {.user = &e, .sample = env_sample, .cycle = env_cycle};
    ru_envf *ev = NULL;
    ru_status st = open_rows(rq, &e, err);
    if (st == RU_OK)
        st = ru_envf_create(s, &o, x0, &sk, &ev, err);
    if (st == RU_OK) {
        ru_run_engine eng = {ev, ev_advance, ev_time, ev_done, ev_stats};
        st = ru_runloop(&eng, k->meas, jc, rep, err);
        fill_info(ev, rep);
        rep->engine.envelope = 1;
        if (st != RU_OK)
            rep->solver.t_reached_s = rep->stop_s;
    }
    if (e.rows) {
        ru_error cerr;
        ru_status cs = ru_csv_close(e.rows, st == RU_OK ? 1 : (st == RU_ENUMERIC ? 2 : 0),
                                    &cerr);
        if ((st == RU_OK || st == RU_EIO) && cs != RU_OK) {
            if (err) /* the file's own reason (a full disk) over "output stopped" */
                *err = cerr;
            st = cs;
        }
    }
    if (st == RU_OK && k->wav)
        st = synth_wav(&e, k->wav, rep->stop_s);
    ru_envf_destroy(ev);
    free(e.rt);
    free(e.ra);
    free(e.rf);
    free(e.ring);
    return st;
}
