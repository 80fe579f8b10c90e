/* check.c: `ringup check FILE`: validate a circuit file and list what it holds. */
#include "cli/cli.h"

#include "ringup/format.h"
#include "ringup/json.h"
#include "ringup/measure.h"
#include "ringup/smallsig.h"
#include "ringup/stray.h"
#include "ringup/system.h"
#include "ringup/transient.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* The run and measure sections as they will be used (defaults filled in). */
static void print_settings(const ru_circuit *c)
{
    static const char *const acc[] = {"draft", "normal", "precise"};
    const ru_run_opts *ro = ru_circuit_run_opts_const(c);
    const ru_measure_opts *mo = ru_circuit_measure_opts_const(c);
    char a[32], b[32];
    printf("run: stop %s, sample %s, accuracy %s, kick ",
           ro->stop_auto ? "auto" : ru_format_si(ro->stop_s, "s", 4, a, sizeof a),
           ro->sample_s > 0 ? ru_format_si(ro->sample_s, "s", 4, b, sizeof b) : "auto",
           acc[ro->accuracy]);
    if (ro->kick == RU_KICK_PRESET) {
        printf("preset");
        for (int i = 0; i < ro->npreset; i++)
            printf(" %s=%s", ru_circuit_node_name(c, ro->preset_node[i]),
                   ru_format_si(ro->preset_v[i], "V", 4, a, sizeof a));
    } else {
        printf("%s", ro->kick == RU_KICK_NOISE ? "noise" : "power-on");
        if (ru_run_opts_noise(ro))
            printf(" with thermal noise (seed %lu)", ro->seed);
        else
            printf(", noise off");
    }
    printf("\nmeasure: probe ");
    if (mo->probe_pos < 0)
        printf("(the first free node)");
    else if (mo->probe_neg > 0)
        printf("%s-%s", ru_circuit_node_name(c, mo->probe_pos),
               ru_circuit_node_name(c, mo->probe_neg));
    else
        printf("%s", ru_circuit_node_name(c, mo->probe_pos));
    printf(", loop %s, start-up level %g %%, growth window %g %% to %g %%\n",
           mo->loop[0] ? mo->loop : "(none)", 100 * mo->startup_level, 100 * mo->growth_lo,
           100 * mo->growth_hi);
}

/* The node names of capacitor group `ref` ("a, b"), or of node k alone. */
static void group_text(const ru_circuit *c, const ru_system *s, int ref, char *buf,
                       size_t size)
{
    size_t len = 0;
    buf[0] = 0;
    for (size_t i = 1; i < ru_circuit_node_count(c) && len + 1 < size; i++) {
        int k = ru_system_node_state(s, (int)i);
        if (k >= 0 && ru_system_state_group(s, (size_t)k) == ref)
            len += (size_t)snprintf(buf + len, size - len, "%s%s", len ? ", " : "",
                                    ru_circuit_node_name(c, (int)i));
    }
}

/* Which nodes are algebraic, and which integrator a run takes. */
static void print_algebraic(const ru_circuit *c, const ru_system *s)
{
    char buf[1024];
    size_t na = 0;
    for (size_t i = 1; i < ru_circuit_node_count(c); i++) {
        int k = ru_system_node_state(s, (int)i);
        if (k >= 0 && ru_system_state_kind(s, (size_t)k) == RU_STATE_ALGEBRAIC)
            printf("%s%s", na++ ? ", " : "algebraic nodes (no capacitance: KCL fixes their "
                                         "voltage at every instant): ",
                   ru_circuit_node_name(c, (int)i));
    }
    if (na)
        printf("\n");
    for (size_t k = 0; k < ru_system_size(s); k++)
        if (ru_system_state_kind(s, k) == RU_STATE_COMMON) {
            group_text(c, s, (int)k, buf, sizeof buf);
            printf("capacitor group with no capacitance to ground (its common level is "
                   "algebraic): %s\n", buf);
        }
    ru_transient_opts o;
    ru_transient_opts_for(ru_circuit_run_opts_const(c)->accuracy, &o);
    ru_solver_stats st;
    memset(&st, 0, sizeof st);
    ru_transient_plan(s, &o, &st.integrator, &st.linsol);
    printf("transient engine: %s (%s)\n", ru_transient_engine_name(&st),
           ru_system_algebraic_count(s) ? "a DAE: the nodes without capacitance need IDA"
           : st.integrator == RU_INTEGRATOR_IDA ? "large: sparse Newton matrix"
                                                : "small ODE");
}

