/* test_units.c: numbered units, their records and the unit log (ringup/units.h).
 *
 * References: IEEE 754 binary64 round-trips through 17 significant decimal digits
 * (IEEE 754-2008 clause 5.12.2; Goldberg, "What every computer scientist should
 * know about floating-point arithmetic", 1991), so a record read back must give
 * the very same bits; RFC 8259 for what is and is not JSON (the parser must refuse
 * the malformed lines below); a set-based model of the runner (every unit of the
 * shard accepted exactly once, none outside it, the skipped ones never run). */
#include "ru_test.h"

#include "batch/jsonl.h"
#include "ringup/loader.h"
#include "ringup/montecarlo.h"
#include "ringup/units.h"

#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

/* ---- JSON lines ---- */

static uint64_t mix(uint64_t *s)
{
    uint64_t z = (*s += 0x9E3779B97F4A7C15ULL); /* splitmix64, from memory */
    z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ULL;
    z = (z ^ (z >> 27)) * 0x94D049BB133111EBULL;
    return z ^ (z >> 31);
}

/* Random bit patterns (every finite double: subnormals, huge, tiny, negative
 * zero) written and read back give the same bits. */
static void test_numbers_round_trip(void **state)
{
    (void)state;
    uint64_t seed = 42;
    for (int n = 0; n < 20000; n++) {
        uint64_t bits = mix(&seed);
        double v;
        memcpy(&v, &bits, sizeof v);
        if (n == 0)
            v = -0.0;
        else if (n == 1)
            v = 4.9406564584124654e-324; /* smallest subnormal */
        else if (n == 2)
            v = 1.7976931348623157e308;  /* largest finite */
        if (!isfinite(v))
            continue;
        jl_buf b;
        jl_init(&b);
        jl_num(&b, "x", v);
        char *line = NULL;
        assert_int_equal(jl_finish(&b, &line), RU_OK);
        jv *root = NULL;
        char why[64];
        assert_int_equal(jv_parse(line, strlen(line), &root, why, sizeof why), RU_OK);
        double back = jv_num(jv_get(root, "x"), 0);
        if (memcmp(&back, &v, sizeof v) != 0)
            fail_msg("%.17g came back as %.17g (%s)", v, back, line);
        jv_free(root);
        free(line);
    }
}

static void test_strings_and_nesting(void **state)
{
    (void)state;
    const char *s = "tab\there \"quoted\" back\\slash\nnew line \x01 ohm \xce\xa9 end";
    jl_buf b;
    jl_init(&b);
    jl_str(&b, "s", s);
    jl_num(&b, "nan", NAN);
    jl_open(&b, "arr", '[');
    jl_int(&b, NULL, -7);
    jl_bool(&b, NULL, 1);
    jl_open(&b, NULL, '{');
    jl_str(&b, "k", "v");
    jl_close(&b, '}');
    jl_close(&b, ']');
    char *line = NULL;
    assert_int_equal(jl_finish(&b, &line), RU_OK);
    assert_non_null(strchr(line, '\n'));
    assert_true(strchr(line, '\n') == line + strlen(line) - 1); /* one line */
    jv *root = NULL;
    assert_int_equal(jv_parse(line, strlen(line), &root, NULL, 0), RU_OK);
    assert_string_equal(jv_str(jv_get(root, "s")), s);
    assert_true(isnan(jv_num(jv_get(root, "nan"), 0)));
    const jv *arr = jv_get(root, "arr");
    assert_int_equal(arr->n, 3);
    assert_true(arr->item[0].num == -7 && arr->item[1].type == JV_BOOL);
    assert_string_equal(jv_str(jv_get(&arr->item[2], "k")), "v");
    jv_free(root);
    free(line);
    /* \u escapes, a surrogate pair (U+1D11E, RFC 8259 section 7) */
    const char *esc = "{\"a\":\"\\u00e9\\ud834\\udd1e\\/\"}";
    assert_int_equal(jv_parse(esc, strlen(esc), &root, NULL, 0), RU_OK);
    assert_string_equal(jv_str(jv_get(root, "a")), "\xc3\xa9\xf0\x9d\x84\x9e/");
    jv_free(root);
}

