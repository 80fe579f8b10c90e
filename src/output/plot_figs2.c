/* plot_figs2.c: the small-signal figures: pole map, Bode plots of the
 * loop gain and of a network response.
 *
 * Invariants: as in plot_figs.c (checks first; draw functions keep nothing and
 * allocate nothing: long arrays are drawn in fixed-size chunks). */
#include "output/plot_impl.h"
#include "ringup/format.h"

#include <math.h>
#include <stdio.h>
#include <string.h>

#ifdef RU_HAVE_PLPLOT
#include <plplot/plplot.h>
#endif

#define CHUNK 256 /* points scaled and drawn at a time */
#define TWO_PI 6.283185307179586

/* ---- pole map ---- */

static ru_status check_poles(const void *data, ru_error *err)
{
    const ru_plot_poles *p = data;
    if (p->n < 1 || !p->poles)
        return ru_error_set(err, RU_EINPUT, "", 0, 0, "pole map: no poles");
    if (p->dominant >= (int)p->n)
        return ru_error_set(err, RU_EINPUT, "", 0, 0, "pole map: dominant index %d out "
                            "of range", p->dominant);
    if (p->ndrift > 0 && (!p->drift || !p->drift_amp_v))
        return ru_error_set(err, RU_EINPUT, "", 0, 0, "pole map: drift arrays missing");
    return RU_OK;
}

#ifdef RU_HAVE_PLPLOT
/* In view: within 4x the dominant pole's distance from the origin (all poles when
 * there is no dominant pair). */
static int pole_in_view(const ru_plot_poles *p, const ru_pole *q)
{
    if (p->dominant < 0)
        return 1;
    const ru_pole *d = &p->poles[p->dominant];
    return hypot(q->re_per_s, q->im_rad_per_s) <= 4.0 * hypot(d->re_per_s, d->im_rad_per_s);
}

/* The view in 1/s on both axes: every pole in view and the drift, the jw axis with
 * room on both sides, then widened along one axis so that a unit is as long on
 * both (the page's plot area is wider than tall): angles and Q read true. */
static void poles_range(const ru_plot_poles *p, double r[4], size_t *far, double *far_re)
{
    r[0] = 0, r[1] = 0, r[2] = 0, r[3] = 0;
    *far = 0, *far_re = 0;
    for (size_t i = 0; i < p->n + p->ndrift; i++) {
        const ru_pole *q = i < p->n ? &p->poles[i] : &p->drift[i - p->n];
        if (i < p->n && !pole_in_view(p, q)) {
            (*far)++;
            *far_re = fmin(*far_re, q->re_per_s);
            continue;
        }
        r[0] = fmin(r[0], q->re_per_s), r[1] = fmax(r[1], q->re_per_s);
        r[2] = fmin(r[2], -fabs(q->im_rad_per_s));
        r[3] = fmax(r[3], fabs(q->im_rad_per_s));
    }
    double xs = r[1] - r[0];
    if (!(xs > 0))
        xs = fmax(1.0, 0.05 * (r[3] - r[2]));
    r[0] -= 0.25 * xs, r[1] += 0.25 * xs;  /* room for the jw axis and labels */
    plot_pad(&r[2], &r[3], 0.15);
    double w = (PLOT_VX1 - PLOT_VX0) * PAGE_W, h = (PLOT_VY1 - PLOT_VY0) * PAGE_H;
    double dx = r[1] - r[0], dy = r[3] - r[2];
    if (dy / dx > h / w) { /* too tall for the area: widen x about its middle */
        double grow = dy * w / h - dx;
        r[0] -= 0.5 * grow, r[1] += 0.5 * grow;
    } else {
        double grow = dx * h / w - dy;
        r[2] -= 0.5 * grow, r[3] += 0.5 * grow;
    }
}

static void poles_marks(const ru_plot_poles *p, double k)
{
    for (size_t i = 0; i < p->n; i++)
        if (pole_in_view(p, &p->poles[i]))
            plot_cross(p->poles[i].re_per_s * k, p->poles[i].im_rad_per_s * k, PC_BLUE, 6.0);
    if (p->dominant < 0)
        return;
    const ru_pole *d = &p->poles[p->dominant];
    for (int sgn = -1; sgn <= 1; sgn += 2) { /* a ray from the origin shows the angle */
        double x[2] = {0, d->re_per_s * k}, y[2] = {0, sgn * d->im_rad_per_s * k};
        plot_line(2, x, y, PC_VERMIL, 1.0, 2);
        plot_ring(x[1], y[1], PC_VERMIL, 13.0);
    }
}

