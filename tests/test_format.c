/* test_format.c: SI-prefixed formatting of the figures people read. Reference:
 * the SI prefixes (BIPM SI brochure): f p n u m k M G T for 1e-15 .. 1e12. */
#include "ru_test.h"

#include "ringup/format.h"

#include <string.h>

static void check(double v, const char *unit, int digits, const char *want)
{
    char buf[64];
    ru_format_si(v, unit, digits, buf, sizeof buf);
    if (strcmp(buf, want) != 0)
        fail_msg("%g %s (%d digits) -> '%s', want '%s'", v, unit, digits, buf, want);
}

static void test_prefixes(void **state)
{
    (void)state;
    check(0.0015, "s", 3, "1.50 ms");
    check(4700, "ohm", 2, "4.7 kohm");
    check(15e-9, "F", 3, "15.0 nF");
    check(2.2e-6, "H", 2, "2.2 uH");
    check(12, "V", 3, "12.0 V");
    check(1e6, "Hz", 4, "1.000 MHz");
    check(-3.3e-3, "V", 2, "-3.3 mV");
    check(0, "V", 3, "0.00 V");
    check(NAN, "V", 3, "-");
}

/* rounding that carries into the next digit or the next prefix */
static void test_rounding(void **state)
{
    (void)state;
    check(9.99996e-6, "V", 4, "10.00 uV");
    check(999.96, "Hz", 4, "1.000 kHz");
    check(99.9996e-3, "V", 4, "100.0 mV");
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_prefixes),
        cmocka_unit_test(test_rounding),
    };
    return cmocka_run_group_tests_name("format", tests, NULL, NULL);
}
