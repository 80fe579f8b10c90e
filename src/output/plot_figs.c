/* plot_figs.c: the time-domain figures: waveform with envelope, envelope growth on a
 * log scale, harmonic levels of the settled tone.
 *
 * Invariants: checks accept only data the draw functions can render (finite times,
 * at least two points); draw functions scale data into SI-prefixed units on the fly
 * in fixed-size chunks or caller-sized temporary arrays, never keep anything. */
#include "output/plot_impl.h"
#include "ringup/format.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#ifdef RU_HAVE_PLPLOT
#include <plplot/plplot.h>
#endif

#define CHUNK 256 /* points scaled and drawn at a time */

/* ---- waveform ---- */

static ru_status check_wave(const void *data, ru_error *err)
{
    const ru_plot_wave *w = data;
    if (w->trace.n < 2 || !w->trace.t_s || !w->trace.min_v || !w->trace.max_v)
        return ru_error_set(err, RU_EINPUT, "", 0, 0,
                            "wave plot: the trace needs at least 2 columns");
    if (w->nenv > 0 && (!w->env_t_s || !w->env_v))
        return ru_error_set(err, RU_EINPUT, "", 0, 0, "wave plot: envelope arrays missing");
    return RU_OK;
}

#ifdef RU_HAVE_PLPLOT
/* Columns of the trace inside [ta, tb] (plot units). */
static size_t wave_columns_in(const ru_trace_view *tv, double kt, double ta, double tb)
{
    size_t n = 0;
    for (size_t i = 0; i < tv->n; i++)
        n += tv->t_s[i] * kt >= ta && tv->t_s[i] * kt <= tb;
    return n;
}

/* Each column as its own vertical stroke from min to max: for a window with few
 * columns, where joining them would draw a sawtooth the circuit never made. */
static void wave_bars(const ru_trace_view *tv, double kt, double kv)
{
    for (size_t i = 0; i < tv->n; i++) {
        double x[2] = {tv->t_s[i] * kt, tv->t_s[i] * kt};
        double y[2] = {tv->min_v[i] * kv, tv->max_v[i] * kv};
        plot_line(2, x, y, PC_BLUE, 2.0, 1);
    }
}

/* Zig-zag through each column's min and max, so a column narrower than a period
 * shows the full swing and a resolved waveform shows its shape. */
static void wave_trace(const ru_trace_view *tv, double kt, double kv)
{
    double x[2 * CHUNK + 1], y[2 * CHUNK + 1];
    size_t i = 0;
    plcol0(PC_BLUE);
    plwidth(1.0);
    while (i < tv->n) {
        size_t m = 0;
        if (i > 0) { /* join to the previous chunk */
            x[m] = tv->t_s[i - 1] * kt;
            y[m++] = tv->max_v[i - 1] * kv;
        }
        for (size_t j = 0; j < CHUNK && i < tv->n; j++, i++) {
            x[m] = tv->t_s[i] * kt;
            y[m++] = tv->min_v[i] * kv;
            x[m] = tv->t_s[i] * kt;
            y[m++] = tv->max_v[i] * kv;
        }
        plline((PLINT)m, x, y);
    }
}

/* The moving DC level at envelope point i: the midpoint of the probe's extremes
 * over the trace columns within half a period of the point (the envelope's own
 * definition, (max - following min)/2 about their midpoint, so the band touches
 * the peaks even while a bias settles); the period is the spacing of envelope
 * points (one per cycle). Without trace columns there, the settled DC. */