static void test_malformed_refused(void **state)
{
    (void)state;
    static const char *const bad[] = {
        "", "{", "{\"a\":}", "[1,]", "{\"a\" 1}", "\"abc", "01", "1.", "-", "nul",
        "{\"a\":1}x", "{a:1}", "[1 2]", "\"\\x\"", "\"\\u12\"", "\"\\ud834\"", "1e",
        "\"a\tb\"", "{\"a\":1,}", "tru",
        "[[[[[[[[[[[[[[[[[[[[1]]]]]]]]]]]]]]]]]]]", /* deeper than JV_DEPTH */
    };
    for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++) {
        jv *root = (jv *)1;
        char why[64] = "";
        if (jv_parse(bad[i], strlen(bad[i]), &root, why, sizeof why) != RU_EINPUT)
            fail_msg("accepted: %s", bad[i]);
        assert_null(root);
        assert_true(why[0] != '\0');
    }
}

/* ---- run records ---- */

static ru_circuit *load_text(const char *text)
{
    ru_circuit *c = NULL;
    ru_error err;
    ru_error_clear(&err);
    if (ru_circuit_load_string(text, "units.yaml", RU_MODELS_DIR, &c, &err) != RU_OK)
        fail_msg("load: %s", err.msg);
    return c;
}

static const char *const vdp_text =
    "parts:\n"
    "  L1: {type: inductor, nodes: [t, gnd], value: 1mH, tol: 5%}\n"
    "  C1: {type: capacitor, nodes: [t, gnd], value: 1u, tol: 2%}\n"
    "  RP: {type: resistor, nodes: [t, gnd], value: 2k, tol: 10%}\n"
    "  G1: {type: poly-conductance, nodes: [t, gnd], coeffs: [0, -2m, 0, 0.5m]}\n"
    "run: {stop: 40m, kick: {preset: {t: 1m}}, accuracy: draft}\n"
    "measure: {probe: t}\n";

static void clean_text(char *s, size_t size)
{
    size_t n = strnlen(s, size);
    if (n < size)
        memset(s + n, 0, size - n);
}

/* A real report written and read back is the same report, byte for byte (the
 * WAV fields are not carried; a batch unit writes no audio, so they are zero). */
static void test_run_record_round_trip(void **state)
{
    (void)state;
    ru_circuit *c = NULL; /* an example with a loop part, so the loop fields are filled */
    ru_error err;
    ru_error_clear(&err);
    if (ru_circuit_load(RU_SOURCE_DIR "/examples/follower-colpitts.yaml", RU_MODELS_DIR, &c,
                        &err) != RU_OK)
        fail_msg("load: %s", err.msg);
    ru_batch_item it;
    memset(&it, 0, sizeof it);
    ru_run_request_default(&it.request);
    it.circuit = c;
    ru_batch_run(&it, 1, 1);
    assert_int_equal(it.status, RU_OK);
    assert_true(it.report.pred.have_loop);
    /* the loop summary arrives by struct copy with undefined padding bytes: put its
     * members back into a zeroed struct so that the byte comparison below sees
     * members only */
    ru_loop_summary loop = it.report.pred.loop;
    memset(&it.report.pred.loop, 0, sizeof loop);
    it.report.pred.loop.found = loop.found;
    it.report.pred.loop.crossover_hz = loop.crossover_hz;
    it.report.pred.loop.gain = loop.gain;
    it.report.pred.loop.margin_db = loop.margin_db;
    /* a text rewritten shorter keeps old bytes after its end: only the text itself
     * is carried, so clear what follows the terminator */
    ru_run_report *rp = &it.report;
    clean_text(rp->probe, sizeof rp->probe);
    clean_text(rp->stop.cap_why, sizeof rp->stop.cap_why);
    clean_text(rp->stop.reason, sizeof rp->stop.reason);
    clean_text(rp->meas.growth_note, sizeof rp->meas.growth_note);
    clean_text(rp->meas.settle_note, sizeof rp->meas.settle_note);
    clean_text(rp->meas.thd_note, sizeof rp->meas.thd_note);
    clean_text(rp->pred.hb.note, sizeof rp->pred.hb.note);
    clean_text(rp->pred.loop_part, sizeof rp->pred.loop_part);
    for (int k = 0; k < RU_MAX_NOTES; k++)
        clean_text(rp->notes[k], sizeof rp->notes[k]);
    double extra[2] = {1.5, NAN};
    char *line = NULL;
    assert_int_equal(ru_unit_record_of_item(17, &it, "values", extra, 2, &line), RU_OK);
    ru_batch_item back;
    memset(&back, 0x5a, sizeof back);
    size_t idx = 0;
    assert_int_equal(ru_unit_item_of_record(line, &idx, &back, &err), RU_OK);
    assert_int_equal(idx, 17);
    assert_int_equal(back.status, RU_OK);
    assert_memory_equal(&back.report, &it.report, sizeof it.report);
    assert_int_equal(ru_unit_record_index(line, &idx, &err), RU_OK);
    assert_int_equal(idx, 17);
    free(line);
    /* a failed unit: its error comes back with place and text */
    it.status = ru_error_set(&it.error, RU_ENUMERIC, "x.yaml", 3, 9, "solver failed at %s",
                             "t = 1 ms");
    assert_int_equal(ru_unit_record_of_item(2, &it, NULL, NULL, 0, &line), RU_OK);
    assert_int_equal(ru_unit_item_of_record(line, &idx, &back, &err), RU_OK);
    assert_int_equal(back.status, RU_ENUMERIC);
    assert_int_equal(back.error.line, 3);
    assert_int_equal(back.error.col, 9);
    assert_string_equal(back.error.file, "x.yaml");
    assert_string_equal(back.error.msg, "solver failed at t = 1 ms");
    free(line);
    /* not records */
    assert_int_equal(ru_unit_item_of_record("{\"unit\":1}", &idx, &back, &err), RU_EINPUT);
    assert_int_equal(ru_unit_item_of_record("[1]", &idx, &back, &err), RU_EINPUT);
    assert_int_equal(ru_unit_record_index("{\"unit\":-1}", &idx, &err), RU_EINPUT);
    ru_circuit_destroy(c);
}

