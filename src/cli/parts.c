/* parts.c: one line per part for the CLI's listings and reports: name, type,
 * nodes and the value that matters (SI prefixes), both as the part's descriptor
 * gives them (ru_part_terminals, ru_part_describe in ringup/part.h). */
#include "cli/cli.h"

#include <stdio.h>
#include <string.h>

/* "a,b" for a part's nodes; other terminal keys by name: "in b, out o, ref gnd"
 * (an amplifier's inv only when it differs from ref; ringup/part.h). */
static void part_nodes(const ru_circuit *c, const ru_part *p, char *buf, size_t size)
{
    ru_terminal t[RU_PART_NODES];
    int n = ru_part_terminals(p, t, RU_PART_NODES);
    size_t len = 0;
    buf[0] = '\0';
    for (int i = 0; i < n && i < RU_PART_NODES && len < size; i++) {
        int same = i > 0 && strcmp(t[i].key, t[i - 1].key) == 0;
        const char *sep = !i ? "" : same ? "," : ", ";
        int bare = strcmp(t[i].key, "nodes") == 0 || same;
        len += (size_t)snprintf(buf + len, size - len, "%s%s%s%s", sep, bare ? "" : t[i].key,
                                bare ? "" : " ", ru_circuit_node_name(c, t[i].node));
    }
}

void cli_part_line(const ru_circuit *c, const ru_part *p, char *buf, size_t size)
{
    char v[192], nodes[4 * RU_NAME_MAX + 16];
    ru_part_describe(p, v, sizeof v);
    part_nodes(c, p, nodes, sizeof nodes);
    snprintf(buf, size, "%-8s %-17s %-22s %s", p->name, ru_part_type_name(p->type), nodes, v);
}

void cli_part_text(const ru_circuit *c, const ru_part *p, char *buf, size_t size)
{
    char v[192], nodes[4 * RU_NAME_MAX + 16];
    ru_part_describe(p, v, sizeof v);
    part_nodes(c, p, nodes, sizeof nodes);
    snprintf(buf, size, "%s, %s (%s): %s", p->name, ru_part_type_name(p->type), nodes, v);
}
