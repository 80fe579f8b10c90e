/* test_yamltree.c: the YAML document tree under the circuit loader
 * (src/circuit/yamltree.h): the shape and places of what is built, and every
 * refusal with its place. References: YAML 1.1 (yaml.org/spec/1.1, the version
 * libyaml implements) for what the text means; RFC 3629 section 3 for which byte
 * sequences are UTF-8; the places expected are found by searching the test text
 * (col_at), not taken from the parser. */
#include "ru_test.h"

#include "circuit/yamltree.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* 1-based column of the first `token` on 1-based `line` of text. */
static int col_at(const char *text, int line, const char *token)
{
    const char *p = text;
    for (int l = 1; l < line && p; l++)
        if ((p = strchr(p, '\n')) != NULL)
            p++;
    if (!p)
        fail_msg("no line %d", line);
    const char *hit = strstr(p, token), *end = strchr(p, '\n');
    if (!hit || (end && hit > end))
        fail_msg("line %d has no '%s'", line, token);
    return (int)(hit - p) + 1;
}

static ru_yaml *parse_ok(const char *text, size_t len)
{
    ru_yaml *y = NULL;
    ru_error err;
    ru_error_clear(&err);
    ru_status s = ru_yaml_parse(text, len, "t.yaml", &y, &err);
    if (s != RU_OK)
        fail_msg("parse failed: %d:%d: %s", err.line, err.col, err.msg);
    return y;
}

/* Parsing len bytes fails with RU_EINPUT at line:col with word in the message. */
static void refused_n(const char *text, size_t len, int line, int col, const char *word)
{
    ru_yaml *y = (ru_yaml *)1;
    ru_error err;
    ru_error_clear(&err);
    ru_status s = ru_yaml_parse(text, len, "t.yaml", &y, &err);
    if (s != RU_EINPUT)
        fail_msg("status %d, want RU_EINPUT (%s)", s, err.msg);
    assert_null(y);
    if (err.line != line || err.col != col)
        fail_msg("place %d:%d, want %d:%d (%s)", err.line, err.col, line, col, err.msg);
    if (!strstr(err.msg, word))
        fail_msg("message lacks '%s': %s", word, err.msg);
    assert_string_equal(err.file, "t.yaml");
}

static void refused(const char *text, int line, int col, const char *word)
{
    refused_n(text, strlen(text), line, col, word);
}

/* Reference: YAML 1.1 sections 7.3 (block mappings), 9.1.3 (flow sequences),
 * 9.1.1 (quoted scalars): the tree holds what the text says, in order, with places. */
