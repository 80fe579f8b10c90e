/* predict.c: the small-signal side of a run and the self-checks.
 *
 * Before the transient: operating point, poles, the dominant pair, the level the
 * dominant mode starts from (engines/startlevel.h: the kick's projection, the
 * supplies' ramp, the accumulated noise), the describing function's settled
 * amplitude and the start-up time from its growth-rate curve, and the loop gain.
 * After it: the comparison of measured against predicted figures. */
#include "analysis/analysis_impl.h"

#include "ringup/descfn.h"
#include "ringup/smallsig.h"
#include "ringup/stray.h"
#include "engines/modes.h"
#include "engines/startlevel.h"
#include "parts/desc.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* Phasor of node k in the mode (0 for ground and driven nodes). */
static void node_phasor(const ru_system *s, const double *vre, const double *vim, int node,
                        double *re, double *im)
{
    int k = ru_system_node_state(s, node);
    *re = k >= 0 ? vre[k] : 0.0;
    *im = k >= 0 ? vim[k] : 0.0;
}

/* The dominant mode's amplitude on the probe when it holds the thermal energy kT
 * (equipartition: kT/2 for each of its two quadratic degrees of freedom). The mode
 * scaled to a unit probe amplitude stores on average
 *   E1 = sum over the parts' capacitances C |dv|^2 / 4 + the stores of their own
 *        states coef |x|^2 / 4 (an inductor's L |i|^2 / 4; a crystal's c0, and
 *        L |i|^2 / 4 + cm |vm|^2 / 4 per motional arm; an amplifier's capacitances),
 * so A = sqrt(kT / E1): sqrt(2kT/C) for a plain LC tank. The noise keeps feeding
 * the mode while it grows, so this is the order of the start level, not its value. */
static double noise_amplitude(const ru_system *s, const double *x_op, ru_pole dom,
                              int pos, int neg)
{
    size_t n = ru_system_size(s);
    const ru_circuit *c = ru_system_circuit(s);
    double *v = malloc(2 * n * sizeof *v), amp = NAN;
    ru_pole lam;
    if (!v || ru_mode_near(s, x_op, dom, &lam, v, v + n, NULL, NULL) != RU_OK)
        goto done;
    double pr, pi, qr, qi, e1 = 0;
    node_phasor(s, v, v + n, pos, &pr, &pi);
    node_phasor(s, v, v + n, neg, &qr, &qi);
    double p2 = (pr - qr) * (pr - qr) + (pi - qi) * (pi - qi);
    for (size_t i = 0; i < ru_circuit_part_count(c); i++) {
        const ru_part *p = ru_circuit_part(c, i);
        ru_cap cap[RU_PART_CAPS_MAX]; /* C |dv|^2 / 4 over its capacitances */
        for (int j = 0, nc = ru_part_caps(p, cap); j < nc; j++) {
            node_phasor(s, v, v + n, cap[j].a, &pr, &pi);
            node_phasor(s, v, v + n, cap[j].b, &qr, &qi);
            e1 += cap[j].c_f * ((pr - qr) * (pr - qr) + (pi - qi) * (pi - qi)) / 4;
        }
        ru_store st[RU_PART_STORES_MAX]; /* coef |x|^2 / 4 over its own states */
        int k0 = ru_system_part_state(s, (int)i);
        for (int j = 0, ns = k0 >= 0 ? ru_part_stores(p, st) : 0; j < ns; j++) {
            size_t k = (size_t)(k0 + st[j].state);
            e1 += st[j].coef * (v[k] * v[k] + v[n + k] * v[n + k]) / 4;
        }
    }
    for (size_t node = 1; node < ru_circuit_node_count(c); node++) {
        int k = ru_system_node_state(s, (int)node);
        if (k >= 0)
            e1 += ru_circuit_node_stray_f(c, (int)node) *
                  (v[k] * v[k] + v[n + k] * v[n + k]) / 4;
    }
    if (p2 > 0 && e1 > 0)
        amp = sqrt(1.380649e-23 * (ru_circuit_temp_c(c) + 273.15) / (e1 / p2));
done:
    free(v);
    return amp;
}

static void keep_poles(ru_run_data *keep, const ru_pole *poles, size_t n, int d)
{
    if (!keep || !(keep->poles = malloc(n * sizeof *poles)))
        return;
    memcpy(keep->poles, poles, n * sizeof *poles);
    keep->npoles = n;
    keep->dominant = d;
}

