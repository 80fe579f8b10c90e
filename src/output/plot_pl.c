/* plot_pl.c: the plot module's PLplot side: devices, streams under the lock, the
 * palette and the drawing helpers every figure uses (see plot_impl.h).
 *
 * Invariants:
 * - Every stream is new (plmkstrm) and ended with plend1 before the lock is released,
 *   so no PLplot state survives a call.
 * - Style: white page, near-black ink, light grey grid under the data, Okabe-Ito
 *   colours for data, titles at the top left, units with SI prefixes in brackets.
 * Built without PLplot, plot_device refuses every format and nothing else is used. */
#include "output/plot_impl.h"
#include "ringup/format.h"

#include <math.h>
#include <pthread.h>
#include <stdio.h>
#include <string.h>

#ifdef RU_HAVE_PLPLOT
#include <plplot/plplot.h>

static pthread_mutex_t plot_lock = PTHREAD_MUTEX_INITIALIZER;


ru_status plot_device(const char *format, const char **dev, const char **ext,
                      ru_error *err)
{
    static const char *const fmt[][2] = {
        {"png", "pngcairo"}, {"svg", "svgcairo"}, {"pdf", "pdfcairo"}};
    if (!format || !*format)
        format = "png";
    int k = -1;
    for (int i = 0; i < 3; i++)
        if (strcmp(format, fmt[i][0]) == 0)
            k = i;
    if (k < 0)
        return ru_error_set(err, RU_EINPUT, "", 0, 0,
                            "unknown picture format '%s' (png, svg or pdf)", format);
    const char *menu[64], *names[64];
    const char **pm = menu, **pn = names;
    int nd = 64, found = 0;
    pthread_mutex_lock(&plot_lock);
    plgDevs(&pm, &pn, &nd);
    for (int i = 0; i < nd; i++)
        if (pn[i] && strcmp(pn[i], fmt[k][1]) == 0)
            found = 1;
    pthread_mutex_unlock(&plot_lock);
    if (!found)
        return ru_error_set(err, RU_EINPUT, "", 0, 0,
                            "picture format '%s' needs PLplot's %s driver, which is "
                            "not installed", format, fmt[k][1]);
    *dev = fmt[k][1];
    *ext = fmt[k][0];
    return RU_OK;
}

/* PLplot's abort messages (bad arguments) are dropped: the library never prints. */
static void plot_quiet_abort(PLCHAR_VECTOR msg)
{
    (void)msg;
}

static void plot_palette(void)
{
    static const unsigned char rgb[PC_COUNT][3] = {
        {255, 255, 255}, {34, 34, 34},    {230, 159, 0},   {86, 180, 233},
        {0, 158, 115},   {240, 228, 66},  {0, 114, 178},   {213, 94, 0},
        {204, 121, 167}, {225, 225, 225}, {110, 110, 110}, {222, 237, 248},
        {252, 232, 204}};
    plscmap0n(16);
    for (int i = 0; i < PC_COUNT; i++)
        plscol0(i, rgb[i][0], rgb[i][1], rgb[i][2]);
}

ru_status plot_stream_begin(const char *dev, const char *file, ru_error *err)
{
    PLINT strm = -1;
    pthread_mutex_lock(&plot_lock);
    plmkstrm(&strm);
    if (strm < 0) {
        pthread_mutex_unlock(&plot_lock);
        return ru_error_set(err, RU_ENOMEM, "", 0, 0, "no free plotting stream");
    }
    plsabort(plot_quiet_abort);
    plsdev(dev);
    plsfnam(file);
    plspage(0, 0, PAGE_W, PAGE_H, 0, 0);
    plot_palette();
    plinit();
    plschr(0, 0.95);
    return RU_OK;
}

void plot_stream_end(void)
{
    plend1();
    pthread_mutex_unlock(&plot_lock);
}

ru_status plot_render(const plot_figure *fig, const void *data, const char *dev,
                      const char *file, ru_error *err)
{
    ru_status st = plot_stream_begin(dev, file, err);
    if (st != RU_OK)
        return st;
    fig->draw(data);
    plot_stream_end();
    return RU_OK;
}
#else  /* built without PLplot */
ru_status plot_device(const char *format, const char **dev, const char **ext,
                      ru_error *err)
{
    (void)format, (void)dev, (void)ext;
    return ru_error_set(err, RU_EINPUT, "", 0, 0,
                        "this ringup was built without PLplot: no pictures");
}

ru_status plot_render(const plot_figure *fig, const void *data, const char *dev,
                      const char *file, ru_error *err)
{
    (void)fig, (void)data, (void)dev, (void)file;
    return ru_error_set(err, RU_EINPUT, "", 0, 0, "built without PLplot");
}
#endif

