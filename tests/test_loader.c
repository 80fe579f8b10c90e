/* test_loader.c: the circuit-file loader (ru_circuit_load, ru_circuit_load_string,
 * ru_loader_default_models_dir). Expectations come from the file format as
 * specified (Reference: README circuit-file format): every field read back, preset
 * layering, and for each class of bad input the place (line and column of the
 * offending key or value, found here by searching the test text, not taken from
 * the loader) and a key word of the message. SI scale factors: Source: BIPM SI
 * Brochure, 9th ed., Table 7. Doubles are compared with a relative 1e-15 (a few
 * ulp: "15n" is 15 * 1e-9 in double arithmetic). */
#define _POSIX_C_SOURCE 200809L /* mkdtemp */
#include "ru_test.h"

#include "ringup/circuit.h"
#include "ringup/loader.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#define NAME "t.yaml"
#define DATA RU_SOURCE_DIR "/tests/data/loader"
#define REL 1e-15

/* 1-based column of the first `token` on 1-based `line` of text (fails if absent). */
static int col_of(const char *text, int line, const char *token)
{
    const char *p = text;
    for (int l = 1; l < line && p; l++) {
        p = strchr(p, '\n');
        if (p)
            p++;
    }
    if (!p)
        fail_msg("test text has no line %d", line);
    const char *end = strchr(p, '\n');
    size_t n = end ? (size_t)(end - p) : strlen(p);
    for (size_t i = 0; i + strlen(token) <= n; i++)
        if (strncmp(p + i, token, strlen(token)) == 0)
            return (int)i + 1;
    fail_msg("line %d of the test text has no '%s'", line, token);
    return 0;
}

/* Loading text fails with RU_EINPUT at file:line:col with `word` in the message. */
static void expect_at(const char *text, const char *models, const char *file, int line,
                      int col, const char *word)
{
    ru_circuit *c = (ru_circuit *)1;
    ru_error err;
    ru_status s = ru_circuit_load_string(text, NAME, models ? models : RU_MODELS_DIR, &c,
                                         &err);
    char buf[1024];
    ru_error_format(&err, buf, sizeof buf);
    if (s != RU_EINPUT)
        fail_msg("status %d, want RU_EINPUT; message: %s", s, buf);
    assert_null(c);
    assert_int_equal(err.code, RU_EINPUT);
    if (strcmp(err.file, file) != 0 && !strstr(err.file, file))
        fail_msg("file '%s', want '%s' (%s)", err.file, file, buf);
    if (err.line != line || err.col != col)
        fail_msg("place %d:%d, want %d:%d (%s)", err.line, err.col, line, col, buf);
    if (!strstr(err.msg, word))
        fail_msg("message lacks '%s': %s", word, buf);
}

/* Same, in the circuit text itself, at the column of `token` on `line`. */
static void expect_tok(const char *text, int line, const char *token, const char *word)
{
    expect_at(text, NULL, NAME, line, col_of(text, line, token), word);
}

static ru_circuit *load_ok(const char *text, const char *models)
{
    ru_circuit *c = NULL;
    ru_error err;
    ru_status s = ru_circuit_load_string(text, NAME, models ? models : RU_MODELS_DIR, &c,
                                         &err);
    char buf[1024];
    ru_error_format(&err, buf, sizeof buf);
    if (s != RU_OK)
        fail_msg("load failed: %s", buf);
    assert_non_null(c);
    return c;
}

static const ru_part *part(const ru_circuit *c, const char *name)
{
    int k = ru_circuit_find_part(c, name);
    if (k < 0)
        fail_msg("no part %s", name);
    return ru_circuit_part(c, (size_t)k);
}

static void assert_nodes(const ru_circuit *c, const ru_part *p, const char *a,
                         const char *b)
{
    assert_string_equal(ru_circuit_node_name(c, p->node[0]), a);
    assert_string_equal(ru_circuit_node_name(c, p->node[1]), b);
}

/* The format's example with our own values, every wave and part kind. */
static const char *const good_text =
    "title: Bench sine source, 1 kHz\n"
    "stray: 1p\n"
    "parts:\n"
    "  VS: {type: supply, nodes: [vcc, gnd], value: 12V, rise: 20u}\n"
    "  V2: {type: supply, nodes: [in, 0], wave: sine, offset: 0.2V, amplitude: 1V, freq: 1k, "
    "phase: 30, at: 0.5m}\n"
    "  V3: {type: supply, nodes: [s, gnd], wave: step, from: -1V, to: 1V, at: 1m, edge: 2u}\n"
    "  I1: {type: current, nodes: [gnd, tank], wave: pulse, from: 0.1m, to: 1m, at: 10u, "
    "width: 1u, period: 5u, edge: 0.1u}\n"
    "  R1: {type: resistor,  nodes: [out, a],  value: 10k, tol: 1%}\n"
    "  C1: {type: capacitor, nodes: [a, b],    value: 15nF, tol: 0.05}\n"
    "  L1: {type: inductor,  nodes: [x, gnd],  value: 10mH, series: 2}\n"
    "  G1: {type: poly-conductance, nodes: [t, gnd], coeffs: [0, -1m, 0, 0.33m]}\n"
    "  A1: {type: amplifier, in: b, out: out, model: soft-follower, gain: 0.99}\n"
    "  Q1: {type: amplifier, in: b, out: c, ref: e, law: exp-stage, is: 10f, beta: 150}\n"
    "  RX: {type: resistor, nodes: [x, t], value: 1}\n"
    "  RC: {type: resistor, nodes: [c, vcc], value: 4.7k}\n"
    "  RE: {type: resistor, nodes: [e, gnd], value: 470}\n"
    "run:  {stop: 200m, sample: 5u, kick: noise, accuracy: draft, seed: 42}\n"
    "measure: {probe: out-a, loop: A1, startup-level: 90%, growth-window: [1%, 10%]}\n";

/* Reference: README circuit-file format (title, stray, supplies and their waves). */
static void test_good_sources(void **state)
{
    (void)state;
    ru_circuit *c = load_ok(good_text, NULL);
    assert_string_equal(ru_circuit_title(c), "Bench sine source, 1 kHz");
    assert_string_equal(ru_circuit_file(c), NAME);
    RU_ASSERT_REL(ru_circuit_stray_f(c), 1e-12, REL);
    const ru_part *p = part(c, "VS");
    assert_int_equal(p->type, RU_PART_SUPPLY);
    assert_nodes(c, p, "vcc", "gnd");
    assert_int_equal(p->wave.kind, RU_WAVE_DC);
    RU_ASSERT_REL(p->wave.value, 12.0, REL);
    RU_ASSERT_REL(p->wave.rise_s, 20e-6, REL);
    assert_int_equal(p->line, 4);
    assert_int_equal(p->col, 3);
    p = part(c, "V2");
    assert_nodes(c, p, "in", "gnd"); /* "0" is ground */
    assert_int_equal(p->wave.kind, RU_WAVE_SINE);
    RU_ASSERT_REL(p->wave.offset, 0.2, REL);
    RU_ASSERT_REL(p->wave.amplitude, 1.0, REL);
    RU_ASSERT_REL(p->wave.freq_hz, 1e3, REL);
    RU_ASSERT_REL(p->wave.phase_deg, 30.0, REL);
    RU_ASSERT_REL(p->wave.at_s, 0.5e-3, REL);
    p = part(c, "V3");
    assert_int_equal(p->wave.kind, RU_WAVE_STEP);
    RU_ASSERT_REL(p->wave.v0, -1.0, REL);
    RU_ASSERT_REL(p->wave.v1, 1.0, REL);
    RU_ASSERT_REL(p->wave.at_s, 1e-3, REL);
    RU_ASSERT_REL(p->wave.edge_s, 2e-6, REL);
    p = part(c, "I1");
    assert_int_equal(p->type, RU_PART_CURRENT);
    assert_nodes(c, p, "gnd", "tank");
    assert_int_equal(p->wave.kind, RU_WAVE_PULSE);
    RU_ASSERT_REL(p->wave.v0, 0.1e-3, REL);
    RU_ASSERT_REL(p->wave.v1, 1e-3, REL);
    RU_ASSERT_REL(p->wave.at_s, 10e-6, REL);
    RU_ASSERT_REL(p->wave.width_s, 1e-6, REL);
    RU_ASSERT_REL(p->wave.period_s, 5e-6, REL);
    RU_ASSERT_REL(p->wave.edge_s, 0.1e-6, REL);
    ru_circuit_destroy(c);
}