static void poles_drift(const ru_plot_poles *p, double k)
{
    double x[CHUNK + 1], y[CHUNK + 1];
    char buf[64], a[32];
    size_t i = 0;
    while (i < p->ndrift) {
        size_t m = 0;
        if (i > 0) {
            x[m] = p->drift[i - 1].re_per_s * k;
            y[m++] = p->drift[i - 1].im_rad_per_s * k;
        }
        for (size_t j = 0; j < CHUNK && i < p->ndrift; j++, i++) {
            x[m] = p->drift[i].re_per_s * k;
            y[m++] = p->drift[i].im_rad_per_s * k;
        }
        plot_line(m, x, y, PC_GREEN, 2.0, 1);
        plcol0(PC_GREEN);
        plssym(0, 0.6);
        plpoin((PLINT)m, x, y, 17);
    }
    PLFLT wx0, wx1, wy0, wy1;
    plgvpw(&wx0, &wx1, &wy0, &wy1);
    size_t ends[2] = {0, p->ndrift - 1};
    const ru_pole *q0 = &p->drift[0], *q1 = &p->drift[p->ndrift - 1];
    double gap = hypot(q1->re_per_s - q0->re_per_s, q1->im_rad_per_s - q0->im_rad_per_s) * k;
    if (p->ndrift > 1 && gap < 0.1 * (wx1 - wx0)) { /* ends too close for two labels */
        char b2[32];
        snprintf(buf, sizeof buf, "%s → %s", plot_si_text(p->drift_amp_v[0], "V", 3, a, sizeof a),
                 plot_si_text(p->drift_amp_v[p->ndrift - 1], "V", 3, b2, sizeof b2));
        plot_text(q0->re_per_s * k, q0->im_rad_per_s * k - 0.05 * (wy1 - wy0), 0.5, PC_GREEN,
                  0.8, buf);
        return;
    }
    for (int e = 0; e < (p->ndrift > 1 ? 2 : 1); e++) { /* amplitudes under the ends */
        const ru_pole *q = &p->drift[ends[e]];
        snprintf(buf, sizeof buf, "%s", plot_si_text(p->drift_amp_v[ends[e]], "V", 3, a,
                                                     sizeof a));
        plot_text(q->re_per_s * k, q->im_rad_per_s * k - 0.05 * (wy1 - wy0), 0.5,
                  PC_GREEN, 0.8, buf);
    }
}

/* The dominant pair with its angle from the jw axis and its Q = |s| / (-2 sigma)
 * (negative when it grows). */
static void poles_subtitle(const ru_plot_poles *p, char *sub, size_t size)
{
    char a[32];
    if (p->dominant < 0) {
        snprintf(sub, size, "no complex pair: nothing oscillates in the linearised circuit");
        return;
    }
    const ru_pole *d = &p->poles[p->dominant];
    double ang = atan2(fabs(d->re_per_s), fabs(d->im_rad_per_s)) * 180.0 / M_PI;
    int n = snprintf(sub, size, "dominant pair σ = %+.4g /s, ω = %.4g rad/s (%s), %.3g° %s "
                                "the jω axis",
                     d->re_per_s, d->im_rad_per_s,
                     plot_si_text(d->im_rad_per_s / TWO_PI, "Hz", 4, a, sizeof a), ang,
                     d->re_per_s > 0 ? "right of" : d->re_per_s < 0 ? "left of" : "on");
    if (d->re_per_s != 0 && n > 0 && (size_t)n < size)
        snprintf(sub + n, size - (size_t)n, ", Q = %.3g",
                 hypot(d->re_per_s, d->im_rad_per_s) / (-2 * d->re_per_s));
}

/* Shading of the right half plane, the axes and their labels. */
static void poles_plane(const double r[4], double k, size_t far, double far_re)
{
    double ax[2] = {0, 0}, ay[2] = {r[2] * k, r[3] * k}, hx[2] = {r[0] * k, r[1] * k},
           hy[2] = {0, 0}, ybot = r[2] * k + 0.04 * (r[3] - r[2]) * k;
    char buf[96];
    plot_line(2, hx, hy, PC_MUTED, 1.0, 1);
    plot_line(2, ax, ay, PC_INK, 2.5, 1);
    plot_text(0, ybot, 1.0, PC_INK, 0.85, "jω axis ");
    plot_text(r[1] * k, ybot, 1.0, PC_VERMIL, 0.85, "grows ");
    plot_text(r[0] * k, ybot, 0.0, PC_MUTED, 0.85, " decays");
    if (far > 0) {
        int e = (int)floor(log10(fabs(far_re)));
        snprintf(buf, sizeof buf, " ← %zu more far left (fastest %.2f×10#u%d#d /s)", far,
                 far_re / pow(10.0, e), e);
        plot_text(r[0] * k, r[3] * k - 0.05 * (r[3] - r[2]) * k, 0.0, PC_MUTED, 0.85, buf);
    }
}