/* Whether a pole is a stiff mode near the imaginary axis, where BDF of order 3 to
 * 5 loses stability: at least RU_STIFF_RATIO times the dominant pair's magnitude
 * (so a step that resolves the tone, ~1/100 of its period, puts h lambda beyond
 * 0.3) and at an angle from the negative real axis beyond BDF5's A(alpha)
 * stability angle, 51.84 degrees (Hairer and Wanner, Solving ODEs II, table
 * V.2.1; from memory). The dominant pair itself is resolved by the error control. */
#define RU_STIFF_RATIO 5.0
#define RU_BDF5_TAN_ALPHA 1.2723 /* tan(51.84 deg) */
static int stiff_oscillatory(const ru_pole *p, size_t np, ru_pole dom)
{
    double wd = hypot(dom.re_per_s, dom.im_rad_per_s);
    for (size_t i = 0; i < np; i++) {
        double w = hypot(p[i].re_per_s, p[i].im_rad_per_s);
        if (w >= RU_STIFF_RATIO * wd &&
            fabs(p[i].im_rad_per_s) > RU_BDF5_TAN_ALPHA * fabs(p[i].re_per_s))
            return 1;
    }
    return 0;
}

static void predict_poles(const ru_system *s, const double *x_op, int pos, int neg,
                          ru_run_report *rep, ru_run_data *keep)
{
    size_t n = ru_system_size(s);
    ru_prediction *pr = &rep->pred;
    ru_pole *poles = malloc(n * sizeof *poles);
    ru_error e;
    ru_error_clear(&e);
    if (!poles)
        goto done;
    if (ru_poles_compute(s, x_op, poles, &e) != RU_OK) {
        ru_report_note(rep, "poles not computed: %s", e.msg);
        goto done;
    }
    int d = ru_poles_dominant(poles, ru_poles_count(s));
    keep_poles(keep, poles, ru_poles_count(s), d);
    if (d < 0) {
        ru_report_note(rep, "no complex pole pair at the operating point: the "
                            "small-signal model has no oscillation to predict");
        goto done;
    }
    size_t np = ru_poles_count(s); /* below n for a DAE */
    for (size_t i = 0; i < np; i++)
        if (poles[i].re_per_s < 0 && (int)i != d && poles[i].im_rad_per_s != -poles[d].im_rad_per_s &&
            !(fabs(poles[i].re_per_s) >= pr->slowest_decay_per_s))
            pr->slowest_decay_per_s = fabs(poles[i].re_per_s);
    pr->stiff_oscillatory = stiff_oscillatory(poles, np, poles[d]);
    pr->have_poles = 1;
    pr->dominant = poles[d];
    pr->growth_rate_per_s = poles[d].re_per_s;
    pr->frequency_hz = poles[d].im_rad_per_s / (2 * M_PI);
    pr->noise_amplitude_v = noise_amplitude(s, x_op, poles[d], pos, neg);
    ru_start_level sl;
    ru_status st = ru_start_level_compute(s, x_op, poles[d], pos, neg, 1e6,
                                          ru_circuit_temp_c(ru_system_circuit(s)), &sl, &e);
    pr->start_kind = (int)sl.kind;
    if (st != RU_OK) {
        ru_report_note(rep, "no start level: %s", e.msg);
    } else if (sl.driven) {
        pr->start_driven = 1;
    } else {
        pr->kick_amplitude_v = sl.level_v;
        pr->start_rms_v = sl.kind == RU_START_NOISE ? sl.noise_rms_v : NAN;
        pr->start_log_sd = sl.log_sd;
    }
done:
    free(poles);
}

static ru_status predict_loop(const ru_circuit *c, const ru_system *s,
                              const ru_run_request *rq, const double *x_op,
                              ru_run_report *rep, ru_run_data *keep, ru_error *err)
{
    ru_loop *l = NULL;
    ru_status st = ru_loop_create_named(s, x_op, rq ? rq->loop_part : NULL,
                                        rq ? rq->loop_node : NULL,
                                        rq ? rq->loop_load : NULL, &l, err);
    if (st != RU_OK && err && !err->file[0]) /* name the file the names came from */
        snprintf(err->file, sizeof err->file, "%s", ru_circuit_file(c));
    if (st != RU_OK || !l)
        return st;
    ru_prediction *pr = &rep->pred;
    double f0 = pr->have_poles ? pr->frequency_hz : 0;
    double fmin = f0 > 0 ? f0 / 30 : 1.0, fmax = f0 > 0 ? f0 * 30 : 1e9;
    ru_error e;
    ru_error_clear(&e);
    snprintf(pr->loop_node, sizeof pr->loop_node, "%s", ru_loop_node(l));
    snprintf(pr->loop_load, sizeof pr->loop_load, "%s", ru_loop_load(l));
    if (pr->loop_node[0])
        snprintf(pr->loop_part, sizeof pr->loop_part, "node %.*s", RU_NAME_MAX - 6,
                 pr->loop_node);
    else
        snprintf(pr->loop_part, sizeof pr->loop_part, "%s", ru_loop_label(l));
    size_t npts = 0;
    if (ru_loop_sweep_adaptive(l, fmin, fmax, RU_LOOP_GRID_POINTS, RU_RUN_DATA_LOOP_POINTS,
                               keep ? keep->loop_f_hz : NULL, keep ? keep->loop_mag : NULL,
                               keep ? keep->loop_phase_deg : NULL, &npts, &pr->loop,
                               &e) != RU_OK) {
        ru_report_note(rep, "loop gain of %s not evaluated: %s", pr->loop_part, e.msg);
    } else {
        pr->have_loop = 1;
        if (keep)
            keep->nloop = npts;
    }
    ru_loop_destroy(l);
    return RU_OK;
}