/* Reference: README circuit-file format (passive parts, poly-conductance). */
static void test_good_passives(void **state)
{
    (void)state;
    ru_circuit *c = load_ok(good_text, NULL);
    const ru_part *p = part(c, "R1");
    assert_int_equal(p->type, RU_PART_RESISTOR);
    assert_nodes(c, p, "out", "a");
    RU_ASSERT_REL(p->value, 10e3, REL);
    RU_ASSERT_REL(p->tol, 0.01, REL);
    p = part(c, "C1");
    assert_int_equal(p->type, RU_PART_CAPACITOR);
    RU_ASSERT_REL(p->value, 15e-9, REL);
    RU_ASSERT_REL(p->tol, 0.05, REL);
    p = part(c, "L1");
    assert_int_equal(p->type, RU_PART_INDUCTOR);
    assert_nodes(c, p, "x", "gnd");
    RU_ASSERT_REL(p->value, 10e-3, REL);
    RU_ASSERT_REL(p->series_ohm, 2.0, REL);
    RU_ASSERT_NEAR(p->tol, 0.0, 0.0);
    p = part(c, "G1");
    assert_int_equal(p->type, RU_PART_POLY);
    assert_int_equal(p->ncoeffs, 4);
    RU_ASSERT_NEAR(p->coeffs[0], 0.0, 0.0);
    RU_ASSERT_REL(p->coeffs[1], -1e-3, REL);
    RU_ASSERT_NEAR(p->coeffs[2], 0.0, 0.0);
    RU_ASSERT_REL(p->coeffs[3], 0.33e-3, REL);
    assert_int_equal(ru_circuit_part_count(c), 13);
    /* nodes in order of first mention */
    static const char *const order[] = {"gnd", "vcc", "in", "s", "tank", "out", "a",
                                        "b",   "x",   "t",  "c", "e"};
    assert_int_equal(ru_circuit_node_count(c), 12);
    for (int i = 0; i < 12; i++)
        assert_string_equal(ru_circuit_node_name(c, i), order[i]);
    int line, col;
    ru_circuit_node_place(c, ru_circuit_find_node(c, "tank"), &line, &col);
    assert_int_equal(line, 7);
    assert_int_equal(col, col_of(good_text, 7, "tank"));
    ru_circuit_destroy(c);
}

/* Reference: README circuit-file format (amplifiers: preset < part keys; law
 * defaults from ru_amp_defaults for keys nobody gives). */
static void test_good_amplifiers(void **state)
{
    (void)state;
    ru_circuit *c = load_ok(good_text, NULL);
    const ru_part *p = part(c, "A1");
    assert_int_equal(p->type, RU_PART_AMPLIFIER);
    assert_string_equal(ru_circuit_node_name(c, p->node[0]), "b");
    assert_string_equal(ru_circuit_node_name(c, p->node[1]), "out");
    assert_int_equal(p->node[2], 0); /* ref defaults to gnd */
    assert_int_equal(p->amp.law, RU_LAW_FOLLOWER_TANH);
    assert_string_equal(p->amp.model, "soft-follower");
    RU_ASSERT_REL(p->amp.gain, 0.99, REL); /* the part's own key wins */
    p = part(c, "Q1");
    ru_amp def;
    ru_amp_defaults(&def, RU_LAW_EXP_STAGE);
    assert_int_equal(p->amp.law, RU_LAW_EXP_STAGE);
    assert_string_equal(p->amp.model, "");
    assert_string_equal(ru_circuit_node_name(c, p->node[2]), "e");
    RU_ASSERT_REL(p->amp.is_a, 10e-15, REL);
    RU_ASSERT_REL(p->amp.beta, 150.0, REL);
    RU_ASSERT_REL(p->amp.n, def.n, REL);
    RU_ASSERT_REL(p->amp.vsat_v, def.vsat_v, REL);
    RU_ASSERT_REL(p->amp.temp_c, def.temp_c, REL);
    ru_circuit_destroy(c);
}

/* Reference: README circuit-file format (run and measure sections). */
static void test_good_run_measure(void **state)
{
    (void)state;
    ru_circuit *c = load_ok(good_text, NULL);
    const ru_run_opts *r = ru_circuit_run_opts_const(c);
    RU_ASSERT_REL(r->stop_s, 0.2, REL);
    RU_ASSERT_REL(r->sample_s, 5e-6, REL);
    assert_int_equal(r->kick, RU_KICK_NOISE);
    assert_int_equal(r->accuracy, RU_ACCURACY_DRAFT);
    assert_int_equal(r->seed, 42);
    const ru_measure_opts *m = ru_circuit_measure_opts_const(c);
    assert_int_equal(m->probe_pos, ru_circuit_find_node(c, "out"));
    assert_int_equal(m->probe_neg, ru_circuit_find_node(c, "a"));
    assert_string_equal(m->loop, "A1");
    RU_ASSERT_REL(m->startup_level, 0.9, REL);
    RU_ASSERT_REL(m->growth_lo, 0.01, REL);
    RU_ASSERT_REL(m->growth_hi, 0.10, REL);
    /* tank is fed by a current source only: the floating-node warning at its first
     * mention; in and s are driven by their supplies and touch nothing else: each
     * gets the one-part warning (README "check": a node one part touches carries
     * no current) */
    assert_int_equal(ru_circuit_warning_count(c), 3);
    assert_non_null(strstr(ru_circuit_warning(c, 1),
                           "warning: node in connects to one part only (V2)"));
    assert_non_null(strstr(ru_circuit_warning(c, 2),
                           "warning: node s connects to one part only (V3)"));
    char want[160];
    snprintf(want, sizeof want, "t.yaml:7:%d: warning: node tank has no DC path to ground",
             col_of(good_text, 7, "tank"));
    if (strncmp(ru_circuit_warning(c, 0), want, strlen(want)) != 0)
        fail_msg("warning '%s', want it to start '%s'", ru_circuit_warning(c, 0), want);
    ru_circuit_destroy(c);
}

