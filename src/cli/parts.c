/* parts.c: one line per part for the CLI's listings and reports: name, type,
 * nodes and the value that matters (SI prefixes). */
#include "cli/cli.h"

#include "ringup/format.h"

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

void cli_part_line(const ru_circuit *c, const ru_part *p, char *buf, size_t size)
{
    char v[192], nodes[4 * RU_NAME_MAX + 16];
    part_value(p, v, sizeof v);
    part_nodes(c, p, nodes, sizeof nodes);
    snprintf(buf, size, "%-8s %-17s %-22s %s", p->name, ru_part_type_name(p->type), nodes, v);
}

void cli_part_text(const ru_circuit *c, const ru_part *p, char *buf, size_t size)
{
    char v[192], nodes[4 * RU_NAME_MAX + 16];
    part_value(p, v, sizeof v);
    part_nodes(c, p, nodes, sizeof nodes);
    snprintf(buf, size, "%s, %s (%s): %s", p->name, ru_part_type_name(p->type), nodes, v);
}
