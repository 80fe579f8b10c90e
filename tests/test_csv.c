/* test_csv.c: the CSV waveform writer (wavefile.h) driven by the transient engine.
 *
 * Checks the contract of wavefile.h: header names, one row per sample
 * (floor(stop/sample) + 1, transient.h), values equal to what the engine handed
 * over (to the 10 significant digits written), the temporary-then-rename life
 * cycle for keep = 0, 1, 2, and RU_EIO with the path and the system's reason. */
#define _GNU_SOURCE /* mkdtemp */
#include "ru_test.h"

#include "ringup/circuit.h"
#include "ringup/system.h"
#include "ringup/transient.h"
#include "ringup/wavefile.h"

#include <dirent.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#define MAXROWS 2048

static void add2(ru_circuit *c, ru_part_type type, const char *name, const char *a,
                 const char *b, double value)
{
    ru_part p;
    ru_part_init(&p, type, name);
    p.node[0] = ru_circuit_node(c, a, 0, 0);
    p.node[1] = ru_circuit_node(c, b, 0, 0);
    p.value = value;
    if (type == RU_PART_SUPPLY) {
        p.wave.kind = RU_WAVE_DC;
        p.wave.value = value;
    }
    ru_error e;
    assert_int_equal(ru_circuit_add_part(c, &p, &e), RU_OK);
}

/* 2 V supply on vin, R1 into out with C1 to ground, L1 from out to x, R2 x to gnd. */
static ru_circuit *make_circuit(const char *mid_name)
{
    ru_circuit *c = NULL;
    assert_int_equal(ru_circuit_create("csv", &c), RU_OK);
    add2(c, RU_PART_SUPPLY, "VS", "vin", "gnd", 2.0);
    add2(c, RU_PART_RESISTOR, "R1", "vin", "out", 1e3);
    add2(c, RU_PART_CAPACITOR, "C1", "out", "gnd", 1e-6);
    add2(c, RU_PART_INDUCTOR, "L1", "out", mid_name, 10e-3);
    add2(c, RU_PART_RESISTOR, "R2", mid_name, "gnd", 100.0);
    return c;
}

/* Sink that writes the CSV row and keeps a copy of the time and states. */
typedef struct tee {
    ru_csv *w;
    long n;
    double t[MAXROWS];
    double x[MAXROWS][4];
} tee;

static ru_status tee_sample(void *user, double t, const double *x, size_t n)
{
    tee *te = user;
    if (te->n < MAXROWS && n <= 4) {
        te->t[te->n] = t;
        memcpy(te->x[te->n], x, n * sizeof *x);
        te->n++;
    }
    return ru_csv_sample(te->w, t, x, n);
}

static int count_entries(const char *dir)
{
    DIR *d = opendir(dir);
    assert_non_null(d);
    int n = 0;
    for (struct dirent *e; (e = readdir(d));)
        if (strcmp(e->d_name, ".") && strcmp(e->d_name, ".."))
            n++;
    closedir(d);
    return n;
}

/* Runs the circuit into path; returns the close status for `keep`. */
static ru_status write_run(ru_circuit *c, const char *path, double stop_s, int keep,
                           tee *te, ru_system **sys)
{
    ru_error err;
    assert_int_equal(ru_system_create(c, sys, &err), RU_OK);
    double x0[4] = {0};
    assert_true(ru_system_size(*sys) <= 4);
    assert_int_equal(ru_system_initial_state(*sys, x0, &err), RU_OK);
    assert_int_equal(ru_csv_open(*sys, path, &te->w, &err), RU_OK);
    ru_transient_opts o;
    ru_transient_opts_for(RU_ACCURACY_NORMAL, &o);
    o.stop_s = stop_s;
    o.sample_s = 10e-6;
    te->n = 0;
    assert_int_equal(ru_transient_run(*sys, &o, x0, tee_sample, te, NULL, &err), RU_OK);
    return ru_csv_close(te->w, keep, &err);
}