/* Reference: README circuit-file format (defaults: sample auto -> 0, kick preset,
 * file loaded from disk with its path in places). */
static void test_good_file(void **state)
{
    (void)state;
    ru_circuit *c = NULL;
    ru_error err;
    const char *path = DATA "/good.yaml";
    assert_int_equal(ru_circuit_load(path, RU_MODELS_DIR, &c, &err), RU_OK);
    assert_string_equal(ru_circuit_file(c), path);
    assert_string_equal(ru_circuit_title(c), "Loader test tank");
    RU_ASSERT_REL(ru_circuit_stray_f(c), 2e-12, REL);
    const ru_part *p = part(c, "L1");
    RU_ASSERT_REL(p->value, 4.7e-3, REL);
    RU_ASSERT_REL(p->series_ohm, 1.5, REL);
    RU_ASSERT_REL(p->tol, 0.02, REL);
    assert_int_equal(p->line, 6);
    const ru_run_opts *r = ru_circuit_run_opts_const(c);
    assert_int_equal(r->kick, RU_KICK_PRESET);
    assert_int_equal(r->npreset, 1);
    assert_int_equal(r->preset_node[0], ru_circuit_find_node(c, "t"));
    RU_ASSERT_REL(r->preset_v[0], 10e-3, REL);
    assert_int_equal(r->accuracy, RU_ACCURACY_PRECISE);
    assert_int_equal(r->seed, 7);
    RU_ASSERT_REL(r->sample_s, 2e-6, REL);
    const ru_measure_opts *m = ru_circuit_measure_opts_const(c);
    RU_ASSERT_REL(m->startup_level, 0.8, REL);
    RU_ASSERT_REL(m->growth_lo, 0.02, REL);
    RU_ASSERT_REL(m->growth_hi, 0.20, REL);
    assert_int_equal(m->probe_neg, 0);
    assert_string_equal(m->loop, "");
    assert_int_equal(ru_circuit_warning_count(c), 0);
    ru_circuit_destroy(c);
    /* sample: auto and the defaults of a circuit without run/measure */
    c = load_ok("parts: {R1: {type: resistor, nodes: [a, gnd], value: 1k}}\n"
                "run: {sample: auto}\n",
                NULL);
    RU_ASSERT_NEAR(ru_circuit_run_opts_const(c)->sample_s, 0.0, 0.0);
    assert_int_equal(ru_circuit_run_opts_const(c)->kick, RU_KICK_POWER_ON);
    RU_ASSERT_REL(ru_circuit_stray_f(c), 1e-12, REL); /* default 1 pF */
    ru_circuit_destroy(c);
}

/* Reference: README circuit-file format (defaults(law) < preset < part keys). */
static void test_preset_override(void **state)
{
    (void)state;
    ru_circuit *c = load_ok("parts:\n"
                            "  A1: {type: amplifier, in: i, out: o, model: inline-follower,"
                            " rout: 10ohm}\n"
                            "  R1: {type: resistor, nodes: [i, gnd], value: 1k}\n",
                            DATA);
    const ru_part *p = part(c, "A1");
    assert_string_equal(p->amp.model, "inline-follower");
    RU_ASSERT_REL(p->amp.gain, 0.9, REL);     /* preset */
    RU_ASSERT_REL(p->amp.swing_v, 2.5, REL);  /* preset */
    RU_ASSERT_REL(p->amp.center_v, 1.0, REL); /* preset */
    RU_ASSERT_REL(p->amp.rout_ohm, 10.0, REL); /* part overrides preset's 75 */
    ru_circuit_destroy(c);
}

/* Each shipped preset loads and has the law its file names. */
static void test_shipped_presets(void **state)
{
    (void)state;
    static const char *const names[] = {"soft-follower", "emitter-follower",
                                        "small-signal-npn", "low-beta-npn"};
    static const ru_law laws[] = {RU_LAW_FOLLOWER_TANH, RU_LAW_FOLLOWER_TANH,
                                  RU_LAW_EXP_STAGE, RU_LAW_EXP_STAGE};
    for (int i = 0; i < 4; i++) {
        char text[256];
        snprintf(text, sizeof text,
                 "parts:\n  A1: {type: amplifier, in: i, out: o, model: %s}\n"
                 "  R1: {type: resistor, nodes: [i, gnd], value: 1k}\n",
                 names[i]);
        ru_circuit *c = load_ok(text, NULL);
        assert_int_equal(part(c, "A1")->amp.law, laws[i]);
        assert_string_equal(part(c, "A1")->amp.model, names[i]);
        ru_circuit_destroy(c);
    }
}

/* Reference: README circuit-file format (each error class: place and message). */
static void test_yaml_errors(void **state)
{
    (void)state;
    const char *t = "parts:\n  R1: {type: resistor, nodes: [a, gnd], value: 1k}}\n";
    /* the YAML parser's own message, at the extra brace */
    expect_at(t, NULL, NAME, 2, col_of(t, 2, "}}") + 1, "YAML:");
    t = "parts:\n  R1: {type: resistor, nodes: [a, gnd], value: 1k}\n"
        "  R1: {type: resistor, nodes: [b, gnd], value: 2k}\n";
    expect_tok(t, 3, "R1", "duplicate key");
    t = "parts:\n  R1: {type: resistor, nodes: [a, gnd], value: 1k, value: 2k}\n";
    expect_at(t, NULL, NAME, 2, col_of(t, 2, "value: 2k"), "duplicate key");
    expect_at("- a\n- b\n", NULL, NAME, 1, 1, "must be a mapping");
    expect_at("just text\n", NULL, NAME, 1, 1, "must be a mapping");
    expect_at("", NULL, NAME, 1, 1, "empty");
    t = "parts: {R1: {type: resistor, nodes: [a, gnd], value: 1k}}\n---\nmore: 1\n";
    expect_at(t, NULL, NAME, 3, 1, "more than one YAML document");
}

/* Reference: README circuit-file format (anchors, aliases and tags are refused). */
static void test_refs_refused(void **state)
{
    (void)state;
    const char *t = "parts:\n"
                    "  R1: {type: resistor, nodes: [a, gnd], value: 1k}\n"
                    "  R2: {type: resistor, nodes: [b, gnd], value: &v 1k}\n"
                    "  R3: {type: resistor, nodes: [c, gnd], value: *v}\n";
    expect_tok(t, 4, "*v", "alias *v");
    t = "parts:\n  R2: {type: resistor, nodes: [b, gnd], value: &v 1k}\n";
    expect_tok(t, 2, "&v", "anchor &v"); /* at the anchor */
    t = "parts:\n  R2: {type: resistor, nodes: [b, gnd], value: !!str 1k}\n";
    expect_tok(t, 2, "!!str", "tag");
    t = "parts: !local\n  R2: {type: resistor, nodes: [b, gnd], value: 1k}\n";
    expect_tok(t, 1, "!local", "tag !local");
}

/* Billion laughs: nine levels of nine aliases would expand to 9^9 strings; the
 * loader must refuse the first alias without expanding (no timing: the status and
 * the named alias are the check; an expansion would exhaust memory long before). */
