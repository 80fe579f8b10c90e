/* fuzz_params.c: libFuzzer target over `PART.KEY` (get, unit, set) and the sweep
 * specification `PART.KEY=LO:HI:N` (ru_sweep_parse, its points and a variant),
 * against one fixed circuit of our own that has a part of most types. The first
 * byte picks --log and the value set; the rest is the text. */
#include "ringup/loader.h"
#include "ringup/params.h"

#include <math.h>
#include <stddef.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

static const char circuit_text[] =
    "title: every kind of key\n"
    "parts:\n"
    "  VS: {type: supply, nodes: [vcc, gnd], value: 9V, rise: 20u}\n"
    "  R1: {type: resistor, nodes: [vcc, c], value: 4.7k, tol: 1%}\n"
    "  R2: {type: resistor, nodes: [b, gnd], value: 10k}\n"
    "  C1: {type: capacitor, nodes: [c, b], value: 10n, tol: 5%}\n"
    "  L1: {type: inductor, nodes: [c, gnd], value: 1m, series: 2}\n"
    "  G1: {type: poly-conductance, nodes: [b, gnd], coeffs: [0, 1m]}\n"
    "  D1: {type: diode, nodes: [b, gnd], model: signal-diode}\n"
    "  A1: {type: amplifier, in: b, out: c, model: soft-follower}\n"
    "  I1: {type: current, nodes: [gnd, b], value: 1u}\n"
    "measure: {probe: c}\n";

/* The fixed circuit, loaded once (a harness may keep state; the library does not)
 * and cloned for every input, since set_param changes it. */
static ru_circuit *circuit(void)
{
    static ru_circuit *base;
    ru_error err;
    if (!base &&
        ru_circuit_load_string(circuit_text, "params.yaml", RU_MODELS_DIR, &base, &err) != RU_OK)
        __builtin_trap(); /* the fixed circuit must load */
    ru_circuit *c = NULL;
    if (ru_circuit_clone(base, &c) != RU_OK)
        __builtin_trap();
    return c;
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    if (size == 0 || size > 4096)
        return 0;
    char *text = malloc(size);
    if (!text)
        return 0;
    memcpy(text, data + 1, size - 1);
    text[size - 1] = '\0';
    ru_circuit *c = circuit();
    ru_error err;
    double v;
    const char *unit;
    if (ru_circuit_get_param(c, text, &v, &err) == RU_OK &&
        ru_circuit_param_unit(c, text, &unit, &err) == RU_OK) {
        double scale[] = {0, -1, 0.5, 2, 1e300, NAN};
        ru_circuit_set_param(c, text, v * scale[data[0] % 6], &err);
    }
    ru_sweep_spec spec;
    if (ru_sweep_parse(c, text, data[0] & 1, &spec, &err) == RU_OK) {
        if (spec.n < 1 || spec.n > RU_SWEEP_MAX)
            __builtin_trap(); /* the parser bounds N */
        (void)ru_sweep_value(&spec, 0);
        (void)ru_sweep_value(&spec, spec.n - 1);
        ru_circuit *var = NULL;
        if (ru_sweep_variant(c, &spec, spec.n / 2, &var, &err) == RU_OK)
            ru_circuit_destroy(var);
    }
    ru_circuit_destroy(c);
    free(text);
    return 0;
}