/* ---- the runner ---- */

#define NUNITS 60

typedef struct fake {
    pthread_mutex_t lock;
    int accepted[NUNITS];  /* times each unit was accepted */
    int ran[NUNITS];       /* times each unit was run */
    volatile sig_atomic_t stop;
    int stop_after;        /* set the stop flag when this many ran (0: never) */
    int nran;
    int remote;            /* units given by the fake remote */
} fake;

static ru_status fake_run(void *ctx, size_t i, char **line, ru_error *err)
{
    (void)err;
    fake *f = ctx;
    pthread_mutex_lock(&f->lock);
    f->ran[i]++;
    int n = ++f->nran;
    pthread_mutex_unlock(&f->lock);
    usleep((useconds_t)(i % 7) * 300); /* units of unequal cost */
    if (f->stop_after && n >= f->stop_after) {
        f->stop = 1;
        return RU_ESTOPPED; /* this one was cut short: not done */
    }
    char buf[64];
    snprintf(buf, sizeof buf, "{\"unit\":%zu}\n", i);
    *line = strdup(buf);
    return *line ? RU_OK : RU_ENOMEM;
}

static ru_status fake_accept(void *ctx, size_t i, const char *line, ru_error *err)
{
    fake *f = ctx;
    size_t idx;
    if (ru_unit_record_index(line, &idx, err) != RU_OK || idx != i)
        return RU_EINPUT;
    f->accepted[i]++; /* under the runner's lock */
    return RU_OK;
}

/* A fake remote worker: takes units on the calling thread and gives them back. */
static void fake_serve(void *sctx, ru_units *u)
{
    fake *f = sctx;
    size_t i;
    while (ru_units_take(u, &i)) {
        char *line = NULL;
        ru_error err;
        ru_status s = fake_run(f, i, &line, &err);
        ru_units_give(u, i, s == RU_OK ? line : NULL);
        if (s == RU_OK)
            f->remote++;
        free(line);
    }
}

static void run_fake(fake *f, unsigned k, unsigned n, const unsigned char *skip,
                     int serve, ru_units_summary *sum)
{
    memset(f, 0, sizeof *f);
    pthread_mutex_init(&f->lock, NULL);
    ru_units_job job = {.count = NUNITS, .shard_k = k, .shard_n = n, .skip = skip,
                        .threads = 3, .stop = &f->stop, .run = fake_run,
                        .accept = fake_accept, .ctx = f,
                        .serve = serve ? fake_serve : NULL, .sctx = f};
    ru_error err;
    ru_error_clear(&err);
    assert_int_equal(ru_units_run(&job, sum, &err), RU_OK);
    pthread_mutex_destroy(&f->lock);
}