static void test_billion_laughs(void **state)
{
    (void)state;
    const char *t = "a: &a [lol, lol, lol, lol, lol, lol, lol, lol, lol]\n"
                    "b: &b [*a, *a, *a, *a, *a, *a, *a, *a, *a]\n"
                    "c: &c [*b, *b, *b, *b, *b, *b, *b, *b, *b]\n"
                    "d: &d [*c, *c, *c, *c, *c, *c, *c, *c, *c]\n"
                    "e: &e [*d, *d, *d, *d, *d, *d, *d, *d, *d]\n"
                    "f: &f [*e, *e, *e, *e, *e, *e, *e, *e, *e]\n"
                    "g: &g [*f, *f, *f, *f, *f, *f, *f, *f, *f]\n"
                    "h: &h [*g, *g, *g, *g, *g, *g, *g, *g, *g]\n"
                    "i: &i [*h, *h, *h, *h, *h, *h, *h, *h, *h]\n"
                    "parts: {R1: {type: resistor, nodes: [a, gnd], value: *i}}\n";
    expect_tok(t, 2, "*a", "alias *a");
}

/* Reference: README circuit-file format (unknown and misplaced keys). */
static void test_key_errors(void **state)
{
    (void)state;
    const char *r = "  R1: {type: resistor, nodes: [a, gnd], value: 1k}\n";
    char t[512];
    snprintf(t, sizeof t, "parts:\n%spartz: 1\n", r);
    expect_tok(t, 3, "partz", "unknown key partz");
    expect_tok("parts:\n  R1: {type: resistor, nodes: [a, gnd], value: 1k, colour: red}\n",
               2, "colour", "part R1: unknown key colour");
    expect_tok("parts:\n  R1: {type: resistor, nodes: [a, gnd], value: 1k, series: 2}\n", 2,
               "series", "part R1: key series does not apply to type resistor");
    expect_tok("parts:\n  Q1: {type: amplifier, in: b, out: c, law: exp-stage, gain: 0.9}\n",
               2, "gain", "part Q1: key gain does not apply to law exp-stage");
    expect_tok("parts:\n  V1: {type: supply, nodes: [a, gnd], wave: step, to: 1V, value: 1V}\n",
               2, "value: 1V", "part V1: key value does not apply to wave step");
    snprintf(t, sizeof t, "parts:\n%srun: {stop: 1m, stopp: 2m}\n", r);
    expect_tok(t, 3, "stopp", "run: unknown key stopp");
    snprintf(t, sizeof t, "parts:\n%smeasure: {probe: a, prob: a}\n", r);
    expect_tok(t, 3, "prob:", "measure: unknown key prob");
    expect_tok("parts:\n  A1: {type: amplifier, in: b, out: c, law: exp-stage, model: x}\n", 2,
               "model", "either model or law");
}

/* Reference: README circuit-file format (types, required keys, node lists). */
static void test_part_errors(void **state)
{
    (void)state;
    expect_tok("parts:\n  X1: {type: transistor, nodes: [a, gnd]}\n", 2, "transistor",
               "part X1: unknown type 'transistor'");
    expect_tok("parts:\n  R1: {type: resistor, value: 1k}\n", 2, "R1",
               "part R1: missing required key nodes");
    expect_tok("parts:\n  R1: {type: resistor, nodes: [a, gnd]}\n", 2, "R1",
               "part R1: missing required key value");
    expect_tok("parts:\n  R1: {nodes: [a, gnd], value: 1k}\n", 2, "R1",
               "part R1: missing required key type");
    expect_tok("parts:\n  A1: {type: amplifier, out: c, law: exp-stage}\n", 2, "A1",
               "part A1: missing required key in");
    expect_tok("parts:\n  R1: {type: resistor, nodes: [a], value: 1k}\n", 2, "[a]",
               "part R1: key nodes needs 2 nodes, got 1");
    expect_tok("parts:\n  R1: {type: resistor, nodes: [a, b, c], value: 1k}\n", 2, "[a, b",
               "got 3");
    expect_tok("parts:\n  R1: {type: resistor, nodes: [a-b, gnd], value: 1k}\n", 2, "a-b",
               "not a node name");
    expect_tok("parts:\n  R-1: {type: resistor, nodes: [a, gnd], value: 1k}\n", 2, "R-1",
               "part name 'R-1' is not valid");
    expect_tok("parts:\n  R1: {type: resistor, nodes: [a, gnd], value: }\n", 2, "value",
               "part R1: key value has no value");
    /* YAML 1.1 (libyaml) wants a space after a key's colon inside braces; the
     * message points at the key */
    expect_tok("parts:\n  R1: {type: resistor, nodes: [a, gnd], value:}\n", 2, "value",
               "YAML: found unexpected ':'");
    expect_tok("parts:\n  G1: {type: poly-conductance, nodes: [a, gnd], coeffs: []}\n", 2,
               "[]", "part G1: key coeffs needs a list of 1 to 8");
    expect_tok("parts:\n  G1: {type: poly-conductance, nodes: [a, gnd], coeffs: [1m, 2V]}\n",
               2, "2V", "item 2: unit V does not fit");
    expect_tok("parts:\n  V1: {type: supply, nodes: [a, gnd], wave: square, to: 1V}\n", 2,
               "square", "not one of dc, step, sine, pulse");
    expect_tok("parts:\n  V1: {type: supply, nodes: [a, gnd], wave: sine, amplitude: 1V}\n",
               2, "V1", "part V1: missing required key freq");
    expect_tok("parts:\n  A1: {type: amplifier, in: b, out: c, law: tanh}\n", 2, "tanh",
               "not one of follower-tanh, exp-stage");
    expect_tok("parts: []\n", 1, "[]", "key parts needs a mapping");
    expect_at("title: x\n", NULL, NAME, 1, 1, "missing required key parts");
}