/* The stray-capacitance check (ringup/stray.h): its warning as a note. */
static void stray_note(const ru_circuit *c, const ru_system *s, const double *x_op,
                       ru_run_report *rep)
{
    ru_stray_result r;
    ru_error e;
    ru_error_clear(&e);
    if (ru_stray_check(c, s, x_op, &r, &e) != RU_OK) {
        ru_report_note(rep, "stray capacitance not checked: %s", e.msg);
        return;
    }
    char text[RU_NOTE_MAX * 2];
    ru_stray_warning(c, &r, text, sizeof text);
    if (text[0])
        ru_report_note(rep, "%s", text);
}

ru_status ru_predict(const ru_circuit *c, const ru_system *s, const ru_run_request *rq,
                     int probe_pos, int probe_neg, ru_run_report *rep, ru_run_data *keep,
                     double *x_op_out, ru_error *err)
{
    ru_prediction *pr = &rep->pred;
    pr->growth_rate_per_s = pr->frequency_hz = NAN;
    pr->kick_amplitude_v = pr->startup_time_s = pr->settled_amplitude_v = NAN;
    pr->noise_amplitude_v = pr->slowest_decay_per_s = NAN;
    pr->df_frequency_hz = pr->start_rms_v = NAN;
    pr->start_log_sd = 0;
    pr->start_driven = 0;
    int floating;
    if (ru_circuit_find_floating_node(c, &floating)) {
        ru_report_note(rep, "no prediction: node %s has no DC path to ground, so there "
                            "is no operating point",
                       ru_circuit_node_name(c, floating));
        return RU_OK;
    }
    size_t n = ru_system_size(s);
    double *x_op = calloc(n ? n : 1, sizeof *x_op);
    if (!x_op)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "out of memory");
    ru_error e;
    ru_error_clear(&e);
    ru_status st = RU_OK;
    if (ru_oppoint_solve(s, x_op, 0, &pr->op, &e) != RU_OK) {
        ru_report_note(rep, "no prediction: operating point not found: %s", e.msg);
        goto done;
    }
    pr->have_op = 1;
    if (x_op_out)
        memcpy(x_op_out, x_op, n * sizeof *x_op);
    predict_poles(s, x_op, probe_pos, probe_neg, rep, keep);
    if (pr->have_poles)
        stray_note(c, s, x_op, rep);
    if (pr->have_poles && pr->growth_rate_per_s > 0)
        ru_predict_tone(s, x_op, probe_pos, probe_neg, rep, keep);
    st = predict_loop(c, s, rq, x_op, rep, keep, err);
done:
    free(x_op);
    return st;
}

