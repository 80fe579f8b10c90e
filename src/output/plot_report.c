/* plot_report.c: reports of one run (ringup/plot.h): a multi-page PDF (summary page,
 * then one page per figure, all in one pdfcairo stream) or a self-contained HTML
 * page with every figure as inline SVG.
 *
 * Invariants:
 * - Every figure's data is checked before any file is created.
 * - The report is written under a temporary name and renamed when complete; the
 *   SVG of each figure goes through its own temporary file, removed at once.
 * - Inline SVGs get their ids prefixed ("f3-glyph0-1"), so the glyph and clip
 *   definitions of different figures cannot collide in one HTML document. */
#define _POSIX_C_SOURCE 200809L

#include "output/plot_impl.h"

#include <ctype.h>
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#ifdef RU_HAVE_PLPLOT
#include <plplot/plplot.h>
#endif

#define REPORT_FIGS 12

typedef struct report_fig {
    const plot_figure *fig;
    const void *data;
    const char *caption;
} report_fig;

/* Figures of the set in report order; returns how many. */
static size_t report_list(const ru_plot_set *set, plot_models *pm, report_fig *f)
{
    size_t n = 0;
    if (!set)
        return 0;
    if (set->wave)
        f[n++] = (report_fig){&plot_fig_wave, set->wave, "Waveform and envelope"};
    if (set->growth)
        f[n++] = (report_fig){&plot_fig_growth, set->growth, "Envelope growth"};
    if (set->spectrum)
        f[n++] = (report_fig){&plot_fig_spectrum, set->spectrum, "Harmonics"};
    if (set->poles)
        f[n++] = (report_fig){&plot_fig_poles, set->poles, "Poles"};
    if (set->loop)
        f[n++] = (report_fig){&plot_fig_loop, set->loop, "Loop gain"};
    if (set->response)
        f[n++] = (report_fig){&plot_fig_response, set->response, "Network response"};
    pm->m = set->models;
    pm->n = set->nmodels;
    if (set->models && set->nmodels > 0) {
        f[n++] = (report_fig){&plot_fig_cmp_env, pm, "Envelopes compared"};
        f[n++] = (report_fig){&plot_fig_cmp_fig, pm, "THD and start-up time compared"};
    }
    if (set->period)
        f[n++] = (report_fig){&plot_fig_period, set->period, "One period of the settled tone"};
    if (set->floquet)
        f[n++] = (report_fig){&plot_fig_floquet, set->floquet, "Floquet multipliers"};
    if (set->phase_noise)
        f[n++] = (report_fig){&plot_fig_phase_noise, set->phase_noise, "Phase noise"};
    if (set->margin)
        f[n++] = (report_fig){&plot_fig_margin, set->margin, "Negative resistance"};
    return n;
}

/* 1 for ".pdf", 2 for ".html", 0 otherwise (case-insensitive). */
static int report_kind(const char *path)
{
    const char *dot = path ? strrchr(path, '.') : NULL;
    char ext[8] = "";
    if (!dot || strlen(dot) >= sizeof ext)
        return 0;
    for (size_t i = 0; dot[i]; i++)
        ext[i] = (char)tolower((unsigned char)dot[i]);
    return strcmp(ext, ".pdf") == 0 ? 1 : strcmp(ext, ".html") == 0 ? 2 : 0;
}

ru_status ru_plot_report_check(const char *path, ru_error *err)
{
    int kind = report_kind(path);
    const char *dev, *ext;
    char *tmp = NULL;
    if (!kind)
        return ru_error_set(err, RU_EINPUT, "", 0, 0, "report '%s': the name must end in "
                            ".pdf or .html", path ? path : "");
    ru_status st = plot_device(kind == 1 ? "pdf" : "svg", &dev, &ext, err);
    if (st == RU_OK)
        st = plot_tmp_create(path, &tmp, err);
    if (tmp)
        remove(tmp);
    free(tmp);
    return st;
}

#ifdef RU_HAVE_PLPLOT
/* The table in columns sized by their longest cell (characters are about 0.0115
 * of the page width at scale 0.95, wide enough for digits in the proportional
 * font); rows that do not fit on the first page are dropped (callers with long
 * tables put them in the summary text, which continues onto further pages). */

