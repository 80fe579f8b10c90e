/* test_limits.c: the size limits of a circuit (README "Limits"): parts, nodes,
 * states, title length, each refused with its place and figure just past the
 * limit and accepted at it; and name lookups (by hash, src/circuit/nameindex.c)
 * against a plain linear search over the same names, the naive model the index
 * must agree with (common practice for testing a fast structure). No timing is
 * asserted here (the machine is shared); bench_loader.c prints the figures. */
#include "ru_test.h"

#include "ringup/circuit.h"
#include "ringup/loader.h"
#include "ringup/system.h"

#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* A growing text buffer for generated circuit files. */
typedef struct text_buf {
    char *s;
    size_t n, cap;
} text_buf;

static void put(text_buf *b, const char *fmt, ...)
    __attribute__((format(printf, 2, 3)));
static void put(text_buf *b, const char *fmt, ...)
{
    for (;;) {
        va_list ap;
        va_start(ap, fmt);
        int w = vsnprintf(b->s ? b->s + b->n : NULL, b->s ? b->cap - b->n : 0, fmt, ap);
        va_end(ap);
        if (b->s && (size_t)w < b->cap - b->n) {
            b->n += (size_t)w;
            return;
        }
        b->cap = b->cap ? 2 * b->cap + (size_t)w : 4096 + (size_t)w;
        b->s = realloc(b->s, b->cap);
        assert_non_null(b->s);
    }
}

/* parts: nparts resistors in parallel between a and gnd (one node). */
static char *parallel(size_t nparts)
{
    text_buf b = {NULL, 0, 0};
    put(&b, "parts:\n");
    for (size_t i = 0; i < nparts; i++)
        put(&b, "  R%zu: {type: resistor, nodes: [a, gnd], value: 1k}\n", i);
    return b.s;
}

/* parts: a supply on n0 and a chain of nres resistors n0-n1-...; a capacitor
 * from every node but n0 to ground when caps is set. */
static char *chain(size_t nres, int caps)
{
    text_buf b = {NULL, 0, 0};
    put(&b, "parts:\n  V1: {type: supply, nodes: [n0, gnd], value: 1V}\n");
    for (size_t i = 0; i < nres; i++) {
        put(&b, "  R%zu: {type: resistor, nodes: [n%zu, n%zu], value: 1k}\n", i, i, i + 1);
        if (caps)
            put(&b, "  C%zu: {type: capacitor, nodes: [n%zu, gnd], value: 1n}\n", i, i + 1);
    }
    return b.s;
}

static ru_status load(const char *text, ru_circuit **c, ru_error *err)
{
    ru_error_clear(err);
    return ru_circuit_load_string(text, "t.yaml", RU_MODELS_DIR, c, err);
}

/* Reference: README "Limits" (RU_PARTS_MAX parts). */
static void test_parts_limit(void **state)
{
    (void)state;
    ru_circuit *c = NULL;
    ru_error err;
    char *t = parallel(RU_PARTS_MAX);
    assert_int_equal(load(t, &c, &err), RU_OK);
    assert_int_equal(ru_circuit_part_count(c), RU_PARTS_MAX);
    ru_circuit_destroy(c);
    free(t);
    t = parallel(RU_PARTS_MAX + 1);
    assert_int_equal(load(t, &c, &err), RU_EINPUT);
    assert_null(c);
    /* the part past the limit, at its name on line RU_PARTS_MAX + 2 */
    assert_int_equal(err.line, RU_PARTS_MAX + 2);
    assert_int_equal(err.col, 3);
    assert_non_null(strstr(err.msg, "part R10000: a circuit holds at most 10000 parts"));
    free(t);
}

/* Reference: README "Limits" (RU_NODES_MAX nodes besides ground). */
static void test_nodes_limit(void **state)
{
    (void)state;
    ru_circuit *c = NULL;
    ru_error err;
    char *t = chain(RU_NODES_MAX - 1, 0); /* nodes n0..n1999 */
    assert_int_equal(load(t, &c, &err), RU_OK);
    assert_int_equal(ru_circuit_node_count(c), RU_NODES_MAX + 1);
    ru_circuit_destroy(c);
    free(t);
    t = chain(RU_NODES_MAX, 0);
    assert_int_equal(load(t, &c, &err), RU_EINPUT);
    assert_null(c);
    assert_int_equal(err.line, RU_NODES_MAX + 2); /* the last resistor's line */
    assert_non_null(strstr(err.msg, "node n2000 would be node 2001; a circuit holds at "
                                    "most 2000 nodes"));
    free(t);
    /* the library call refuses the node too */
    assert_int_equal(ru_circuit_create("x", &c), RU_OK);
    char name[32];
    for (int i = 1; i <= RU_NODES_MAX; i++) {
        snprintf(name, sizeof name, "m%d", i);
        assert_int_equal(ru_circuit_node(c, name, 0, 0), i);
    }
    assert_int_equal(ru_circuit_node(c, "one-more", 0, 0), -1);
    assert_int_equal(ru_circuit_node(c, "m7", 0, 0), 7); /* an existing name still works */
    ru_circuit_destroy(c);
}