static void test_header_rows_values(void **state)
{
    (void)state;
    char dir[] = "/tmp/ru_csv_XXXXXX", path[64];
    assert_non_null(mkdtemp(dir));
    snprintf(path, sizeof path, "%s/wave.csv", dir);
    ru_circuit *c = make_circuit("x");
    ru_system *s = NULL;
    static tee te;
    /* stop 1.005 ms at 10 us: floor(100.5) + 1 = 101 rows (transient.h) */
    assert_int_equal(write_run(c, path, 1.005e-3, 1, &te, &s), RU_OK);
    assert_int_equal(te.n, 101);
    /* wavefile.h: the temporary file is gone, only the final name is left */
    assert_int_equal(count_entries(dir), 1);
    FILE *fp = fopen(path, "r");
    assert_non_null(fp);
    char line[512];
    assert_non_null(fgets(line, sizeof line, fp));
    /* wavefile.h: time_s, then every node but ground in node order (driven vin
     * included), then inductor currents as i(NAME) */
    assert_string_equal(line, "time_s,vin,out,x,i(L1)\n");
    int is = ru_system_inductor_state(s, ru_circuit_find_part(c, "L1"));
    int sx = ru_system_node_state(s, ru_circuit_find_node(c, "x"));
    int so = ru_system_node_state(s, ru_circuit_find_node(c, "out"));
    assert_true(is >= 0 && sx >= 0 && so >= 0);
    long rows = 0;
    while (fgets(line, sizeof line, fp)) {
        double v[5];
        char *p = line;
        for (int i = 0; i < 5; i++) {
            v[i] = strtod(p, &p);
            assert_true(*p == (i < 4 ? ',' : '\n'));
            p++;
        }
        assert_true(rows < te.n);
        /* %.12g time, %.10g values (csv.c head comment): round-off below 5e-13
         * and 5e-10 relative; tolerances 1e-12 and 1e-9 of the value (plus 1e-15
         * absolute for zeros). */
        RU_ASSERT_NEAR(v[0], te.t[rows], 1e-12 * te.t[rows] + 1e-18);
        RU_ASSERT_NEAR(v[0], rows * 10e-6, 1e-12 * rows * 10e-6 + 1e-18);
        RU_ASSERT_NEAR(v[1], 2.0, 0.0); /* driven node: the supply's value */
        RU_ASSERT_NEAR(v[2], te.x[rows][so], 1e-9 * fabs(te.x[rows][so]) + 1e-15);
        RU_ASSERT_NEAR(v[3], te.x[rows][sx], 1e-9 * fabs(te.x[rows][sx]) + 1e-15);
        RU_ASSERT_NEAR(v[4], te.x[rows][is], 1e-9 * fabs(te.x[rows][is]) + 1e-15);
        rows++;
    }
    fclose(fp);
    assert_int_equal(rows, 101);
    unlink(path);
    rmdir(dir);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

static void test_keep_modes(void **state)
{
    (void)state;
    char dir[] = "/tmp/ru_csv_XXXXXX", path[64];
    assert_non_null(mkdtemp(dir));
    snprintf(path, sizeof path, "%s/wave.csv", dir);
    ru_circuit *c = make_circuit("x");
    ru_system *s = NULL;
    static tee te;
    /* keep = 0: nothing under the final name, no temporary left */
    assert_int_equal(write_run(c, path, 0.1e-3, 0, &te, &s), RU_OK);
    assert_int_equal(count_entries(dir), 0);
    assert_int_equal(access(path, F_OK), -1);
    ru_system_destroy(s);
    /* keep = 2 after a run that failed numerically (step limit): the partial file
     * stays under the final name with one row per delivered sample. */
    ru_error err;
    assert_int_equal(ru_system_create(c, &s, &err), RU_OK);
    double x0[4] = {0};
    assert_int_equal(ru_system_initial_state(s, x0, &err), RU_OK);
    assert_int_equal(ru_csv_open(s, path, &te.w, &err), RU_OK);
    ru_transient_opts o;
    ru_transient_opts_for(RU_ACCURACY_NORMAL, &o);
    o.stop_s = 5e-3;
    o.sample_s = 10e-6;
    o.max_steps = 100;
    te.n = 0;
    ru_solver_stats st;
    assert_int_equal(ru_transient_run(s, &o, x0, tee_sample, &te, &st, &err),
                     RU_ENUMERIC);
    print_message("step limit: %ld samples, t reached %g s\n", te.n, st.t_reached_s);
    assert_true(te.n > 1 && te.n < 501);
    assert_int_equal(ru_csv_close(te.w, 2, &err), RU_OK);
    assert_int_equal(count_entries(dir), 1);
    FILE *fp = fopen(path, "r");
    assert_non_null(fp);
    char line[512];
    long lines = 0;
    while (fgets(line, sizeof line, fp))
        lines++;
    fclose(fp);
    assert_int_equal(lines, te.n + 1);
    unlink(path);
    rmdir(dir);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

static void test_unwritable_folder(void **state)
{
    (void)state;
    ru_circuit *c = make_circuit("x");
    ru_system *s = NULL;
    ru_error err;
    assert_int_equal(ru_system_create(c, &s, &err), RU_OK);
    ru_csv *w = (ru_csv *)&err; /* must be reset to NULL on failure */
    const char *path = "/tmp/ru_csv_no_such_folder/sub/wave.csv";
    ru_error_clear(&err);
    assert_int_equal(ru_csv_open(s, path, &w, &err), RU_EIO);
    assert_null(w);
    assert_int_equal(err.code, RU_EIO);
    /* the message names the path and the system's reason (strerror(ENOENT)) */
    assert_non_null(strstr(err.msg, path));
    assert_non_null(strstr(err.msg, "No such file or directory"));
    /* a regular file where the folder should be (ENOTDIR), also as root */
    char dir0[] = "/tmp/ru_csv_XXXXXX", notdir[64], p1[80];
    assert_non_null(mkdtemp(dir0));
    snprintf(notdir, sizeof notdir, "%s/plain", dir0);
    FILE *fp = fopen(notdir, "w");
    assert_non_null(fp);
    fclose(fp);
    snprintf(p1, sizeof p1, "%s/wave.csv", notdir);
    assert_int_equal(ru_csv_open(s, p1, &w, &err), RU_EIO);
    assert_non_null(strstr(err.msg, p1));
    assert_non_null(strstr(err.msg, "Not a directory"));
    assert_int_equal(count_entries(dir0), 1);
    unlink(notdir);
    rmdir(dir0);
    if (geteuid() != 0) { /* root ignores folder permissions */
        char dir[] = "/tmp/ru_csv_XXXXXX", p2[64];
        assert_non_null(mkdtemp(dir));
        assert_int_equal(chmod(dir, 0500), 0);
        snprintf(p2, sizeof p2, "%s/wave.csv", dir);
        assert_int_equal(ru_csv_open(s, p2, &w, &err), RU_EIO);
        assert_non_null(strstr(err.msg, "Permission denied"));
        chmod(dir, 0700);
        rmdir(dir);
    }
    assert_int_equal(ru_csv_close(NULL, 1, &err), RU_OK); /* NULL is harmless */
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

/* A node name with a comma is quoted in the header (RFC 4180 section 2). */
static void test_header_quoting(void **state)
{
    (void)state;
    char dir[] = "/tmp/ru_csv_XXXXXX", path[64];
    assert_non_null(mkdtemp(dir));
    snprintf(path, sizeof path, "%s/wave.csv", dir);
    ru_circuit *c = make_circuit("x,\"y\"");
    ru_system *s = NULL;
    static tee te;
    assert_int_equal(write_run(c, path, 20e-6, 1, &te, &s), RU_OK);
    FILE *fp = fopen(path, "r");
    assert_non_null(fp);
    char line[256];
    assert_non_null(fgets(line, sizeof line, fp));
    assert_string_equal(line, "time_s,vin,out,\"x,\"\"y\"\"\",i(L1)\n");
    long rows = 0;
    while (fgets(line, sizeof line, fp))
        rows++;
    assert_int_equal(rows, 3);
    fclose(fp);
    unlink(path);
    rmdir(dir);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_header_rows_values),
        cmocka_unit_test(test_keep_modes),
        cmocka_unit_test(test_unwritable_folder),
        cmocka_unit_test(test_header_quoting),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