static double wave_centre(const ru_plot_wave *w, size_t i, double dc)
{
    const ru_trace_view *tv = &w->trace;
    double t = w->env_t_s[i];
    double per = i + 1 < w->nenv ? w->env_t_s[i + 1] - t
                 : i > 0         ? t - w->env_t_s[i - 1]
                                 : 0.0;
    size_t lo = 0, hi = tv->n; /* first column at or after t - per/2 */
    while (lo < hi) {
        size_t mid = (lo + hi) / 2;
        if (tv->t_s[mid] < t - 0.5 * per)
            lo = mid + 1;
        else
            hi = mid;
    }
    double mx = -INFINITY, mn = INFINITY;
    for (size_t k = lo; k < tv->n && tv->t_s[k] <= t + 0.5 * per; k++) {
        mx = fmax(mx, tv->max_v[k]);
        mn = fmin(mn, tv->min_v[k]);
    }
    if (!(mx >= mn)) { /* no column inside: the nearest one */
        size_t k = lo < tv->n ? lo : tv->n - 1;
        mx = tv->max_v[k];
        mn = tv->min_v[k];
    }
    return isfinite(mx) && isfinite(mn) ? 0.5 * (mx + mn) : dc;
}

/* moving DC +- envelope, one side at a time. */
static void wave_envelope(const ru_plot_wave *w, double dc, double kt, double kv)
{
    double x[CHUNK + 1], y[CHUNK + 1];
    for (int side = -1; side <= 1; side += 2) {
        size_t i = 0;
        while (i < w->nenv) {
            size_t m = 0;
            if (i > 0) {
                x[m] = w->env_t_s[i - 1] * kt;
                y[m++] = (wave_centre(w, i - 1, dc) + side * w->env_v[i - 1]) * kv;
            }
            for (size_t j = 0; j < CHUNK && i < w->nenv; j++, i++) {
                x[m] = w->env_t_s[i] * kt;
                y[m++] = (wave_centre(w, i, dc) + side * w->env_v[i]) * kv;
            }
            plot_line(m, x, y, PC_VERMIL, 2.0, 1);
        }
    }
}

static void wave_range(const ru_plot_wave *w, double dc, double *lo, double *hi)
{
    *lo = INFINITY;
    *hi = -INFINITY;
    for (size_t i = 0; i < w->trace.n; i++) {
        *lo = fmin(*lo, w->trace.min_v[i]);
        *hi = fmax(*hi, w->trace.max_v[i]);
    }
    if (isfinite(w->settled_v)) {
        *lo = fmin(*lo, dc - w->settled_v);
        *hi = fmax(*hi, dc + w->settled_v);
    }
}

static void wave_marks(const ru_plot_wave *w, double dc, double kt, double kv,
                       double t0, double t1, double ylo, double yhi, int label)
{
    char buf[96], a[32];
    if (isfinite(w->settled_v)) {
        double tx[2] = {t0, t1}, y1[2], y2[2];
        y1[0] = y1[1] = (dc + w->settled_v) * kv;
        y2[0] = y2[1] = (dc - w->settled_v) * kv;
        plot_line(2, tx, y1, PC_INK, 1.2, 2);
        plot_line(2, tx, y2, PC_INK, 1.2, 2);
    }
    if (isfinite(w->startup_time_s)) {
        double x = w->startup_time_s * kt, tx[2] = {x, x}, ty[2] = {ylo, yhi};
        plot_line(2, tx, ty, PC_GREEN, 2.0, 1);
        if (!label)
            return;
        plot_si_text(w->startup_time_s, "s", 3, a, sizeof a);
        snprintf(buf, sizeof buf, " start-up %s ", a);
        double just = (x - t0) > 0.75 * (t1 - t0) ? 1.0 : 0.0;
        plot_text(x, ylo + 0.04 * (yhi - ylo), just, PC_GREEN, 0.95, buf);
    }
}

/* One panel of the waveform figure: frame, trace, envelope and marks over the
 * time window [ta, tb] (plot units; PLplot clips what lies outside). */
static void wave_panel(const ru_plot_wave *w, double dc, double kt, double kv,
                       double vy0, double vy1, double ta, double tb, double ylo,
                       double yhi, const char *xl, const char *yl, int label)
{
    plot_frame(PLOT_VX0, PLOT_VX1, vy0, vy1, ta, tb, ylo, yhi, 0, 0, 0, 0, xl, yl);
    if (wave_columns_in(&w->trace, kt, ta, tb) < 300)
        wave_bars(&w->trace, kt, kv);
    else
        wave_trace(&w->trace, kt, kv);
    if (w->nenv > 0)
        wave_envelope(w, dc, kt, kv);
    wave_marks(w, dc, kt, kv, ta, tb, ylo, yhi, label);
}