int plot_series_colour(size_t i)
{
    static const int c[] = {PC_BLUE, PC_VERMIL, PC_GREEN, PC_ORANGE, PC_PURPLE, PC_SKY,
                            PC_INK};
    return c[i % (sizeof c / sizeof c[0])];
}

char *plot_si_text(double v, const char *unit, int digits, char *buf, size_t size)
{
    char tmp[64];
    ru_format_si(v, unit, digits, tmp, sizeof tmp);
    char *sp = strchr(tmp, ' ');
    /* "12.3 us" -> "12.3 µs": the prefix is the letter after the space unless the
     * unit itself starts there (no SI unit starts with u) */
    if (sp && sp[1] == 'u' && !(unit && unit[0] == 'u'))
        snprintf(buf, size, "%.*s µ%s", (int)(sp - tmp), tmp, sp + 2);
    else
        snprintf(buf, size, "%s", tmp);
    return buf;
}

/* Characters of a UTF-8 string as drawn (continuation bytes and PLplot's escape
 * doubling not counted). */
static size_t plot_chars(const char *text)
{
    size_t n = 0;
    for (const unsigned char *p = (const unsigned char *)text; *p; p++)
        if ((*p & 0xC0) != 0x80 && !(*p == '#' && p[1] == '#'))
            n++;
    return n;
}

#define PLOT_CHAR_W 0.0115 /* page width per character at scale 1 (measured on the
                              960-pixel PNGs for the proportional font) */

double plot_fit_text(char *buf, size_t size, double width, double scale)
{
    double need = PLOT_CHAR_W * scale * (double)plot_chars(buf);
    if (need <= width)
        return scale;
    double s = scale * width / need;
    if (s >= 0.7 * scale)
        return s;
    s = 0.7 * scale;
    size_t keep = (size_t)(width / (PLOT_CHAR_W * s)) - 1, n = 0, j = 0;
    for (; buf[j] && n < keep; j++)
        if (((unsigned char)buf[j] & 0xC0) != 0x80)
            n++;
    while (j > 0 && ((unsigned char)buf[j] & 0xC0) == 0x80)
        j--; /* never cut inside a character */
    if (j + 4 <= size)
        snprintf(buf + j, size - j, "…");
    return s;
}

double plot_si_scale(double maxabs, const char **prefix)
{
    static const char *const p[] = {"f", "p", "n", "µ", "m", "", "k", "M", "G", "T"};
    int e3 = 0;
    if (isfinite(maxabs) && maxabs > 0)
        e3 = (int)floor(log10(maxabs * 1.0000001) / 3.0);
    if (e3 < -5)
        e3 = -5;
    if (e3 > 4)
        e3 = 4;
    *prefix = p[e3 + 5];
    return pow(10.0, -3.0 * e3);
}

void plot_axis_label(char *buf, size_t size, const char *name, const char *prefix,
                     double factor, const char *unit)
{
    if (strcmp(unit, "/s") == 0 && fabs(factor - 1.0) > 1e-9) {
        int e = (int)lround(-log10(factor));
        snprintf(buf, size, "%s (10#u%d#d /s)", name, e);
    } else {
        snprintf(buf, size, "%s (%s%s)", name, prefix, unit);
    }
}

void plot_escape(char *buf, size_t size, const char *s)
{
    size_t j = 0;
    if (!size)
        return;
    for (; s && *s && j + 2 < size; s++) {
        if (*s == '#')
            buf[j++] = '#';
        buf[j++] = *s;
    }
    buf[j] = '\0';
}

void plot_pad(double *lo, double *hi, double frac)
{
    if (!isfinite(*lo) || !isfinite(*hi)) {
        *lo = 0;
        *hi = 1;
    }
    double span = *hi - *lo;
    if (!(span > 1e-12 * (fabs(*lo) + fabs(*hi)))) {
        double d = fabs(*lo) > 0 ? 0.1 * fabs(*lo) : 1.0;
        *lo -= d;
        *hi += d;
        return;
    }
    *lo -= frac * span;
    *hi += frac * span;
}

