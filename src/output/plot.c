/* plot.c: files, streams, the lock and the drawing helpers of the plot module
 * (ringup/plot.h), and the one-file-per-figure entry points.
 *
 * Invariants:
 * - `plot_lock` is the one static object of this module: it guards PLplot's
 *   process-wide stream tables (like FFTW's planner lock in harmonics.c) and holds
 *   no data. It is held from plot_stream_begin to plot_stream_end, never longer.
 * - PLplot never sees an unknown device (checked in plgDevs first) or a file it
 *   cannot open (the temporary file is created here with O_EXCL before plinit), so
 *   it never prompts on stdin or exits. Its abort messages are swallowed.
 * - Output goes to "<path>.tmp.<pid>-<i>" in the target folder and is renamed onto
 *   the final name only when complete and non-empty. */
#define _POSIX_C_SOURCE 200809L

#include "output/plot_impl.h"

#include "ringup/outfile.h"

#include <errno.h>
#include <fcntl.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>


static ru_status plot_errno(ru_error *err, int e, const char *what, const char *path)
{
    char eb[128] = "unknown error";
    if (strerror_r(e, eb, sizeof eb) != 0)
        snprintf(eb, sizeof eb, "error %d", e);
    return ru_error_set(err, RU_EIO, "", 0, 0, "cannot %s '%s': %s", what, path, eb);
}

ru_status plot_tmp_create(const char *path, char **tmp, ru_error *err)
{
    int fd = -1;
    ru_status st = ru_outfile_tmp(path, &fd, tmp, err);
    if (st == RU_OK)
        close(fd);
    return st;
}

/* A picture is complete when it ends as its format ends (a PNG with its IEND
 * chunk, a PDF with %%EOF, an SVG with </svg>): cairo and PLplot do not report a
 * write that failed on a full disk, so the file itself is read back. */
static int picture_complete(const char *tmp, const char *path)
{
    static const unsigned char iend[12] = {0, 0, 0, 0, 'I', 'E', 'N', 'D',
                                           0xAE, 0x42, 0x60, 0x82};
    const char *ext = strrchr(path, '.');
    FILE *fp = fopen(tmp, "rb");
    if (!fp)
        return 0;
    unsigned char tail[64];
    size_t n = 0;
    if (fseek(fp, -(long)sizeof tail, SEEK_END) != 0)
        rewind(fp); /* a file shorter than the tail */
    n = fread(tail, 1, sizeof tail, fp);
    fclose(fp);
    if (n == 0)
        return 0;
    if (ext && !strcmp(ext, ".png"))
        return n >= sizeof iend && !memcmp(tail + n - sizeof iend, iend, sizeof iend);
    const char *mark = ext && !strcmp(ext, ".pdf") ? "%%EOF"
                       : ext && !strcmp(ext, ".svg") ? "</svg>"
                                                     : NULL;
    if (!mark)
        return 1;
    size_t m = strlen(mark);
    for (size_t i = 0; i + m <= n; i++)
        if (!memcmp(tail + i, mark, m))
            return 1;
    return 0;
}

ru_status plot_tmp_commit(const char *tmp, const char *path, ru_error *err)
{
    struct stat sb;
    if (stat(tmp, &sb) != 0 || sb.st_size == 0) {
        remove(tmp);
        return ru_error_set(err, RU_EIO, "", 0, 0,
                            "cannot write '%s': the file came out empty", path);
    }
    if (!picture_complete(tmp, path)) {
        remove(tmp);
        return ru_error_set(err, RU_EIO, "", 0, 0,
                            "cannot write '%s': the file came out incomplete (%lld "
                            "bytes; is the disk full?)",
                            path, (long long)sb.st_size);
    }
    if (rename(tmp, path) != 0) {
        int e = errno;
        remove(tmp);
        return plot_errno(err, e, "rename onto", path);
    }
    return RU_OK;
}

/* Joins dir, stem and extension into a malloc'd path. */
static char *plot_join(const char *dir, const char *stem, const char *ext)
{
    if (!dir || !*dir)
        dir = ".";
    size_t len = strlen(dir) + strlen(stem) + strlen(ext) + 3;
    char *p = malloc(len);
    if (p)
        snprintf(p, len, "%s/%s.%s", dir, stem, ext);
    return p;
}

ru_status ru_plot_check(const char *dir, const char *format, ru_error *err)
{
    const char *dev, *ext;
    ru_status st = plot_device(format, &dev, &ext, err);
    if (st != RU_OK)
        return st;
    char *probe = plot_join(dir, ".ringup-probe", ext), *tmp = NULL;
    if (!probe)
        return ru_error_set(err, RU_ENOMEM, "", 0, 0, "out of memory");
    st = plot_tmp_create(probe, &tmp, err);
    if (st == RU_EIO)
        st = ru_error_set(err, RU_EIO, "", 0, 0, "cannot write pictures into '%s': %s",
                          dir && *dir ? dir : ".", err ? err->msg : "not writable");
    if (tmp)
        remove(tmp);
    free(tmp);
    free(probe);
    return st;
}