/* When the start-up takes less than this fraction of the run, a second panel
 * below the whole run shows the first 2.5 start-up times, so the growth itself is
 * readable. */
#define WAVE_ZOOM_FRACTION 0.25

static void draw_wave(const void *data)
{
    const ru_plot_wave *w = data;
    const char *tp, *vp, *zp;
    char title[200], sub[200], xl[64], yl[96], pr[80], a[32];
    double dc = isfinite(w->dc_v) ? w->dc_v : 0.0, ylo, yhi;
    double t0 = fmin(0.0, w->trace.t_s[0]), t1 = w->trace.t_s[w->trace.n - 1];
    int zoom = isfinite(w->startup_time_s) && w->startup_time_s > 0 &&
               w->startup_time_s < WAVE_ZOOM_FRACTION * (t1 - t0);
    wave_range(w, dc, &ylo, &yhi);
    double kt = plot_si_scale(fmax(fabs(t0), fabs(t1)), &tp);
    double kv = plot_si_scale(fmax(fabs(ylo), fabs(yhi)), &vp);
    plot_pad(&ylo, &yhi, 0.08);
    ylo *= kv, yhi *= kv;
    plot_escape(pr, sizeof pr, w->probe ? w->probe : "probe");
    pladv(0);
    snprintf(title, sizeof title, "Start-up of v(%s) from power-on", pr);
    if (isfinite(w->settled_v))
        snprintf(sub, sizeof sub, "settles at %s peak around %s",
                 plot_si_text(w->settled_v, "V", 4, a, sizeof a),
                 plot_si_text(dc, "V", 3, yl, sizeof yl));
    else
        snprintf(sub, sizeof sub, "no settled amplitude");
    if (zoom)
        snprintf(sub + strlen(sub), sizeof sub - strlen(sub), "; below, the start-up");
    if (w->title && *w->title) {
        char t[120];
        plot_escape(t, sizeof t, w->title);
        snprintf(sub + strlen(sub), sizeof sub - strlen(sub), "  ·  %s", t);
    }
    plot_titles(title, sub);
    plot_axis_label(xl, sizeof xl, "time from power-on", tp, kt, "s");
    snprintf(yl, sizeof yl, "v(%s) (%sV)", pr, vp);
    if (!zoom) {
        wave_panel(w, dc, kt, kv, PLOT_VY0, PLOT_VY1, t0 * kt, t1 * kt, ylo, yhi, xl, yl,
                   1);
    } else {
        double tz = fmin(t1, 2.5 * w->startup_time_s);
        double kz = plot_si_scale(tz, &zp);
        char zl[64];
        plot_axis_label(zl, sizeof zl, "time from power-on, start-up enlarged", zp, kz,
                        "s");
        wave_panel(w, dc, kt, kv, 0.555, PLOT_VY1, t0 * kt, t1 * kt, ylo, yhi, xl, yl, 0);
        /* the zoomed stretch, shaded in the whole-run panel */
        plot_rect(t0 * kt, tz * kt, yhi - 0.03 * (yhi - ylo), yhi, PC_TINT_BLUE);
        wave_panel(w, dc, kz, kv, PLOT_VY0, 0.40, t0 * kz, tz * kz, ylo, yhi, zl, yl, 1);
    }
    plot_legend lg = {0};
    plot_legend_add(&lg, PC_BLUE, 0, 1.5, "waveform");
    if (w->nenv > 0)
        plot_legend_add(&lg, PC_VERMIL, 0, 2.0, "envelope (moving DC ± amplitude)");
    if (isfinite(w->settled_v))
        plot_legend_add(&lg, PC_INK, 1, 1.2, "settled");
    if (isfinite(w->startup_time_s)) {
        snprintf(yl, sizeof yl, "start-up (%.0f %%)",
                 100.0 * (w->startup_level > 0 ? w->startup_level : 0.9));
        plot_legend_add(&lg, PC_GREEN, 0, 2.0, yl);
    }
    plot_legend_draw(&lg);
}
#else
#define draw_wave NULL
#endif