/* Reference: README "Limits" (RU_STATES_MAX states: the dense solver). */
static void test_states_limit(void **state)
{
    (void)state;
    ru_circuit *c = NULL;
    ru_system *s = NULL;
    ru_error err;
    char *t = chain(RU_STATES_MAX, 1); /* n1..n1000 free: 1000 states */
    assert_int_equal(load(t, &c, &err), RU_OK);
    assert_int_equal(ru_system_create(c, &s, &err), RU_OK);
    assert_int_equal(ru_system_size(s), RU_STATES_MAX);
    ru_system_destroy(s);
    ru_circuit_destroy(c);
    free(t);
    t = chain(RU_STATES_MAX + 1, 1);
    assert_int_equal(load(t, &c, &err), RU_OK);
    s = (ru_system *)1;
    assert_int_equal(ru_system_create(c, &s, &err), RU_EINPUT);
    assert_null(s);
    assert_non_null(strstr(err.msg, "the circuit has 1001 states (1001 free nodes"));
    assert_non_null(strstr(err.msg, "more than the 1000"));
    assert_string_equal(err.file, "t.yaml");
    ru_circuit_destroy(c);
    free(t);
}

/* Reference: README "Limits" (a title of at most RU_TITLE_MAX bytes). */
static void test_title_limit(void **state)
{
    (void)state;
    char t[RU_TITLE_MAX + 128];
    ru_circuit *c = NULL;
    ru_error err;
    for (int extra = 0; extra < 2; extra++) {
        int n = RU_TITLE_MAX + extra;
        memcpy(t, "title: ", 7);
        memset(t + 7, 'x', (size_t)n);
        snprintf(t + 7 + n, sizeof t - 7 - (size_t)n,
                 "\nparts: {R1: {type: resistor, nodes: [a, gnd], value: 1}}\n");
        ru_status s = load(t, &c, &err);
        if (extra == 0) {
            assert_int_equal(s, RU_OK);
            assert_int_equal(strlen(ru_circuit_title(c)), RU_TITLE_MAX);
            ru_circuit_destroy(c);
        } else {
            assert_int_equal(s, RU_EINPUT);
            assert_int_equal(err.line, 1);
            assert_int_equal(err.col, 8);
            assert_non_null(strstr(err.msg, "key title is 256 bytes long, more than the 255"));
        }
    }
}

/* Every name found by hash is the one a linear search finds; absent names are
 * absent; replacing a part under a new name moves the lookup with it. */
static void test_lookups(void **state)
{
    (void)state;
    ru_circuit *c = NULL;
    ru_error err;
    char *t = chain(1500, 1);
    assert_int_equal(load(t, &c, &err), RU_OK);
    free(t);
    for (size_t i = 0; i < ru_circuit_part_count(c); i++) {
        const char *name = ru_circuit_part(c, i)->name;
        size_t linear = 0;
        while (strcmp(ru_circuit_part(c, linear)->name, name) != 0)
            linear++;
        assert_int_equal(ru_circuit_find_part(c, name), (int)linear);
    }
    for (size_t i = 0; i < ru_circuit_node_count(c); i++) {
        const char *name = ru_circuit_node_name(c, (int)i);
        assert_int_equal(ru_circuit_find_node(c, name), (int)i);
    }
    assert_int_equal(ru_circuit_find_node(c, "0"), 0);
    assert_int_equal(ru_circuit_find_part(c, "R1500"), -1);
    assert_int_equal(ru_circuit_find_part(c, "R"), -1);
    assert_int_equal(ru_circuit_find_node(c, "n1501"), -1);
    ru_circuit *d = NULL;
    assert_int_equal(ru_circuit_clone(c, &d), RU_OK); /* the copy has its own index */
    ru_circuit_destroy(c);
    assert_int_equal(ru_circuit_find_part(d, "C77"), 2 * 77 + 2);
    ru_part p = *ru_circuit_part(d, 4);
    snprintf(p.name, sizeof p.name, "Rnew");
    assert_int_equal(ru_circuit_replace_part(d, 4, &p, &err), RU_OK);
    assert_int_equal(ru_circuit_find_part(d, "Rnew"), 4);
    assert_int_equal(ru_circuit_find_part(d, "C1"), -1); /* part 4 was C1 */
    ru_circuit_destroy(d);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_parts_limit),  cmocka_unit_test(test_nodes_limit),
        cmocka_unit_test(test_states_limit), cmocka_unit_test(test_title_limit),
        cmocka_unit_test(test_lookups),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