/* Writes one figure to DIR/STEM.EXT through a temporary file. */
static ru_status plot_file(const plot_figure *fig, const char *dir, const char *format,
                           const void *data, ru_error *err)
{
    const char *dev, *ext;
    char *path = NULL, *tmp = NULL;
    ru_status st = data ? RU_OK
                        : ru_error_set(err, RU_EINPUT, "", 0, 0, "%s: no data", fig->name);
    if (st == RU_OK)
        st = plot_device(format, &dev, &ext, err);
    if (st == RU_OK)
        st = fig->check(data, err);
    if (st == RU_OK && !(path = plot_join(dir, fig->name, ext)))
        st = ru_error_set(err, RU_ENOMEM, "", 0, 0, "out of memory");
    if (st == RU_OK)
        st = plot_tmp_create(path, &tmp, err);
    if (st == RU_OK)
        st = plot_render(fig, data, dev, tmp, err);
    if (st == RU_OK)
        st = plot_tmp_commit(tmp, path, err);
    else if (tmp)
        remove(tmp);
    free(tmp);
    free(path);
    return st;
}

ru_status ru_plot_wave_file(const char *dir, const char *format, const ru_plot_wave *w,
                            ru_error *err)
{
    return plot_file(&plot_fig_wave, dir, format, w, err);
}

ru_status ru_plot_growth_file(const char *dir, const char *format,
                              const ru_plot_growth *g, ru_error *err)
{
    return plot_file(&plot_fig_growth, dir, format, g, err);
}

ru_status ru_plot_spectrum_file(const char *dir, const char *format,
                                const ru_plot_spectrum *s, ru_error *err)
{
    return plot_file(&plot_fig_spectrum, dir, format, s, err);
}

ru_status ru_plot_poles_file(const char *dir, const char *format,
                             const ru_plot_poles *p, ru_error *err)
{
    return plot_file(&plot_fig_poles, dir, format, p, err);
}

ru_status ru_plot_bode_file(const char *dir, const char *format, const ru_plot_bode *b,
                            ru_error *err)
{
    const plot_figure *fig = (b && b->is_loop) ? &plot_fig_loop : &plot_fig_response;
    return plot_file(fig, dir, format, b, err);
}

ru_status ru_plot_period_file(const char *dir, const char *format, const ru_plot_period *p,
                              ru_error *err)
{
    return plot_file(&plot_fig_period, dir, format, p, err);
}

ru_status ru_plot_floquet_file(const char *dir, const char *format,
                               const ru_plot_floquet *f, ru_error *err)
{
    return plot_file(&plot_fig_floquet, dir, format, f, err);
}

ru_status ru_plot_phase_noise_file(const char *dir, const char *format,
                                   const ru_plot_phase_noise *p, ru_error *err)
{
    return plot_file(&plot_fig_phase_noise, dir, format, p, err);
}

ru_status ru_plot_margin_file(const char *dir, const char *format,
                              const ru_plot_margin *m, ru_error *err)
{
    return plot_file(&plot_fig_margin, dir, format, m, err);
}

ru_status ru_plot_compare_envelopes_file(const char *dir, const char *format,
                                         const ru_plot_model *m, size_t n,
                                         ru_error *err)
{
    plot_models pm = {m, n};
    return plot_file(&plot_fig_cmp_env, dir, format, &pm, err);
}

ru_status ru_plot_compare_figures_file(const char *dir, const char *format,
                                       const ru_plot_model *m, size_t n,
                                       ru_error *err)
{
    plot_models pm = {m, n};
    return plot_file(&plot_fig_cmp_fig, dir, format, &pm, err);
}

ru_status ru_plot_set_files(const char *dir, const char *format, const ru_plot_set *set,
                            ru_error *err)
{
    if (!set)
        return ru_error_set(err, RU_EINPUT, "", 0, 0, "no figures given");
    ru_status st = RU_OK;
    if (st == RU_OK && set->wave)
        st = ru_plot_wave_file(dir, format, set->wave, err);
    if (st == RU_OK && set->growth)
        st = ru_plot_growth_file(dir, format, set->growth, err);
    if (st == RU_OK && set->spectrum)
        st = ru_plot_spectrum_file(dir, format, set->spectrum, err);
    if (st == RU_OK && set->poles)
        st = ru_plot_poles_file(dir, format, set->poles, err);
    if (st == RU_OK && set->loop)
        st = ru_plot_bode_file(dir, format, set->loop, err);
    if (st == RU_OK && set->response)
        st = ru_plot_bode_file(dir, format, set->response, err);
    if (st == RU_OK && set->models && set->nmodels > 0)
        st = ru_plot_compare_envelopes_file(dir, format, set->models, set->nmodels, err);
    if (st == RU_OK && set->models && set->nmodels > 0)
        st = ru_plot_compare_figures_file(dir, format, set->models, set->nmodels, err);
    if (st == RU_OK && set->period)
        st = ru_plot_period_file(dir, format, set->period, err);
    if (st == RU_OK && set->floquet)
        st = ru_plot_floquet_file(dir, format, set->floquet, err);
    if (st == RU_OK && set->phase_noise)
        st = ru_plot_phase_noise_file(dir, format, set->phase_noise, err);
    if (st == RU_OK && set->margin)
        st = ru_plot_margin_file(dir, format, set->margin, err);
    return st;
}