const plot_figure plot_fig_wave = {"wave", check_wave, draw_wave};

/* ---- envelope growth ---- */

static ru_status check_growth(const void *data, ru_error *err)
{
    const ru_plot_growth *g = data;
    size_t ok = 0;
    for (size_t i = 0; g->env_t_s && g->env_v && i < g->nenv; i++)
        ok += g->env_v[i] > 0 && isfinite(g->env_v[i]) && isfinite(g->env_t_s[i]);
    if (ok < 2)
        return ru_error_set(err, RU_EINPUT, "", 0, 0,
                            "growth plot: needs at least 2 positive envelope points");
    return RU_OK;
}

#ifdef RU_HAVE_PLPLOT
/* Intercept of ln(env) = a + sigma t over the points inside the fit window: the
 * least-squares intercept for the given slope is the mean of ln(env) - sigma t. */
static int growth_anchor(const ru_plot_growth *g, double *tm, double *lnm)
{
    double st = 0, sl = 0;
    int n = 0;
    for (size_t i = 0; i < g->nenv; i++) {
        double t = g->env_t_s[i], v = g->env_v[i];
        if (v > 0 && t >= g->fit_t0_s && t <= g->fit_t1_s) {
            st += t, sl += log(v), n++;
        }
    }
    if (n == 0)
        return 0;
    *tm = st / n;  /* the least-squares line passes through the centroid */
    *lnm = sl / n;
    return 1;
}

/* Line of slope sigma through (tm, e^lnm), over [ta, tb], in plot units. */
static void growth_line(double sigma, double tm, double lnm, double ta, double tb,
                        double kt, int colour, int style)
{
    double x[2] = {ta * kt, tb * kt};
    double y[2] = {(lnm + sigma * (ta - tm)) / log(10.0),
                   (lnm + sigma * (tb - tm)) / log(10.0)};
    plot_line(2, x, y, colour, 2.0, style);
}

static void growth_points(const ru_plot_growth *g, double kt, double *lo, double *hi,
                          int draw)
{
    double x[CHUNK], y[CHUNK];
    size_t m = 0;
    for (size_t i = 0; i <= g->nenv; i++) {
        if (i == g->nenv || m == CHUNK) {
            if (draw && m > 0) {
                plot_line(m, x, y, PC_BLUE, 1.2, 1);
                plcol0(PC_BLUE);
                plssym(0, 0.6);
                plpoin((PLINT)m, x, y, 17);
            }
            m = 0;
            if (i == g->nenv)
                break;
        }
        double v = g->env_v[i];
        if (!(v > 0) || !isfinite(v))
            continue;
        x[m] = g->env_t_s[i] * kt;
        y[m++] = log10(v);
        *lo = fmin(*lo, log10(v));
        *hi = fmax(*hi, log10(v));
    }
}

static void growth_legend(const ru_plot_growth *g, int have_fit)
{
    char buf[128];
    plot_legend lg = {0};
    plot_legend_add(&lg, PC_BLUE, 2, 1, "envelope (per cycle)");
    if (have_fit) {
        snprintf(buf, sizeof buf, "fit σ = %.4g /s", g->sigma_per_s);
        plot_legend_add(&lg, PC_VERMIL, 0, 2.0, buf);
    }
    if (isfinite(g->predicted_per_s)) {
        snprintf(buf, sizeof buf, "poles σ = %.4g /s", g->predicted_per_s);
        plot_legend_add(&lg, PC_INK, 1, 2.0, buf);
    }
    plot_legend_draw(&lg);
}

static void growth_subtitle(const ru_plot_growth *g, int have_fit, char *sub,
                            size_t size)
{
    char a[32], b[32];
    if (!have_fit) {
        snprintf(sub, size, "no growth fit (too few cycles in the window)");
        return;
    }
    int k = snprintf(sub, size, "fit over %s to %s (shaded)",
                     plot_si_text(g->fit_t0_s, "s", 3, a, sizeof a),
                     plot_si_text(g->fit_t1_s, "s", 3, b, sizeof b));
    if (isfinite(g->predicted_per_s) && k > 0 && (size_t)k < size)
        snprintf(sub + k, size - (size_t)k, "; measured %+.2f %% against the poles",
                 100.0 * (g->sigma_per_s / g->predicted_per_s - 1.0));
}

