/* plot_trace.c: the decimated min/max waveform collector (ringup/plot.h).
 *
 * Invariants:
 * - Column k covers [t0 + k w, t0 + (k + 1) w) with k < cap; only columns that got a
 *   sample are stored, in increasing k (samples arrive in time order), so at most
 *   cap entries exist and memory is fixed at create.
 * - A sample at or past t0 + cap w folds the columns pairwise (w doubles, k -> k/2,
 *   neighbours with the same new k merge their min and max) until it fits.
 * - t_s[i] is always the centre of entry i's column for the current w. */
#include "ringup/plot.h"

#include <math.h>
#include <stdlib.h>

struct ru_trace {
    size_t cap;     /* columns */
    size_t n;       /* filled entries */
    double t0_s;    /* time of the first sample (s) */
    double w_s;     /* column width (s) */
    int started;    /* 1 once the first sample is in */
    size_t *col;    /* column index of each entry */
    double *t_s;    /* column centre times (s) */
    double *min_v;  /* smallest sample (V) */
    double *max_v;  /* largest sample (V) */
};

ru_status ru_trace_create(double span_s, size_t columns, ru_trace **out)
{
    if (!out)
        return RU_EINPUT;
    *out = NULL;
    if (!(span_s > 0) || !isfinite(span_s))
        return RU_EINPUT;
    if (columns == 0)
        columns = RU_TRACE_COLUMNS;
    ru_trace *tr = calloc(1, sizeof *tr);
    if (!tr)
        return RU_ENOMEM;
    tr->cap = columns;
    tr->w_s = span_s / (double)columns;
    tr->col = malloc(columns * sizeof *tr->col);
    tr->t_s = malloc(columns * sizeof *tr->t_s);
    tr->min_v = malloc(columns * sizeof *tr->min_v);
    tr->max_v = malloc(columns * sizeof *tr->max_v);
    if (!tr->col || !tr->t_s || !tr->min_v || !tr->max_v) {
        ru_trace_destroy(tr);
        return RU_ENOMEM;
    }
    *out = tr;
    return RU_OK;
}

void ru_trace_destroy(ru_trace *tr)
{
    if (!tr)
        return;
    free(tr->col);
    free(tr->t_s);
    free(tr->min_v);
    free(tr->max_v);
    free(tr);
}

/* Doubles the column width and merges the entries that now share a column. */
static void trace_fold(ru_trace *tr)
{
    size_t m = 0;
    tr->w_s *= 2.0;
    for (size_t i = 0; i < tr->n; i++) {
        size_t k = tr->col[i] / 2;
        if (m > 0 && tr->col[m - 1] == k) {
            if (tr->min_v[i] < tr->min_v[m - 1])
                tr->min_v[m - 1] = tr->min_v[i];
            if (tr->max_v[i] > tr->max_v[m - 1])
                tr->max_v[m - 1] = tr->max_v[i];
            continue;
        }
        tr->col[m] = k;
        tr->min_v[m] = tr->min_v[i];
        tr->max_v[m] = tr->max_v[i];
        tr->t_s[m] = tr->t0_s + ((double)k + 0.5) * tr->w_s;
        m++;
    }
    tr->n = m;
}

ru_status ru_trace_push(ru_trace *tr, double t_s, double v)
{
    if (!tr || !isfinite(t_s) || !isfinite(v))
        return RU_EINPUT;
    if (!tr->started) {
        tr->t0_s = t_s;
        tr->started = 1;
    }
    if (t_s < tr->t0_s || (tr->n > 0 && t_s < tr->t_s[tr->n - 1] - 0.5 * tr->w_s))
        return RU_EINPUT;
    double kf = floor((t_s - tr->t0_s) / tr->w_s);
    while (kf >= (double)tr->cap) {
        trace_fold(tr);
        kf = floor((t_s - tr->t0_s) / tr->w_s);
    }
    size_t k = (size_t)kf;
    if (tr->n > 0 && tr->col[tr->n - 1] >= k) {
        size_t i = tr->n - 1;  /* same column (a rounding tie counts as the last) */
        if (v < tr->min_v[i])
            tr->min_v[i] = v;
        if (v > tr->max_v[i])
            tr->max_v[i] = v;
        return RU_OK;
    }
    tr->col[tr->n] = k;
    tr->t_s[tr->n] = tr->t0_s + ((double)k + 0.5) * tr->w_s;
    tr->min_v[tr->n] = v;
    tr->max_v[tr->n] = v;
    tr->n++;
    return RU_OK;
}

void ru_trace_get(const ru_trace *tr, ru_trace_view *view)
{
    if (!view)
        return;
    view->n = tr ? tr->n : 0;
    view->t_s = tr ? tr->t_s : NULL;
    view->min_v = tr ? tr->min_v : NULL;
    view->max_v = tr ? tr->max_v : NULL;
}