static void test_shape_and_places(void **state)
{
    (void)state;
    const char *t = "# comment\n"
                    "title: \"Q  x\"\n"
                    "parts:\n"
                    "  R1: {type: resistor, nodes: [a, gnd], value: 1k}\n"
                    "  R2:\n"
                    "    nodes:\n"
                    "      - b\n"
                    "      - 'c'\n"
                    "    value:\n";
    ru_yaml *y = parse_ok(t, strlen(t));
    const ru_ynode *r = ru_yaml_root(y);
    assert_int_equal(r->type, RU_YAML_MAPPING);
    assert_int_equal(r->line, 2); /* a block mapping starts at its first key */
    assert_int_equal(r->col, 1);
    assert_int_equal(r->n, 2);
    assert_string_equal(r->pairs[0].key->text, "title");
    const ru_ynode *title = r->pairs[0].value;
    assert_string_equal(title->text, "Q  x");
    assert_int_equal(title->style, RU_YAML_QUOTED);
    assert_int_equal(title->col, col_at(t, 2, "\"")); /* at the opening quote */
    const ru_ynode *parts = r->pairs[1].value;
    assert_int_equal(parts->n, 2);
    const ru_ynode *r1 = parts->pairs[0].value;
    assert_int_equal(r1->type, RU_YAML_MAPPING);
    assert_int_equal(r1->line, 4);
    assert_int_equal(r1->col, col_at(t, 4, "{"));
    assert_int_equal(r1->n, 3);
    const ru_ynode *nodes = r1->pairs[1].value;
    assert_int_equal(nodes->type, RU_YAML_SEQUENCE);
    assert_int_equal(nodes->col, col_at(t, 4, "["));
    assert_int_equal(nodes->n, 2);
    assert_string_equal(nodes->items[1]->text, "gnd");
    assert_int_equal(nodes->items[1]->col, col_at(t, 4, "gnd"));
    assert_int_equal(r1->pairs[2].value->col, col_at(t, 4, "1k"));
    const ru_ynode *r2 = parts->pairs[1].value;
    const ru_ynode *n2 = r2->pairs[0].value;
    assert_int_equal(n2->n, 2);
    assert_int_equal(n2->line, 7);
    assert_int_equal(n2->col, col_at(t, 7, "-")); /* a block list starts at its dash */
    assert_string_equal(n2->items[1]->text, "c");
    assert_int_equal(n2->items[1]->line, 8);
    assert_int_equal(n2->items[1]->col, col_at(t, 8, "'"));
    const ru_ynode *empty = r2->pairs[1].value; /* "value:" with nothing after it */
    assert_int_equal(empty->type, RU_YAML_SCALAR);
    assert_int_equal(empty->empty, 1);
    assert_string_equal(empty->text, "");
    ru_yaml_destroy(y);
    ru_yaml_destroy(NULL);
}

/* Columns count characters, not bytes, and a UTF-8 byte-order mark is not a
 * column (YAML 1.1 section 5.2: the mark is not content). */
static void test_columns_in_characters(void **state)
{
    (void)state;
    const char *t = "\xEF\xBB\xBF" "a: 1\n" "\xC3\xA9\xC3\xA9: x\n" "b: [\xE2\x82\xAC, y]\n";
    ru_yaml *y = parse_ok(t, strlen(t));
    const ru_ynode *r = ru_yaml_root(y);
    assert_int_equal(r->pairs[0].key->col, 1);
    assert_int_equal(r->pairs[1].value->col, 5); /* after two 2-byte letters */
    assert_int_equal(r->pairs[2].value->items[1]->col, 8); /* after a 3-byte euro sign */
    ru_yaml_destroy(y);
    /* CR LF and a lone CR end lines as LF does */
    const char *crlf = "a: 1\r\nb: 2\rc: [x, y]\n";
    y = parse_ok(crlf, strlen(crlf));
    r = ru_yaml_root(y);
    assert_int_equal(r->pairs[2].value->line, 3);
    assert_int_equal(r->pairs[2].value->items[1]->col, 8);
    ru_yaml_destroy(y);
}

/* Empty inputs give no root; the loader says "empty". */
static void test_empty(void **state)
{
    (void)state;
    const char *cases[] = {"", "# only a comment\n", "---\n", "\n\n"};
    for (size_t i = 0; i < sizeof cases / sizeof *cases; i++) {
        ru_yaml *y = parse_ok(cases[i], strlen(cases[i]));
        assert_null(ru_yaml_root(y));
        ru_yaml_destroy(y);
    }
}

/* Reference: YAML 1.1 sections 6.8 (directives), 6.9.1 (tags), 7.1 (aliases),
 * 9.1.3: all of them are refused at their first character. */