static double report_table(const ru_plot_table *t, double y)
{
    char line[256];
    if (!t || !t->cells || t->ncols == 0)
        return y;
    double x[32], w = 0.06;
    for (size_t c = 0; c < t->ncols && c < 32; c++) {
        size_t mx = 4;
        for (size_t r = 0; r < t->nrows; r++) {
            const char *s = t->cells[r * t->ncols + c];
            mx = s && strlen(s) > mx ? strlen(s) : mx;
        }
        x[c] = w;
        w += 0.0115 * (double)mx + 0.03;
    }
    for (size_t r = 0; r < t->nrows && y > 0.05; r++) {
        y -= 0.035;
        for (size_t c = 0; c < t->ncols && c < 32; c++) {
            const char *s = t->cells[r * t->ncols + c];
            plot_escape(line, sizeof line, s ? s : "");
            plot_text(x[c], y, 0.0, r == 0 ? PC_MUTED : PC_INK, 0.95, line);
        }
        if (r == 0) {
            double lx[2] = {0.06, fmin(w, 0.97)}, ly[2] = {y - 0.018, y - 0.018};
            plot_line(2, lx, ly, PC_GRID, 1.0, 1);
        }
    }
    return y - 0.03;
}

/* Text pages: the title on the first, then the table (if any), then the summary
 * in a monospaced font exactly as the terminal shows it (columns line up), lines
 * longer than RU_REPORT_COLS wrapped at a space (continuations indented), going on
 * over as many pages as it needs: nothing is cut off. */
#define RU_REPORT_COLS 110   /* characters per line of the monospaced text */
#define RU_REPORT_LINE 0.0235 /* line spacing (fraction of the page height) */
#define RU_REPORT_MONO 0.62  /* character scale of the monospaced text */

static void report_new_page(double *y)
{
    pladv(0);
    plvpor(0, 1, 0, 1);
    plwind(0, 1, 0, 1);
    *y = 0.95;
}

static void report_pages(const char *title, const char *summary, const ru_plot_table *t)
{
    char line[512], raw[RU_REPORT_COLS + 8];
    double y;
    report_new_page(&y);
    plot_escape(line, sizeof line, title ? title : "ringup report");
    plot_text(0.04, 0.94, 0.0, PC_INK, 1.5, line);
    y = report_table(t, 0.90);
    plsfont(PL_FCI_MONO, PL_FCI_UPRIGHT, PL_FCI_MEDIUM);
    int cont = 0; /* 1: this line goes on from the last one */
    for (const char *p = summary; p && *p;) {
        size_t room = RU_REPORT_COLS - (cont ? 4 : 0);
        size_t len = strcspn(p, "\n"), cut = len;
        if (cut > room) {
            cut = room;
            while (cut > room / 3 && p[cut] != ' ')
                cut--;
            if (p[cut] != ' ')
                cut = room; /* no space to wrap at: cut inside the word */
        }
        if (y - RU_REPORT_LINE < 0.03)
            report_new_page(&y);
        snprintf(raw, sizeof raw, "%s%.*s", cont ? "    " : "", (int)cut, p);
        plot_escape(line, sizeof line, raw);
        y -= RU_REPORT_LINE;
        plot_text(0.04, y, 0.0, PC_INK, RU_REPORT_MONO, line);
        p += cut;
        cont = cut < len;
        if (!cont && *p == '\n')
            p++;
        while (cont && *p == ' ')
            p++;
    }
    plsfont(PL_FCI_SANS, PL_FCI_UPRIGHT, PL_FCI_MEDIUM);
}

static ru_status report_pdf(const char *tmp, const char *title, const char *summary,
                            const ru_plot_table *t, const report_fig *f, size_t n,
                            ru_error *err)
{
    ru_status st = plot_stream_begin("pdfcairo", tmp, err);
    if (st != RU_OK)
        return st;
    report_pages(title, summary, t);
    for (size_t i = 0; i < n; i++)
        f[i].fig->draw(f[i].data);
    plot_stream_end();
    return RU_OK;
}
#endif

/* Writes s with &, <, > and " escaped. */
static void html_text(FILE *fp, const char *s)
{
    for (; s && *s; s++) {
        switch (*s) {
        case '&': fputs("&amp;", fp); break;
        case '<': fputs("&lt;", fp); break;
        case '>': fputs("&gt;", fp); break;
        case '"': fputs("&quot;", fp); break;
        default: fputc(*s, fp);
        }
    }
}

/* Copies the <svg> element of file svg into fp with ids prefixed by "fK-". */
static ru_status html_svg(FILE *fp, const char *svg, size_t k, ru_error *err)
{
    static const char *const pat[] = {"id=\"", "href=\"#", "url(#"};
    FILE *in = fopen(svg, "rb");
    if (!in)
        return ru_error_set(err, RU_EIO, "", 0, 0, "cannot read back '%s'", svg);
    fseek(in, 0, SEEK_END);
    long len = ftell(in);
    fseek(in, 0, SEEK_SET);
    char *buf = len > 0 ? malloc((size_t)len + 1) : NULL;
    size_t got = buf ? fread(buf, 1, (size_t)len, in) : 0;
    fclose(in);
    if (!buf || got != (size_t)len) {
        free(buf);
        return ru_error_set(err, RU_EIO, "", 0, 0, "cannot read back '%s'", svg);
    }
    buf[len] = '\0';
    const char *p = strstr(buf, "<svg");
    for (; p && *p; p++) {
        fputc(*p, fp);
        for (int j = 0; j < 3; j++) {
            size_t pl = strlen(pat[j]);
            if (strncmp(p, pat[j], pl) == 0) {
                fwrite(p + 1, 1, pl - 1, fp);
                fprintf(fp, "f%zu-", k);
                p += pl - 1;
                break;
            }
        }
    }
    free(buf);
    return RU_OK;
}

