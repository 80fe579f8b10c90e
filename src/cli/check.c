/* check.c: `ringup check FILE`: validate a circuit file and list what it holds. */
#include "cli.h"

#include "ringup/format.h"
#include "ringup/json.h"
#include "ringup/system.h"

#include <stdio.h>
#include <string.h>

static void part_value(const ru_part *p, char *buf, size_t size)
{
    static const char *const unit[] = {"ohm", "F", "H"};
    char v[32];
    switch (p->type) {
    case RU_PART_RESISTOR:
    case RU_PART_CAPACITOR:
    case RU_PART_INDUCTOR:
        ru_format_si(p->value, unit[p->type], 4, buf, size);
        if (p->type == RU_PART_INDUCTOR && p->series_ohm > 0) {
            size_t l = strlen(buf);
            snprintf(buf + l, size - l, " + %s", ru_format_si(p->series_ohm, "ohm", 3, v, sizeof v));
        }
        break;
    case RU_PART_SUPPLY:
    case RU_PART_CURRENT: {
        const char *u = p->type == RU_PART_SUPPLY ? "V" : "A";
        const ru_wave *w = &p->wave;
        if (w->kind == RU_WAVE_DC)
            ru_format_si(w->value, u, 4, buf, size);
        else if (w->kind == RU_WAVE_SINE)
            snprintf(buf, size, "sine %g %s at %g Hz", w->amplitude, u, w->freq_hz);
        else
            snprintf(buf, size, "%s %g -> %g %s", w->kind == RU_WAVE_STEP ? "step" : "pulse",
                     w->v0, w->v1, u);
        break;
    }
    case RU_PART_POLY:
        snprintf(buf, size, "%d coefficients", p->ncoeffs);
        break;
    case RU_PART_AMPLIFIER:
        snprintf(buf, size, "%s%s%s", ru_law_name(p->amp.law), p->amp.model[0] ? " / " : "",
                 p->amp.model);
        break;
    default:
        buf[0] = '\0';
    }
}

static void print_text(const ru_circuit *c, const ru_system *s)
{
    size_t np = ru_circuit_part_count(c), nn = ru_circuit_node_count(c);
    char sbuf[32];
    printf("%s: %s\n", ru_circuit_file(c), ru_circuit_title(c)[0] ? ru_circuit_title(c) : "(no title)");
    printf("%zu parts, %zu nodes besides ground, %zu states\n", np, nn - 1, ru_system_size(s));
    for (size_t i = 0; i < np; i++) {
        const ru_part *p = ru_circuit_part(c, i);
        char v[96];
        part_value(p, v, sizeof v);
        int nt = p->type == RU_PART_AMPLIFIER ? 3 : 2;
        printf("  %-8s %-17s", p->name, ru_part_type_name(p->type));
        for (int k = 0; k < nt; k++)
            printf("%s%s", k ? "," : " ", ru_circuit_node_name(c, p->node[k]));
        printf("  %s\n", v);
    }
    printf("states:");
    for (size_t i = 0; i < ru_system_size(s); i++)
        printf(" %s", ru_system_state_name(s, i));
    printf("\nstray capacitance: %s from every free node to ground (set `stray:` to change)\n",
           ru_format_si(ru_circuit_stray_f(c), "F", 3, sbuf, sizeof sbuf));
    if (ru_circuit_warning_count(c) == 0)
        printf("no warnings\n");
}

static void print_json(const ru_circuit *c, const ru_system *s)
{
    ru_json j;
    ru_json_init(&j, stdout, 1);
    ru_json_begin_object(&j, NULL);
    ru_json_string(&j, "file", ru_circuit_file(c));
    ru_json_string(&j, "title", ru_circuit_title(c));
    ru_json_number(&j, "stray_f", ru_circuit_stray_f(c));
    ru_json_begin_array(&j, "parts");
    for (size_t i = 0; i < ru_circuit_part_count(c); i++) {
        const ru_part *p = ru_circuit_part(c, i);
        int nt = p->type == RU_PART_AMPLIFIER ? 3 : 2;
        ru_json_begin_object(&j, NULL);
        ru_json_string(&j, "name", p->name);
        ru_json_string(&j, "type", ru_part_type_name(p->type));
        ru_json_begin_array(&j, "nodes");
        for (int k = 0; k < nt; k++)
            ru_json_string(&j, NULL, ru_circuit_node_name(c, p->node[k]));
        ru_json_end_array(&j);
        ru_json_end_object(&j);
    }
    ru_json_end_array(&j);
    ru_json_begin_array(&j, "nodes");
    for (size_t i = 1; i < ru_circuit_node_count(c); i++)
        ru_json_string(&j, NULL, ru_circuit_node_name(c, (int)i));
    ru_json_end_array(&j);
    ru_json_begin_array(&j, "states");
    for (size_t i = 0; i < ru_system_size(s); i++)
        ru_json_string(&j, NULL, ru_system_state_name(s, i));
    ru_json_end_array(&j);
    ru_json_begin_array(&j, "warnings");
    for (size_t i = 0; i < ru_circuit_warning_count(c); i++)
        ru_json_string(&j, NULL, ru_circuit_warning(c, i));
    ru_json_end_array(&j);
    ru_json_end_object(&j);
    ru_json_finish(&j);
}

int cmd_check(int argc, char **argv)
{
    cli_opt opts[] = {{"json", NULL, "print JSON on stdout", NULL}, {NULL, NULL, NULL, NULL}};
    const char *file;
    int rc = cli_parse(argc, argv, "ringup check FILE [--json]",
                       "Reads the circuit file, validates every value and the topology, and "
                       "lists parts,\nnodes, ODE states and warnings.",
                       opts, &file);
    if (rc >= 0)
        return rc;
    int json = cli_get(opts, "json") != NULL;
    ru_circuit *c = NULL;
    if ((rc = cli_load(file, 0, &c)) != 0)
        return rc;
    ru_system *s = NULL;
    ru_error err;
    ru_error_clear(&err);
    if (ru_system_create(c, &s, &err) != RU_OK) {
        rc = cli_fail(&err);
        goto done;
    }
    if (json)
        print_json(c, s);
    else
        print_text(c, s);
done:
    ru_system_destroy(s);
    ru_circuit_destroy(c);
    return rc;
}