static void test_refusals(void **state)
{
    (void)state;
    refused("%YAML 1.1\n---\na: 1\n", 1, 1, "%YAML directive is not allowed");
    refused("%TAG ! tag:example.com,2000:\n---\na: 1\n", 1, 1, "%TAG directive");
    refused("%FOO bar\n---\na: 1\n", 1, 5, "YAML: found unknown directive name");
    const char *t = "a: !!str 1\n";
    refused(t, 1, col_at(t, 1, "!!str"), "tag !!str is not allowed");
    t = "a:\n  b: !local {x: 1}\n";
    refused(t, 2, col_at(t, 2, "!local"), "tag !local");
    t = "a: [x, &first y]\n";
    refused(t, 1, col_at(t, 1, "&first"), "anchor &first is not allowed");
    t = "a: &k 1\nb: 2\nc: *k\n";
    refused(t, 3, col_at(t, 3, "*k"), "alias *k is not allowed"); /* the alias first */
    t = "a: &k 1\nb: [\n"; /* an anchor, then a syntax error: the anchor is named */
    refused(t, 1, col_at(t, 1, "&k"), "anchor &k");
    t = "a: 1\n---\nb: 2\n";
    refused(t, 3, 1, "more than one YAML document");
    t = "a: 1\n--- \n";
    refused(t, 2, 1, "more than one YAML document");
}

/* Reference: YAML 1.1 section 3.2.1.1 (keys of a mapping are unique): both
 * places are named, at every depth, and keys that differ only after a common
 * prefix or in length are not confused. */
static void test_duplicate_keys(void **state)
{
    (void)state;
    const char *t = "parts:\n  R1: {a: 1}\n  R12: {a: 2}\n  R1: {a: 3}\n";
    refused(t, 4, 3, "duplicate key R1 (first given at 2:3)");
    t = "a: {x: 1, xx: 2, y: 3, x: 4}\n";
    refused(t, 1, col_at(t, 1, "x: 4"), "duplicate key x (first given at 1:5)");
    t = "a: {b: [{c: 1, c: 2}]}\n";
    refused(t, 1, col_at(t, 1, "c: 2"), "duplicate key c");
    t = "a: 1\nb: 2\n'a': 3\n"; /* quoting does not make another key */
    refused(t, 3, 1, "duplicate key a (first given at 1:1)");
    /* the same key in two mappings is fine */
    t = "p: {a: 1}\nq: {a: 2}\n";
    ru_yaml_destroy(parse_ok(t, strlen(t)));
    /* many keys, none repeated: all kept (the hash table grows past its first size) */
    size_t n = 5000, cap = n * 16 + 8, used = 0;
    char *big = malloc(cap);
    assert_non_null(big);
    for (size_t i = 0; i < n; i++)
        used += (size_t)snprintf(big + used, cap - used, "k%zu: %zu\n", i, i);
    ru_yaml *y = parse_ok(big, used);
    assert_int_equal(ru_yaml_root(y)->n, n);
    assert_string_equal(ru_yaml_root(y)->pairs[n - 1].key->text, "k4999");
    ru_yaml_destroy(y);
    snprintf(big + used, cap - used, "k17: again\n");
    refused_n(big, strlen(big), (int)n + 1, 1, "duplicate key k17 (first given at 18:1)");
    free(big);
}

/* The limits of yamltree.h: depth, scalar length; each with its place. */
static void test_limits(void **state)
{
    (void)state;
    char deep[2 * RU_YAML_DEPTH_MAX + 8];
    size_t k = 0;
    for (int i = 0; i < RU_YAML_DEPTH_MAX; i++)
        deep[k++] = '[';
    for (int i = 0; i < RU_YAML_DEPTH_MAX; i++)
        deep[k++] = ']';
    deep[k] = '\0';
    ru_yaml_destroy(parse_ok(deep, k)); /* exactly the limit is fine */
    memmove(deep + 1, deep, k + 1);
    deep[0] = '[';
    memcpy(deep + k + 1, "]", 2);
    refused(deep, 1, RU_YAML_DEPTH_MAX + 1, "nest deeper than 32 levels");
    size_t n = RU_YAML_SCALAR_MAX + 1;
    static char lng[RU_YAML_SCALAR_MAX + 16];
    memcpy(lng, "a: ", 3);
    memset(lng + 3, 'x', n);
    lng[3 + n] = '\0';
    refused(lng, 1, 4, "a value of 4097 bytes is longer");
    lng[3 + n - 1] = '\0'; /* 4096 bytes: fine */
    ru_yaml_destroy(parse_ok(lng, strlen(lng)));
    /* the size limit is checked before anything is read */
    size_t big = (size_t)RU_YAML_BYTES_MAX + 1;
    char *huge = malloc(big);
    assert_non_null(huge);
    memset(huge, '#', big);
    refused_n(huge, big, 0, 0, "over the limit of 4194304 bytes");
    free(huge);
}

