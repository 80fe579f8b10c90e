/* value.c: ru_value_parse, the parser of numbers with SI prefixes and units used
 * by the circuit-file loader and the command line.
 *
 * Grammar: NUMBER [PREFIX] [UNIT], no spaces. NUMBER is decimal C strtod syntax
 * ([+-] digits [. digits] [e[+-]digits]); hex, inf and nan are refused. PREFIX is
 * one of f p n u µ m k M G T (µ as U+00B5 or Greek mu U+03BC); UNIT must equal
 * the expected unit exactly (Ω or U+2126 stand for ohm). Case matters: m is milli,
 * M mega. A value with unit "%" written with the % sign is divided by 100, and a
 * fraction may also be written in parts per million: "20ppm" is 20e-6.
 * Invariant: on RU_OK *out is finite; on error *out is untouched. strtod is used
 * on a copy of the digits only, so the C locale's '.' is assumed. */
#include "ringup/loader.h"

#include <errno.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

typedef struct prefix_rec {
    const char *text; /* spelling (UTF-8) */
    double scale;     /* multiplier */
} prefix_rec;

static const prefix_rec prefixes[] = {
    {"f", 1e-15}, {"p", 1e-12}, {"n", 1e-9},      {"u", 1e-6},
    {"\xc2\xb5", 1e-6} /* micro sign */,          {"\xce\xbc", 1e-6} /* Greek mu */,
    {"m", 1e-3},  {"k", 1e3},   {"M", 1e6},       {"G", 1e9},
    {"T", 1e12}};

/* Units the parser knows by name, to tell a wrong unit from stray text. */
static const char *const known_units[] = {"ohm", "\xce\xa9", "\xe2\x84\xa6", "F", "H",
                                          "V",   "A",        "s",            "Hz",
                                          "%",   "C",        "S",            "ppm", "W",
                                          "V/rtHz", "A/rtHz"};

static ru_status fail(char *why, size_t whylen, const char *fmt, ...)
#if defined(__GNUC__)
    __attribute__((format(printf, 3, 4)))
#endif
    ;

static ru_status fail(char *why, size_t whylen, const char *fmt, ...)
{
    if (why && whylen > 0) {
        va_list ap;
        va_start(ap, fmt);
        vsnprintf(why, whylen, fmt, ap);
        va_end(ap);
    }
    return RU_EINPUT;
}

static int is_digit(char ch) { return ch >= '0' && ch <= '9'; }

/* Length of the decimal number at the start of s (0: none). */
static size_t number_length(const char *s)
{
    size_t i = 0, digits = 0;
    if (s[i] == '+' || s[i] == '-')
        i++;
    while (is_digit(s[i])) {
        i++;
        digits++;
    }
    if (s[i] == '.') {
        i++;
        while (is_digit(s[i])) {
            i++;
            digits++;
        }
    }
    if (digits == 0)
        return 0;
    if (s[i] == 'e' || s[i] == 'E') {
        size_t j = i + 1;
        if (s[j] == '+' || s[j] == '-')
            j++;
        if (is_digit(s[j])) {
            while (is_digit(s[j]))
                j++;
            i = j;
        }
    }
    return i;
}

/* Whether text names `unit` (ohm also as the Greek capital omega or ohm sign). */
static int unit_matches(const char *text, const char *unit)
{
    if (!unit)
        return 0;
    if (strcmp(text, unit) == 0)
        return 1;
    if (strcmp(unit, "ohm") == 0)
        return strcmp(text, "\xce\xa9") == 0 || strcmp(text, "\xe2\x84\xa6") == 0;
    return 0;
}

static int is_known_unit(const char *text)
{
    for (size_t i = 0; i < sizeof known_units / sizeof known_units[0]; i++)
        if (strcmp(text, known_units[i]) == 0)
            return 1;
    return 0;
}

/* Splits the suffix after the number into scale and unit check. */
static ru_status parse_suffix(const char *rest, const char *unit, double *scale,
                              int *percent, char *why, size_t whylen)
{
    *scale = 1.0;
    *percent = 0;
    const char *u = rest;
    if (unit && !strcmp(unit, "%") && !strcmp(rest, "ppm")) {
        *scale = 1e-6;
        return RU_OK;
    }
    if (!unit_matches(rest, unit)) {
        for (size_t i = 0; i < sizeof prefixes / sizeof prefixes[0]; i++) {
            size_t n = strlen(prefixes[i].text);
            if (strncmp(rest, prefixes[i].text, n) == 0) {
                *scale = prefixes[i].scale;
                u = rest + n;
                break;
            }
        }
    }
    if (!u[0])
        return RU_OK;
    if (unit_matches(u, unit)) {
        *percent = strcmp(unit, "%") == 0;
        return RU_OK;
    }
    const char *want = unit ? unit : "a plain number";
    if (is_known_unit(u))
        return fail(why, whylen, "unit %s does not fit, expected %s", u, want);
    if (is_known_unit(rest))
        return fail(why, whylen, "unit %s does not fit, expected %s", rest, want);
    return fail(why, whylen, "unexpected text '%s' after the number (expected %s%s)",
                rest, unit ? "an SI prefix and unit " : "an SI prefix or ",
                unit ? unit : "nothing");
}

ru_status ru_value_parse(const char *text, const char *unit, double *out, char *why,
                         size_t whylen)
{
    if (!text || !text[0])
        return fail(why, whylen, "empty value");
    size_t n = number_length(text);
    if (n == 0)
        return fail(why, whylen, "'%s' is not a number", text);
    if (n >= 64)
        return fail(why, whylen, "number '%s' is too long", text);
    char digits[64];
    memcpy(digits, text, n);
    digits[n] = '\0';
    double scale;
    int percent;
    ru_status s = parse_suffix(text + n, unit, &scale, &percent, why, whylen);
    if (s != RU_OK)
        return s;
    errno = 0;
    double v = strtod(digits, NULL);
    if (errno == ERANGE || !isfinite(v))
        return fail(why, whylen, "'%s' is out of range", text);
    v *= scale;
    if (percent)
        v /= 100.0;
    if (!isfinite(v))
        return fail(why, whylen, "'%s' is out of range", text);
    *out = v;
    return RU_OK;
}
