/* plot_impl.h: what the plot module's files share (not installed).
 *
 * A figure is a check (validates the caller's data before any file exists) and a
 * draw function (renders onto the current PLplot stream, one page, never fails on
 * data its check accepted). plot.c owns the lock, the streams and the files;
 * plot_figs*.c own the figures; plot_report.c the reports. Drawing code runs only
 * under the lock, between plot_stream_begin and plot_stream_end. */
#ifndef RU_PLOT_IMPL_H
#define RU_PLOT_IMPL_H

#include "ringup/plot.h"

#include <stddef.h>

/* Palette (colour map 0 indices). Okabe-Ito colours, safe for the common forms of
 * colour blindness, plus greys and two pale tints for shading. */
enum {
    PC_BG = 0,        /* white */
    PC_INK = 1,       /* near black: axes, text */
    PC_ORANGE = 2,
    PC_SKY = 3,
    PC_GREEN = 4,     /* bluish green */
    PC_YELLOW = 5,
    PC_BLUE = 6,
    PC_VERMIL = 7,    /* vermillion */
    PC_PURPLE = 8,    /* reddish purple */
    PC_GRID = 9,      /* light grey grid */
    PC_MUTED = 10,    /* mid grey: secondary text */
    PC_TINT_BLUE = 11,   /* pale blue shading */
    PC_TINT_ORANGE = 12, /* pale orange shading */
    PC_COUNT = 13
};

/* Colours for series 0, 1, ... (cycled). */
int plot_series_colour(size_t i);

typedef struct plot_figure {
    const char *name;  /* file stem, "wave" */
    ru_status (*check)(const void *data, ru_error *err);
    void (*draw)(const void *data);
} plot_figure;

extern const plot_figure plot_fig_wave, plot_fig_growth, plot_fig_spectrum,
    plot_fig_poles, plot_fig_loop, plot_fig_response, plot_fig_cmp_env,
    plot_fig_cmp_fig, plot_fig_period, plot_fig_floquet, plot_fig_phase_noise,
    plot_fig_margin;

/* Data of the comparison figures (a pointer and a count in one object). */
typedef struct plot_models {
    const ru_plot_model *m;
    size_t n;
} plot_models;

/* ---- files and streams (plot.c) ---- */

/* Maps "png"/"svg"/"pdf" (NULL, "" = png) to its cairo device and file extension;
 * RU_EINPUT when unknown or the device is missing. */
ru_status plot_device(const char *format, const char **dev, const char **ext,
                      ru_error *err);
/* Creates an empty temporary file next to `path` (O_EXCL); *tmp is malloc'd. */
ru_status plot_tmp_create(const char *path, char **tmp, ru_error *err);
/* Renames tmp onto path, or removes tmp and fails with RU_EIO. */
ru_status plot_tmp_commit(const char *tmp, const char *path, ru_error *err);
/* Takes the lock, makes a new stream writing to file with device dev. */
ru_status plot_stream_begin(const char *dev, const char *file, ru_error *err);
/* Ends the stream and releases the lock. */
void plot_stream_end(void);
/* Renders one figure into file (which exists) with device dev. */
ru_status plot_render(const plot_figure *fig, const void *data, const char *dev,
                      const char *file, ru_error *err);

/* ---- drawing helpers (plot.c; under the lock) ---- */

/* SI scale for values up to |maxabs|: multiply data by *factor; the prefix ("m",
 * "µ", "k", ...) goes before the unit in the label. */
double plot_si_scale(double maxabs, const char **prefix);
/* "time (ms)": name, then the prefixed unit in brackets. unit "/s" is written
 * as "10^3 /s" style powers instead of a prefix. */
void plot_axis_label(char *buf, size_t size, const char *name, const char *prefix,
                     double factor, const char *unit);