/* Reference: RFC 3629 section 3 (UTF-8 byte sequences), YAML 1.1 section 5.1
 * (the characters a stream may hold): each bad byte is refused at its place. */
static void test_bytes(void **state)
{
    (void)state;
    refused_n("%\xFF", 2, 1, 2, "byte 0xFF is not UTF-8");
    refused_n("a: b\nc: d\xC0\xAF\n", 11, 2, 5, "byte 0xC0 is not UTF-8");  /* overlong '/' */
    refused_n("a: \xED\xA0\x80\n", 7, 1, 4, "byte 0xED is not UTF-8");      /* a surrogate */
    refused_n("a: \xF4\x90\x80\x80\n", 8, 1, 4, "byte 0xF4 is not UTF-8");  /* > U+10FFFF */
    refused_n("a: \xE2\x82\n", 6, 1, 4, "byte 0xE2 is not UTF-8");          /* cut short */
    refused_n("a: 1\nb: 2\x00junk\n", 15, 2, 5, "a NUL byte is not allowed");
    refused_n("\xFF\xFE" "a\0:\0", 6, 1, 1, "UTF-16 text; save it as UTF-8");
    refused_n("\xFE\xFF" "\0a", 4, 1, 1, "UTF-16 text");
    refused_n("\0\0\xFE\xFF", 4, 1, 1, "UTF-32 text");
    refused_n("a\0:\0 \0001\0", 8, 1, 1, "UTF-16 or UTF-32 text"); /* no byte-order mark */
    refused("a: x\x01y\n", 1, 5, "character U+0001 (a control character)");
    refused("a: 1\nb: \x7F\n", 2, 4, "U+007F");
    refused("a: x\xC2\x85y\n", 1, 5, "U+0085 (a line separator)");
    refused("a: \"x\xE2\x80\xA8y\"\n", 1, 6, "U+2028 (a line separator)");
    refused("a: \"x\\0y\"\n", 1, 4, "a value holds a NUL character");
    /* tabs, CR and non-ASCII letters are fine */
    const char *ok = "a:\t\"\xC3\xA9\xE2\x82\xAC\xF0\x9F\x8E\xB5\"\r\n";
    ru_yaml *y = parse_ok(ok, strlen(ok));
    assert_string_equal(ru_yaml_root(y)->pairs[0].value->text, "\xC3\xA9\xE2\x82\xAC\xF0\x9F\x8E\xB5");
    ru_yaml_destroy(y);
}

/* The parser's own errors keep its place (YAML 1.1 section 9.1.3: a flow
 * mapping is closed once). */
static void test_syntax_errors(void **state)
{
    (void)state;
    const char *t = "a: {b: 1}}\n";
    refused(t, 1, col_at(t, 1, "}}") + 1, "YAML:");
    t = "a: \"open\nb: 2\n";
    refused(t, 1, col_at(t, 1, "\""), "found unexpected end of stream while scanning a quoted");
    t = "a:\n  - x\n b: y\n";
    refused(t, 3, 2, "YAML:");
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_shape_and_places), cmocka_unit_test(test_columns_in_characters),
        cmocka_unit_test(test_empty),            cmocka_unit_test(test_refusals),
        cmocka_unit_test(test_duplicate_keys),   cmocka_unit_test(test_limits),
        cmocka_unit_test(test_bytes),            cmocka_unit_test(test_syntax_errors),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
