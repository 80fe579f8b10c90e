/* fuzz_value.c: libFuzzer target over the SI value parser (ru_value_parse) with
 * every unit the circuit file knows: the first byte picks the unit, the rest is
 * the text. A parsed value must be finite; a refusal must say why. */
#include "ringup/loader.h"

#include <math.h>
#include <stddef.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

static const char *const units[] = {NULL, "", "ohm", "F", "H", "V", "A", "s", "Hz",
                                    "C", "V/s", "K/W", "J/K", "K", "S", "%"};

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    if (size == 0 || size > 8192)
        return 0;
    const char *unit = units[data[0] % (sizeof units / sizeof units[0])];
    char *text = malloc(size);
    if (!text)
        return 0;
    memcpy(text, data + 1, size - 1);
    text[size - 1] = '\0';
    double v = 0;
    char why[128];
    why[0] = '\0';
    if (ru_value_parse(text, unit, &v, why, sizeof why) == RU_OK) {
        if (!isfinite(v))
            __builtin_trap(); /* the parser promises a finite value */
    } else if (!why[0]) {
        __builtin_trap(); /* a refusal says why */
    }
    free(text);
    return 0;
}
