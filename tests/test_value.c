/* test_value.c: ru_value_parse, the number + SI prefix + unit parser of circuit
 * files. Expected scale factors come from the SI prefixes (Source: BIPM, The
 * International System of Units, 9th ed. 2019, Table 7); accepted spellings and
 * refusals from the format spec (Reference: README circuit-file format).
 * Tolerance: a relative 1e-15 (a few ulp), since "15n" is 15 * 1e-9 computed in
 * double and need not equal the decimal 1.5e-8 to the last bit. */
#include "ru_test.h"

#include "ringup/loader.h"

#include <string.h>

static double parse_ok(const char *text, const char *unit)
{
    double v = -12345.0;
    char why[128] = "";
    ru_status s = ru_value_parse(text, unit, &v, why, sizeof why);
    if (s != RU_OK)
        fail_msg("'%s' (unit %s) refused: %s", text, unit ? unit : "none", why);
    return v;
}

/* Refusal with a reason that contains `word`. */
static void parse_bad(const char *text, const char *unit, const char *word)
{
    double v = 42.0;
    char why[128] = "";
    ru_status s = ru_value_parse(text, unit, &v, why, sizeof why);
    if (s != RU_EINPUT)
        fail_msg("'%s' (unit %s) accepted as %g", text, unit ? unit : "none", v);
    if (!strstr(why, word))
        fail_msg("'%s': reason '%s' lacks '%s'", text, why, word);
    RU_ASSERT_NEAR(v, 42.0, 0.0); /* output untouched on error */
}

/* Source: SI Brochure Table 7, f p n u m k M G T; µ as micro sign and Greek mu. */
static void test_prefixes(void **state)
{
    (void)state;
    RU_ASSERT_REL(parse_ok("3f", "F"), 3e-15, 1e-15);
    RU_ASSERT_REL(parse_ok("1p", "F"), 1e-12, 1e-15);
    RU_ASSERT_REL(parse_ok("15n", "F"), 15e-9, 1e-15);
    RU_ASSERT_REL(parse_ok("20u", "s"), 20e-6, 1e-15);
    RU_ASSERT_REL(parse_ok("4.7\xc2\xb5", "F"), 4.7e-6, 1e-15);  /* U+00B5 */
    RU_ASSERT_REL(parse_ok("4.7\xce\xbc" "F", "F"), 4.7e-6, 1e-15); /* U+03BC */
    RU_ASSERT_REL(parse_ok("200m", "s"), 0.2, 1e-15);
    RU_ASSERT_REL(parse_ok("10k", "ohm"), 1e4, 1e-15);
    RU_ASSERT_REL(parse_ok("2.2M", "ohm"), 2.2e6, 1e-15);
    RU_ASSERT_REL(parse_ok("1G", "Hz"), 1e9, 1e-15);
    RU_ASSERT_REL(parse_ok("3T", "Hz"), 3e12, 1e-15);
}

/* Reference: README circuit-file format (units must equal the expected one). */
static void test_units(void **state)
{
    (void)state;
    RU_ASSERT_REL(parse_ok("10kohm", "ohm"), 1e4, 1e-15);
    RU_ASSERT_REL(parse_ok("10k\xce\xa9", "ohm"), 1e4, 1e-15); /* Ω, Greek omega */
    RU_ASSERT_REL(parse_ok("47\xe2\x84\xa6", "ohm"), 47.0, 1e-15); /* ohm sign */
    RU_ASSERT_REL(parse_ok("15nF", "F"), 15e-9, 1e-15);
    RU_ASSERT_REL(parse_ok("12V", "V"), 12.0, 1e-15);
    RU_ASSERT_REL(parse_ok("2.2uH", "H"), 2.2e-6, 1e-15);
    RU_ASSERT_REL(parse_ok("1kHz", "Hz"), 1e3, 1e-15);
    RU_ASSERT_REL(parse_ok("27C", "C"), 27.0, 1e-15);
    RU_ASSERT_REL(parse_ok("1F", "F"), 1.0, 1e-15);   /* unit F, not femto */
    RU_ASSERT_REL(parse_ok("1fF", "F"), 1e-15, 1e-15);
    RU_ASSERT_REL(parse_ok("20u", "V"), 20e-6, 1e-15); /* no unit is always fine */
    RU_ASSERT_REL(parse_ok("-1m", "A"), -1e-3, 1e-15);
}

