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
    case RU_PART_DIODE:
        snprintf(buf, size, "is %g A, n %g%s%s", p->diode.is_a, p->diode.n,
                 p->diode.model[0] ? " / " : "", p->diode.model);
        break;
    case RU_PART_THERMAL:
        snprintf(buf, size, "%s, %s cold%s%s",
                 p->thermal.kind == RU_THERMAL_LAMP ? "lamp" : "ntc",
                 ru_format_si(p->thermal.r0_ohm, "ohm", 3, v, sizeof v),
                 p->thermal.model[0] ? " / " : "", p->thermal.model);
        break;
    default:
        buf[0] = '\0';
    }
}

/* "a,b" for two-terminal parts; "in,out,ref" (",inv" when it differs from ref). */
static void part_nodes(const ru_circuit *c, const ru_part *p, char *buf, size_t size)
{
    if (p->type != RU_PART_AMPLIFIER) {
        snprintf(buf, size, "%s,%s", ru_circuit_node_name(c, p->node[0]),
                 ru_circuit_node_name(c, p->node[1]));
        return;
    }
    int inv = ru_part_inv_node(p);
    snprintf(buf, size, "in %s, out %s, ref %s%s%s", ru_circuit_node_name(c, p->node[0]),
             ru_circuit_node_name(c, p->node[1]), ru_circuit_node_name(c, p->node[2]),
             inv != p->node[2] ? ", inv " : "", inv != p->node[2] ? ru_circuit_node_name(c, inv) : "");
}

static void print_text(const ru_circuit *c, const ru_system *s)
{
    size_t np = ru_circuit_part_count(c), nn = ru_circuit_node_count(c);
    char sbuf[32];
    printf("%s: %s\n", ru_circuit_file(c), ru_circuit_title(c)[0] ? ru_circuit_title(c) : "(no title)");
    printf("%zu parts, %zu node%s besides ground, %zu states\n", np, nn - 1,
           nn == 2 ? "" : "s", ru_system_size(s));
    for (size_t i = 0; i < np; i++) {
        const ru_part *p = ru_circuit_part(c, i);
        char v[192];
        part_value(p, v, sizeof v);
        char nodes[4 * RU_NAME_MAX + 16];
        part_nodes(c, p, nodes, sizeof nodes);
        printf("  %-8s %-17s %-22s %s\n", p->name, ru_part_type_name(p->type), nodes, v);
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
        if (p->type == RU_PART_AMPLIFIER && ru_part_inv_node(p) != p->node[2])
            ru_json_string(&j, NULL, ru_circuit_node_name(c, ru_part_inv_node(p)));
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