/* Reference: README circuit-file format (values, units, R/C/L > 0). */
static void test_value_errors(void **state)
{
    (void)state;
    expect_tok("parts:\n  C1: {type: capacitor, nodes: [a, gnd], value: 15nH}\n", 2, "15nH",
               "part C1: key value: unit H does not fit, expected F");
    expect_tok("parts:\n  R1: {type: resistor, nodes: [a, gnd], value: 1kk}\n", 2, "1kk",
               "part R1: key value: unexpected text");
    expect_tok("parts:\n  R1: {type: resistor, nodes: [a, gnd], value: .inf}\n", 2, ".inf",
               "not a number");
    expect_tok("parts:\n  R1: {type: resistor, nodes: [a, gnd], value: 1e999}\n", 2, "1e999",
               "out of range");
    expect_tok("parts:\n  V1: {type: supply, nodes: [a, gnd], value: 2A}\n", 2, "2A",
               "expected V");
    expect_tok("parts:\n  I1: {type: current, nodes: [a, gnd], value: 2V}\n", 2, "2V",
               "expected A");
    expect_tok("parts:\n  Q1: {type: amplifier, in: b, out: c, law: exp-stage, temp: 300K}\n",
               2, "300K", "part Q1: key temp");
    /* zero and negative values: the builder's check, at the part's name */
    expect_tok("parts:\n  R1: {type: resistor, nodes: [a, gnd], value: 0}\n", 2, "R1",
               "part R1: value must be positive");
    expect_tok("parts:\n  C1: {type: capacitor, nodes: [a, gnd], value: -1n}\n", 2, "C1",
               "part C1: value must be positive");
    expect_tok("parts:\n  L1: {type: inductor, nodes: [a, gnd], value: 0H}\n", 2, "L1",
               "part L1: value must be positive");
    expect_tok("stray: -1p\nparts:\n  R1: {type: resistor, nodes: [a, gnd], value: 1}\n", 1,
               "-1p", "key stray must be 0 or more");
    /* per-node strays: the node must exist and not be ground; values >= 0 */
    expect_tok("stray: {default: 1p, nodes: {b: 0}}\nparts:\n"
               "  R1: {type: resistor, nodes: [a, gnd], value: 1}\n",
               1, "b", "stray: nodes: node b does not exist");
    expect_tok("stray: {nodes: {gnd: 0}}\nparts:\n"
               "  R1: {type: resistor, nodes: [a, gnd], value: 1}\n",
               1, "gnd", "ground has no stray capacitance");
    expect_tok("stray: {nodes: {a: -2p}}\nparts:\n"
               "  R1: {type: resistor, nodes: [a, gnd], value: 1}\n",
               1, "-2p", "key a must be 0 or more");
    expect_tok("stray: {deflt: 1p}\nparts:\n"
               "  R1: {type: resistor, nodes: [a, gnd], value: 1}\n",
               1, "deflt", "unknown key");
    expect_tok("stray: {nodes: {a: 2H}}\nparts:\n"
               "  R1: {type: resistor, nodes: [a, gnd], value: 1}\n",
               1, "2H", "unit H does not fit, expected F");
}

/* Reference: README circuit-file format (`stray`: one value, or a default and
 * per-node values; 0 is an ideal node with no capacitance). */
static void test_stray_forms(void **state)
{
    (void)state;
    ru_circuit *c = NULL;
    ru_error err;
    assert_int_equal(ru_circuit_load_string("stray: 0\nparts:\n"
                                            "  R1: {type: resistor, nodes: [a, gnd], value: 1}\n"
                                            "  C1: {type: capacitor, nodes: [a, gnd], value: 1n}\n",
                                            NAME, RU_MODELS_DIR, &c, &err),
                     RU_OK);
    RU_ASSERT_NEAR(ru_circuit_stray_f(c), 0.0, 0.0);
    RU_ASSERT_NEAR(ru_circuit_node_stray_f(c, ru_circuit_find_node(c, "a")), 0.0, 0.0);
    ru_circuit_destroy(c);
    assert_int_equal(ru_circuit_load_string("stray: {default: 2p, nodes: {b: 0, c: 5p}}\n"
                                            "parts:\n"
                                            "  R1: {type: resistor, nodes: [a, b], value: 1}\n"
                                            "  R2: {type: resistor, nodes: [b, c], value: 1}\n"
                                            "  R3: {type: resistor, nodes: [c, gnd], value: 1}\n",
                                            NAME, RU_MODELS_DIR, &c, &err),
                     RU_OK);
    RU_ASSERT_REL(ru_circuit_stray_f(c), 2e-12, REL);
    RU_ASSERT_REL(ru_circuit_node_stray_f(c, ru_circuit_find_node(c, "a")), 2e-12, REL);
    RU_ASSERT_NEAR(ru_circuit_node_stray_f(c, ru_circuit_find_node(c, "b")), 0.0, 0.0);
    RU_ASSERT_REL(ru_circuit_node_stray_f(c, ru_circuit_find_node(c, "c")), 5e-12, REL);
    assert_true(ru_circuit_node_stray_set(c, ru_circuit_find_node(c, "b")));
    assert_false(ru_circuit_node_stray_set(c, ru_circuit_find_node(c, "a")));
    /* a clone keeps the per-node values */
    ru_circuit *d = NULL;
    assert_int_equal(ru_circuit_clone(c, &d), RU_OK);
    RU_ASSERT_REL(ru_circuit_node_stray_f(d, ru_circuit_find_node(d, "c")), 5e-12, REL);
    ru_circuit_destroy(d);
    ru_circuit_destroy(c);
    /* a mapping without default keeps 1 pF */
    assert_int_equal(ru_circuit_load_string("stray: {nodes: {a: 0}}\nparts:\n"
                                            "  R1: {type: resistor, nodes: [a, gnd], value: 1}\n"
                                            "  R2: {type: resistor, nodes: [b, gnd], value: 1}\n",
                                            NAME, RU_MODELS_DIR, &c, &err),
                     RU_OK);
    RU_ASSERT_REL(ru_circuit_node_stray_f(c, ru_circuit_find_node(c, "b")), 1e-12, REL);
    RU_ASSERT_NEAR(ru_circuit_node_stray_f(c, ru_circuit_find_node(c, "a")), 0.0, 0.0);
    ru_circuit_destroy(c);
}

/* Reference: README circuit-file format (run and measure names must exist). */
static void test_run_measure_errors(void **state)
{
    (void)state;
    const char *head = "parts:\n"
                       "  R1: {type: resistor, nodes: [a, gnd], value: 1k}\n"
                       "  A1: {type: amplifier, in: a, out: b, law: follower-tanh}\n";
    static const struct {
        const char *line3; /* third line of the file */
        const char *token; /* where the error must point */
        const char *word;  /* what the message must say */
    } cases[] = {
        {"measure: {probe: zz}", "zz", "measure: key probe: node zz does not exist"},
        {"measure: {probe: a-zz}", "a-zz", "node zz does not exist"},
        {"measure: {probe: gnd}", "gnd", "ground"},
        {"measure: {probe: gnd-gnd}", "gnd-gnd", "the two nodes are the same"},
        {"measure: {loop: X9}", "X9", "measure: key loop: there is no part X9"},
        {"measure: {loop: R1}", "R1", "part R1 is not an amplifier"},
        {"measure: {loop-node: az}", "az", "measure: key loop-node: node az does not "
                                           "exist (did you mean a?)"},
        {"measure: {loop-node: gnd}", "gnd", "ground cannot be broken"},
        {"measure: {loop-node: a, loop-load: [R1, X9]}", "X9",
         "measure: key loop-load: there is no part X9"},
        {"measure: {loop-node: a, loop-load: [R1, [A1]]}", "[A1",
         "each entry is one part name"},
        {"measure: {loop-load: R1}", "loop-load", "loop-load needs loop-node"},
        {"measure: {loop: A1, loop-node: a}", "loop-node", "not both"},
        {"measure: {startup-level: 150%}", "150%", "between 0 and 100%"},
        {"measure: {growth-window: [10%, 1%]}", "[10%", "lo must be below hi"},
        {"measure: {growth-window: [10%]}", "[10%", "list of two levels"},
        {"run: {kick: {preset: {zz: 1V}}}", "zz", "run: kick preset: node zz does not exist"},
        {"run: {kick: {preset: {a: 1A}}}", "1A", "unit A does not fit, expected V"},
        {"run: {kick: shake}", "shake", "not one of power-on, noise"},
        {"run: {accuracy: best}", "best", "not one of draft, normal, precise"},
        {"run: {seed: -3}", "-3", "run: key seed"},
        {"run: {stop: 0}", "0", "run: key stop must be positive"},
        {"run: {sample: often}", "often", "run: key sample"},
        {"run: [1, 2]", "[1", "run needs a mapping"},
    };
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        char t[512];
        snprintf(t, sizeof t, "%s%s\n", head, cases[i].line3);
        expect_tok(t, 4, cases[i].token, cases[i].word);
    }
}