static void draw_growth(const void *data)
{
    const ru_plot_growth *g = data;
    const char *tp;
    char sub[200], xl[64];
    double t0 = g->env_t_s[0], t1 = g->env_t_s[g->nenv - 1], lo = INFINITY, hi = -INFINITY;
    double kt = plot_si_scale(fmax(fabs(t0), fabs(t1)), &tp), tm = 0, lnm = 0;
    growth_points(g, kt, &lo, &hi, 0);
    if (isfinite(g->settled_v) && g->settled_v > 0)
        hi = fmax(hi, log10(g->settled_v));
    lo = floor(lo - 0.1), hi = ceil(hi + 0.1);
    int have_fit = isfinite(g->sigma_per_s) && growth_anchor(g, &tm, &lnm);
    pladv(0);
    growth_subtitle(g, have_fit, sub, sizeof sub);
    plot_titles("Envelope growth on a log scale (straight = exponential)", sub);
    plot_axis_label(xl, sizeof xl, "time from power-on", tp, kt, "s");
    plvpor(PLOT_VX0, PLOT_VX1, PLOT_VY0, PLOT_VY1);
    plwind(t0 * kt, t1 * kt, lo, hi);
    if (have_fit)
        plot_rect(g->fit_t0_s * kt, g->fit_t1_s * kt, lo, hi, PC_TINT_ORANGE);
    plot_frame(PLOT_VX0, PLOT_VX1, PLOT_VY0, PLOT_VY1, t0 * kt, t1 * kt, lo, hi, 0, 0, 1, 0,
               xl, "envelope amplitude (V peak, log scale)");
    if (have_fit) { /* centred on the window, but never past the frame's edges */
        double xm = 0.5 * (g->fit_t0_s + g->fit_t1_s) * kt, half = 0.08 * (t1 - t0) * kt;
        double just = 0.5, x = xm;
        if (xm - half < t0 * kt) {
            just = 0.0;
            x = fmax(g->fit_t0_s * kt, t0 * kt) + 0.005 * (t1 - t0) * kt;
        } else if (xm + half > t1 * kt) {
            just = 1.0;
            x = fmin(g->fit_t1_s * kt, t1 * kt) - 0.005 * (t1 - t0) * kt;
        }
        plot_text(x, lo + 0.04 * (hi - lo), just, PC_VERMIL, 0.85, "fit window");
    }
    if (isfinite(g->settled_v) && g->settled_v > 0) {
        double x[2] = {t0 * kt, t1 * kt}, y[2] = {log10(g->settled_v), log10(g->settled_v)};
        char a[32], buf[48];
        plot_line(2, x, y, PC_MUTED, 1.0, 2);
        snprintf(buf, sizeof buf, "settled %s ", plot_si_text(g->settled_v, "V", 3, a,
                                                             sizeof a));
        plot_text(t1 * kt, y[0] + 0.04 * (hi - lo), 1.0, PC_MUTED, 0.85, buf);
    }
    growth_points(g, kt, &lo, &hi, 1);
    /* the fit line spans its window and a little more; the poles' line, through the
     * same centroid, runs from the start up to the settled level (or the top) */
    double w = g->fit_t1_s - g->fit_t0_s, ta = fmax(t0, g->fit_t0_s - 0.5 * w);
    double tb = fmin(t1, g->fit_t1_s + 0.5 * w);
    if (have_fit && isfinite(g->predicted_per_s) && g->predicted_per_s > 0) {
        double top = isfinite(g->settled_v) && g->settled_v > 0 ? log(g->settled_v)
                                                                : hi * log(10.0);
        double tp_end = fmin(t1, tm + (top - lnm) / g->predicted_per_s);
        growth_line(g->predicted_per_s, tm, lnm, t0, fmax(tp_end, tb), kt, PC_INK, 2);
    }
    if (have_fit)
        growth_line(g->sigma_per_s, tm, lnm, ta, tb, kt, PC_VERMIL, 1);
    growth_legend(g, have_fit);
}
#else
#define draw_growth NULL
#endif