static void test_runner_shards_and_skips(void **state)
{
    (void)state;
    unsigned char skip[NUNITS] = {0};
    for (int i = 0; i < NUNITS; i += 5)
        skip[i] = 1;
    fake f;
    ru_units_summary sum;
    size_t union_count[NUNITS] = {0};
    for (unsigned k = 1; k <= 3; k++) {
        run_fake(&f, k, 3, skip, k == 2, &sum);
        size_t want = 0;
        for (int i = 0; i < NUNITS; i++) {
            int mine = i % 3 == (int)k - 1 && !skip[i];
            want += (size_t)mine;
            assert_int_equal(f.accepted[i], mine);
            assert_int_equal(f.ran[i], mine);
            union_count[i] += (size_t)f.accepted[i];
        }
        assert_int_equal(sum.todo, want);
        assert_int_equal(sum.done, want);
        assert_false(sum.stopped);
        if (k == 2) /* the serving thread took some units too (it ran until none was left) */
            assert_true(f.remote >= 0 && (size_t)f.remote <= want);
    }
    for (int i = 0; i < NUNITS; i++) /* the shards cover every unit not skipped once */
        assert_int_equal(union_count[i], skip[i] ? 0 : 1);
    assert_true(ru_units_in_shard(7, 2, 3) && !ru_units_in_shard(7, 1, 3));
    assert_true(ru_units_in_shard(7, 1, 1) && ru_units_in_shard(7, 0, 0));
}

static void test_runner_stop(void **state)
{
    (void)state;
    fake f;
    ru_units_summary sum;
    run_fake(&f, 1, 1, NULL, 0, &sum);
    assert_int_equal(sum.done, NUNITS);
    memset(&f, 0, sizeof f);
    pthread_mutex_init(&f.lock, NULL);
    f.stop_after = 10;
    ru_units_job job = {.count = NUNITS, .threads = 2, .stop = &f.stop, .run = fake_run,
                        .accept = fake_accept, .ctx = &f};
    ru_error err;
    ru_error_clear(&err);
    assert_int_equal(ru_units_run(&job, &sum, &err), RU_OK);
    assert_true(sum.stopped);
    assert_true(sum.done < 10); /* the 10th and later were cut short */
    size_t accepted = 0;
    for (int i = 0; i < NUNITS; i++) {
        assert_true(f.accepted[i] <= 1 && f.accepted[i] <= f.ran[i]);
        accepted += (size_t)f.accepted[i];
    }
    assert_int_equal(accepted, sum.done);
    assert_true(f.nran < 10 + 2); /* nothing handed out after the flag (2 in flight) */
    pthread_mutex_destroy(&f.lock);
}

/* ---- the unit log ---- */

typedef struct lines {
    size_t n;
    char text[16][128];
} lines;

static ru_status keep(void *ctx, const char *line, size_t lineno, ru_error *err)
{
    (void)err;
    lines *l = ctx;
    assert_int_equal(lineno, l->n + 2); /* the header is line 1 */
    snprintf(l->text[l->n++], sizeof l->text[0], "%s", line);
    return RU_OK;
}

static void test_unit_log(void **state)
{
    (void)state;
    char dir[] = "/tmp/ru_units_XXXXXX", path[64];
    assert_non_null(mkdtemp(dir));
    snprintf(path, sizeof path, "%s/%s", dir, RU_UNITLOG_NAME);
    ru_unitlog_header h, back;
    memset(&h, 0, sizeof h);
    snprintf(h.command, sizeof h.command, "montecarlo");
    snprintf(h.file_hash, sizeof h.file_hash, "0123456789abcdef");
    h.units = 40;
    h.shard_k = 2;
    h.shard_n = 4;
    char a0[] = "my file \"x\".yaml", a1[] = "--samples=40";
    h.args[0] = a0;
    h.args[1] = a1;
    h.nargs = 2;
    ru_unitlog *log = NULL, *other = NULL;
    ru_error err;
    ru_error_clear(&err);
    assert_int_equal(ru_unitlog_create(path, &h, &log, &err), RU_OK);
    assert_int_equal(ru_unitlog_append(log, "{\"unit\":1}\n", &err), RU_OK);
    assert_int_equal(ru_unitlog_append(log, "{\"unit\":5}\n", &err), RU_OK);
    /* one writer at a time */
    lines l = {0};
    assert_int_equal(ru_unitlog_resume(path, &back, keep, &l, &other, &err), RU_EIO);
    assert_int_equal(ru_unitlog_close(log, &err), RU_OK);
    /* never overwritten */
    assert_int_equal(ru_unitlog_create(path, &h, &log, &err), RU_EIO);
    /* a record cut short by a crash: skipped when read, cut off when continued */
    FILE *fp = fopen(path, "a");
    fputs("{\"unit\":9,\"sta", fp);
    fclose(fp);
    assert_int_equal(ru_unitlog_read(path, &back, keep, &l, &err), RU_OK);
    assert_int_equal(l.n, 2);
    assert_string_equal(l.text[1], "{\"unit\":5}");
    assert_string_equal(back.command, "montecarlo");
    assert_int_equal(back.units, 40);
    assert_true(back.shard_k == 2 && back.shard_n == 4 && back.nargs == 2);
    assert_string_equal(back.args[0], a0);
    assert_string_equal(back.file_hash, h.file_hash);
    ru_unitlog_header_clear(&back);
    l.n = 0;
    assert_int_equal(ru_unitlog_resume(path, &back, keep, &l, &log, &err), RU_OK);
    assert_int_equal(l.n, 2);
    assert_int_equal(ru_unitlog_append(log, "{\"unit\":9}\n", &err), RU_OK);
    assert_int_equal(ru_unitlog_close(log, &err), RU_OK);
    ru_unitlog_header_clear(&back);
    l.n = 0;
    assert_int_equal(ru_unitlog_read(path, &back, keep, &l, &err), RU_OK);
    assert_int_equal(l.n, 3);
    assert_string_equal(l.text[2], "{\"unit\":9}");
    ru_unitlog_header_clear(&back);
    /* not a unit log */
    fp = fopen(path, "w");
    fputs("{\"something\":1}\n", fp);
    fclose(fp);
    assert_int_equal(ru_unitlog_read(path, &back, keep, &l, &err), RU_EINPUT);
    assert_non_null(strstr(err.msg, "not a ringup unit log"));
    unlink(path);
    rmdir(dir);
}