/* Reference: README circuit-file format (model presets: missing, broken). */
static void test_preset_errors(void **state)
{
    (void)state;
    const char *t = "parts:\n  A1: {type: amplifier, in: a, out: b, model: no-such}\n";
    expect_tok(t, 2, "no-such", "part A1: key model: no preset no-such");
    t = "parts:\n  A1: {type: amplifier, in: a, out: b, model: ../x}\n";
    expect_tok(t, 2, "../x", "not a preset name");
    t = "parts:\n  A1: {type: amplifier, in: a, out: b, model: bad-key}\n";
    expect_at(t, DATA, "bad-key.yaml", 4, 1, "preset bad-key (used by part A1): key gain "
                                            "does not apply to law exp-stage");
    t = "parts:\n  A1: {type: amplifier, in: a, out: b, model: bad-syntax}\n";
    /* the YAML parser's message, at the opening quote of line 3 that is never closed */
    expect_at(t, DATA, "bad-syntax.yaml", 3, 7,
              "YAML: found unexpected end of stream while scanning a quoted scalar");
    t = "parts:\n  A1: {type: amplifier, in: a, out: b, model: no-law}\n";
    expect_at(t, DATA, "no-law.yaml", 2, 1, "missing required key law"); /* the mapping */
    t = "parts:\n  A1: {type: amplifier, in: a, out: b, model: bad-unit}\n";
    expect_at(t, DATA, "bad-unit.yaml", 3, 8, "key swing: unit A does not fit, expected V");
    /* the part's keys are checked against the preset's law */
    t = "parts:\n  A1: {type: amplifier, in: a, out: b, model: small-signal-npn, swing: 1V}\n";
    expect_tok(t, 2, "swing", "key swing does not apply to law exp-stage");
}

static void test_io_errors(void **state)
{
    (void)state;
    ru_circuit *c = (ru_circuit *)1;
    ru_error err;
    /* Source: POSIX, ENOENT text of strerror in glibc. */
    assert_int_equal(ru_circuit_load(DATA "/does-not-exist.yaml", NULL, &c, &err), RU_EIO);
    assert_null(c);
    assert_non_null(strstr(err.msg, "No such file or directory"));
    assert_non_null(strstr(err.file, "does-not-exist.yaml"));
    c = (ru_circuit *)1;
    /* only regular files are read: a folder, a device (which never ends) and a
     * FIFO (which would wait for a writer) are bad input at once */
    assert_int_equal(ru_circuit_load(DATA, NULL, &c, &err), RU_EINPUT);
    assert_null(c);
    assert_non_null(strstr(err.msg, "a directory is not a circuit file"));
    assert_int_equal(ru_circuit_load("/dev/zero", NULL, &c, &err), RU_EINPUT);
    assert_non_null(strstr(err.msg, "a character device is not a circuit file"));
    char dir[] = "/tmp/ru-loader-XXXXXX", fifo[64];
    assert_non_null(mkdtemp(dir));
    snprintf(fifo, sizeof fifo, "%s/pipe.yaml", dir);
    assert_int_equal(mkfifo(fifo, 0600), 0);
    assert_int_equal(ru_circuit_load(fifo, NULL, &c, &err), RU_EINPUT);
    assert_non_null(strstr(err.msg, "a pipe (FIFO) is not a circuit file"));
    unlink(fifo);
    rmdir(dir);
}

/* $RINGUP_MODELS wins; without it the folder the build was configured with. */
static void test_default_models_dir(void **state)
{
    (void)state;
    setenv("RINGUP_MODELS", "/tmp/some-models", 1);
    assert_string_equal(ru_loader_default_models_dir(), "/tmp/some-models");
    unsetenv("RINGUP_MODELS");
    assert_string_equal(ru_loader_default_models_dir(), RU_MODELS_DIR);
    /* NULL models_dir uses the default */
    ru_circuit *c = NULL;
    ru_error err;
    assert_int_equal(ru_circuit_load_string("parts:\n  A1: {type: amplifier, in: a, out: b,"
                                            " model: soft-follower}\n",
                                            NAME, NULL, &c, &err),
                     RU_OK);
    ru_circuit_destroy(c);
}


/* ---- new laws and parts -------------------------------------------------------- */

/* Reference: README draft (docs-draft/laws.md): keys, units and defaults of the
 * new laws and parts. */
static void test_new_parts(void **state)
{
    (void)state;
    ru_circuit *c = load_ok(
        "parts:\n"
        "  A1: {type: amplifier, in: p, inv: m, out: o, law: diff-pair-tanh, itail: 2mA,"
        " n: 1.2, temp: 40C, rout: 47k, sign: -1}\n"
        "  A2: {type: amplifier, in: p, inv: o2, out: o2, law: opamp, gain: 200k, gbw: 1MHz,"
        " vmax: 13V, vmin: -12V, knee: 0.2V, slew: 500kV/s, rout: 75ohm}\n"
        "  A3: {type: amplifier, in: o2, out: t, law: table, rout: 1k,"
        " points: [[-1, -0.5], [0, 0], [1V, 0.6V]]}\n"
        "  D1: {type: diode, nodes: [t, gnd], is: 2n, n: 1.9, rs: 3ohm, temp: 30C}\n"
        "  RT1: {type: thermal-resistor, nodes: [o, gnd], kind: lamp, r0: 40ohm, alpha: 4m,"
        " t0: 20C, tamb: 30C, rth: 10kK/W, cth: 20uJ/K}\n"
        "  RT2: {type: thermal-resistor, nodes: [m, gnd], kind: ntc, r0: 4.7k, bth: 3900K}\n"
        "  R1: {type: resistor, nodes: [p, gnd], value: 1k}\n",
        NULL);
    const ru_part *p = part(c, "A1");
    assert_int_equal(p->amp.law, RU_LAW_DIFF_PAIR_TANH);
    assert_string_equal(ru_circuit_node_name(c, p->node[3]), "m");
    RU_ASSERT_REL(p->amp.itail_a, 2e-3, REL);
    RU_ASSERT_REL(p->amp.n, 1.2, REL);
    RU_ASSERT_REL(p->amp.temp_c, 40.0, REL);
    RU_ASSERT_REL(p->amp.rout_ohm, 47e3, REL);
    RU_ASSERT_REL(p->amp.sign, -1.0, REL);
    p = part(c, "A2");
    assert_int_equal(p->amp.law, RU_LAW_OPAMP);
    assert_int_equal(p->node[3], p->node[1]); /* inverting input on the output */
    RU_ASSERT_REL(p->amp.gain, 2e5, REL);
    RU_ASSERT_REL(p->amp.gbw_hz, 1e6, REL);
    RU_ASSERT_REL(p->amp.vmax_v, 13.0, REL);
    RU_ASSERT_REL(p->amp.vmin_v, -12.0, REL);
    RU_ASSERT_REL(p->amp.knee_v, 0.2, REL);
    RU_ASSERT_REL(p->amp.slew_v_per_s, 5e5, REL);
    RU_ASSERT_REL(p->amp.rout_ohm, 75.0, REL);
    p = part(c, "A3");
    assert_int_equal(p->amp.npoints, 3);
    assert_int_equal(p->node[3], -1); /* inv not given: ref */
    RU_ASSERT_REL(p->amp.pt_vin[2], 1.0, REL);
    RU_ASSERT_REL(p->amp.pt_vout[0], -0.5, REL);
    p = part(c, "D1");
    assert_int_equal(p->type, RU_PART_DIODE);
    assert_nodes(c, p, "t", "gnd");
    RU_ASSERT_REL(p->diode.is_a, 2e-9, REL);
    RU_ASSERT_REL(p->diode.n, 1.9, REL);
    RU_ASSERT_REL(p->diode.rs_ohm, 3.0, REL);
    RU_ASSERT_REL(p->diode.temp_c, 30.0, REL);
    p = part(c, "RT1");
    assert_int_equal(p->thermal.kind, RU_THERMAL_LAMP);
    RU_ASSERT_REL(p->thermal.r0_ohm, 40.0, REL);
    RU_ASSERT_REL(p->thermal.alpha_per_k, 4e-3, REL);
    RU_ASSERT_REL(p->thermal.t0_c, 20.0, REL);
    RU_ASSERT_REL(p->thermal.tamb_c, 30.0, REL);
    RU_ASSERT_REL(p->thermal.rth_k_per_w, 1e4, REL);
    RU_ASSERT_REL(p->thermal.cth_j_per_k, 2e-5, REL);
    p = part(c, "RT2");
    assert_int_equal(p->thermal.kind, RU_THERMAL_NTC);
    RU_ASSERT_REL(p->thermal.beta_k, 3900.0, REL);
    ru_thermal def;
    ru_thermal_defaults(&def, RU_THERMAL_NTC);
    RU_ASSERT_REL(p->thermal.rth_k_per_w, def.rth_k_per_w, REL); /* default kept */
    /* Reference: circuit.h find_floating_node: diodes and thermal resistors
     * conduct, the opamp output conducts to ref, inputs do not: every node here
     * reaches ground (p by R1; m by RT2; o by RT1; o2 by A2's output; t by D1). */
    int fl;
    assert_int_equal(ru_circuit_find_floating_node(c, &fl), 0);
    ru_circuit_destroy(c);
}

