/* plot_margin.c: the negative-resistance figure: the impedance the rest of the
 * circuit presents to a part over frequency, two panels sharing the frequency
 * axis: Re Z with the -ESR line (below it the rest out-drives the part's loss)
 * and Im Z with the part's reactance negated (the operating frequency is where
 * they meet), the operating frequency marked in both.
 *
 * Invariants: as every figure (plot_impl.h), the check accepts only data the draw
 * function renders; nothing is kept between calls. */
#include "output/plot_impl.h"
#include "ringup/format.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#ifdef RU_HAVE_PLPLOT
#include <plplot/plplot.h>
#endif

static ru_status check_margin(const void *data, ru_error *err)
{
    const ru_plot_margin *m = data;
    if (m->n < 2 || !m->f_hz || !m->re_ohm || !m->im_ohm)
        return ru_error_set(err, RU_EINPUT, "", 0, 0, "margin plot: needs 2 or more points");
    for (size_t i = 0; i < m->n; i++) {
        if (!(m->f_hz[i] > 0) || !isfinite(m->re_ohm[i]) || !isfinite(m->im_ohm[i]) ||
            (m->part_x_ohm && !isfinite(m->part_x_ohm[i])))
            return ru_error_set(err, RU_EINPUT, "", 0, 0,
                                "margin plot: a point is not finite");
        if (i > 0 && !(m->f_hz[i] > m->f_hz[i - 1]))
            return ru_error_set(err, RU_EINPUT, "", 0, 0,
                                "margin plot: frequencies must ascend");
    }
    return RU_OK;
}

#ifdef RU_HAVE_PLPLOT
/* Polyline of y against f (scaled by kf), scaled by k, clipped to [lo, hi]. */
static void curve(const ru_plot_margin *m, const double *y, double kf, double k, double lo,
                  double hi, int colour, int style)
{
    double *xs = malloc(m->n * sizeof *xs), *ys = malloc(m->n * sizeof *ys);
    if (xs && ys) {
        for (size_t i = 0; i < m->n; i++) {
            xs[i] = m->f_hz[i] * kf;
            ys[i] = fmin(fmax(y[i] * k, lo), hi);
        }
        plot_line(m->n, xs, ys, colour, 2.0, style);
    }
    free(xs);
    free(ys);
}

static void range(const double *y, size_t n, double neg, double *lo, double *hi)
{
    for (size_t i = 0; i < n; i++) {
        *lo = fmin(*lo, neg * y[i]);
        *hi = fmax(*hi, neg * y[i]);
    }
}

static void vline(double x, double lo, double hi)
{
    double xx[2] = {x, x}, yy[2] = {lo, hi};
    plot_line(2, xx, yy, PC_MUTED, 1.2, 2);
}

static void draw_margin(const void *data)
{
    const ru_plot_margin *m = data;
    char title[160], sub[200], nm[80], yl[64], xl[64], a[32], b[32];
    const char *pr, *pf;
    double kf = plot_si_scale(m->f_hz[m->n - 1], &pf);
    double x0 = m->f_hz[0] * kf, x1 = m->f_hz[m->n - 1] * kf;
    double rlo = 0, rhi = 0, ilo = INFINITY, ihi = -INFINITY;
    range(m->re_ohm, m->n, 1, &rlo, &rhi);
    if (isfinite(m->esr_ohm))
        rlo = fmin(rlo, -m->esr_ohm), rhi = fmax(rhi, -m->esr_ohm);
    range(m->im_ohm, m->n, 1, &ilo, &ihi);
    /* the part's reactance is steep: show it only within the rest's span */
    double ispan = fmax(ihi - ilo, fabs(ihi) + fabs(ilo)) + 1e-300;
    ilo -= 0.5 * ispan, ihi += 0.5 * ispan;
    plot_pad(&rlo, &rhi, 0.08);
    double k = plot_si_scale(fmax(fmax(fabs(rlo), fabs(rhi)), fmax(fabs(ilo), fabs(ihi))),
                             &pr);
    plot_escape(nm, sizeof nm, m->part ? m->part : "part");
    pladv(0);
    snprintf(title, sizeof title, "Impedance the circuit presents to %s", nm);
    int len = snprintf(sub, sizeof sub, "rest of the circuit linearized at the operating "
                                        "point");
    if (isfinite(m->f_op_hz))
        len += snprintf(sub + len, sizeof sub - (size_t)len, "; operating at %s",
                        ru_format_si(m->f_op_hz, "Hz", 7, a, sizeof a));
    if (isfinite(m->margin))
        snprintf(sub + len, sizeof sub - (size_t)len, ", margin %.3g (ESR %s)", m->margin,
                 ru_format_si(m->esr_ohm, "ohm", 4, b, sizeof b));
    plot_titles(title, sub);
    plot_axis_label(yl, sizeof yl, "Re Z", pr, k, "ohm");
    plot_axis_label(xl, sizeof xl, "frequency", pf, kf, "Hz");
    plot_frame(PLOT_VX0, PLOT_VX1, 0.52, PLOT_VY1, x0, x1, rlo * k, rhi * k, 0, 0, 0, 0,
               NULL, yl);
    curve(m, m->re_ohm, kf, k, rlo * k, rhi * k, PC_BLUE, 1);
    if (isfinite(m->esr_ohm)) {
        double xx[2] = {x0, x1}, yy[2] = {-m->esr_ohm * k, -m->esr_ohm * k};
        plot_line(2, xx, yy, PC_VERMIL, 1.5, 2);
    }
    if (isfinite(m->f_op_hz))
        vline(m->f_op_hz * kf, rlo * k, rhi * k);
    plot_axis_label(yl, sizeof yl, "Im Z", pr, k, "ohm");
    plot_frame(PLOT_VX0, PLOT_VX1, PLOT_VY0, 0.44, x0, x1, ilo * k, ihi * k, 0, 0, 0, 0,
               xl, yl);
    curve(m, m->im_ohm, kf, k, ilo * k, ihi * k, PC_GREEN, 1);
    if (m->part_x_ohm) {
        double *neg = malloc(m->n * sizeof *neg);
        if (neg) {
            for (size_t i = 0; i < m->n; i++)
                neg[i] = -m->part_x_ohm[i];
            curve(m, neg, kf, k, ilo * k, ihi * k, PC_ORANGE, 2);
        }
        free(neg);
    }
    if (isfinite(m->f_op_hz))
        vline(m->f_op_hz * kf, ilo * k, ihi * k);
    double lx = PLOT_VX0, ly = 0.855;
    plot_legend_item(&lx, &ly, PC_BLUE, 0, 2.0, "Re Z");
    if (isfinite(m->esr_ohm))
        plot_legend_item(&lx, &ly, PC_VERMIL, 1, 1.5, "-ESR");
    plot_legend_item(&lx, &ly, PC_GREEN, 0, 2.0, "Im Z");
    if (m->part_x_ohm)
        plot_legend_item(&lx, &ly, PC_ORANGE, 1, 2.0, "-X of the part");
    if (isfinite(m->f_op_hz))
        plot_legend_item(&lx, &ly, PC_MUTED, 1, 1.2, "operating frequency");
}
#else
#define draw_margin NULL
#endif

const plot_figure plot_fig_margin = {"margin", check_margin, draw_margin};