static void draw_poles(const void *data)
{
    const ru_plot_poles *p = data;
    double r[4], far_re;
    size_t far;
    const char *pre;
    char xl[64], yl[64], sub[240], a[32];
    poles_range(p, r, &far, &far_re);
    /* one scale for both axes: the same unit (1/s, the imaginary part in rad/s) */
    double k = plot_si_scale(fmax(fmax(fabs(r[0]), fabs(r[1])), fmax(fabs(r[2]), fabs(r[3]))),
                             &pre);
    pladv(0);
    poles_subtitle(p, sub, sizeof sub);
    plot_titles("Poles of the linearised circuit in the s-plane (same scale on both axes)",
                sub);
    plot_axis_label(xl, sizeof xl, "real part σ", pre, k, "/s");
    plot_axis_label(yl, sizeof yl, "imaginary part ω", pre, k, "/s");
    plvpor(PLOT_VX0, PLOT_VX1, PLOT_VY0, PLOT_VY1);
    plwind(r[0] * k, r[1] * k, r[2] * k, r[3] * k);
    plot_rect(0, r[1] * k, r[2] * k, r[3] * k, PC_TINT_ORANGE);
    plot_frame(PLOT_VX0, PLOT_VX1, PLOT_VY0, PLOT_VY1, r[0] * k, r[1] * k, r[2] * k,
               r[3] * k, 0, 0, 0, 0, xl, yl);
    poles_plane(r, k, far, far_re);
    if (p->ndrift > 0)
        poles_drift(p, k);
    poles_marks(p, k);
    plot_legend lg = {0};
    plot_legend_add(&lg, PC_BLUE, 4, 2.0, "pole");
    if (p->dominant >= 0)
        plot_legend_add(&lg, PC_VERMIL, 5, 2.0, "dominant pair (dashed: its angle)");
    if (p->ndrift > 0) {
        snprintf(sub, sizeof sub, "drift with amplitude, %s → %s",
                 plot_si_text(p->drift_amp_v[0], "V", 3, a, sizeof a),
                 plot_si_text(p->drift_amp_v[p->ndrift - 1], "V", 3, xl, sizeof xl));
        plot_legend_add(&lg, PC_GREEN, 0, 2.0, sub);
    }
    plot_legend_draw(&lg);
}
#else
#define draw_poles NULL
#endif

const plot_figure plot_fig_poles = {"poles", check_poles, draw_poles};

/* ---- Bode plots ---- */

static ru_status check_bode(const void *data, ru_error *err)
{
    const ru_plot_bode *b = data;
    if (b->n < 2 || !b->f_hz || !b->mag || !b->phase_deg)
        return ru_error_set(err, RU_EINPUT, "", 0, 0, "Bode plot: needs 2 or more points");
    for (size_t i = 0; i < b->n; i++)
        if (!(b->f_hz[i] > 0) || (i > 0 && !(b->f_hz[i] > b->f_hz[i - 1])))
            return ru_error_set(err, RU_EINPUT, "", 0, 0, "Bode plot: frequencies must be "
                                "positive and ascending");
    return RU_OK;
}

#ifdef RU_HAVE_PLPLOT
/* Next phase of the sweep unwrapped (call for i = 0, 1, ... in order). */
static double bode_phase_at(const ru_plot_bode *b, size_t i, double *prev, double *acc)
{
    double ph = b->phase_deg[i];
    if (i == 0) {
        *acc = ph;
    } else {
        double d = ph - *prev;
        d -= 360.0 * round(d / 360.0);
        *acc += d;
    }
    *prev = ph;
    return *acc;
}

/* Shift by whole turns that puts the unwrapped phase nearest the mark (or the
 * middle of the sweep) in (-180, 180], and the shifted range in 45-degree steps. */
static void bode_phase_range(const ru_plot_bode *b, double *shift, double *lo, double *hi)
{
    size_t ref = b->n / 2;
    if (isfinite(b->mark_hz))
        for (size_t i = 0; i < b->n; i++)
            if (fabs(log(b->f_hz[i] / b->mark_hz)) < fabs(log(b->f_hz[ref] / b->mark_hz)))
                ref = i;
    double prev = 0, acc = 0, at_ref = 0;
    *lo = INFINITY, *hi = -INFINITY;
    for (size_t i = 0; i < b->n; i++) {
        double v = bode_phase_at(b, i, &prev, &acc);
        if (i == ref)
            at_ref = v;
        *lo = fmin(*lo, v), *hi = fmax(*hi, v);
    }
    *shift = -360.0 * round(at_ref / 360.0);
    *lo += *shift, *hi += *shift;
    *lo = 45.0 * floor((*lo - 10) / 45.0), *hi = 45.0 * ceil((*hi + 10) / 45.0);
}