/* Copies s into buf doubling PLplot's escape character '#'. */
void plot_escape(char *buf, size_t size, const char *s);
/* Title (left, large) and subtitle (left, grey) above the plot area. */
void plot_titles(const char *title, const char *subtitle);
/* Sets viewport and window, draws the grid, frame, ticks and axis labels. xlog/ylog:
 * world coordinates are log10 of the data, labelled as powers of ten (or by the
 * frequency labeller for x when xhz is 1). ytick: y tick spacing (0 auto).
 * ylab NULL: y axis without ticks or numbers (bar charts label their rows). */
void plot_frame(double vx0, double vx1, double vy0, double vy1, double xlo, double xhi,
                double ylo, double yhi, int xlog, int xhz, int ylog, double ytick,
                const char *xlab, const char *ylab);
/* The same with a given x tick spacing (0: PLplot's choice). */
void plot_frame_ticks(double vx0, double vx1, double vy0, double vy1, double xlo,
                      double xhi, double ylo, double yhi, int xlog, int xhz, int ylog,
                      double xtick, double ytick, const char *xlab, const char *ylab);
/* A 1, 2 or 5 times a power of ten step giving about n intervals over span. */
double plot_nice_step(double span, int n);
#define PAGE_W 960 /* page size (pixels for PNG, points for PDF and SVG) */
#define PAGE_H 600
/* Default single-panel viewport. */
#define PLOT_VX0 0.09
#define PLOT_VX1 0.97
#define PLOT_VY0 0.11
#define PLOT_VY1 0.82

/* A figure's legend, laid out as a whole above the plot area (between the
 * subtitle and the frame): entries are added, then drawn in one row at the
 * normal size if they fit, else with smaller text, else in two rows of small
 * text, so the legend never reaches into the plot. Up to PLOT_LEGEND_MAX entries
 * (more are dropped); text longer than 95 bytes is cut. */
#define PLOT_LEGEND_MAX 12
typedef struct plot_legend {
    int n;
    struct {
        int colour, style;
        double width;
        char text[96];
    } e[PLOT_LEGEND_MAX];
} plot_legend;
void plot_legend_add(plot_legend *lg, int colour, int style, double width,
                     const char *text);
void plot_legend_draw(const plot_legend *lg);

/* ru_format_si for a figure: the same text with the micro prefix written µ, as
 * the axis labels write it (plot_si_scale), so one figure spells it one way. */
char *plot_si_text(double v, const char *unit, int digits, char *buf, size_t size);

/* Fits one line of text into width (a fraction of the page) at scale: returns the
 * scale to draw it at (down to 0.7 of it) and, when even that is too wide, cuts
 * buf to fit and ends it with an ellipsis. Widths are estimated from the number
 * of characters (0.0115 of the page per character at scale 1). */
double plot_fit_text(char *buf, size_t size, double width, double scale);

/* One legend entry at page position (*x, *y) in [0,1] page coordinates: a short
 * sample (style 0 line, 1 dashed line, 2 dot, 3 filled box, 4 cross, 5 ring) and
 * text. Moves *x past
 * it, wrapping to a new row (*y lower) when the entry would pass the right edge. */
void plot_legend_item(double *x, double *y, int colour, int style, double width,
                      const char *text);
/* Markers of a fixed size in pixels, centred exactly on (x, y) in world units
 * (PLplot's symbol glyphs sit off-centre in the cairo drivers). */
void plot_cross(double x, double y, int colour, double r_px);
void plot_ring(double x, double y, int colour, double r_px);
void plot_dot(double x, double y, int colour, double r_px);
/* Polyline of n points in the given colour, width and line style (1 solid). */
void plot_line(size_t n, const double *x, const double *y, int colour, double width,
               int style);
/* Axis-aligned filled rectangle in world coordinates. */
void plot_rect(double x0, double x1, double y0, double y1, int colour);
/* Text in world coordinates, horizontal, justified (0 left, 0.5 centre, 1 right). */
void plot_text(double x, double y, double just, int colour, double scale,
               const char *text);
/* Nice range [lo, hi] padded by frac of the span (never empty). */
void plot_pad(double *lo, double *hi, double frac);

#endif