const plot_figure plot_fig_growth = {"growth", check_growth, draw_growth};

/* ---- harmonic levels ---- */

static ru_status check_spectrum(const void *data, ru_error *err)
{
    const ru_plot_spectrum *s = data;
    if (s->nharm < 1 || s->nharm > 64 || !s->harmonics_dbc)
        return ru_error_set(err, RU_EINPUT, "", 0, 0,
                            "spectrum plot: needs 1 to 64 harmonic levels");
    return RU_OK;
}

#ifdef RU_HAVE_PLPLOT
static void spectrum_bars(const ru_plot_spectrum *s, double floor_db)
{
    char buf[32];
    for (int k = 1; k <= s->nharm + 1; k++) {
        double db = k == 1 ? 0.0 : s->harmonics_dbc[k - 2];
        double x = k, pos = (k - 0.5) / (s->nharm + 1.0);
        snprintf(buf, sizeof buf, "H%d", k);
        plcol0(PC_INK);
        plmtex("b", 1.2, pos, 0.5, buf);
        if (!isfinite(db)) {
            plot_text(x, floor_db + 3, 0.5, PC_MUTED, 0.8, "n/a");
            continue;
        }
        int col = k == 1 ? PC_INK : (k % 2 ? PC_BLUE : PC_SKY);
        plot_rect(x - 0.3, x + 0.3, floor_db, fmax(db, floor_db), col);
        snprintf(buf, sizeof buf, "%.1f", db);
        plot_text(x, fmax(db, floor_db) + 0.035 * (10.0 - floor_db), 0.5, PC_INK, 0.8, buf);
    }
}

static void draw_spectrum(const void *data)
{
    const ru_plot_spectrum *s = data;
    char sub[160], xl[96], a[32];
    double mn = 0;
    for (int k = 0; k < s->nharm; k++)
        if (isfinite(s->harmonics_dbc[k]))
            mn = fmin(mn, s->harmonics_dbc[k]);
    double floor_db = fmax(-200.0, 20.0 * floor((mn - 10.0) / 20.0));
    pladv(0);
    if (isfinite(s->thd_percent))
        snprintf(sub, sizeof sub, "THD %.3g %% (harmonics 2 to %d); bars start at the "
                 "plot floor, %.0f dBc", s->thd_percent, s->nharm + 1, floor_db);
    else
        snprintf(sub, sizeof sub, "THD not known");
    plot_titles("Harmonics of the settled tone, relative to the fundamental", sub);
    snprintf(xl, sizeof xl, "harmonic (H1 = fundamental, %s)",
             plot_si_text(s->frequency_hz, "Hz", 4, a, sizeof a));
    plvpor(PLOT_VX0, PLOT_VX1, PLOT_VY0, PLOT_VY1);
    plwind(0.5, s->nharm + 1.5, floor_db, 10.0);
    plcol0(PC_GRID);
    plbox("", 0, 0, "g", 0, 0);
    plcol0(PC_INK);
    plbox("bc", 0, 0, "bcnstv", 0, 0);
    plmtex("b", 3.3, 0.5, 0.5, xl);
    plmtex("l", 4.2, 0.5, 0.5, "level (dBc)");
    spectrum_bars(s, floor_db);
    plot_legend lg = {0};
    plot_legend_add(&lg, PC_INK, 3, 1, "fundamental (0 dBc)");
    plot_legend_add(&lg, PC_BLUE, 3, 1, "odd harmonics");
    plot_legend_add(&lg, PC_SKY, 3, 1, "even harmonics");
    plot_legend_draw(&lg);
}
#else
#define draw_spectrum NULL
#endif

const plot_figure plot_fig_spectrum = {"spectrum", check_spectrum, draw_spectrum};
