/* plot_cmp.c: comparison figures of several models: their envelopes overlaid, and
 * THD and start-up time per model as horizontal bars.
 *
 * Invariants: as in plot_figs.c. Series k uses colour plot_series_colour(k) and line
 * style 1 + k % 4, so curves stay apart in grey print and for colour-blind readers. */
#include "output/plot_impl.h"
#include "ringup/format.h"

#include <math.h>
#include <stdio.h>
#include <string.h>

#ifdef RU_HAVE_PLPLOT
#include <plplot/plplot.h>
#endif

#define CHUNK 256 /* points scaled and drawn at a time */
#define CMP_MAX 64 /* models per comparison */

static ru_status check_models(const void *data, ru_error *err)
{
    const plot_models *pm = data;
    if (pm->n < 1 || pm->n > CMP_MAX || !pm->m)
        return ru_error_set(err, RU_EINPUT, "", 0, 0,
                            "comparison: needs 1 to %d models", CMP_MAX);
    for (size_t k = 0; k < pm->n; k++)
        if (!pm->m[k].name || (pm->m[k].nenv > 0 && (!pm->m[k].env_t_s || !pm->m[k].env_v)))
            return ru_error_set(err, RU_EINPUT, "", 0, 0,
                                "comparison: model %zu has no name or no envelope arrays",
                                k + 1);
    return RU_OK;
}

#ifdef RU_HAVE_PLPLOT
/* Legend entries in rows under the title; returns nothing, wraps at the right. */
static void cmp_legend(const plot_models *pm, int style_lines)
{
    double lx = PLOT_VX0, ly = 0.855;
    char name[80];
    for (size_t k = 0; k < pm->n; k++) {
        plot_escape(name, sizeof name, pm->m[k].name);
        plot_legend_item(&lx, &ly, plot_series_colour(k), style_lines ? 0 : 3, 2.0,
                              name);
    }
}

static void cmp_envelope(const ru_plot_model *m, size_t k, double kt, double kv)
{
    double x[CHUNK + 1], y[CHUNK + 1];
    size_t i = 0;
    while (i < m->nenv) {
        size_t n = 0;
        if (i > 0)
            x[n] = m->env_t_s[i - 1] * kt, y[n++] = m->env_v[i - 1] * kv;
        for (size_t j = 0; j < CHUNK && i < m->nenv; j++, i++)
            x[n] = m->env_t_s[i] * kt, y[n++] = m->env_v[i] * kv;
        plot_line(n, x, y, plot_series_colour(k), 2.0, 1 + (int)(k % 4));
    }
    if (!isfinite(m->startup_time_s) || m->nenv < 2)
        return;
    for (i = 1; i < m->nenv; i++) /* marker on the curve at the start-up time */
        if (m->env_t_s[i] >= m->startup_time_s) {
            double t0 = m->env_t_s[i - 1], t1 = m->env_t_s[i], f = 0;
            if (t1 > t0)
                f = (m->startup_time_s - t0) / (t1 - t0);
            PLFLT px = m->startup_time_s * kt;
            PLFLT py = (m->env_v[i - 1] + f * (m->env_v[i] - m->env_v[i - 1])) * kv;
            plcol0(plot_series_colour(k));
            plssym(0, 1.6);
            plpoin(1, &px, &py, 17);
            break;
        }
}