static void test_new_part_errors(void **state)
{
    (void)state;
    const char *t = "parts:\n  A1: {type: amplifier, in: a, out: b, law: table, "
                    "points: [[0, 0], [1, 1], [1, 2]]}\n";
    expect_tok(t, 2, "[1, 2]", "part A1: key points, item 3: vin 1 does not increase");
    t = "parts:\n  A1: {type: amplifier, in: a, out: b, law: table, points: [[0, 0]]}\n";
    expect_tok(t, 2, "[[0", "key points needs a list of 2 to 64 pairs");
    t = "parts:\n  A1: {type: amplifier, in: a, out: b, law: table, points: [[0, 0], 5]}\n";
    expect_tok(t, 2, "5]", "item 2: needs a pair");
    t = "parts:\n  A1: {type: amplifier, in: a, out: b, law: table, points: [[0, 0], [1, 2A]]}\n";
    expect_tok(t, 2, "2A", "unit A does not fit, expected V");
    t = "parts:\n  A1: {type: amplifier, in: a, out: b, law: table}\n";
    expect_tok(t, 2, "A1", "part A1: missing required key points");
    t = "parts:\n  A1: {type: amplifier, in: a, out: b, law: opamp, slew: 5V}\n";
    expect_tok(t, 2, "5V", "part A1: key slew: unit V does not fit, expected V/s");
    t = "parts:\n  A1: {type: amplifier, in: a, out: b, law: opamp, vmax: 1V, vmin: 2V}\n";
    expect_tok(t, 2, "A1", "part A1: vmax must be above vmin");
    t = "parts:\n  A1: {type: amplifier, in: a, out: b, law: diff-pair-tanh, sign: 2}\n";
    expect_tok(t, 2, "A1", "part A1: sign must be 1 or -1");
    t = "parts:\n  A1: {type: amplifier, in: a, inv: a, out: b, law: opamp}\n";
    expect_tok(t, 2, "A1", "part A1: in and inv must differ");
    t = "parts:\n  A1: {type: amplifier, in: a, out: b, law: opamp, beta: 100}\n";
    expect_tok(t, 2, "beta", "key beta does not apply to law opamp");
    t = "parts:\n  A1: {type: amplifier, in: a, out: b, law: opamp2}\n";
    expect_tok(t, 2, "opamp2", "not one of follower-tanh, exp-stage, diff-pair-tanh, opamp");
    t = "parts:\n  D1: {type: diode, nodes: [a, gnd], gain: 2}\n";
    expect_tok(t, 2, "gain", "part D1: key gain does not apply to type diode");
    t = "parts:\n  D1: {type: diode, nodes: [a, gnd], rs: -1}\n";
    expect_tok(t, 2, "D1", "part D1: rs must not be negative");
    t = "parts:\n  D1: {type: diode, nodes: [a, gnd], model: general-opamp}\n";
    expect_tok(t, 2, "general-opamp",
               "part D1: key model: preset general-opamp (law opamp) does not fit a part "
               "of type diode");
    t = "parts:\n  RT1: {type: thermal-resistor, nodes: [a, gnd], kind: ntc, alpha: 4m}\n";
    expect_tok(t, 2, "alpha", "key alpha does not apply to kind ntc");
    t = "parts:\n  RT1: {type: thermal-resistor, nodes: [a, gnd], kind: hot}\n";
    expect_tok(t, 2, "hot", "key kind: 'hot' is not one of lamp, ntc");
    t = "parts:\n  RT1: {type: thermal-resistor, nodes: [a, gnd], rth: 5K}\n";
    expect_tok(t, 2, "5K", "key rth: unexpected text 'K'");
    t = "parts:\n  RT1: {type: thermal-resistor, nodes: [a, gnd], cth: 0}\n";
    expect_tok(t, 2, "RT1", "part RT1: cth must be positive");
    t = "parts:\n  A1: {type: amplifier, in: a, out: b, model: pilot-lamp}\n";
    expect_tok(t, 2, "pilot-lamp", "(law thermal-resistor) does not fit a part of type "
                                   "amplifier");
}

