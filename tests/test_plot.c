/* test_plot.c: the plot module: the min/max trace collector against a brute-force
 * reduction, every figure file as valid PNG/SVG/PDF that is not blank, reports,
 * refusals without exiting, nothing on stdout, two threads at once.
 *
 * Files land in plot-out/ under the test's working folder (the build folder), so
 * they can be looked at after a run. Synthetic data: an averaged van der Pol start
 * (sigma 2500 /s, 5 kHz, 1 mV kick, 2 V settled), whose envelope is
 * A(t) = As / sqrt(1 + (As^2/a0^2 - 1) exp(-2 sigma t)) (Reference: the averaged van
 * der Pol amplitude equation dA/dt = sigma A (1 - A^2/As^2), whose closed-form
 * solution this is; from memory, checked here only as plot input). */
#define _POSIX_C_SOURCE 200809L

#include "ru_test.h"

#include "ringup/plot.h"
#include "output/plot_impl.h"

#include <errno.h>
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#define OUT "plot-out"
#define TWO_PI 6.283185307179586
#define SIGMA 2500.0
#define F0 5000.0
#define AS 2.0
#define A0 1e-3
#define STOP 0.02
#define NENV 100
#define NBODE 300

/* LeakSanitizer hook (read only in -DRU_SANITIZE=ON builds): fontconfig, loaded by
 * PLplot's cairo drivers, keeps its font cache for the life of the process and
 * never frees it; every leak reported in this test's ASan run was inside
 * libfontconfig, none in ringup or PLplot. */
const char *__lsan_default_suppressions(void);
const char *__lsan_default_suppressions(void)
{
    return "leak:libfontconfig.so\n";
}

static double env_at(double t)
{
    return AS / sqrt(1.0 + (AS * AS / (A0 * A0) - 1.0) * exp(-2.0 * SIGMA * t));
}

/* Everything one run of the synthetic oscillator gives the plots. */
typedef struct fixture {
    ru_trace *tr;
    double env_t[NENV], env_v[NENV];
    double harm[9];
    ru_pole poles[4];
    double drift_a[20];
    ru_pole drift[20];
    double f[NBODE], lmag[NBODE], lph[NBODE], rmag[NBODE], rph[NBODE];
    double env2_v[NENV], env3_v[NENV];
    ru_plot_wave wave;
    ru_plot_growth growth;
    ru_plot_spectrum spec;
    ru_plot_poles pm;
    ru_plot_bode loop, resp;
    ru_plot_model models[3];
    ru_plot_set set;
} fixture;

static void fill_time(fixture *x)
{
    double dt = 1.0 / (72.0 * F0);
    assert_int_equal(ru_trace_create(STOP, 0, &x->tr), RU_OK);
    for (long k = 0; k * dt <= STOP; k++) {
        double t = k * dt, a = env_at(t), ph = TWO_PI * F0 * t;
        double v = 0.5 + a * sin(ph) + 0.02 * a * a * a / 8.0 * sin(3 * ph);
        assert_int_equal(ru_trace_push(x->tr, t, v), RU_OK);
    }
    for (int i = 0; i < NENV; i++) {
        x->env_t[i] = (i + 0.5) / F0;
        x->env_v[i] = env_at(x->env_t[i]);
        x->env2_v[i] = 1.4 / sqrt(1.0 + (1.96 / 1e-6 - 1.0) * exp(-2.0 * 1800 * x->env_t[i]));
        x->env3_v[i] = 2.6 / sqrt(1.0 + (6.76 / 1e-6 - 1.0) * exp(-2.0 * 3200 * x->env_t[i]));
    }
    static const double h[9] = {-136.8, -34.1, -144.4, -63.7, -147.9,
                                -92.4,  -150.8, -120.4, -152.6};
    memcpy(x->harm, h, sizeof h);
}

