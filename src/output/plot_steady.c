/* plot_steady.c: the figures of the settled tone: one period of the periodic steady
 * state on the probe, the Floquet multipliers against the unit circle, and the
 * phase noise L(fm) from the perturbation projection vector with Leeson's formula
 * beside it and its regions labelled.
 *
 * Invariants: as every figure (plot_impl.h), the checks accept only data the draw
 * functions render; nothing is kept between calls. */
#include "output/plot_impl.h"
#include "ringup/format.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#ifdef RU_HAVE_PLPLOT
#include <plplot/plplot.h>
#endif

/* ---- one period ---- */

static ru_status check_period(const void *data, ru_error *err)
{
    const ru_plot_period *p = data;
    if (p->n < 8 || !p->v || !(p->period_s > 0) || !isfinite(p->period_s))
        return ru_error_set(err, RU_EINPUT, "", 0, 0,
                            "period plot: needs 8 or more samples and a period");
    for (size_t i = 0; i < p->n; i++)
        if (!isfinite(p->v[i]))
            return ru_error_set(err, RU_EINPUT, "", 0, 0, "period plot: a sample is not finite");
    return RU_OK;
}

#ifdef RU_HAVE_PLPLOT
static void hline(double x0, double x1, double y, int colour, int style)
{
    double x[2] = {x0, x1}, yy[2] = {y, y};
    plot_line(2, x, yy, colour, 1.2, style);
}

static void draw_period(const void *data)
{
    const ru_plot_period *p = data;
    const char *tp, *vp;
    char sub[240], xl[64], yl[64], pr[80], a[32], b[32], c[32];
    double lo = INFINITY, hi = -INFINITY;
    for (size_t i = 0; i < p->n; i++) {
        lo = fmin(lo, p->v[i]);
        hi = fmax(hi, p->v[i]);
    }
    double mx = isfinite(p->max_v) ? p->max_v : hi, mn = isfinite(p->min_v) ? p->min_v : lo;
    lo = fmin(lo, mn);
    hi = fmax(hi, mx);
    double kt = plot_si_scale(p->period_s, &tp), kv = plot_si_scale(fmax(fabs(lo), fabs(hi)), &vp);
    double ylo = lo, yhi = hi;
    plot_pad(&ylo, &yhi, 0.08);
    plot_escape(pr, sizeof pr, p->probe ? p->probe : "probe");
    pladv(0);
    char title[160];
    snprintf(title, sizeof title, "One period of v(%s) in the periodic steady state", pr);
    int len = snprintf(sub, sizeof sub, "period %s, amplitude %s",
                       ru_format_si(p->period_s, "s", 7, a, sizeof a),
                       ru_format_si(0.5 * (mx - mn), "V", 5, b, sizeof b));
    if (isfinite(p->thd_percent))
        len += snprintf(sub + len, sizeof sub - (size_t)len, ", THD %.3g %%", p->thd_percent);
    if (isfinite(p->dc_v))
        snprintf(sub + len, sizeof sub - (size_t)len, ", DC %s",
                 ru_format_si(p->dc_v, "V", 4, c, sizeof c));
    plot_titles(title, sub);
    plot_axis_label(xl, sizeof xl, "time in the period", tp, kt, "s");
    plot_axis_label(yl, sizeof yl, "voltage", vp, kv, "V");
    double t1 = p->period_s * kt;
    plot_frame(PLOT_VX0, PLOT_VX1, PLOT_VY0, PLOT_VY1, 0, t1, ylo * kv, yhi * kv, 0, 0, 0, 0,
               xl, yl);
    hline(0, t1, mx * kv, PC_MUTED, 2);
    hline(0, t1, mn * kv, PC_MUTED, 2);
    if (isfinite(p->dc_v))
        hline(0, t1, p->dc_v * kv, PC_GREEN, 3);
    double *x = malloc((p->n + 1) * sizeof *x), *y = malloc((p->n + 1) * sizeof *y);
    if (x && y) {
        for (size_t i = 0; i <= p->n; i++) { /* closed: the last point is the first */
            x[i] = t1 * (double)i / (double)p->n;
            y[i] = p->v[i % p->n] * kv;
        }
        plot_line(p->n + 1, x, y, PC_BLUE, 2.0, 1);
    }
    free(x);
    free(y);
    double lx = PLOT_VX0, ly = 0.855;
    plot_legend_item(&lx, &ly, PC_BLUE, 0, 2.0, "probe");
    plot_legend_item(&lx, &ly, PC_MUTED, 1, 1.2, "extremes");
    if (isfinite(p->dc_v))
        plot_legend_item(&lx, &ly, PC_GREEN, 1, 1.2, "DC level (mean)");
}
#else
#define draw_period NULL
#endif