/* Reference: README circuit-file format ("1%" is 0.01; a plain fraction as is). */
static void test_percent(void **state)
{
    (void)state;
    RU_ASSERT_REL(parse_ok("1%", "%"), 0.01, 1e-15);
    RU_ASSERT_REL(parse_ok("0.5%", "%"), 0.005, 1e-15);
    RU_ASSERT_REL(parse_ok("90%", "%"), 0.9, 1e-15);
    RU_ASSERT_REL(parse_ok("0.05", "%"), 0.05, 1e-15);
    /* parts per million (a crystal's frequency tolerance): 1 ppm = 1e-6 */
    RU_ASSERT_REL(parse_ok("20ppm", "%"), 20e-6, 1e-15);
}

/* Plain YAML numbers in C strtod decimal syntax. Source: ISO C11 7.22.1.3. */
static void test_plain_numbers(void **state)
{
    (void)state;
    RU_ASSERT_REL(parse_ok("1e-9", "F"), 1e-9, 1e-15);
    RU_ASSERT_REL(parse_ok("2.5E3", NULL), 2500.0, 1e-15);
    RU_ASSERT_REL(parse_ok("+.5", NULL), 0.5, 1e-15);
    RU_ASSERT_REL(parse_ok("7.", NULL), 7.0, 1e-15);
    RU_ASSERT_NEAR(parse_ok("0", NULL), 0.0, 0.0);
    RU_ASSERT_REL(parse_ok("1e3k", NULL), 1e6, 1e-15); /* exponent, then prefix */
}

/* Reference: README circuit-file format (refusals and their reasons). */
static void test_errors(void **state)
{
    (void)state;
    parse_bad("15nH", "F", "unit H does not fit, expected F");
    parse_bad("12V", NULL, "unit V does not fit");
    parse_bad("5A", "V", "expected V");
    parse_bad("10meg", "ohm", "unexpected text 'meg'"); /* meg is not a prefix */
    parse_bad("10K", "ohm", "unexpected text 'K'");     /* case matters */
    parse_bad("10kohms", "ohm", "unexpected");
    parse_bad("1 k", "ohm", "unexpected");
    parse_bad("", "F", "empty");
    parse_bad("abc", "F", "not a number");
    parse_bad("0x10", NULL, "unexpected text 'x10'");    /* no hex */
    parse_bad("inf", NULL, "not a number");
    parse_bad("nan", NULL, "not a number");
    parse_bad("-", NULL, "not a number");
    parse_bad("1e999", NULL, "out of range");            /* overflow */
    parse_bad("1e308T", NULL, "out of range");           /* overflow after prefix */
    parse_bad("5%", "V", "unit % does not fit");
    parse_bad("1.2.3", NULL, "unexpected");
    parse_bad("1e", NULL, "unexpected text 'e'");
}

static void test_null_why(void **state)
{
    (void)state;
    double v = 1.0;
    assert_int_equal(ru_value_parse("bad", "F", &v, NULL, 0), RU_EINPUT);
    assert_int_equal(ru_value_parse(NULL, "F", &v, NULL, 0), RU_EINPUT);
    RU_ASSERT_NEAR(v, 1.0, 0.0);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_prefixes),    cmocka_unit_test(test_units),
        cmocka_unit_test(test_percent),     cmocka_unit_test(test_plain_numbers),
        cmocka_unit_test(test_errors),      cmocka_unit_test(test_null_why),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
