/* fuzz_loader.c: libFuzzer target over the whole input path of a circuit file:
 * the byte checks, the YAML tree, the loader (every part type, presets from
 * models/), the circuit checks, and the system built from it as `ringup check`
 * builds it. Any bytes must give RU_OK or an error with a message; a crash, a
 * hang, a leak or a sanitizer report is a finding. Built by RU_FUZZ (clang
 * -fsanitize=fuzzer); replay.c runs the same function over stored inputs as a
 * normal test. */
#include "ringup/loader.h"
#include "ringup/system.h"

#include <stddef.h>
#include <stdint.h>
#include <string.h>

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    ru_circuit *c = NULL;
    ru_error err;
    ru_status st = ru_circuit_load_buffer((const char *)data, size, "fuzz.yaml",
                                          RU_MODELS_DIR, &c, &err);
    if (st != RU_OK) {
        if (!err.msg[0] || strchr(err.msg, '\n'))
            __builtin_trap(); /* every refusal has a one-line message */
        return 0;
    }
    ru_system *s = NULL;
    if (ru_system_create(c, &s, &err) == RU_OK)
        ru_system_destroy(s);
    ru_circuit_destroy(c);
    return 0;
}