static void fill_freq(fixture *x)
{
    double w0 = TWO_PI * F0;
    x->poles[0] = (ru_pole){SIGMA, sqrt(w0 * w0 - SIGMA * SIGMA)};
    x->poles[1] = (ru_pole){SIGMA, -sqrt(w0 * w0 - SIGMA * SIGMA)};
    x->poles[2] = (ru_pole){-8000.0, 0.0};
    x->poles[3] = (ru_pole){-1e9, 0.0};
    for (int i = 0; i < 20; i++) {
        double a = AS * (i + 1) / 20.0, s = SIGMA * (1.0 - a * a / (AS * AS));
        x->drift_a[i] = a;
        x->drift[i] = (ru_pole){s, sqrt(w0 * w0 - s * s)};
    }
    for (int i = 0; i < NBODE; i++) { /* band-pass loop: G jwb / (w0^2 - w^2 + jwb) */
        double f = 500.0 * pow(100.0, i / (NBODE - 1.0)), w = TWO_PI * f, b = w0 / 5.0;
        double re = w0 * w0 - w * w, im = w * b, d = re * re + im * im;
        double hr = w * b * im / d, hi = w * b * re / d;
        x->f[i] = f;
        x->lmag[i] = 1.03 * hypot(hr, hi);
        x->lph[i] = atan2(hi, hr) * 360.0 / TWO_PI;
        x->rmag[i] = 1.35 * hypot(hr, hi) * (1 + 0.2 * f / 5e4);
        x->rph[i] = x->lph[i] - 90.0 * f / 5e4;
    }
}

static void fill_structs(fixture *x)
{
    ru_trace_get(x->tr, &x->wave.trace);
    x->wave = (ru_plot_wave){"Van der Pol tank, 5 kHz, 2 V", "tank", x->wave.trace, NENV,
                             x->env_t, x->env_v, 0.5, 3.35e-3, 0.9, AS};
    x->growth = (ru_plot_growth){NENV, x->env_t, x->env_v, 2495.7, 1.25e-3, 2.05e-3,
                                 SIGMA, AS};
    x->spec = (ru_plot_spectrum){5025.0, x->harm, 9, 1.975};
    x->pm = (ru_plot_poles){4, x->poles, 0, 20, x->drift_a, x->drift};
    x->loop = (ru_plot_bode){1, "A1", NBODE, x->f, x->lmag, x->lph, F0, 1.03};
    x->resp = (ru_plot_bode){0, "v(tap)/v(out)", NBODE, x->f, x->rmag, x->rph, F0, 1.35};
    x->models[0] = (ru_plot_model){"cubic", NENV, x->env_t, x->env_v, 1.975, 3.35e-3};
    x->models[1] = (ru_plot_model){"soft-follower", NENV, x->env_t, x->env2_v, 0.41, 4.5e-3};
    x->models[2] = (ru_plot_model){"exp-stage #2", NENV, x->env_t, x->env3_v, NAN, 2.6e-3};
    x->set = (ru_plot_set){&x->wave, &x->growth, &x->spec, &x->pm, &x->loop, &x->resp,
                           x->models, 3, NULL, NULL, NULL, NULL};
}

static int setup(void **state)
{
    fixture *x = calloc(1, sizeof *x);
    if (!x)
        return -1;
    mkdir(OUT, 0777);
    fill_time(x);
    fill_freq(x);
    fill_structs(x);
    *state = x;
    return 0;
}

static int teardown(void **state)
{
    fixture *x = *state;
    ru_trace_destroy(x->tr);
    free(x);
    return 0;
}

/* Whole file into a malloc'd NUL-terminated buffer; *len its size. */
static char *slurp(const char *path, size_t *len)
{
    FILE *fp = fopen(path, "rb");
    if (!fp)
        return NULL;
    fseek(fp, 0, SEEK_END);
    long n = ftell(fp);
    fseek(fp, 0, SEEK_SET);
    char *b = malloc((size_t)n + 1);
    if (b && fread(b, 1, (size_t)n, fp) != (size_t)n) {
        free(b);
        b = NULL;
    }
    fclose(fp);
    if (b)
        b[n] = '\0';
    *len = (size_t)n;
    return b;
}

static size_t count(const char *hay, size_t len, const char *needle)
{
    size_t c = 0, nl = strlen(needle);
    for (size_t i = 0; i + nl <= len; i++)
        c += memcmp(hay + i, needle, nl) == 0;
    return c;
}

static int exists(const char *path)
{
    struct stat sb;
    return stat(path, &sb) == 0;
}

