/* steady_wave.c: one period of the converged periodic steady state, integrated once
 * more: every state on a uniform grid by dense output (the CSV and the FFT), the
 * probe's extremes by root finding on its derivative and the probe's DC level (the
 * grid mean, spectrally exact for a smooth periodic wave). The harmonics are taken
 * from the grid by the analysis layer (the measure layer sits above the engines). */
#include "engines/steady_impl.h"

#include "engines/pss_int.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

typedef struct wave_sink {
    ru_steady *st;
    size_t k;
} wave_sink;

static ru_status wave_sample(void *user, double t_s, const double *x)
{
    (void)t_s;
    wave_sink *w = user;
    ru_steady *st = w->st;
    if (w->k >= st->v.ngrid)
        return RU_OK;
    memcpy(st->grid_x + w->k * st->n, x, st->n * sizeof *x);
    double p = st->probe_offset;
    for (size_t i = 0; i < st->n; i++)
        p += st->probe_g[i] * x[i];
    st->grid_probe[w->k++] = p;
    return RU_OK;
}

ru_status ru_steady_wave(const ru_system *s, ru_steady *st, ru_error *err)
{
    ru_steady_view *v = &st->v;
    size_t ng = v->ngrid;
    double *x_end = malloc(st->n * sizeof *x_end);
    if (!x_end)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "out of memory");
    wave_sink w = {st, 0};
    ru_pint_req q = {.t_end_s = v->period_s,
                     .rtol = st->rtol,
                     .atol_rel = st->rtol * RU_STEADY_ATOL_OVER_RTOL,
                     .scale = st->scale,
                     .dt_sample_s = v->period_s / (double)ng,
                     .nsamples = ng,
                     .fn = wave_sample,
                     .user = &w,
                     .probe_g = st->probe_g};
    ru_pint_out out;
    ru_status rs = ru_pint_run(s, &q, st->x0, x_end, NULL, &out, err);
    free(x_end);
    v->steps += out.steps;
    if (rs != RU_OK)
        return rs;
    double mx = -INFINITY, mn = INFINITY, sum = 0.0;
    for (size_t k = 0; k < w.k; k++) {
        mx = fmax(mx, st->grid_probe[k]);
        mn = fmin(mn, st->grid_probe[k]);
        sum += st->grid_probe[k];
    }
    /* root-found extremes are exact; the grid's are a floor for them */
    double rmax = out.probe_max + st->probe_offset, rmin = out.probe_min + st->probe_offset;
    v->probe_max_v = isfinite(rmax) ? fmax(rmax, mx) : mx;
    v->probe_min_v = isfinite(rmin) ? fmin(rmin, mn) : mn;
    v->amplitude_v = 0.5 * (v->probe_max_v - v->probe_min_v);
    v->dc_level_v = sum / (double)w.k;
    return RU_OK;
}