static void html_head(FILE *fp, const char *title, const char *summary,
                      const ru_plot_table *t)
{
    fputs("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">\n<title>", fp);
    html_text(fp, title ? title : "ringup report");
    fputs("</title>\n<style>body{font-family:sans-serif;max-width:1000px;margin:2em auto;"
          "color:#222}pre{background:#f4f4f4;padding:1em}table{border-collapse:collapse}"
          "td,th{padding:.25em 1em;text-align:left;border-bottom:1px solid #ddd}"
          "figure{margin:2em 0}svg{width:100%;height:auto}</style></head><body>\n<h1>", fp);
    html_text(fp, title ? title : "ringup report");
    fputs("</h1>\n", fp);
    if (summary && *summary) {
        fputs("<pre>", fp);
        html_text(fp, summary);
        fputs("</pre>\n", fp);
    }
    if (!t || !t->cells || t->ncols == 0 || t->nrows == 0)
        return;
    fputs("<table>\n", fp);
    for (size_t r = 0; r < t->nrows; r++) {
        fputs("<tr>", fp);
        for (size_t c = 0; c < t->ncols; c++) {
            fputs(r == 0 ? "<th>" : "<td>", fp);
            html_text(fp, t->cells[r * t->ncols + c]);
            fputs(r == 0 ? "</th>" : "</td>", fp);
        }
        fputs("</tr>\n", fp);
    }
    fputs("</table>\n", fp);
}

/* Renders figure i to a temporary SVG next to path and inlines it. */
static ru_status html_figure(FILE *fp, const char *path, const report_fig *f, size_t i,
                             ru_error *err)
{
    char *svg = NULL;
    ru_status st = plot_tmp_create(path, &svg, err);
    if (st == RU_OK)
        st = plot_render(f->fig, f->data, "svgcairo", svg, err);
    if (st == RU_OK) {
        fputs("<figure>\n", fp);
        st = html_svg(fp, svg, i, err);
        fputs("\n<figcaption>", fp);
        html_text(fp, f->caption);
        fputs("</figcaption></figure>\n", fp);
    }
    if (svg)
        remove(svg);
    free(svg);
    return st;
}

static ru_status report_html(const char *path, const char *tmp, const char *title,
                             const char *summary, const ru_plot_table *t,
                             const report_fig *f, size_t n, ru_error *err)
{
    FILE *fp = fopen(tmp, "wb");
    if (!fp)
        return ru_error_set(err, RU_EIO, "", 0, 0, "cannot write '%s': %s", path,
                            strerror(errno));
    ru_status st = RU_OK;
    html_head(fp, title, summary, t);
    for (size_t i = 0; i < n && st == RU_OK; i++)
        st = html_figure(fp, path, &f[i], i, err);
    fputs("</body></html>\n", fp);
    if (ferror(fp) && st == RU_OK)
        st = ru_error_set(err, RU_EIO, "", 0, 0, "cannot write '%s'", path);
    if (fclose(fp) != 0 && st == RU_OK)
        st = ru_error_set(err, RU_EIO, "", 0, 0, "cannot write '%s'", path);
    return st;
}

ru_status ru_plot_report(const char *path, const char *title, const char *summary,
                         const ru_plot_table *table, const ru_plot_set *set,
                         ru_error *err)
{
    report_fig f[REPORT_FIGS];
    plot_models pm;
    char *tmp = NULL;
    size_t n = report_list(set, &pm, f);
    ru_status st = ru_plot_report_check(path, err);
    for (size_t i = 0; i < n && st == RU_OK; i++)
        st = f[i].fig->check(f[i].data, err);
    if (st == RU_OK)
        st = plot_tmp_create(path, &tmp, err);
#ifdef RU_HAVE_PLPLOT
    if (st == RU_OK && report_kind(path) == 1)
        st = report_pdf(tmp, title, summary, table, f, n, err);
#endif
    if (st == RU_OK && report_kind(path) == 2)
        st = report_html(path, tmp, title, summary, table, f, n, err);
    if (st == RU_OK)
        st = plot_tmp_commit(tmp, path, err);
    else if (tmp)
        remove(tmp);
    free(tmp);
    return st;
}