/* Every shipped preset: listed, loadable on a part of its type, law as named. */
static void test_models_list(void **state)
{
    (void)state;
    ru_model_info *m = NULL;
    size_t n = 0;
    ru_error err;
    assert_int_equal(ru_models_list(RU_MODELS_DIR, &m, &n, &err), RU_OK);
    assert_true(n >= 10);
    int laws_seen[RU_LAW_COUNT + 2] = {0};
    for (size_t i = 0; i < n; i++) {
        if (i > 0)
            assert_true(strcmp(m[i - 1].name, m[i].name) < 0); /* sorted */
        assert_true(m[i].description[0] != '\0');
        assert_true(m[i].nparams > 0);
        const char *type = strcmp(m[i].law, "diode") == 0 ? "diode"
                           : strcmp(m[i].law, "thermal-resistor") == 0 ? "thermal-resistor"
                                                                       : "amplifier";
        char text[512];
        /* a law with an upper rail (cmos-inverter) gets vdd: a supply node */
        int rail = strcmp(m[i].law, "cmos-inverter") == 0;
        if (strcmp(type, "amplifier") == 0)
            snprintf(text, sizeof text,
                     "parts:\n  X1: {type: amplifier, in: i, out: o, model: %s%s}\n"
                     "  R1: {type: resistor, nodes: [i, gnd], value: 1k}\n%s", m[i].name,
                     rail ? ", vdd: v" : "",
                     rail ? "  V1: {type: supply, nodes: [v, gnd], value: 3V}\n" : "");
        else
            snprintf(text, sizeof text, "parts:\n  X1: {type: %s, nodes: [i, gnd], model: %s}\n",
                     type, m[i].name);
        ru_circuit *c = load_ok(text, NULL);
        const ru_part *p = part(c, "X1");
        if (p->type == RU_PART_AMPLIFIER) {
            assert_string_equal(ru_law_name(p->amp.law), m[i].law);
            assert_string_equal(p->amp.model, m[i].name);
            laws_seen[p->amp.law] = 1;
        } else if (p->type == RU_PART_DIODE) {
            assert_string_equal(p->diode.model, m[i].name);
            laws_seen[RU_LAW_COUNT] = 1;
        } else {
            assert_string_equal(p->thermal.model, m[i].name);
            laws_seen[RU_LAW_COUNT + 1] = 1;
        }
        ru_circuit_destroy(c);
    }
    int nlaws = 0;
    for (int k = 0; k < RU_LAW_COUNT + 2; k++)
        nlaws += laws_seen[k];
    assert_true(nlaws >= 6); /* the issue: presets over at least 6 laws */
    for (size_t i = 0; i < n; i++) { /* one listing read back: general-opamp */
        if (strcmp(m[i].name, "general-opamp") != 0)
            continue;
        assert_string_equal(m[i].law, "opamp");
        int found = 0;
        for (size_t k = 0; k < m[i].nparams; k++)
            if (strcmp(m[i].params[k].name, "gbw") == 0) {
                RU_ASSERT_REL(m[i].params[k].value, 1e6, REL);
                assert_string_equal(m[i].params[k].unit, "Hz");
                found = 1;
            }
        assert_true(found);
    }
    ru_models_free(m);
    ru_models_free(NULL);
    assert_int_equal(ru_models_list("/nonexistent-ringup-models", &m, &n, &err), RU_EIO);
    assert_null(m);
    /* a broken preset fails the listing with its place */
    char dir[] = "/tmp/ringup-models-XXXXXX";
    assert_non_null(mkdtemp(dir));
    char path[256];
    snprintf(path, sizeof path, "%s/broken.yaml", dir);
    FILE *f = fopen(path, "w");
    assert_non_null(f);
    fputs("law: opamp\ngbw: 1MV\n", f);
    fclose(f);
    assert_int_equal(ru_models_list(dir, &m, &n, &err), RU_EINPUT);
    assert_int_equal(err.line, 2);
    assert_non_null(strstr(err.msg, "key gbw: unit V does not fit, expected Hz"));
    remove(path);
    rmdir(dir);
}

/* ru_circuit_apply_model: the preset replaces the law and every inline value. */
static void test_apply_model(void **state)
{
    (void)state;
    ru_circuit *c = load_ok(
        "parts:\n"
        "  A1: {type: amplifier, in: i, out: o, law: follower-tanh, gain: 0.5, rout: 3ohm}\n"
        "  D1: {type: diode, nodes: [o, gnd], is: 1p}\n"
        "  RT1: {type: thermal-resistor, nodes: [i, gnd]}\n"
        "  R1: {type: resistor, nodes: [i, gnd], value: 1k}\n",
        NULL);
    ru_error err;
    assert_int_equal(ru_circuit_apply_model(c, "A1", "general-opamp", NULL, &err), RU_OK);
    const ru_part *p = part(c, "A1");
    assert_int_equal(p->amp.law, RU_LAW_OPAMP);
    assert_string_equal(p->amp.model, "general-opamp");
    RU_ASSERT_REL(p->amp.gain, 2e5, REL);     /* the preset's, not the inline 0.5 */
    RU_ASSERT_REL(p->amp.rout_ohm, 75.0, REL); /* the preset's, not the inline 3 */
    assert_string_equal(ru_circuit_node_name(c, p->node[1]), "o");
    assert_int_equal(ru_circuit_apply_model(c, "D1", "schottky-diode", NULL, &err), RU_OK);
    RU_ASSERT_REL(part(c, "D1")->diode.is_a, 1e-6, REL);
    assert_int_equal(ru_circuit_apply_model(c, "RT1", "bead-ntc", NULL, &err), RU_OK);
    assert_int_equal(part(c, "RT1")->thermal.kind, RU_THERMAL_NTC);
    /* errors leave the part as it was */
    assert_int_equal(ru_circuit_apply_model(c, "A9", "general-opamp", NULL, &err), RU_EINPUT);
    assert_non_null(strstr(err.msg, "no part A9"));
    assert_int_equal(ru_circuit_apply_model(c, "R1", "general-opamp", NULL, &err), RU_EINPUT);
    assert_non_null(strstr(err.msg, "part R1: a resistor takes no model"));
    assert_int_equal(ru_circuit_apply_model(c, "A1", "no-such", NULL, &err), RU_EINPUT);
    assert_non_null(strstr(err.msg, "part A1: no preset no-such"));
    assert_int_equal(ru_circuit_apply_model(c, "A1", "../etc", NULL, &err), RU_EINPUT);
    assert_non_null(strstr(err.msg, "not a preset name"));
    assert_int_equal(ru_circuit_apply_model(c, "A1", "signal-diode", NULL, &err), RU_EINPUT);
    assert_non_null(strstr(err.msg, "part A1: preset signal-diode (law diode) does not fit"));
    assert_int_equal(part(c, "A1")->amp.law, RU_LAW_OPAMP);
    assert_string_equal(part(c, "A1")->amp.model, "general-opamp");
    assert_int_equal(err.line, 2); /* at the part's name */
    ru_circuit_destroy(c);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_good_sources),     cmocka_unit_test(test_good_passives),
        cmocka_unit_test(test_good_amplifiers),  cmocka_unit_test(test_good_run_measure),
        cmocka_unit_test(test_good_file),        cmocka_unit_test(test_preset_override),
        cmocka_unit_test(test_shipped_presets),  cmocka_unit_test(test_yaml_errors),
        cmocka_unit_test(test_refs_refused),     cmocka_unit_test(test_billion_laughs),
        cmocka_unit_test(test_key_errors),       cmocka_unit_test(test_part_errors),
        cmocka_unit_test(test_value_errors),     cmocka_unit_test(test_stray_forms),
        cmocka_unit_test(test_run_measure_errors),
        cmocka_unit_test(test_preset_errors),    cmocka_unit_test(test_io_errors),
        cmocka_unit_test(test_default_models_dir),
        cmocka_unit_test(test_new_parts),        cmocka_unit_test(test_new_part_errors),
        cmocka_unit_test(test_models_list),      cmocka_unit_test(test_apply_model),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