/* The collector's columns against a brute-force min/max over the same samples. */
static void test_trace_matches_bruteforce(void **state)
{
    (void)state;
    enum { NS = 5000 };
    static double t[NS], v[NS];
    ru_trace *tr = NULL;
    assert_int_equal(ru_trace_create(1.0, 50, &tr), RU_OK);
    for (int k = 0; k < NS; k++) { /* 2.5 s: past the span, so the columns fold twice */
        t[k] = 2.5 * k / NS;
        v[k] = sin(37.0 * t[k]) + 0.3 * sin(1234.5 * t[k] * t[k]);
        assert_int_equal(ru_trace_push(tr, t[k], v[k]), RU_OK);
    }
    ru_trace_view tv;
    ru_trace_get(tr, &tv);
    /* span 1 s in 50 columns is 0.02 s; two folds make 0.08 s, so 2.5 s fill
     * ceil(2.5 / 0.08) = 32 columns */
    assert_int_equal(tv.n, 32);
    double w = 0.08;
    for (size_t i = 0; i < tv.n; i++) {
        double lo = INFINITY, hi = -INFINITY, a = tv.t_s[i] - w / 2, b = tv.t_s[i] + w / 2;
        for (int k = 0; k < NS; k++)
            if (t[k] >= a - 1e-12 && t[k] < b - 1e-12)
                lo = fmin(lo, v[k]), hi = fmax(hi, v[k]);
        RU_ASSERT_NEAR(tv.t_s[i], (i + 0.5) * w, 1e-12);
        assert_true(tv.min_v[i] == lo);  /* same samples: exact */
        assert_true(tv.max_v[i] == hi);
    }
    assert_int_equal(ru_trace_push(tr, 0.1, 0.0), RU_EINPUT); /* time went back */
    assert_int_equal(ru_trace_push(tr, 2.6, NAN), RU_EINPUT);
    ru_trace_destroy(tr);
    ru_trace_destroy(NULL);
    assert_int_equal(ru_trace_create(0.0, 10, &tr), RU_EINPUT);
    assert_null(tr);
}

static const char *const NAMES[] = {"wave", "growth", "spectrum", "poles", "loop",
                                    "response", "compare-envelopes", "compare-figures"};
#define NFIG 8

/* Minimal data for each figure (flat trace, two points, no marks): an almost
 * empty page of the same layout, to compare sizes against. */
static void minimal_set(ru_plot_set *m, ru_plot_wave *w, ru_plot_growth *g,
                        ru_plot_spectrum *s, ru_plot_poles *p, ru_plot_bode *l,
                        ru_plot_bode *r, ru_plot_model *md)
{
    static const double nanh[9] = {NAN, NAN, NAN, NAN, NAN, NAN, NAN, NAN, NAN};
    static const double tt[2] = {0, 0.02}, zz[2] = {0.5, 0.5}, ee[2] = {1, 1};
    static const double ff[2] = {500, 50000}, mm[2] = {0.01, 0.01}, pp[2] = {0, 0};
    static ru_pole one[1] = {{-100.0, 0.0}};
    *w = (ru_plot_wave){NULL, "tank", {2, tt, zz, zz}, 0, NULL, NULL, NAN, NAN, 0.9, NAN};
    *g = (ru_plot_growth){2, tt, ee, NAN, NAN, NAN, NAN, NAN};
    *p = (ru_plot_poles){1, one, -1, 0, NULL, NULL};
    *l = (ru_plot_bode){1, "A1", 2, ff, mm, pp, NAN, NAN};
    *r = (ru_plot_bode){0, "v(a)/v(b)", 2, ff, mm, pp, NAN, NAN};
    *md = (ru_plot_model){"m", 2, tt, ee, NAN, NAN};
    *s = (ru_plot_spectrum){5000.0, nanh, 9, NAN};
    *m = (ru_plot_set){w, g, s, p, l, r, md, 1, NULL, NULL, NULL, NULL};
}

/* PNG signature and IHDR size. Reference: PNG specification (W3C/ISO 15948) 5.2
 * (signature 89 50 4E 47 0D 0A 1A 0A) and 11.2.2 (IHDR first: width and height as
 * 4-byte big-endian at file offsets 16 and 20). */
static void assert_png(const char *path, size_t *size)
{
    static const unsigned char sig[8] = {0x89, 'P', 'N', 'G', 0x0d, 0x0a, 0x1a, 0x0a};
    size_t len;
    unsigned char *b = (unsigned char *)slurp(path, &len);
    assert_non_null(b);
    assert_true(len > 33);
    assert_memory_equal(b, sig, 8);
    assert_memory_equal(b + 12, "IHDR", 4);
    unsigned w = (unsigned)b[16] << 24 | b[17] << 16 | b[18] << 8 | b[19];
    unsigned h = (unsigned)b[20] << 24 | b[21] << 16 | b[22] << 8 | b[23];
    assert_int_equal(w, 960);  /* the page size the module sets */
    assert_int_equal(h, 600);
    *size = len;
    free(b);
}

