/* poles_amp.c: `ringup poles --amplitude`: how the dominant pair drifts with the
 * amplitude (the describing function's sigma(A) and w(A)), printed as a short table
 * at meaningful amplitudes (shares of the settled one, the crossing of the jw axis
 * marked), every curve point and table row in JSON, and the harmonic balance's
 * settled tone beside it. */
#include "cli/cli.h"

#include "ringup/descfn.h"
#include "ringup/format.h"
#include "ringup/hb.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* Shares of the settled amplitude shown when the curve crosses the axis. */
static const double shares[] = {0.01, 0.1, 0.25, 0.5, 0.75, 0.9, 0.95, 1.0, 1.1, 1.25};
#define NSHARES (sizeof shares / sizeof shares[0])

/* Rows of a curve with no crossing: evenly spaced curve points. */
static void rows_from_curve(cli_amp *t)
{
    size_t want = t->ncurve < CLI_AMP_ROWS ? t->ncurve : CLI_AMP_ROWS;
    for (size_t i = 0; i < want; i++) {
        size_t k = want > 1 ? i * (t->ncurve - 1) / (want - 1) : 0;
        t->rows[t->nrows++] = t->curve[k];
    }
}

static void settle_hb(const ru_system *s, ru_df *df, int pos, int neg, cli_amp *t)
{
    size_t n = ru_system_size(s);
    double *x = malloc(3 * n * sizeof *x), w;
    ru_hb *hb = NULL;
    ru_error e;
    ru_error_clear(&e);
    if (x && ru_df_zero_state(df, x, x + n, x + 2 * n, &w) == RU_OK &&
        ru_hb_create(s, pos, neg, RU_HB_MAX_HARMONICS, &hb, &e) == RU_OK) {
        ru_hb_start(hb, x, x + n, x + 2 * n, w);
        t->have_hb = ru_hb_settle(hb, &t->hb, &e) == RU_OK;
    }
    if (!t->have_hb)
        snprintf(t->hb_note, sizeof t->hb_note, "no harmonic balance: %s",
                 e.msg[0] ? e.msg : "out of memory");
    ru_hb_destroy(hb);
    free(x);
}

ru_status cli_amp_compute(const ru_system *s, const double *x_op, int pos, int neg,
                          cli_amp *t, ru_error *err)
{
    ru_df *df = NULL;
    t->nrows = 0;
    t->crossing = -1;
    t->have_hb = 0;
    ru_status st = ru_df_create(s, x_op, pos, neg, &df, err);
    if (st == RU_ERANGE) { /* nothing oscillates: an empty table with the reason */
        snprintf(t->df.note, sizeof t->df.note, "no complex pole pair: nothing oscillates");
        t->ncurve = 0;
        t->df.found = 0;
        return RU_OK;
    }
    if (st != RU_OK)
        return st;
    st = ru_df_find(df, 0, t->curve, CLI_AMP_CURVE, &t->ncurve, &t->df, err);
    if (st == RU_OK && t->df.found) {
        for (size_t i = 0; i < NSHARES; i++) {
            ru_df_point p;
            ru_error e;
            if (ru_df_at(df, shares[i] * t->df.settled_amplitude_v, &p, &e) != RU_OK)
                continue;
            if (shares[i] == 1.0)
                t->crossing = (int)t->nrows;
            t->rows[t->nrows++] = p;
        }
        settle_hb(s, df, pos, neg, t);
    } else if (st == RU_OK) {
        rows_from_curve(t);
    }
    ru_df_destroy(df);
    return st;
}

void cli_amp_print(const cli_amp *t, const char *probe)
{
    char a[40], b[40], c[40];
    printf("\ndominant pair against the amplitude on %s (describing function):\n", probe);
    printf("  %-12s %-10s %-16s %-14s %s\n", "amplitude", "of settled", "growth rate",
           "frequency", "DC shift");
    for (size_t i = 0; i < t->nrows; i++) {
        const ru_df_point *p = &t->rows[i];
        char share[16] = "-";
        if (t->df.found)
            snprintf(share, sizeof share, "%.0f %%",
                     100 * p->amplitude_v / t->df.settled_amplitude_v);
        printf("  %-12s %-10s %-+16.5g %-14s %s%s\n",
               ru_format_si(p->amplitude_v, "V", 4, a, sizeof a), share,
               p->growth_rate_per_s, ru_format_si(p->frequency_hz, "Hz", 6, b, sizeof b),
               ru_format_si(p->dc_shift_v, "V", 3, c, sizeof c),
               (int)i == t->crossing ? "   <- crosses the jw axis: settled" : "");
    }
    if (t->df.found)
        printf("describing function: settled at %s (fundamental) and %s\n",
               ru_format_si(t->df.settled_amplitude_v, "V", 5, a, sizeof a),
               ru_format_si(t->df.frequency_hz, "Hz", 6, b, sizeof b));
    if (t->df.note[0])
        printf("note: %s\n", t->df.note);
    if (t->have_hb) {
        const ru_hb_tone *h = &t->hb;
        char hd[2][24];
        for (int k = 0; k < 2; k++) {
            double d = h->harmonics_dbc[k];
            if (isfinite(d) && d > -200)
                snprintf(hd[k], sizeof hd[k], "%.1f dBc", d);
            else
                snprintf(hd[k], sizeof hd[k], "below -200 dBc");
        }
        printf("harmonic balance (%d harmonics%s): %s (half peak-to-peak), fundamental %s, "
               "%s, THD %.3g %%, H2 %s, H3 %s\n",
               h->harmonics, h->converged ? "" : ", not converged",
               ru_format_si(h->amplitude_v, "V", 5, a, sizeof a),
               ru_format_si(h->fundamental_v, "V", 5, b, sizeof b),
               ru_format_si(h->frequency_hz, "Hz", 6, c, sizeof c), h->thd_percent, hd[0],
               hd[1]);
        if (h->note[0])
            printf("note: %s\n", h->note);
    } else if (t->hb_note[0]) {
        printf("note: %s\n", t->hb_note);
    }
}

static void json_point(ru_json *j, const ru_df_point *p)
{
    ru_json_number(j, "amplitude_v", p->amplitude_v);
    ru_json_number(j, "growth_rate_per_s", p->growth_rate_per_s);
    ru_json_number(j, "frequency_hz", p->frequency_hz);
    ru_json_number(j, "dc_shift_v", p->dc_shift_v);
}

void cli_amp_json(ru_json *j, const cli_amp *t)
{
    ru_json_begin_array(j, "amplitude_curve");
    for (size_t i = 0; i < t->ncurve; i++) {
        ru_json_begin_object(j, NULL);
        json_point(j, &t->curve[i]);
        ru_json_end_object(j);
    }
    ru_json_end_array(j);
    ru_json_begin_array(j, "amplitude_table");
    for (size_t i = 0; i < t->nrows; i++) {
        ru_json_begin_object(j, NULL);
        json_point(j, &t->rows[i]);
        ru_json_bool(j, "crossing", (int)i == t->crossing);
        ru_json_end_object(j);
    }
    ru_json_end_array(j);
    ru_json_begin_object(j, "predicted");
    ru_json_number(j, "settled_amplitude_v", t->df.found ? t->df.settled_amplitude_v : NAN);
    ru_json_number(j, "frequency_hz", t->df.found ? t->df.frequency_hz : NAN);
    ru_json_string(j, "note", t->df.note);
    ru_json_end_object(j);
    if (!t->have_hb) {
        ru_json_null(j, "harmonic_balance");
        return;
    }
    cli_json_hb(j, &t->hb);
}