const plot_figure plot_fig_period = {"steady", check_period, draw_period};

/* ---- Floquet multipliers ---- */

static ru_status check_floquet(const void *data, ru_error *err)
{
    const ru_plot_floquet *f = data;
    if (f->n < 1 || !f->re || !f->im)
        return ru_error_set(err, RU_EINPUT, "", 0, 0, "Floquet plot: no multipliers");
    for (size_t i = 0; i < f->n; i++)
        if (!isfinite(f->re[i]) || !isfinite(f->im[i]))
            return ru_error_set(err, RU_EINPUT, "", 0, 0,
                                "Floquet plot: a multiplier is not finite");
    return RU_OK;
}

#ifdef RU_HAVE_PLPLOT
static void draw_floquet(const void *data)
{
    const ru_plot_floquet *f = data;
    char sub[200], a[32], b[64], line[128];
    double r = 1.0;
    for (size_t i = 0; i < f->n; i++)
        r = fmax(r, hypot(f->re[i], f->im[i]));
    r *= 1.15;
    pladv(0);
    if (isfinite(f->recovery_time_s) && f->period_s > 0)
        snprintf(sub, sizeof sub, "amplitude recovery (from the second): %s, %.4g cycles",
                 ru_format_si(f->recovery_time_s, "s", 4, a, sizeof a),
                 f->recovery_time_s / f->period_s);
    else
        snprintf(sub, sizeof sub, "amplitude recovery from the second multiplier");
    plot_titles("Floquet multipliers of the limit cycle", sub);
    /* a square plot area: 0.71 of 600 px high is 0.444 of 960 px wide */
    double vx1 = PLOT_VX0 + (PLOT_VY1 - PLOT_VY0) * PAGE_H / PAGE_W;
    plot_frame(PLOT_VX0, vx1, PLOT_VY0, PLOT_VY1, -r, r, -r, r, 0, 0, 0, 0,
               "real part", "imaginary part");
    double cx[181], cy[181];
    for (int k = 0; k <= 180; k++) {
        cx[k] = cos(2.0 * M_PI * k / 180.0);
        cy[k] = sin(2.0 * M_PI * k / 180.0);
    }
    plot_line(181, cx, cy, PC_MUTED, 1.2, 2);
    for (size_t i = 1; i < f->n; i++)
        plot_cross(f->re[i], f->im[i], PC_BLUE, 6.0);
    plot_ring(f->re[0], f->im[0], PC_VERMIL, 8.0);
    double lx = PLOT_VX0, ly = 0.855;
    plot_legend_item(&lx, &ly, PC_VERMIL, 5, 2.0, "phase (1)");
    plot_legend_item(&lx, &ly, PC_BLUE, 4, 2.0, "the others");
    plot_legend_item(&lx, &ly, PC_MUTED, 1, 1.2, "unit circle");
    plvpor(vx1 + 0.05, 0.97, PLOT_VY0, PLOT_VY1);
    plwind(0, 1, 0, 1);
    double y = 0.95;
    plot_text(0, y, 0, PC_INK, 0.95, "multipliers, by size:");
    for (size_t i = 0; i < f->n && i < 14; i++) {
        y -= 0.065;
        snprintf(b, sizeof b, "%s", i == 0 ? "  (phase)" : i == 1 ? "  (recovery)" : "");
        snprintf(line, sizeof line, i == 0 ? "%.10g %c %.3gj%s" : "%.6g %c %.4gj%s", f->re[i],
                 f->im[i] < 0 ? '-' : '+', fabs(f->im[i]), b);
        plot_text(0, y, 0, i == 0 ? PC_VERMIL : PC_INK, 0.9, line);
    }
    if (f->n > 14)
        plot_text(0, y - 0.065, 0, PC_MUTED, 0.9, "...");
}
#else
#define draw_floquet NULL
#endif