#ifdef RU_HAVE_PLPLOT
void plot_titles(const char *title, const char *subtitle)
{
    char buf[512];
    double room = 0.985 - PLOT_VX0;
    plvpor(PLOT_VX0, PLOT_VX1, PLOT_VY0, PLOT_VY1);
    plcol0(PC_INK);
    snprintf(buf, sizeof buf, "%s", title ? title : "");
    double sc = plot_fit_text(buf, sizeof buf, room, 1.35);
    plschr(0, sc);
    plmtex("t", 4.2 * 1.35 / sc, 0.0, 0.0, buf);
    if (subtitle && *subtitle) {
        snprintf(buf, sizeof buf, "%s", subtitle);
        sc = plot_fit_text(buf, sizeof buf, room, 0.95);
        plschr(0, sc);
        plcol0(PC_MUTED);
        plmtex("t", 4.0 * 0.95 / sc, 0.0, 0.0, buf);
    }
    plschr(0, 0.95);
    plcol0(PC_INK);
}

/* Tick labels of a log10(f) axis as "100 Hz", "1 kHz", "10 kHz". */
static void plot_hz_label(PLINT axis, PLFLT value, PLCHAR_NC_VECTOR label, PLINT length,
                          PLPointer data)
{
    (void)axis, (void)data;
    double f = pow(10.0, value);
    const char *pre;
    double k = plot_si_scale(f, &pre);
    snprintf(label, (size_t)length, "%.3g %sHz", f * k, pre);
}

void plot_frame(double vx0, double vx1, double vy0, double vy1, double xlo, double xhi,
                double ylo, double yhi, int xlog, int xhz, int ylog, double ytick,
                const char *xlab, const char *ylab)
{
    plot_frame_ticks(vx0, vx1, vy0, vy1, xlo, xhi, ylo, yhi, xlog, xhz, ylog, 0.0, ytick,
                     xlab, ylab);
}

double plot_nice_step(double span, int n)
{
    if (!(span > 0) || n < 1)
        return 0.0;
    double raw = span / n, mag = pow(10.0, floor(log10(raw)));
    static const double m[] = {1, 2, 5, 10};
    for (int i = 0; i < 4; i++)
        if (m[i] * mag >= raw * (1.0 - 1e-9))
            return m[i] * mag;
    return 10 * mag;
}

void plot_frame_ticks(double vx0, double vx1, double vy0, double vy1, double xlo,
                      double xhi, double ylo, double yhi, int xlog, int xhz, int ylog,
                      double xtick, double ytick, const char *xlab, const char *ylab)
{
    char xo[16], yo[16];
    plvpor(vx0, vx1, vy0, vy1);
    plwind(xlo, xhi, ylo, yhi);
    plwidth(1.0);
    pllsty(1);
    plcol0(PC_GRID);
    plbox(xlog ? "gh" : "g", xtick, 0, ylog ? "gh" : "g", ytick, 0);
    plcol0(PC_INK);
    snprintf(xo, sizeof xo, "bcnst%s", xlog ? (xhz ? "lo" : "l") : "");
    snprintf(yo, sizeof yo, "%s%s", ylab ? "bcnstv" : "bc", ylog ? "l" : "");
    if (xhz)
        plslabelfunc(plot_hz_label, NULL);
    plbox(xo, xtick, 0, yo, ytick, 0);
    if (xhz)
        plslabelfunc(NULL, NULL);
    if (xlab)
        plmtex("b", 3.3, 0.5, 0.5, xlab);
    if (ylab)
        plmtex("l", 4.2, 0.5, 0.5, ylab);
}

void plot_legend_add(plot_legend *lg, int colour, int style, double width,
                     const char *text)
{
    if (lg->n >= PLOT_LEGEND_MAX)
        return;
    lg->e[lg->n].colour = colour;
    lg->e[lg->n].style = style;
    lg->e[lg->n].width = width;
    snprintf(lg->e[lg->n].text, sizeof lg->e[0].text, "%s", text ? text : "");
    lg->n++;
}

static void legend_entry(double x, double y, int colour, int style, double width,
                         double sc, const char *text);

/* Width of entry i at text scale sc (sample, gap to the text, text, gap after). */
static double legend_width(const plot_legend *lg, int i, double sc)
{
    return 0.04 + PLOT_CHAR_W * sc * (double)plot_chars(lg->e[i].text) + 0.02;
}

void plot_legend_draw(const plot_legend *lg)
{
    double room = 0.985 - PLOT_VX0, total = 0;
    for (int i = 0; i < lg->n; i++)
        total += legend_width(lg, i, 0.95);
    double sc = 0.95;
    int rows = 1;
    if (total > room) { /* smaller text, then two rows */
        double fixed = 0.06 * lg->n, text = total - fixed;
        sc = text > 0 ? 0.95 * (room - fixed) / text : 0.95;
        if (sc < 0.78) {
            sc = 0.78;
            rows = 2;
        }
    }
    double x = PLOT_VX0, y = rows == 1 ? 0.855 : 0.868;
    for (int i = 0; i < lg->n; i++) {
        double w = legend_width(lg, i, sc);
        if (rows == 2 && x > PLOT_VX0 && x + w > 0.985 && y > 0.85) {
            x = PLOT_VX0;
            y = 0.840;
        }
        legend_entry(x, y, lg->e[i].colour, lg->e[i].style, lg->e[i].width, sc,
                     lg->e[i].text);
        x += w;
    }
}

