/* ringup/plot.h: pictures of a start-up analysis (PNG, SVG, PDF) and reports.
 *
 * The API works on plain arrays: the analysis layer hands its figures over and the
 * library keeps no plotting state between calls. Each ru_plot_* call is
 * self-contained: it opens its own PLplot stream, draws, ends the stream and moves
 * the finished file from a temporary name onto DIR/NAME.EXT (a failure never leaves
 * half a file under the final name).
 *
 * Threads. PLplot keeps its streams in process-wide tables, so every drawing call
 * runs under one static mutex inside the plot module (like FFTW's planner lock in
 * harmonics.c): calls from parallel threads are safe and run one after another.
 * The mutex guards PLplot's state only, it holds no data of ours.
 *
 * Safety. PLplot prompts on stdin and exits the process on an unknown device or an
 * unwritable file; this module checks the device (plgDevs) and creates the output
 * file itself before PLplot sees it, so neither can happen. Nothing is printed.
 *
 * Formats: "png" (default when format is NULL or ""), "svg", "pdf" through PLplot's
 * cairo drivers. Without PLplot at build time (RU_HAVE_PLPLOT undefined) every
 * drawing call returns RU_EINPUT with a message saying so; the trace collector
 * works either way.
 *
 * File names under DIR: wave, growth, spectrum, poles, loop, response,
 * compare-envelopes, compare-figures, steady, floquet, phase-noise (each +
 * .png/.svg/.pdf). */
#ifndef RINGUP_PLOT_H
#define RINGUP_PLOT_H

#include "ringup/smallsig.h"
#include "ringup/status.h"

#include <stddef.h>