static void test_png_every_figure(void **state)
{
    fixture *x = *state;
    ru_error err;
    ru_plot_set m;
    ru_plot_wave w;
    ru_plot_growth g;
    ru_plot_spectrum s;
    ru_plot_poles p;
    ru_plot_bode l, r;
    ru_plot_model md;
    char path[256];
    mkdir(OUT "/min", 0777);
    assert_int_equal(ru_plot_check(OUT, "png", &err), RU_OK);
    assert_int_equal(ru_plot_set_files(OUT, NULL, &x->set, &err), RU_OK);
    minimal_set(&m, &w, &g, &s, &p, &l, &r, &md);
    assert_int_equal(ru_plot_set_files(OUT "/min", "png", &m, &err), RU_OK);
    for (int i = 0; i < NFIG; i++) {
        size_t full, bare;
        snprintf(path, sizeof path, OUT "/%s.png", NAMES[i]);
        assert_png(path, &full);
        snprintf(path, sizeof path, OUT "/min/%s.png", NAMES[i]);
        assert_png(path, &bare);
        /* Not blank: the data (curves, bars, shading, labels) add at least 20 % to
         * the compressed size of the same page drawn almost empty (measured: 1.3x
         * to 6x). Common practice in place of decoding the image. */
        if (!(full > bare * 1.2))
            fail_msg("%s.png: %zu bytes with data, %zu without", NAMES[i], full, bare);
    }
}

/* Colour specifications "rgb(r%,g%,b%)" that are not a grey: the page, ink, grid
 * and text of every figure are neutral greys, the data is drawn in colours. */
static size_t colour_uses(const char *s)
{
    size_t c = 0;
    double r, g, b;
    for (const char *p = strstr(s, "rgb("); p; p = strstr(p + 4, "rgb("))
        if (sscanf(p, "rgb(%lf%%,%lf%%,%lf%%)", &r, &g, &b) == 3 && !(r == g && g == b))
            c++;
    return c;
}

/* SVG: an XML document whose root is <svg> (W3C SVG 1.1, 5.1), and the data drawn:
 * many more coloured elements than on the almost empty page. */
static void test_svg_every_figure(void **state)
{
    fixture *x = *state;
    ru_error err;
    ru_plot_set m;
    ru_plot_wave w;
    ru_plot_growth g;
    ru_plot_spectrum s;
    ru_plot_poles p;
    ru_plot_bode l, r;
    ru_plot_model md;
    char path[256];
    mkdir(OUT "/svg", 0777);
    mkdir(OUT "/svg-min", 0777);
    assert_int_equal(ru_plot_set_files(OUT "/svg", "svg", &x->set, &err), RU_OK);
    minimal_set(&m, &w, &g, &s, &p, &l, &r, &md);
    assert_int_equal(ru_plot_set_files(OUT "/svg-min", "svg", &m, &err), RU_OK);
    for (int i = 0; i < NFIG; i++) {
        size_t len, blen;
        snprintf(path, sizeof path, OUT "/svg/%s.svg", NAMES[i]);
        char *b = slurp(path, &len);
        snprintf(path, sizeof path, OUT "/svg-min/%s.svg", NAMES[i]);
        char *bb = slurp(path, &blen);
        assert_non_null(b);
        assert_non_null(bb);
        assert_true(strncmp(b, "<?xml", 5) == 0);
        const char *root = strstr(b, "<svg");
        assert_non_null(root);
        assert_non_null(strstr(root, "</svg>"));
        size_t cf = colour_uses(b), cb = colour_uses(bb);
        /* curves, markers, bars and shading: at least 8 coloured elements more
         * (measured 10 to 358 more) */
        if (!(cf >= cb + 8))
            fail_msg("%s.svg: %zu coloured elements with data, %zu without", NAMES[i],
                     cf, cb);
        free(b);
        free(bb);
    }
}

/* PDF: header "%PDF-" and trailer "%%EOF" (ISO 32000-1, 7.5.2 and 7.5.5); page
 * objects are "/Type /Page" dictionaries (7.7.3.3), "/Type /Pages" is the tree. */
static size_t pdf_pages(const char *path)
{
    size_t len;
    char *b = slurp(path, &len);
    assert_non_null(b);
    assert_true(len > 100 && strncmp(b, "%PDF-", 5) == 0);
    assert_non_null(strstr(b + len - 32, "%%EOF"));
    size_t pages = count(b, len, "/Type /Page") - count(b, len, "/Type /Pages");
    free(b);
    return pages;
}

