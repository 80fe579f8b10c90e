/* steady_start.c: where the shooting Newton starts (ringup/steady.h): a given state,
 * the describing function's balance at its settled amplitude, or a small kick when
 * some pole grows; and the tracking runs (plain integration over some periods, the
 * period measured from crossings of the probe's mean) used for the warm-up and for
 * the continuation when Newton fails. */
#include "engines/pss_int.h"
#include "engines/steady_impl.h"
#include "ringup/descfn.h"
#include "ringup/smallsig.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#define RU_SS_TRACK_SAMPLES 64  /* probe samples per period while tracking */
#define RU_SS_TRACK_RTOL 1e-6   /* tolerance of the tracking runs */

/* ---- tracking: plain integration over some periods, the period from crossings ---- */

typedef struct track {
    const ru_steady *st;
    double *p;        /* probe samples */
    size_t np, cap;
} track;

static ru_status track_sample(void *user, double t_s, const double *x)
{
    (void)t_s;
    track *tk = user;
    if (tk->np >= tk->cap)
        return RU_OK;
    double v = 0.0;
    for (size_t i = 0; i < tk->st->n; i++)
        v += tk->st->probe_g[i] * x[i];
    tk->p[tk->np++] = v;
    return RU_OK;
}

/* Period (in samples) from upward crossings of the mean of the last half; 0 when
 * fewer than three crossings are seen. *swing gets the last period's max - min and
 * *drift the relative change of that swing over the last quarter of the record. */
static double track_period(const track *tk, double *swing, double *drift)
{
    size_t n = tk->np, h = n / 2;
    double mean = 0.0;
    for (size_t k = h; k < n; k++)
        mean += tk->p[k];
    mean /= (double)(n - h);
    double first = -1, last = -1;
    int count = 0;
    for (size_t k = h + 1; k < n; k++)
        if (tk->p[k - 1] < mean && tk->p[k] >= mean) {
            double c = (double)(k - 1) + (mean - tk->p[k - 1]) / (tk->p[k] - tk->p[k - 1]);
            if (first < 0)
                first = c;
            last = c;
            count++;
        }
    double est = count >= 3 ? (last - first) / (double)(count - 1) : 0.0;
    size_t per = est > 1 && est < (double)n / 4 ? (size_t)ceil(est) : RU_SS_TRACK_SAMPLES,
           q = n / 4;
    if (q + per > n)
        q = n - per;
    double a = INFINITY, b = -INFINITY, a2 = INFINITY, b2 = -INFINITY;
    for (size_t k = n - per; k < n; k++) {
        a = fmin(a, tk->p[k]);
        b = fmax(b, tk->p[k]);
    }
    for (size_t k = n - q - per; k < n - q; k++) {
        a2 = fmin(a2, tk->p[k]);
        b2 = fmax(b2, tk->p[k]);
    }
    *swing = b - a;
    *drift = (b - a) > 0 ? fabs((b - a) - (b2 - a2)) / (b - a) : INFINITY;
    return est;
}

ru_status ru_steady_track(const ru_system *s, ru_steady *st, double *x, double *T,
                           double periods, double *swing, double *drift, ru_error *err)
{
    size_t cap = (size_t)ceil(periods * RU_SS_TRACK_SAMPLES) + 1;
    track tk = {st, malloc(cap * sizeof(double)), 0, cap};
    double *xe = malloc(st->n * sizeof *xe);
    if (!tk.p || !xe) {
        free(tk.p);
        free(xe);
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "out of memory");
    }
    double dt = *T / RU_SS_TRACK_SAMPLES;
    ru_pint_req q = {.t_end_s = dt * (double)(cap - 1),
                     .rtol = RU_SS_TRACK_RTOL,
                     .atol_rel = RU_SS_TRACK_RTOL * RU_STEADY_ATOL_OVER_RTOL,
                     .scale = st->scale,
                     .dt_sample_s = dt,
                     .nsamples = cap,
                     .fn = track_sample,
                     .user = &tk};
    ru_pint_out out;
    ru_status rs = ru_pint_run(s, &q, x, xe, NULL, &out, err);
    st->v.steps += out.steps;
    st->transient_s += periods * *T;
    if (rs == RU_OK && tk.np >= 4 * RU_SS_TRACK_SAMPLES / 2) {
        memcpy(x, xe, st->n * sizeof *x);
        double per = track_period(&tk, swing, drift);
        if (per > 0)
            *T = per * dt;
    } else if (rs == RU_OK) {
        memcpy(x, xe, st->n * sizeof *x);
        *swing = NAN;
        *drift = INFINITY;
    }
    free(tk.p);
    free(xe);
    return rs;
}

/* The describing function's balance at its settled amplitude: x(0) and T. */
static int start_from_df(const ru_system *s, const ru_steady_opts *o, const double *x_op,
                         double *x, double *T)
{
    size_t n = ru_system_size(s);
    double *b = malloc(3 * n * sizeof *b);
    ru_df_result res;
    ru_error e;
    int ok = b && ru_df_settled_state(s, x_op, o->probe_pos, o->probe_neg, b, b + n,
                                      b + 2 * n, &res, &e) == RU_OK &&
             res.found && res.frequency_hz > 0;
    if (ok) {
        for (size_t i = 0; i < n; i++)
            x[i] = b[i] + b[n + i];
        *T = 1.0 / res.frequency_hz;
    }
    free(b);
    return ok;
}

/* A small kick (1e-3 of every state's scale, signs alternating) when some pole lies
 * right of the jw axis; the period guess is the dominant pair's, or 2 pi over the
 * fastest growth when the growing poles are real (a relaxation oscillator). */
static int start_from_kick(const ru_system *s, const ru_steady *st, const double *x_op,
                           double *x, double *T)
{
    size_t n = st->n;
    ru_pole *poles = malloc(n * sizeof *poles);
    ru_error e;
    int ok = poles && ru_poles_compute(s, x_op, poles, &e) == RU_OK && poles[0].re_per_s > 0;
    if (ok) {
        int d = ru_poles_dominant(poles, ru_poles_count(s));
        *T = d >= 0 && poles[d].re_per_s > 0 ? 2.0 * M_PI / poles[d].im_rad_per_s
                                             : 2.0 * M_PI / poles[0].re_per_s;
        for (size_t i = 0; i < n; i++)
            x[i] = x_op[i] + 1e-3 * st->scale[i] * ((i % 2) ? -0.7 : 1.0);
    }
    free(poles);
    return ok;
}

int ru_steady_start(const ru_system *s, const ru_steady_opts *o, const double *x_op,
                    ru_steady *st, double *x, double *T)
{
    if (o->x_start && o->period_start_s > 0) {
        memcpy(x, o->x_start, st->n * sizeof *x);
        *T = o->period_start_s;
        st->v.start = "given state";
        return 1;
    }
    if (!x_op)
        return 0;
    if (start_from_df(s, o, x_op, x, T)) {
        st->v.start = "describing function";
        return 1;
    }
    if (start_from_kick(s, st, x_op, x, T)) {
        st->v.start = "transient";
        return 2; /* grows from a kick: a transient first */
    }
    return 0;
}