/* The frequency axis: log10(f) normally; for a narrow sweep (fmax/fmin below
 * BODE_NARROW, where a log axis has no decade to label, such as a crystal's
 * resonance) a linear axis of the offset from the centre frequency, in ppm when
 * the span is under 0.1 % of it, else in SI-prefixed hertz. */
#define BODE_NARROW 1.25
typedef struct bode_axis {
    int lin;      /* 1: linear offset axis */
    double fc_hz; /* centre (Hz) */
    double k;     /* plot units per hertz of offset */
    char label[96];
} bode_axis;

static void bode_axis_for(const ru_plot_bode *b, bode_axis *ax)
{
    double f0 = b->f_hz[0], f1 = b->f_hz[b->n - 1];
    memset(ax, 0, sizeof *ax);
    if (f1 / f0 >= BODE_NARROW) {
        snprintf(ax->label, sizeof ax->label, "frequency (log scale)");
        return;
    }
    char c[32];
    ax->lin = 1;
    ax->fc_hz = 0.5 * (f0 + f1);
    plot_si_text(ax->fc_hz, "Hz", 6, c, sizeof c);
    if ((f1 - f0) / ax->fc_hz < 1e-3) {
        ax->k = 1e6 / ax->fc_hz;
        snprintf(ax->label, sizeof ax->label, "offset from %s (ppm)", c);
    } else {
        const char *pre;
        ax->k = plot_si_scale(0.5 * (f1 - f0), &pre);
        snprintf(ax->label, sizeof ax->label, "offset from %s (%sHz)", c, pre);
    }
}

static double bode_x(const bode_axis *ax, double f_hz)
{
    return ax->lin ? (f_hz - ax->fc_hz) * ax->k : log10(f_hz);
}

/* Draws (or, with tint, shades down to 0 dB) the m points gathered so far. */
static void bode_flush(double *x, double *y, size_t m, int phase, int tint)
{
    if (tint && m >= 2) {
        x[m] = x[m - 1], y[m] = 0;
        x[m + 1] = x[0], y[m + 1] = 0;
        plcol0(PC_TINT_ORANGE);
        plpsty(0);
        plfill((PLINT)(m + 2), x, y);
    } else if (!tint) {
        plot_line(m, x, y, phase ? PC_GREEN : PC_BLUE, 2.0, 1);
    }
}

/* Magnitude (dB) or phase (deg) curve in chunks; with tint, the area between the
 * curve and 0 dB where the gain exceeds one is shaded instead (runs start and end
 * at the interpolated 0 dB crossings). */
static void bode_curve(const ru_plot_bode *b, const bode_axis *ax, int phase, double shift,
                       int tint)
{
    double x[CHUNK + 4], y[CHUNK + 4], prev = 0, acc = 0, px = 0, pv = 0;
    size_t m = 0;
    int pok = 0;
    for (size_t i = 0; i < b->n; i++) {
        int ok = phase || b->mag[i] > 0;
        double v = phase ? bode_phase_at(b, i, &prev, &acc) + shift
                         : (ok ? 20.0 * log10(b->mag[i]) : 0.0);
        double xi = bode_x(ax, b->f_hz[i]);
        int in = ok && (!tint || v > 0);
        if (in) {
            if (m == 0 && tint && pok)
                x[m] = px + (xi - px) * (0 - pv) / (v - pv), y[m++] = 0;
            x[m] = xi, y[m++] = v;
            if (m >= CHUNK) {
                bode_flush(x, y, m, phase, tint);
                m = 0;
                x[m] = xi, y[m++] = v;
            }
        } else if (m > 0) {
            if (tint && ok)
                x[m] = px + (xi - px) * (0 - pv) / (v - pv), y[m++] = 0;
            bode_flush(x, y, m, phase, tint);
            m = 0;
        }
        px = xi, pv = v, pok = ok;
    }
    if (m > 0)
        bode_flush(x, y, m, phase, tint);
}