static void draw_cmp_env(const void *data)
{
    const plot_models *pm = data;
    double tmax = 0, vmax = 0;
    const char *tp, *vp;
    char xl[64], yl[64];
    for (size_t k = 0; k < pm->n; k++)
        for (size_t i = 0; i < pm->m[k].nenv; i++) {
            if (isfinite(pm->m[k].env_t_s[i]))
                tmax = fmax(tmax, pm->m[k].env_t_s[i]);
            if (isfinite(pm->m[k].env_v[i]))
                vmax = fmax(vmax, pm->m[k].env_v[i]);
        }
    if (!(tmax > 0))
        tmax = 1;
    if (!(vmax > 0))
        vmax = 1;
    double kt = plot_si_scale(tmax, &tp), kv = plot_si_scale(vmax, &vp);
    pladv(0);
    plot_titles("Envelopes compared (one per model or value)",
                "amplitude of the probe per cycle; a dot marks each start-up time");
    plot_axis_label(xl, sizeof xl, "time from power-on", tp, kt, "s");
    plot_axis_label(yl, sizeof yl, "envelope amplitude", vp, kv, "V peak");
    plot_frame(PLOT_VX0, PLOT_VX1, PLOT_VY0, PLOT_VY1 - 0.04, 0, tmax * kt, 0,
               vmax * kv * 1.08, 0, 0, 0, 0, xl, yl);
    for (size_t k = 0; k < pm->n; k++)
        cmp_envelope(&pm->m[k], k, kt, kv);
    cmp_legend(pm, 1);
}
#else
#define draw_cmp_env NULL
#endif

const plot_figure plot_fig_cmp_env = {"compare-envelopes", check_models, draw_cmp_env};

#ifdef RU_HAVE_PLPLOT
/* One panel of horizontal bars, model k at y = n - k (first model on top). */
static void cmp_bars(const plot_models *pm, int which, double vx0, double vx1)
{
    double vmax = 0, v[CMP_MAX];
    const char *pre = "";
    char lab[64], buf[64], a[32];
    for (size_t k = 0; k < pm->n; k++) {
        v[k] = which ? pm->m[k].startup_time_s : pm->m[k].thd_percent;
        if (isfinite(v[k]))
            vmax = fmax(vmax, v[k]);
    }
    double f = which ? plot_si_scale(vmax > 0 ? vmax : 1, &pre) : 1.0;
    double top = (vmax > 0 ? vmax : 1) * f * 1.4; /* room for the value labels */
    if (which)
        plot_axis_label(lab, sizeof lab, "start-up time", pre, f, "s");
    else
        snprintf(lab, sizeof lab, "THD (%%)");
    /* a half-width panel: about four intervals, so the tick numbers never touch */
    plot_frame_ticks(vx0, vx1, PLOT_VY0, PLOT_VY1 - 0.04, 0, top, 0.4, pm->n + 0.6, 0, 0, 0,
                     plot_nice_step(top, 4), 0, lab, NULL);
    for (size_t k = 0; k < pm->n; k++) {
        double y = (double)(pm->n - k);
        if (!isfinite(v[k])) {
            plot_text(0.01 * top, y, 0.0, PC_MUTED, 0.8, which ? " did not start" : " n/a");
            continue;
        }
        plot_rect(0, v[k] * f, y - 0.3, y + 0.3, plot_series_colour(k));
        if (which)
            snprintf(buf, sizeof buf, " %s", plot_si_text(v[k], "s", 3, a, sizeof a));
        else
            snprintf(buf, sizeof buf, " %.3g %%", v[k]);
        plot_text(v[k] * f, y, 0.0, PC_INK, 0.8, buf);
    }
}

static void draw_cmp_fig(const void *data)
{
    const plot_models *pm = data;
    char name[80];
    pladv(0);
    plot_titles("Distortion and start-up time, per model or value",
                "THD of the settled tone; start-up time from power-on");
    cmp_bars(pm, 0, 0.22, 0.57);
    plvpor(0.22, 0.57, PLOT_VY0, PLOT_VY1 - 0.04); /* names left of the first panel */
    plcol0(PC_INK);
    for (size_t k = 0; k < pm->n; k++) {
        plot_escape(name, sizeof name, pm->m[k].name);
        double pos = ((double)(pm->n - k) - 0.4) / ((double)pm->n + 0.2);
        plmtex("lv", 1.0, pos, 1.0, name);
    }
    cmp_bars(pm, 1, 0.62, 0.97);
}
#else
#define draw_cmp_fig NULL
#endif

const plot_figure plot_fig_cmp_fig = {"compare-figures", check_models, draw_cmp_fig};