/* One legend entry at page position (x, y), text at scale sc; no wrapping. */
static void legend_entry(double x, double y, int colour, int style, double width,
                         double sc, const char *text)
{
    PLFLT vx0, vx1, vy0, vy1, wx0, wx1, wy0, wy1;
    plgvpd(&vx0, &vx1, &vy0, &vy1);
    plgvpw(&wx0, &wx1, &wy0, &wy1);
    plvpor(0, 1, 0, 1);
    plwind(0, 1, 0, 1);
    if (style == 2) {
        plot_dot(x + 0.015, y, colour, 5.0);
    } else if (style == 3) {
        plot_rect(x, x + 0.03, y - 0.012, y + 0.012, colour);
    } else if (style == 4) {
        plot_cross(x + 0.015, y, colour, 6.0);
    } else if (style == 5) {
        plot_ring(x + 0.015, y, colour, 9.0);
    } else {
        double lx[2] = {x, x + 0.03}, ly[2] = {y, y};
        plot_line(2, lx, ly, colour, width, style == 1 ? 2 : 1);
    }
    plcol0(PC_INK);
    plschr(0, sc);
    plptex(x + 0.038, y, 1, 0, 0, text);
    plschr(0, 0.95);
    plvpor(vx0, vx1, vy0, vy1);
    plwind(wx0, wx1, wy0, wy1);
}

void plot_legend_item(double *x, double *y, int colour, int style, double width,
                      const char *text)
{
    double need = 0.04 + PLOT_CHAR_W * 0.95 * (double)plot_chars(text);
    if (*x > PLOT_VX0 && *x + need > 0.98) { /* wrap to a new row */
        *x = PLOT_VX0;
        *y -= 0.036;
    }
    legend_entry(*x, *y, colour, style, width, 0.95, text);
    *x += need + 0.02;
}

/* World units per pixel along x and y in the current viewport and window. */
static void plot_px(double *dx, double *dy)
{
    PLFLT vx0, vx1, vy0, vy1, wx0, wx1, wy0, wy1;
    plgvpd(&vx0, &vx1, &vy0, &vy1);
    plgvpw(&wx0, &wx1, &wy0, &wy1);
    *dx = (wx1 - wx0) / ((vx1 - vx0) * PAGE_W);
    *dy = (wy1 - wy0) / ((vy1 - vy0) * PAGE_H);
}

void plot_cross(double x, double y, int colour, double r_px)
{
    double dx, dy;
    plot_px(&dx, &dy);
    double ax[2] = {x - r_px * dx, x + r_px * dx}, ay[2] = {y - r_px * dy, y + r_px * dy};
    double by[2] = {y + r_px * dy, y - r_px * dy};
    plot_line(2, ax, ay, colour, 2.0, 1);
    plot_line(2, ax, by, colour, 2.0, 1);
}

void plot_ring(double x, double y, int colour, double r_px)
{
    double dx, dy;
    plot_px(&dx, &dy);
    plcol0(colour);
    plwidth(2.0);
    plarc(x, y, r_px * dx, r_px * dy, 0, 360, 0, 0);
    plwidth(1.0);
}

void plot_dot(double x, double y, int colour, double r_px)
{
    double dx, dy;
    plot_px(&dx, &dy);
    plcol0(colour);
    plarc(x, y, r_px * dx, r_px * dy, 0, 360, 0, 1);
}

void plot_line(size_t n, const double *x, const double *y, int colour, double width,
               int style)
{
    if (n < 2)
        return;
    plcol0(colour);
    plwidth(width);
    pllsty(style);
    plline((PLINT)n, x, y);
    pllsty(1);
    plwidth(1.0);
}

void plot_rect(double x0, double x1, double y0, double y1, int colour)
{
    PLFLT x[4] = {x0, x1, x1, x0}, y[4] = {y0, y0, y1, y1};
    plcol0(colour);
    plpsty(0);
    plfill(4, x, y);
}

void plot_text(double x, double y, double just, int colour, double scale,
               const char *text)
{
    plcol0(colour);
    plschr(0, scale);
    plptex(x, y, 1, 0, just, text);
    plschr(0, 0.95);
    plcol0(PC_INK);
}
#endif