#ifdef __cplusplus
extern "C" {
#endif

/* ---- decimated waveform collector (bounded memory, streaming) ---- */

typedef struct ru_trace ru_trace;

#define RU_TRACE_COLUMNS 2000 /* default number of min/max columns */

/* Collector of the min and max of the probe over `columns` equal time columns
 * spanning [first sample, first sample + span_s). Samples past the span fold the
 * columns pairwise (each column then covers twice the time), so any run length is
 * kept in at most `columns` columns. columns 0 means RU_TRACE_COLUMNS; span_s is
 * the expected run length (> 0). */
ru_status ru_trace_create(double span_s, size_t columns, ru_trace **out);
/* Destructor; NULL is harmless. */
void ru_trace_destroy(ru_trace *tr);
/* Adds one sample (t non-decreasing; NAN values are refused with RU_EINPUT). */
ru_status ru_trace_push(ru_trace *tr, double t_s, double v);

/* Read-only view of the filled columns: time of each column's centre (s), and
 * the smallest and largest value seen in it (V). Arrays owned by tr, valid until
 * the next push or destroy. Empty columns (no sample) are left out. */
typedef struct ru_trace_view {
    size_t n;             /* columns with data */
    const double *t_s;    /* column centre times (s) */
    const double *min_v;  /* smallest sample in the column (V) */
    const double *max_v;  /* largest sample in the column (V) */
} ru_trace_view;
void ru_trace_get(const ru_trace *tr, ru_trace_view *view);

/* ---- what each figure needs (NAN marks a figure that is not known) ---- */

/* Waveform of the probe, envelope over it, start-up time and settled amplitude. */
typedef struct ru_plot_wave {
    const char *title;         /* circuit title, shown small (NULL or "" for none) */
    const char *probe;         /* probe name, "out" or "a-b" (NULL: "probe") */
    ru_trace_view trace;       /* decimated waveform (required, n >= 2) */
    size_t nenv;               /* envelope points (0: no envelope drawn) */
    const double *env_t_s;     /* envelope point times (s) */
    const double *env_v;       /* envelope amplitude (V peak, about the DC level) */
    double dc_v;               /* level the envelope is drawn around (NAN: 0 V) */
    double startup_time_s;     /* marked with a vertical line (NAN: not marked) */
    double startup_level;      /* start-up threshold, fraction of settled (0.9) */
    double settled_v;          /* settled amplitude (V peak): dashed dc +- line */
} ru_plot_wave;

/* Envelope on a log scale, the fitted growth line and the predicted slope. */
typedef struct ru_plot_growth {
    size_t nenv;               /* envelope points (required, >= 2) */
    const double *env_t_s;     /* times (s) */
    const double *env_v;       /* amplitude (V peak, > 0; others skipped) */
    double sigma_per_s;        /* measured growth rate (NAN: no fit line) */
    double fit_t0_s;           /* fit window (shaded) */
    double fit_t1_s;
    double predicted_per_s;    /* growth rate of the dominant poles (NAN: none) */
    double settled_v;          /* settled amplitude (V): a dotted level line */
} ru_plot_growth;

/* Harmonic levels of the settled tone. */
typedef struct ru_plot_spectrum {
    double frequency_hz;       /* fundamental (Hz), for the axis label */
    const double *harmonics_dbc; /* levels of harmonics 2..1+nharm (dBc) */
    int nharm;                 /* number of entries (RU_HARMONICS - 1 = 9) */
    double thd_percent;        /* shown in the title (NAN: not shown) */
} ru_plot_spectrum;

/* Pole map with the dominant pair and, optionally, its drift with amplitude. */
typedef struct ru_plot_poles {
    size_t n;                  /* poles (required, >= 1) */
    const ru_pole *poles;
    int dominant;              /* index of the dominant pair's im > 0 member, or -1 */
    size_t ndrift;             /* points of the drift path (0: not drawn) */
    const double *drift_amp_v; /* amplitude at each point (V peak) */
    const ru_pole *drift;      /* dominant pole (im > 0) at that amplitude */
} ru_plot_poles;

/* Bode plot: loop gain (is_loop = 1) or network response (is_loop = 0). */
typedef struct ru_plot_bode {
    int is_loop;               /* 1: return ratio; 2: loop gain at a node (double
                                  injection); 0: v(out)/v(in) */
    const char *what;          /* "A1" (loop part) or "v(tank)/v(out)" */
    size_t n;                  /* points (required, >= 2), f ascending, > 0 */
    const double *f_hz;
    const double *mag;         /* |H| (V/V, linear) */
    const double *phase_deg;   /* phase (degrees, any wrapping) */
    double mark_hz;            /* loop: 0-degree crossover; response: peak (NAN: none) */
    double mark_mag;           /* |H| there (V/V) */
} ru_plot_bode;

/* One model of a comparison. */
typedef struct ru_plot_model {
    const char *name;          /* shown in the legend (required) */
    size_t nenv;               /* envelope points */
    const double *env_t_s;     /* times (s) */
    const double *env_v;       /* amplitude (V peak) */
    double thd_percent;        /* NAN: no bar */
    double startup_time_s;     /* NAN: no bar (did not start) */
} ru_plot_model;

/* One period of the periodic steady state on the probe. */
typedef struct ru_plot_period {
    const char *title;         /* circuit title, shown small (NULL or "" for none) */
    const char *probe;         /* probe name (NULL: "probe") */
    size_t n;                  /* samples over one period (required, >= 8) */
    const double *v;           /* probe at t_k = k period / n (V) */
    double period_s;           /* (required, > 0) */
    double max_v, min_v;       /* extremes (NAN: from the samples) */
    double dc_v;               /* mean level (NAN: not drawn) */
    double thd_percent;        /* shown in the subtitle (NAN: not shown) */
} ru_plot_period;

/* Floquet multipliers in the complex plane with the unit circle. */
typedef struct ru_plot_floquet {
    size_t n;                  /* multipliers (required, >= 1); [0] is the phase one */
    const double *re, *im;
    double recovery_time_s;    /* from the second (NAN: not known) */
    double period_s;
} ru_plot_floquet;

/* Phase noise L(fm) by the PPV, Leeson's formula beside it, labelled regions. */
typedef struct ru_plot_phase_noise {
    double f0_hz;              /* carrier */
    size_t n;                  /* offsets (required, >= 2), ascending, > 0 */
    const double *offset_hz;
    const double *ppv_dbc;     /* L(fm) from the PPV (dBc/Hz) */
    const double *leeson_dbc;  /* Leeson's L(fm) (NULL: not drawn) */
    double c_s;                /* phase diffusion constant (s^2/s) */
    double lorentz_hz;         /* half width pi f0^2 c of the Lorentzian */
    double flicker_hz;         /* where the 1/f^3 part meets the 1/f^2 part (NAN none) */
    double leeson_hz;          /* Leeson's corner f0 / (2 QL) (NAN: none) */
    double period_jitter_s;    /* shown in the subtitle */
    double leeson_fc_hz;       /* Leeson's flicker corner, marked (0 or NAN: none) */
    double leeson_floor_dbc;   /* Leeson's floor 2FkT/Ps, labelled (0 or NAN: none) */
} ru_plot_phase_noise;

/* Negative-resistance analysis: the impedance the rest of the circuit presents to
 * a part, Re Z with the -ESR line (Re Z must lie below it to start) and Im Z with
 * the part's own reactance negated (they meet at the operating frequency). */
typedef struct ru_plot_margin {
    const char *part;          /* the part's name */
    size_t n;                  /* points (>= 2), frequencies ascending, > 0 */
    const double *f_hz;
    const double *re_ohm;      /* Re Z of the rest */
    const double *im_ohm;      /* Im Z of the rest */
    const double *part_x_ohm;  /* the part's reactance (NULL: not drawn) */
    double esr_ohm;            /* the part's resistance (NAN: no line) */
    double f_op_hz;            /* operating frequency (NAN: none) */
    double margin;             /* shown in the subtitle (NAN: none) */
} ru_plot_margin;

/* ---- checks before any simulation work ---- */

/* Checks that `format` is png, svg or pdf (NULL or "" = png) and its cairo driver
 * is present (RU_EINPUT otherwise), and that dir is a writable folder (a probe file
 * is created and removed; RU_EIO otherwise). */
ru_status ru_plot_check(const char *dir, const char *format, ru_error *err);

/* Checks a report path: it must end in .pdf or .html (RU_EINPUT) and its folder
 * must be writable (RU_EIO). */
ru_status ru_plot_report_check(const char *path, ru_error *err);

/* ---- one file per figure: DIR/NAME.EXT ---- */

ru_status ru_plot_wave_file(const char *dir, const char *format, const ru_plot_wave *w,
                            ru_error *err);
ru_status ru_plot_growth_file(const char *dir, const char *format,
                              const ru_plot_growth *g, ru_error *err);
ru_status ru_plot_spectrum_file(const char *dir, const char *format,
                                const ru_plot_spectrum *s, ru_error *err);
ru_status ru_plot_poles_file(const char *dir, const char *format,
                             const ru_plot_poles *p, ru_error *err);
/* Writes loop.EXT when b->is_loop, response.EXT otherwise. */
ru_status ru_plot_bode_file(const char *dir, const char *format, const ru_plot_bode *b,
                            ru_error *err);
ru_status ru_plot_compare_envelopes_file(const char *dir, const char *format,
                                         const ru_plot_model *m, size_t n,
                                         ru_error *err);
ru_status ru_plot_compare_figures_file(const char *dir, const char *format,
                                       const ru_plot_model *m, size_t n,
                                       ru_error *err);

/* DIR/steady.EXT, DIR/floquet.EXT, DIR/phase-noise.EXT. */
ru_status ru_plot_period_file(const char *dir, const char *format, const ru_plot_period *p,
                              ru_error *err);
ru_status ru_plot_floquet_file(const char *dir, const char *format,
                               const ru_plot_floquet *f, ru_error *err);
ru_status ru_plot_phase_noise_file(const char *dir, const char *format,
                                   const ru_plot_phase_noise *p, ru_error *err);
/* DIR/margin.EXT. */
ru_status ru_plot_margin_file(const char *dir, const char *format,
                              const ru_plot_margin *m, ru_error *err);

/* ---- every figure at once, and reports ---- */

/* The figures of one run (any member NULL / 0 is left out). */
typedef struct ru_plot_set {
    const ru_plot_wave *wave;
    const ru_plot_growth *growth;
    const ru_plot_spectrum *spectrum;
    const ru_plot_poles *poles;
    const ru_plot_bode *loop;
    const ru_plot_bode *response;
    const ru_plot_model *models; /* comparison (both comparison figures) */
    size_t nmodels;
    const ru_plot_period *period;   /* periodic steady state */
    const ru_plot_floquet *floquet;
    const ru_plot_phase_noise *phase_noise;
    const ru_plot_margin *margin;   /* negative-resistance analysis */
} ru_plot_set;

/* Writes every figure present in set into dir; stops at the first failure. */
ru_status ru_plot_set_files(const char *dir, const char *format, const ru_plot_set *set,
                            ru_error *err);

/* A table of figures for a report: cells row-major, row 0 is the header. */
typedef struct ru_plot_table {
    size_t nrows;
    size_t ncols;
    const char *const *cells;  /* nrows * ncols strings (NULL cell = empty) */
} ru_plot_table;

/* Writes a report to path: ".pdf" gives a multi-page PDF (a first page with the
 * title, the summary text and the table, then one page per figure); ".html" gives
 * one self-contained page with the same text, the table and every figure as inline
 * SVG. summary may hold several lines ('\n'); table may be NULL. */
ru_status ru_plot_report(const char *path, const char *title, const char *summary,
                         const ru_plot_table *table, const ru_plot_set *set,
                         ru_error *err);

#ifdef __cplusplus
}
#endif
#endif