const plot_figure plot_fig_floquet = {"floquet", check_floquet, draw_floquet};

/* ---- phase noise ---- */

static ru_status check_phase_noise(const void *data, ru_error *err)
{
    const ru_plot_phase_noise *p = data;
    if (p->n < 2 || !p->offset_hz || !p->ppv_dbc || !(p->f0_hz > 0))
        return ru_error_set(err, RU_EINPUT, "", 0, 0,
                            "phase-noise plot: needs 2 or more offsets and a carrier");
    for (size_t i = 0; i < p->n; i++)
        if (!(p->offset_hz[i] > 0) || (i > 0 && !(p->offset_hz[i] > p->offset_hz[i - 1])) ||
            !isfinite(p->ppv_dbc[i]))
            return ru_error_set(err, RU_EINPUT, "", 0, 0,
                                "phase-noise plot: offsets must be positive and ascending, "
                                "levels finite");
    return RU_OK;
}

#ifdef RU_HAVE_PLPLOT
/* A dotted vertical line at offset f (Hz, world x = log10 f) labelled at the top. */
static void pn_mark(double f, double ylo, double yhi, const char *label, double xlo,
                    double xhi)
{
    double x = log10(f);
    if (!(x > xlo && x < xhi))
        return;
    double tx[2] = {x, x}, ty[2] = {ylo, yhi};
    plot_line(2, tx, ty, PC_MUTED, 1.0, 3);
    plot_text(x, yhi - 0.05 * (yhi - ylo), x > 0.5 * (xlo + xhi) ? 1.0 : 0.0, PC_MUTED, 0.85,
              label);
}

/* Region names along the bottom: below the Lorentzian's width, between it and the
 * flicker corner (1/f^3), above (1/f^2). */
static void pn_regions(const ru_plot_phase_noise *p, double xlo, double xhi, double ylo,
                       double yhi)
{
    double y = ylo + 0.05 * (yhi - ylo);
    double xl = isfinite(p->lorentz_hz) && p->lorentz_hz > 0 ? log10(p->lorentz_hz) : xlo;
    double xf = isfinite(p->flicker_hz) && p->flicker_hz > 0 ? log10(p->flicker_hz) : xl;
    xl = fmin(fmax(xl, xlo), xhi);
    xf = fmin(fmax(xf, xl), xhi);
    if (xl - xlo > 0.08 * (xhi - xlo))
        plot_text(0.5 * (xlo + xl), y, 0.5, PC_GREEN, 0.9, "flat (Lorentzian)");
    if (xf - xl > 0.08 * (xhi - xlo))
        plot_text(0.5 * (xl + xf), y, 0.5, PC_GREEN, 0.9, "1/f³ (flicker)");
    if (xhi - xf > 0.08 * (xhi - xlo))
        plot_text(0.5 * (xf + xhi), y, 0.5, PC_GREEN, 0.9, "1/f² (white noise)");
}