static void bode_mark(const ru_plot_bode *b, char *sub, size_t size)
{
    char a[32];
    double db = 20.0 * log10(b->mark_mag);
    plot_si_text(b->mark_hz, "Hz", 4, a, sizeof a);
    if (b->is_loop)
        snprintf(sub, size, "phase 0° at %s: |L| = %.4g (%+.2f dB), %s", a, b->mark_mag,
                 db, b->mark_mag > 1 ? "above one: the loop starts (Barkhausen)"
                                     : "below one: the loop does not start");
    else
        snprintf(sub, size, "peak |H| = %.4g (%+.2f dB) at %s%s", b->mark_mag, db, a,
                 b->mark_mag > 1 ? ": passive gain above one" : "");
}

static void bode_vline(double lf, double lo, double hi)
{
    double x[2] = {lf, lf}, y[2] = {lo, hi};
    plot_line(2, x, y, PC_VERMIL, 1.5, 2);
}

static void draw_bode(const void *data)
{
    const ru_plot_bode *b = data;
    char title[200], sub[200], what[120];
    double lo = 0, hi = 0, shift, plo, phi;
    bode_axis ax;
    bode_axis_for(b, &ax);
    double fx0 = bode_x(&ax, b->f_hz[0]), fx1 = bode_x(&ax, b->f_hz[b->n - 1]);
    int lg10 = !ax.lin;
    for (size_t i = 0; i < b->n; i++)
        if (b->mag[i] > 0)
            lo = fmin(lo, 20 * log10(b->mag[i])), hi = fmax(hi, 20 * log10(b->mag[i]));
    lo = 10.0 * floor((lo - 2) / 10.0), hi = 10.0 * ceil((hi + 2) / 10.0);
    bode_phase_range(b, &shift, &plo, &phi);
    plot_escape(what, sizeof what, b->what ? b->what : "");
    pladv(0);
    if (b->is_loop == 2)
        snprintf(title, sizeof title, "Loop gain L at %s (double injection): magnitude and "
                 "phase", what);
    else if (b->is_loop)
        snprintf(title, sizeof title, "Loop gain L of %s (return ratio): magnitude and phase",
                 what);
    else
        snprintf(title, sizeof title, "Network response %s: magnitude and phase", what);
    if (isfinite(b->mark_hz) && b->mark_mag > 0)
        bode_mark(b, sub, sizeof sub);
    else
        snprintf(sub, sizeof sub, "%s", b->is_loop ? "the phase does not pass 0° in this "
                 "range: no oscillation frequency" : "");
    plot_titles(title, sub);
    plvpor(PLOT_VX0, PLOT_VX1, 0.48, PLOT_VY1);
    plwind(fx0, fx1, lo, hi);
    if (!b->is_loop)
        bode_curve(b, &ax, 0, 0, 1);
    plot_frame(PLOT_VX0, PLOT_VX1, 0.48, PLOT_VY1, fx0, fx1, lo, hi, lg10, lg10, 0, 0, NULL,
               b->is_loop ? "|L| (dB)" : "|H| (dB)");
    double zx[2] = {fx0, fx1}, zy[2] = {0, 0};
    plot_line(2, zx, zy, PC_INK, 2.0, 1);
    plot_text(fx0, 0.07 * (hi - lo), 0.0, PC_INK, 0.8, " 0 dB: gain of one");
    bode_curve(b, &ax, 0, 0, 0);
    if (isfinite(b->mark_hz) && b->mark_mag > 0)
        bode_vline(bode_x(&ax, b->mark_hz), lo, hi);
    plot_frame(PLOT_VX0, PLOT_VX1, PLOT_VY0, 0.42, fx0, fx1, plo, phi, lg10, lg10, 0,
               phi - plo > 360 ? 180 : (phi - plo > 180 ? 90 : 45), ax.label,
               "phase (degrees)");
    plot_line(2, zx, zy, PC_INK, 1.5, 1);
    bode_curve(b, &ax, 1, shift, 0);
    if (isfinite(b->mark_hz) && b->mark_mag > 0)
        bode_vline(bode_x(&ax, b->mark_hz), plo, phi);
    plot_legend lg = {0};
    plot_legend_add(&lg, PC_BLUE, 0, 2.0, "magnitude");
    plot_legend_add(&lg, PC_GREEN, 0, 2.0, "phase");
    if (isfinite(b->mark_hz) && b->mark_mag > 0)
        plot_legend_add(&lg, PC_VERMIL, 1, 1.5, b->is_loop ? "0° crossing" : "peak");
    if (!b->is_loop)
        plot_legend_add(&lg, PC_TINT_ORANGE, 3, 1, "gain above one");
    plot_legend_draw(&lg);
}
#else
#define draw_bode NULL
#endif

const plot_figure plot_fig_loop = {"loop", check_bode, draw_bode};
const plot_figure plot_fig_response = {"response", check_bode, draw_bode};