void ru_selfcheck(ru_run_report *rep)
{
    if (rep->partial) {
        ru_report_note(rep, "the run stopped early, so its figures cover only the part "
                            "that was computed; no comparison with the prediction");
        return;
    }
    const ru_measure_result *m = &rep->meas;
    ru_prediction *pr = &rep->pred;
    if (pr->have_poles && isfinite(m->growth_rate_per_s) && pr->growth_rate_per_s != 0) {
        rep->growth_mismatch =
            (m->growth_rate_per_s - pr->growth_rate_per_s) / fabs(pr->growth_rate_per_s);
        if (fabs(rep->growth_mismatch) > 0.02)
            ru_report_note(rep,
                           "measured growth rate differs from the poles' by %+.1f %%: "
                           "the operating point may still move during start-up (bias "
                           "settling after power-on, a lamp or thermistor warming), the "
                           "fit window may reach into the nonlinear region, or the kick "
                           "is large; try --verify",
                           100 * rep->growth_mismatch);
    }
    /* the start level against the one the measured growth extrapolates back to:
     * beyond 3 s.d. of the noise's scatter, or a factor 1.5, the start is not the
     * small-signal growth from the kick the prediction assumes */
    double lev = pr->kick_amplitude_v, fit = m->growth_fit_level_v;
    double lim = fmax(log(1.5), 3 * pr->start_log_sd);
    if (m->started && isfinite(lev) && lev > 0 && isfinite(fit) && fit > 0 &&
        fabs(log(fit / lev)) > lim)
        ru_report_note(rep, "the measured growth extrapolates back to %.3g V at t = 0, the "
                            "predicted start level is %.3g V: the start is not the "
                            "small-signal growth of the dominant mode from the kick (a "
                            "large-signal bias transient after power-on, or a slow state "
                            "moving during the growth), so the start-up prediction is off "
                            "by about %.2g s",
                       fit, lev, log(fit / lev) / -pr->growth_rate_per_s);
    if (pr->have_poles && pr->growth_rate_per_s < 0 && m->started)
        ru_report_note(rep, "the poles are in the left half-plane yet the run started: "
                            "a large kick can start a hard-excited oscillator");
    /* the balances predict the fundamental: compare like with like */
    const ru_hb_tone *h = pr->have_hb && pr->hb.converged ? &pr->hb : NULL;
    /* (only a settled tone is compared: a figure of a tone still moving is not its
     * settled size, and the not-settled note says so already) */
    if (h && m->settled && isfinite(m->fundamental_v) &&
        (fabs(m->fundamental_v / h->fundamental_v - 1) > 0.02 ||
         fabs(m->frequency_hz / h->frequency_hz - 1) > 0.005))
        ru_report_note(rep, "the measured tone differs from the harmonic balance's (%d "
                            "harmonics): fundamental %+.2f %%, frequency %+.3f %%; the run "
                            "may not have settled, or the settled state is not one "
                            "periodic tone",
                       h->harmonics, 100 * (m->fundamental_v / h->fundamental_v - 1),
                       100 * (m->frequency_hz / h->frequency_hz - 1));
    if (!h && m->settled && isfinite(pr->settled_amplitude_v) &&
        isfinite(m->fundamental_v) &&
        fabs(m->fundamental_v / pr->settled_amplitude_v - 1) > 0.05)
        ru_report_note(rep, "measured fundamental differs from the describing-function "
                            "prediction by %+.1f %%: that method keeps only the "
                            "fundamental at every node, so harmonics anywhere in the loop "
                            "(THD on the probe: %.2g %%) make it approximate",
                       100 * (m->fundamental_v / pr->settled_amplitude_v - 1),
                       m->thd_percent);
    if (m->started && m->settled && m->peak_envelope_v > 1.2 * m->settled_amplitude_v)
        ru_report_note(rep, "the envelope overshoots to %.3g V, %.2gx the settled "
                            "amplitude, before it settles (an amplitude control with "
                            "memory, such as a lamp or thermistor, or a loop that "
                            "bounces): the start-up time is when it stays within the "
                            "start-up band",
                       m->peak_envelope_v, m->peak_envelope_v / m->settled_amplitude_v);
    /* the measured tone, else the predicted one (a tone sampled too coarsely may
     * show no cycle at all, and then "run longer" would be the wrong advice) */
    int measured_f = isfinite(m->frequency_hz) && m->frequency_hz > 0;
    double f_hz = measured_f ? m->frequency_hz
                  : pr->have_poles && pr->frequency_hz > 0 ? pr->frequency_hz
                                                            : NAN;
    if (isfinite(f_hz) && f_hz * rep->sample_s > 1.0 / 16)
        ru_report_note(rep, "only %.1f samples per period of the %s tone: the "
                            "envelope, THD and even the frequency may be wrong; set "
                            "--sample to %.3g s or less",
                       1.0 / (f_hz * rep->sample_s), measured_f ? "measured" : "predicted",
                       1.0 / (64 * f_hz));
    /* a figure that cannot be had is null: say why (the measurement's own notes;
     * the verdict's notes say why a run that did not start has none) */
    if (m->started && !isfinite(m->growth_rate_per_s) && m->growth_note[0])
        ru_report_note(rep, "no growth rate: %s", m->growth_note);
    if (m->started && !isfinite(m->thd_percent) && m->thd_note[0])
        ru_report_note(rep, "no %sTHD: %s",
                       isfinite(m->frequency_hz) ? "" : "frequency, fundamental or ",
                       m->thd_note);
    double sn = rep->integrator_damping_per_s, sg = m->growth_rate_per_s;
    if (isfinite(sn) && isfinite(sg) && fabs(sn) > 0.01 * fabs(sg))
        ru_report_note(rep, "the integrator's own damping (%.3g /s) is %.1f %% of the "
                            "growth rate: use accuracy precise or --verify",
                       sn, 100 * fabs(sn / sg));
}