static void test_pdf_figure_and_report(void **state)
{
    fixture *x = *state;
    ru_error err;
    static const char *const cells[] = {"figure", "measured", "predicted",
                                        "start-up time", "3.353 ms", "3.329 ms",
                                        "growth rate", "2495.7 /s", "2500 /s"};
    ru_plot_table t = {3, 3, cells};
    mkdir(OUT "/pdf", 0777);
    assert_int_equal(ru_plot_poles_file(OUT "/pdf", "pdf", &x->pm, &err), RU_OK);
    assert_int_equal(pdf_pages(OUT "/pdf/poles.pdf"), 1);
    assert_int_equal(ru_plot_report_check(OUT "/report.pdf", &err), RU_OK);
    assert_int_equal(ru_plot_report(OUT "/report.pdf", "Van der Pol tank #1",
                                    "examples/vdp-tank.yaml\nprobe tank, stop 20 ms",
                                    &t, &x->set, &err), RU_OK);
    assert_int_equal(pdf_pages(OUT "/report.pdf"), 1 + NFIG); /* summary + figures */
}

static void test_html_report(void **state)
{
    fixture *x = *state;
    ru_error err;
    size_t len;
    static const char *const cells[] = {"figure", "value", "THD", "<2 %"};
    ru_plot_table t = {2, 2, cells};
    assert_int_equal(ru_plot_report(OUT "/report.html", "Tank <b> & co",
                                    "line one\nline two", &t, &x->set, &err), RU_OK);
    char *b = slurp(OUT "/report.html", &len);
    assert_non_null(b);
    assert_true(strncmp(b, "<!DOCTYPE html>", 15) == 0);
    assert_int_equal(count(b, len, "<svg"), NFIG);
    assert_int_equal(count(b, len, "</svg>"), NFIG);
    assert_non_null(strstr(b, "Tank &lt;b&gt; &amp; co"));
    assert_non_null(strstr(b, "<td>&lt;2 %</td>"));
    /* every id and reference carries its figure's prefix: none is left bare */
    assert_int_equal(count(b, len, "id=\"glyph"), 0);
    assert_int_equal(count(b, len, "href=\"#glyph"), 0);
    assert_true(count(b, len, "id=\"f7-") > 0);
    assert_null(strstr(b, "<?xml"));
    free(b);
}

static void test_refusals_do_not_exit(void **state)
{
    fixture *x = *state;
    ru_error err;
    ru_error_clear(&err);
    assert_int_equal(ru_plot_check(OUT, "gif", &err), RU_EINPUT);
    assert_non_null(strstr(err.msg, "gif"));
    assert_int_equal(ru_plot_wave_file(OUT "/gif", "gif", &x->wave, &err), RU_EINPUT);
    assert_false(exists(OUT "/gif/wave.gif"));
    assert_int_equal(ru_plot_check("/nonexistent-ringup-dir/sub", "png", &err), RU_EIO);
    assert_non_null(strstr(err.msg, "/nonexistent-ringup-dir/sub"));
    FILE *fp = fopen(OUT "/plain-file", "w"); /* a file where a folder should be */
    assert_non_null(fp);
    fclose(fp);
    assert_int_equal(ru_plot_check(OUT "/plain-file", "svg", &err), RU_EIO);
    assert_int_equal(ru_plot_growth_file(OUT "/plain-file", "png", &x->growth, &err),
                     RU_EIO);
    assert_int_equal(ru_plot_report_check(OUT "/report.txt", &err), RU_EINPUT);
    assert_int_equal(ru_plot_report("/nonexistent-ringup-dir/r.pdf", "t", "", NULL,
                                    &x->set, &err), RU_EIO);
    ru_plot_wave bad = x->wave;
    bad.trace.n = 1;
    assert_int_equal(ru_plot_wave_file(OUT, "png", &bad, &err), RU_EINPUT);
    ru_plot_bode down = x->loop;
    double f2[2] = {1000, 500}, m2[2] = {1, 1}, p2[2] = {0, 0};
    down.n = 2, down.f_hz = f2, down.mag = m2, down.phase_deg = p2;
    assert_int_equal(ru_plot_bode_file(OUT, "png", &down, &err), RU_EINPUT);
    assert_int_equal(ru_plot_spectrum_file(OUT, "png", NULL, &err), RU_EINPUT);
}

