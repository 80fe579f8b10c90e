/* predict_tone.c: the settled tone and the start-up time predicted before a run:
 * the describing function's sigma(A) curve and amplitude (ringup/descfn.h), the
 * harmonic balance with K harmonics started from it (ringup/hb.h: amplitude,
 * frequency, THD, H2, H3), and the start-up time as the integral of the envelope
 * equation over the growth-rate curve from the start level to the start-up level. */
#include "analysis/analysis_impl.h"

#include "ringup/descfn.h"
#include "ringup/hb.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* Below this share of the start-up level the start-up integral uses the
 * describing function: harmonics there are below about 5 % of their settled share
 * for a cubic (they grow as A^2), so sigma_K and sigma_1 agree. */
#define RU_HB_FROM 0.05

/* A balance that still moves by less than this at its last K is used for the
 * start-up integral even when not converged for the tone (the time needs the
 * growth rate near the top to about a percent, not the amplitude to 0.1 %). */
#define RU_HB_STARTUP_MOVED 0.01

/* Shares of the predicted start-up time above which the slowest other time
 * constant withholds the prediction, or makes it rough (our own rule, from the
 * corpus in tests/data/predict: a state that needs a third of the start-up to
 * follow no longer sits on the quasi-static balance). */
#define RU_SLOW_WITHHOLD 0.3
#define RU_SLOW_NOTE 0.05

/* The envelope equation's time from a0 to top: the describing function's sigma(A)
 * below RU_HB_FROM of the settled fundamental (harmonics negligible there), the
 * harmonic balance's sigma_K(A) above it when it converged (hb not NULL). */
static ru_status startup_time(ru_df *df, ru_hb *hb, double a0, double top, double *t,
                              ru_error *e)
{
    if (!hb)
        return ru_df_startup_time(df, a0, top, t, e);
    double ab = RU_HB_FROM * top, t1 = 0, t2;
    ru_status st = RU_OK;
    if (a0 < ab)
        st = ru_df_startup_time(df, a0, ab, &t1, e);
    if (st == RU_OK)
        st = ru_hb_startup_time(hb, fmax(a0, ab), top, &t2, e);
    *t = st == RU_OK ? t1 + t2 : NAN;
    return st;
}

/* Start-up time from the growth-rate curve: the envelope obeys dA/dt = sigma(A) A,
 * so it takes t = integral dA / (A sigma(A)) from the start level to the start-up
 * level (a share of the settled fundamental). */
static void predict_startup(ru_df *df, ru_hb *hb, double amp_v, ru_run_report *rep)
{
    ru_prediction *pr = &rep->pred;
    double a0 = pr->kick_amplitude_v, top = rep->startup_level * amp_v;
    if (pr->start_driven) {
        ru_report_note(rep, "no start-up prediction: a periodic source keeps driving "
                            "the circuit, so there is no start level");
        return;
    }
    if (!isfinite(a0))
        return; /* the note says why */
    if (!(a0 < top)) {
        ru_report_note(rep, "no start-up prediction: the kick (%.3g V in the dominant "
                            "mode) is not below the start-up level (%.3g V), so the start "
                            "is not a growth from a small level",
                       a0, top);
        return;
    }
    ru_error e;
    ru_error_clear(&e);
    double t;
    if (startup_time(df, hb, a0, top, &t, &e) != RU_OK) {
        ru_report_note(rep, "no start-up prediction: %s", e.msg);
        return;
    }
    /* The envelope equation takes every other state as following the amplitude at
     * once (a quasi-static balance). A slow decaying mode (a bias capacitor, a lamp
     * or thermistor warming) that is not short against the start-up breaks that. */
    double tau = pr->slowest_decay_per_s > 0 ? 1.0 / pr->slowest_decay_per_s : 0;
    if (tau > RU_SLOW_WITHHOLD * t) {
        ru_report_note(rep, "no start-up prediction: a time constant of %.3g s (a bias "
                            "capacitor, a lamp or thermistor) is not short against the "
                            "%.3g s the envelope equation gives, so the amplitude does "
                            "not follow the quasi-static growth-rate curve",
                       tau, t);
        return;
    }
    pr->startup_time_s = t;
    if (tau > RU_SLOW_NOTE * t)
        ru_report_note(rep, "the predicted start-up time is rough: a time constant of "
                            "%.3g s is %.0f %% of it, and the envelope equation takes the "
                            "slow states as following the amplitude at once",
                       tau, 100 * tau / t);
}

/* The harmonic balance from the describing function's settled balance; NULL
 * (with a note) when it cannot run or finds nothing. */
static ru_hb *predict_hb(const ru_system *s, ru_df *df, int pos, int neg,
                         ru_run_report *rep)
{
    ru_prediction *pr = &rep->pred;
    size_t n = ru_system_size(s);
    double *x = malloc(3 * n * sizeof *x), w;
    ru_hb *hb = NULL;
    ru_error e;
    ru_error_clear(&e);
    if (!x || ru_df_zero_state(df, x, x + n, x + 2 * n, &w) != RU_OK ||
        ru_hb_create(s, pos, neg, RU_HB_MAX_HARMONICS, &hb, &e) != RU_OK) {
        if (e.msg[0])
            ru_report_note(rep, "no harmonic balance: %s", e.msg);
        free(x);
        return NULL;
    }
    ru_hb_start(hb, x, x + n, x + 2 * n, w);
    free(x);
    if (ru_hb_settle(hb, &pr->hb, &e) != RU_OK) {
        ru_report_note(rep, "no harmonic balance: %s", e.msg);
        ru_hb_destroy(hb);
        return NULL;
    }
    pr->have_hb = 1;
    if (!pr->hb.converged)
        ru_report_note(rep, "%s", pr->hb.note);
    return hb;
}

void ru_predict_tone(const ru_system *s, const double *x_op, int pos, int neg,
                     ru_run_report *rep, ru_run_data *keep)
{
    ru_df_result res;
    size_t npts = 0;
    ru_df *df = NULL;
    ru_error e;
    ru_error_clear(&e);
    ru_status st = ru_df_create(s, x_op, pos, neg, &df, &e);
    if (st == RU_OK)
        st = ru_df_find(df, 0, keep ? keep->df : NULL, keep ? RU_RUN_DATA_DF_MAX : 0,
                        &npts, &res, &e);
    if (keep)
        keep->ndf = npts;
    if (st != RU_OK)
        ru_report_note(rep, "no amplitude prediction: %s", e.msg);
    else if (!res.found)
        ru_report_note(rep, "no amplitude prediction: %s", res.note);
    if (st == RU_OK && res.found) {
        rep->pred.settled_amplitude_v = res.settled_amplitude_v;
        rep->pred.df_frequency_hz = res.frequency_hz;
        ru_hb *hb = predict_hb(s, df, pos, neg, rep);
        int use = hb && (rep->pred.hb.converged || rep->pred.hb.moved < RU_HB_STARTUP_MOVED);
        predict_startup(df, use ? hb : NULL,
                        use ? rep->pred.hb.fundamental_v : res.settled_amplitude_v, rep);
        ru_hb_destroy(hb);
    }
    ru_df_destroy(df);
}