static void print_text(const ru_circuit *c, const ru_system *s)
{
    size_t np = ru_circuit_part_count(c), nn = ru_circuit_node_count(c);
    char sbuf[32];
    printf("%s: %s\n", ru_circuit_file(c), ru_circuit_title(c)[0] ? ru_circuit_title(c) : "(no title)");
    printf("%zu part%s, %zu node%s besides ground, %zu states\n", np, np == 1 ? "" : "s", nn - 1,
           nn == 2 ? "" : "s", ru_system_size(s));
    for (size_t i = 0; i < np; i++) {
        const ru_part *p = ru_circuit_part(c, i);
        char line[512];
        cli_part_line(c, p, line, sizeof line);
        printf("  %s\n", line);
    }
    printf("states:");
    for (size_t i = 0; i < ru_system_size(s); i++)
        printf(" %s", ru_system_state_name(s, i));
    printf("\nstray capacitance: %s from every free node to ground",
           ru_format_si(ru_circuit_stray_f(c), "F", 3, sbuf, sizeof sbuf));
    for (size_t i = 1; i < nn; i++)
        if (ru_circuit_node_stray_set(c, (int)i))
            printf(", %s at %s",
                   ru_format_si(ru_circuit_node_stray_f(c, (int)i), "F", 3, sbuf, sizeof sbuf),
                   ru_circuit_node_name(c, (int)i));
    printf(" (set `stray:` to change)\n");
    if (ru_circuit_temp_c(c) != RU_TEMP_REF_C)
        printf("temperature: %g C (temp keys of parts that give none, tempco, thermal "
               "noise)\n", ru_circuit_temp_c(c));
    print_algebraic(c, s);
    print_settings(c);
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
    ru_json_begin_object(&j, "node_stray_f");
    for (size_t i = 1; i < ru_circuit_node_count(c); i++)
        if (ru_circuit_node_stray_set(c, (int)i))
            ru_json_number(&j, ru_circuit_node_name(c, (int)i),
                           ru_circuit_node_stray_f(c, (int)i));
    ru_json_end_object(&j);
    ru_json_begin_array(&j, "parts");
    for (size_t i = 0; i < ru_circuit_part_count(c); i++) {
        const ru_part *p = ru_circuit_part(c, i);
        ru_terminal t[RU_PART_NODES];
        int nt = ru_part_terminals(p, t, RU_PART_NODES);
        ru_json_begin_object(&j, NULL);
        ru_json_string(&j, "name", p->name);
        ru_json_string(&j, "type", ru_part_type_name(p->type));
        ru_json_begin_array(&j, "nodes");
        for (int k = 0; k < nt && k < RU_PART_NODES; k++)
            ru_json_string(&j, NULL, ru_circuit_node_name(c, t[k].node));
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
    ru_json_begin_array(&j, "algebraic_nodes");
    for (size_t i = 1; i < ru_circuit_node_count(c); i++) {
        int k = ru_system_node_state(s, (int)i);
        if (k >= 0 && ru_system_state_kind(s, (size_t)k) == RU_STATE_ALGEBRAIC)
            ru_json_string(&j, NULL, ru_circuit_node_name(c, (int)i));
    }
    ru_json_end_array(&j);
    ru_json_begin_array(&j, "capacitor_groups");
    for (size_t k = 0; k < ru_system_size(s); k++) {
        if (ru_system_state_kind(s, k) != RU_STATE_COMMON)
            continue;
        ru_json_begin_array(&j, NULL);
        for (size_t i = 1; i < ru_circuit_node_count(c); i++) {
            int q = ru_system_node_state(s, (int)i);
            if (q >= 0 && ru_system_state_group(s, (size_t)q) == (int)k)
                ru_json_string(&j, NULL, ru_circuit_node_name(c, (int)i));
        }
        ru_json_end_array(&j);
    }
    ru_json_end_array(&j);
    ru_transient_opts o;
    ru_transient_opts_for(ru_circuit_run_opts_const(c)->accuracy, &o);
    ru_solver_stats st;
    memset(&st, 0, sizeof st);
    ru_transient_plan(s, &o, &st.integrator, &st.linsol);
    ru_json_string(&j, "engine", ru_transient_engine_name(&st));
    ru_json_begin_array(&j, "warnings");
    for (size_t i = 0; i < ru_circuit_warning_count(c); i++)
        ru_json_string(&j, NULL, ru_circuit_warning(c, i));
    ru_json_end_array(&j);
    ru_json_end_object(&j);
    ru_json_finish(&j);
}

/* The stray-capacitance check (ringup/stray.h) at the operating point, when there
 * is one: its warning printed and kept with the file's warnings. */
static void stray_warning(ru_circuit *c, const ru_system *s)
{
    int floating;
    size_t n = ru_system_size(s);
    double *x = calloc(n ? n : 1, sizeof *x);
    ru_error e;
    ru_error_clear(&e);
    ru_stray_result r;
    if (x && !ru_circuit_find_floating_node(c, &floating) &&
        ru_oppoint_solve(s, x, 0, NULL, &e) == RU_OK &&
        ru_stray_check(c, s, x, &r, &e) == RU_OK && r.warn) {
        char text[RU_NOTE_MAX * 2];
        ru_stray_warning(c, &r, text, sizeof text);
        fprintf(stderr, "%s\n", text);
        ru_circuit_add_warning(c, text);
    }
    free(x);
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
    stray_warning(c, s);
    if (json)
        print_json(c, s);
    else
        print_text(c, s);
done:
    ru_system_destroy(s);
    ru_circuit_destroy(c);
    return rc;
}