/* JSON mode needs a clean stdout: plotting must write nothing there. */
static void test_nothing_on_stdout(void **state)
{
    fixture *x = *state;
    ru_error err;
    fflush(stdout);
    int saved = dup(STDOUT_FILENO);
    FILE *cap = tmpfile();
    assert_true(saved >= 0 && cap != NULL);
    dup2(fileno(cap), STDOUT_FILENO);
    ru_status st = ru_plot_wave_file(OUT, "svg", &x->wave, &err);
    ru_status st2 = ru_plot_check(OUT, "gif", &err);
    fflush(stdout);
    dup2(saved, STDOUT_FILENO);
    close(saved);
    long n = ftell(cap) >= 0 ? (fseek(cap, 0, SEEK_END), ftell(cap)) : -1;
    fclose(cap);
    assert_int_equal(st, RU_OK);
    assert_int_equal(st2, RU_EINPUT);
    assert_int_equal(n, 0);
}

typedef struct job {
    const fixture *x;
    const char *dir;
    ru_status st;
} job;

static void *plot_job(void *arg)
{
    job *j = arg;
    ru_error err;
    mkdir(j->dir, 0777);
    j->st = ru_plot_set_files(j->dir, "png", &j->x->set, &err);
    return NULL;
}

/* Two threads plotting at once: both succeed (the lock serialises PLplot). */
static void test_two_threads(void **state)
{
    job a = {*state, OUT "/thread-a", RU_ENUMERIC}, b = {*state, OUT "/thread-b",
                                                          RU_ENUMERIC};
    pthread_t ta, tb;
    size_t sa, sb;
    assert_int_equal(pthread_create(&ta, NULL, plot_job, &a), 0);
    assert_int_equal(pthread_create(&tb, NULL, plot_job, &b), 0);
    pthread_join(ta, NULL);
    pthread_join(tb, NULL);
    assert_int_equal(a.st, RU_OK);
    assert_int_equal(b.st, RU_OK);
    assert_png(OUT "/thread-a/poles.png", &sa);
    assert_png(OUT "/thread-b/poles.png", &sb);
    assert_int_equal(sa, sb); /* same data, same picture */
}

/* Text helpers of the figures: one spelling of micro, and lines fitted to a width. */
static void test_text_helpers(void **state)
{
    (void)state;
    char buf[64];
    /* Reference: the SI brochure (BIPM, 9th ed., table 7): the micro prefix symbol
     * is µ; the axis labels already write it so (plot_si_scale). */
    assert_string_equal(plot_si_text(12.3e-6, "s", 3, buf, sizeof buf), "12.3 µs");
    assert_string_equal(plot_si_text(4.7e3, "ohm", 2, buf, sizeof buf), "4.7 kohm");
    assert_string_equal(plot_si_text(2.0, "V", 3, buf, sizeof buf), "2.00 V");
    /* A short line keeps its size; a long one shrinks (not below 0.7 of it), and
     * one too long for that is cut with an ellipsis that fits the width. */
    snprintf(buf, sizeof buf, "short");
    RU_ASSERT_NEAR(plot_fit_text(buf, sizeof buf, 0.9, 1.0), 1.0, 0);
    char longer[200];
    memset(longer, 'x', 90);
    longer[90] = '\0';
    double sc = plot_fit_text(longer, sizeof longer, 0.9, 1.0);
    assert_true(sc < 1.0 && sc >= 0.7);
    assert_int_equal(strlen(longer), 90);
    memset(longer, 'x', 190);
    longer[190] = '\0';
    sc = plot_fit_text(longer, sizeof longer, 0.9, 1.0);
    RU_ASSERT_NEAR(sc, 0.7, 1e-12);
    assert_non_null(strstr(longer, "…"));
    assert_true(strlen(longer) < 190);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_trace_matches_bruteforce),
        cmocka_unit_test(test_text_helpers),
        cmocka_unit_test_setup_teardown(test_png_every_figure, setup, teardown),
        cmocka_unit_test_setup_teardown(test_svg_every_figure, setup, teardown),
        cmocka_unit_test_setup_teardown(test_pdf_figure_and_report, setup, teardown),
        cmocka_unit_test_setup_teardown(test_html_report, setup, teardown),
        cmocka_unit_test_setup_teardown(test_refusals_do_not_exit, setup, teardown),
        cmocka_unit_test_setup_teardown(test_nothing_on_stdout, setup, teardown),
        cmocka_unit_test_setup_teardown(test_two_threads, setup, teardown),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