static void draw_phase_noise(const void *data)
{
    const ru_plot_phase_noise *p = data;
    char sub[240], a[32], b[32], c[32];
    double xlo = log10(p->offset_hz[0]), xhi = log10(p->offset_hz[p->n - 1]);
    double lo = INFINITY, hi = -INFINITY;
    for (size_t i = 0; i < p->n; i++) {
        lo = fmin(lo, p->ppv_dbc[i]);
        hi = fmax(hi, p->ppv_dbc[i]);
        if (p->leeson_dbc && isfinite(p->leeson_dbc[i])) {
            lo = fmin(lo, p->leeson_dbc[i]);
            hi = fmax(hi, p->leeson_dbc[i]);
        }
    }
    double ylo = 10.0 * floor(lo / 10.0) - 10.0, yhi = 10.0 * ceil(hi / 10.0) + 10.0;
    pladv(0);
    snprintf(sub, sizeof sub, "carrier %s; phase diffusion c = %.4g s; period jitter %s",
             ru_format_si(p->f0_hz, "Hz", 6, a, sizeof a), p->c_s,
             ru_format_si(p->period_jitter_s, "s", 3, b, sizeof b));
    plot_titles("Phase noise L(fm) by the perturbation projection vector", sub);
    plot_frame(PLOT_VX0, PLOT_VX1, PLOT_VY0, PLOT_VY1, xlo, xhi, ylo, yhi, 1, 1, 0, 0,
               "offset from the carrier fm", "L(fm) (dBc/Hz)");
    double *x = malloc(p->n * sizeof *x), *y = malloc(p->n * sizeof *y);
    if (x && y) {
        for (size_t i = 0; i < p->n; i++)
            x[i] = log10(p->offset_hz[i]);
        if (p->leeson_dbc) {
            size_t m = 0;
            for (size_t i = 0; i < p->n; i++)
                if (isfinite(p->leeson_dbc[i])) {
                    x[m] = log10(p->offset_hz[i]);
                    y[m++] = p->leeson_dbc[i];
                }
            plot_line(m, x, y, PC_ORANGE, 2.0, 2);
            for (size_t i = 0; i < p->n; i++)
                x[i] = log10(p->offset_hz[i]);
        }
        for (size_t i = 0; i < p->n; i++)
            y[i] = p->ppv_dbc[i];
        plot_line(p->n, x, y, PC_BLUE, 2.2, 1);
    }
    free(x);
    free(y);
    snprintf(a, sizeof a, " π f0² c ");
    pn_mark(p->lorentz_hz, ylo, yhi, a, xlo, xhi);
    if (isfinite(p->flicker_hz))
        pn_mark(p->flicker_hz, ylo, yhi, " 1/f³ corner ", xlo, xhi);
    if (p->leeson_dbc && isfinite(p->leeson_hz)) {
        snprintf(c, sizeof c, " f0/2QL ");
        pn_mark(p->leeson_hz, ylo, yhi - 0.06 * (yhi - ylo), c, xlo, xhi);
    }
    if (p->leeson_dbc && p->leeson_fc_hz > 0)
        pn_mark(p->leeson_fc_hz, ylo, yhi - 0.12 * (yhi - ylo), " fc (Leeson) ", xlo, xhi);
    if (p->leeson_dbc && p->leeson_floor_dbc < 0 && p->leeson_floor_dbc > ylo &&
        p->leeson_floor_dbc < yhi)
        plot_text(xhi - 0.01 * (xhi - xlo), p->leeson_floor_dbc + 0.04 * (yhi - ylo), 1.0,
                  PC_ORANGE, 0.85, "floor 2FkT/Ps");
    pn_regions(p, xlo, xhi, ylo, yhi);
    double lx = PLOT_VX0, ly = 0.855;
    plot_legend_item(&lx, &ly, PC_BLUE, 0, 2.2, "PPV (Demir, Mehrotra, Roychowdhury)");
    if (p->leeson_dbc)
        plot_legend_item(&lx, &ly, PC_ORANGE, 1, 2.0, "Leeson's formula");
}
#else
#define draw_phase_noise NULL
#endif

const plot_figure plot_fig_phase_noise = {"phase-noise", check_phase_noise,
                                          draw_phase_noise};