/* ---- Monte Carlo from records ---- */

/* The result built from the records in reverse order, after a pass through their
 * text, equals ru_mc_run's bit for bit; a record twice or of another study is
 * refused. */
static void test_mc_from_records(void **state)
{
    (void)state;
    ru_circuit *c = load_text(vdp_text);
    ru_mc_opts o;
    ru_mc_opts_default(&o);
    o.samples = 6;
    o.seed = 3;
    o.threads = 2;
    ru_mc_result *whole = NULL, *part = NULL;
    ru_error err;
    ru_error_clear(&err);
    assert_int_equal(ru_mc_run(c, &o, &whole, &err), RU_OK);
    assert_int_equal(ru_mc_result_create(c, &o, &part, &err), RU_OK);
    char *rec[6];
    for (size_t i = 0; i < 6; i++)
        assert_int_equal(ru_mc_unit_record(c, &o, i, &rec[i], &err), RU_OK);
    for (size_t i = 6; i-- > 0;)
        assert_int_equal(ru_mc_result_add(part, rec[i], &err), RU_OK);
    assert_int_equal(ru_mc_result_add(part, rec[2], &err), RU_EINPUT); /* twice */
    assert_non_null(strstr(err.msg, "twice"));
    ru_mc_result_finish(part);
    assert_int_equal(ru_mc_done_count(part), 6);
    for (size_t i = 0; i < 6; i++) {
        assert_memory_equal(ru_mc_get_unit(whole, i), ru_mc_get_unit(part, i),
                            sizeof(ru_mc_unit));
        for (size_t k = 0; k < ru_mc_tol_count(whole); k++)
            assert_true(ru_mc_value(whole, i, k) == ru_mc_value(part, i, k));
    }
    for (int f = 0; f < RU_MC_NFIG; f++)
        assert_memory_equal(ru_mc_get_stats(whole, f), ru_mc_get_stats(part, f),
                            sizeof(ru_mc_stats));
    /* a record of a study with other toleranced parts */
    ru_mc_result *other = NULL;
    ru_circuit *c2 = load_text(
        "parts:\n"
        "  L1: {type: inductor, nodes: [t, gnd], value: 1mH, tol: 5%}\n"
        "  C1: {type: capacitor, nodes: [t, gnd], value: 1u}\n"
        "  G1: {type: poly-conductance, nodes: [t, gnd], coeffs: [0, -2m, 0, 0.5m]}\n");
    assert_int_equal(ru_mc_result_create(c2, &o, &other, &err), RU_OK);
    assert_int_equal(ru_mc_result_add(other, rec[1], &err), RU_EINPUT);
    for (size_t i = 0; i < 6; i++)
        free(rec[i]);
    ru_mc_result_destroy(other);
    ru_mc_result_destroy(whole);
    ru_mc_result_destroy(part);
    ru_circuit_destroy(c2);
    ru_circuit_destroy(c);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_numbers_round_trip),
        cmocka_unit_test(test_strings_and_nesting),
        cmocka_unit_test(test_malformed_refused),
        cmocka_unit_test(test_run_record_round_trip),
        cmocka_unit_test(test_runner_shards_and_skips),
        cmocka_unit_test(test_runner_stop),
        cmocka_unit_test(test_unit_log),
        cmocka_unit_test(test_mc_from_records),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
