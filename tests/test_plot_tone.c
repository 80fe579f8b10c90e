/* test_plot_tone.c: the settled tone's figures (one period, Floquet multipliers,
 * phase noise) are written as valid files with their data drawn, go into reports,
 * and bad data is refused without a file. Synthetic data of our own (a 1 kHz tone,
 * multipliers of a Wien-like cycle, a Lorentzian phase noise with a 1/f^3 part). */
#include "ru_test.h"

#include "ringup/plot.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#define OUT "plot-tone-out"
#define NP 256
#define NF 120

/* LeakSanitizer hook (as in test_plot.c): fontconfig's process-long font cache. */
const char *__lsan_default_suppressions(void);
const char *__lsan_default_suppressions(void)
{
    return "leak:libfontconfig.so\n";
}

static size_t file_size(const char *path)
{
    struct stat sb;
    return stat(path, &sb) == 0 ? (size_t)sb.st_size : 0;
}

/* PNG signature and IHDR (the PNG specification, section 5.2 and 11.2.2). */
static void assert_png(const char *path)
{
    static const unsigned char sig[8] = {0x89, 'P', 'N', 'G', 0x0d, 0x0a, 0x1a, 0x0a};
    unsigned char b[16];
    FILE *fp = fopen(path, "rb");
    assert_non_null(fp);
    assert_int_equal(fread(b, 1, 16, fp), 16);
    fclose(fp);
    assert_memory_equal(b, sig, 8);
    assert_memory_equal(b + 12, "IHDR", 4);
}

typedef struct data {
    double v[NP], flat[NP];
    double re[6], im[6];
    double f[NF], l[NF], le[NF], lflat[NF];
    ru_plot_period per, per0;
    ru_plot_floquet fl, fl0;
    ru_plot_phase_noise pn, pn0;
} data;

static void fill(data *d)
{
    for (int k = 0; k < NP; k++) {
        double th = 2 * M_PI * k / NP;
        d->v[k] = 1.97 * cos(th) + 0.02 * cos(3 * th);
        d->flat[k] = 0.0;
    }
    const double re[6] = {1.0, 0.979, 0.979, 0.3, 1e-16, -1e-17};
    const double im[6] = {0.0, 0.169, -0.169, 0.0, 0.0, 0.0};
    memcpy(d->re, re, sizeof re);
    memcpy(d->im, im, sizeof im);
    double f0 = 1e3, c = 1e-18;
    for (int i = 0; i < NF; i++) {
        double fm = 10.0 * pow(50.0, i / (NF - 1.0));
        d->f[i] = fm;
        d->l[i] = 10 * log10(f0 * f0 * c / (M_PI * M_PI * pow(f0, 4) * c * c + fm * fm) +
                             f0 * f0 * c * 30.0 / (fm * fm * fm));
        d->le[i] = d->l[i] + 3.0;
        d->lflat[i] = -100.0;
    }
    d->per = (ru_plot_period){"Wien bridge", "o", NP, d->v, 1e-3, 1.99, -1.99, 0.0, 0.0093};
    d->per0 = (ru_plot_period){NULL, "o", NP, d->flat, 1e-3, NAN, NAN, NAN, NAN};
    d->fl = (ru_plot_floquet){6, d->re, d->im, 0.1635, 1e-3};
    d->fl0 = (ru_plot_floquet){1, d->re, d->im, NAN, 1e-3};
    d->pn = (ru_plot_phase_noise){f0, NF, d->f, d->l, d->le, c, M_PI * f0 * f0 * c, 30.0,
                                  5.0, 1e-12, 100.0, -170.0};
    d->pn0 = (ru_plot_phase_noise){f0, 2, d->f, d->lflat, NULL, c, NAN, NAN, NAN, 1e-12,
                                   NAN, NAN};
}

static void test_figures_drawn(void **state)
{
    (void)state;
    data *d = calloc(1, sizeof *d);
    fill(d);
    ru_error err;
    mkdir(OUT, 0777);
    mkdir(OUT "/min", 0777);
    ru_plot_set s = {0}, s0 = {0};
    s.period = &d->per, s.floquet = &d->fl, s.phase_noise = &d->pn;
    s0.period = &d->per0, s0.floquet = &d->fl0, s0.phase_noise = &d->pn0;
    assert_int_equal(ru_plot_set_files(OUT, "png", &s, &err), RU_OK);
    assert_int_equal(ru_plot_set_files(OUT "/min", "png", &s0, &err), RU_OK);
    const char *names[3] = {"steady", "floquet", "phase-noise"};
    for (int i = 0; i < 3; i++) {
        char a[128], b[128];
        snprintf(a, sizeof a, OUT "/%s.png", names[i]);
        snprintf(b, sizeof b, OUT "/min/%s.png", names[i]);
        assert_png(a);
        assert_png(b);
        /* Not blank: the data add at least 20 % to the compressed size of the same
         * page drawn almost empty (common practice, as test_plot.c) */
        if (!(file_size(a) > 1.2 * file_size(b)))
            fail_msg("%s: %zu bytes with data, %zu without", names[i], file_size(a),
                     file_size(b));
    }
    /* Reports take the new figures: the PDF starts with its magic (ISO 32000-1,
     * 7.5.2) and the HTML holds one inline SVG per figure */
    assert_int_equal(ru_plot_report(OUT "/r.pdf", "tone", "summary", NULL, &s, &err), RU_OK);
    FILE *fp = fopen(OUT "/r.pdf", "rb");
    char head[5] = "";
    assert_non_null(fp);
    assert_int_equal(fread(head, 1, 4, fp), 4);
    fclose(fp);
    assert_memory_equal(head, "%PDF", 4);
    assert_int_equal(ru_plot_report(OUT "/r.html", "tone", "summary", NULL, &s, &err), RU_OK);
    fp = fopen(OUT "/r.html", "rb");
    assert_non_null(fp);
    size_t nsvg = 0;
    char line[4096];
    while (fgets(line, sizeof line, fp))
        for (char *p = strstr(line, "<svg"); p; p = strstr(p + 4, "<svg"))
            nsvg++;
    fclose(fp);
    assert_int_equal(nsvg, 3);
    free(d);
}

static void test_bad_data_refused(void **state)
{
    (void)state;
    data *d = calloc(1, sizeof *d);
    fill(d);
    ru_error err;
    mkdir(OUT "/bad", 0777);
    ru_plot_period p = d->per;
    p.n = 4;
    assert_int_equal(ru_plot_period_file(OUT "/bad", "png", &p, &err), RU_EINPUT);
    p = d->per;
    p.period_s = 0;
    assert_int_equal(ru_plot_period_file(OUT "/bad", "png", &p, &err), RU_EINPUT);
    ru_plot_floquet f = d->fl;
    double nan_re[1] = {NAN};
    f.n = 1, f.re = nan_re;
    assert_int_equal(ru_plot_floquet_file(OUT "/bad", "png", &f, &err), RU_EINPUT);
    ru_plot_phase_noise n = d->pn;
    double down[2] = {100, 10};
    n.n = 2, n.offset_hz = down;
    assert_int_equal(ru_plot_phase_noise_file(OUT "/bad", "png", &n, &err), RU_EINPUT);
    assert_int_equal(file_size(OUT "/bad/steady.png"), 0);
    assert_int_equal(file_size(OUT "/bad/floquet.png"), 0);
    assert_int_equal(file_size(OUT "/bad/phase-noise.png"), 0);
    free(d);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_figures_drawn),
        cmocka_unit_test(test_bad_data_refused),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
