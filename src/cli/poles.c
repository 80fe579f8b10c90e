/* poles.c: `ringup poles FILE`: operating point, poles, dominant pair, loop gain. */
#include "cli/cli.h"

#include "ringup/descfn.h"
#include "ringup/format.h"
#include "ringup/json.h"
#include "ringup/plot.h"
#include "ringup/smallsig.h"
#include "ringup/system.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

typedef struct poles_result {
    ru_system *sys;
    double *x;          /* operating point */
    ru_pole *poles;
    int dom;            /* index of the dominant pair or -1 */
    ru_loop *lh;        /* the loop named (--loop, --loop-node or the file), or NULL */
    ru_loop_summary loop;
    int have_loop;
    int probe_pos, probe_neg; /* probe for the amplitude curve */
    cli_amp *amp;             /* --amplitude: curve, table and balance, or NULL */
    double loop_f[RU_RUN_DATA_LOOP_POINTS], loop_mag[RU_RUN_DATA_LOOP_POINTS],
        loop_ph[RU_RUN_DATA_LOOP_POINTS];
    size_t nloop;       /* points of the loop-gain sweep held */
} poles_result;

static void print_text(const ru_circuit *c, const poles_result *p)
{
    size_t n = ru_poles_count(p->sys);
    char a[40], b[40];
    printf("%s: %s\n\noperating point:\n", ru_circuit_file(c), ru_circuit_title(c));
    for (size_t i = 1; i < ru_circuit_node_count(c); i++)
        printf("  %-12s %s\n", ru_circuit_node_name(c, (int)i),
               ru_format_si(ru_system_node_voltage_dc(p->sys, (int)i, p->x), "V", 5, a,
                            sizeof a));
    printf("\npoles (real part 1/s, imaginary part as Hz):\n");
    for (size_t i = 0; i < n; i++)
        printf("  %+14.6g /s  %+14.6g Hz%s\n", p->poles[i].re_per_s,
               p->poles[i].im_rad_per_s / (2 * M_PI),
               (int)i == p->dom ? "   <- dominant pair" : "");
    if (p->dom >= 0) {
        const ru_pole *d = &p->poles[p->dom];
        printf("\ndominant pair: growth rate %.6g /s at %s: %s\n", d->re_per_s,
               ru_format_si(d->im_rad_per_s / (2 * M_PI), "Hz", 5, a, sizeof a),
               d->re_per_s > 0   ? "right of the jw axis, it starts"
               : d->re_per_s < 0 ? "left of the jw axis, it does not start"
                                 : "on the jw axis (no loss, no gain): it neither grows "
                                   "nor decays");
        if (d->re_per_s > 0)
            printf("  grows 10x every %s\n",
                   ru_format_si(log(10.0) / d->re_per_s, "s", 3, b, sizeof b));
    } else {
        printf("\nno complex pole pair: nothing here oscillates\n");
    }
    if (p->amp)
        cli_amp_print(p->amp, ru_circuit_node_name(c, p->probe_pos));
    if (p->have_loop) {
        char what[RU_LOOP_LABEL_MAX + 16];
        cli_loop_title(p->lh, what, sizeof what);
        if (p->loop.found)
            printf("%s: phase 0 at %s, |L| = %.5g (%+.2f dB)\n", what,
                   ru_format_si(p->loop.crossover_hz, "Hz", 5, a, sizeof a), p->loop.gain,
                   p->loop.margin_db);
        else
            printf("%s: the phase does not pass 0 degrees in the range searched\n",
                   what);
    }
}

static void print_json(const ru_circuit *c, const poles_result *p)
{
    size_t n = ru_poles_count(p->sys);
    ru_json j;
    ru_json_init(&j, stdout, 1);
    ru_json_begin_object(&j, NULL);
    ru_json_begin_object(&j, "operating_point_v");
    for (size_t i = 1; i < ru_circuit_node_count(c); i++)
        ru_json_number(&j, ru_circuit_node_name(c, (int)i),
                       ru_system_node_voltage_dc(p->sys, (int)i, p->x));
    ru_json_end_object(&j);
    ru_json_begin_array(&j, "poles");
    for (size_t i = 0; i < n; i++) {
        ru_json_begin_object(&j, NULL);
        ru_json_number(&j, "re_per_s", p->poles[i].re_per_s);
        ru_json_number(&j, "im_rad_per_s", p->poles[i].im_rad_per_s);
        ru_json_end_object(&j);
    }
    ru_json_end_array(&j);
    if (p->dom >= 0) {
        ru_json_begin_object(&j, "dominant");
        ru_json_number(&j, "growth_rate_per_s", p->poles[p->dom].re_per_s);
        ru_json_number(&j, "frequency_hz", p->poles[p->dom].im_rad_per_s / (2 * M_PI));
        ru_json_end_object(&j);
    } else {
        ru_json_null(&j, "dominant");
    }
    if (p->amp)
        cli_amp_json(&j, p->amp);
    if (p->have_loop) {
        ru_json_begin_object(&j, "loop");
        cli_loop_json_id(&j, p->lh);
        ru_json_number(&j, "crossover_hz", p->loop.found ? p->loop.crossover_hz : NAN);
        ru_json_number(&j, "gain_at_crossover", p->loop.found ? p->loop.gain : NAN);
        ru_json_number(&j, "margin_db", p->loop.found ? p->loop.margin_db : NAN);
        ru_json_end_object(&j);
    }
    ru_json_end_object(&j);
    ru_json_finish(&j);
}

/* The probe of the file's measure section, or the first free node. */
static void pick_probe(const ru_circuit *c, poles_result *p)
{
    const ru_measure_opts *mo = ru_circuit_measure_opts_const(c);
    p->probe_pos = mo->probe_pos;
    p->probe_neg = mo->probe_pos >= 0 ? mo->probe_neg : 0;
    for (size_t i = 1; p->probe_pos < 0 && i < ru_circuit_node_count(c); i++)
        if (ru_system_node_state(p->sys, (int)i) >= 0)
            p->probe_pos = (int)i;
}

static ru_status amplitude_curve(const ru_circuit *c, poles_result *p, ru_error *err)
{
    pick_probe(c, p);
    if (p->probe_pos < 0)
        return ru_error_set(err, RU_EINPUT, ru_circuit_file(c), 0, 0,
                            "no free node to probe for the amplitude curve");
    return cli_amp_compute(p->sys, p->x, p->probe_pos, p->probe_neg, p->amp, err);
}

static ru_status compute(const ru_circuit *c, const cli_loop_opts *lo, poles_result *p,
                         ru_error *err)
{
    ru_status st = ru_system_create(c, &p->sys, err);
    if (st != RU_OK)
        return st;
    int fl;
    if (ru_circuit_find_floating_node(c, &fl)) {
        int line, col;
        ru_circuit_node_place(c, fl, &line, &col);
        return ru_error_set(err, RU_EINPUT, ru_circuit_file(c), line, col,
                            "node %s has no DC path to ground: there is no operating "
                            "point (add a resistor to ground)",
                            ru_circuit_node_name(c, fl));
    }
    size_t n = ru_system_size(p->sys);
    p->x = calloc(n ? n : 1, sizeof *p->x);
    p->poles = calloc(n ? n : 1, sizeof *p->poles);
    if (!p->x || !p->poles)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "out of memory");
    if ((st = ru_oppoint_solve(p->sys, p->x, 0, NULL, err)) != RU_OK)
        return st;
    if ((st = ru_poles_compute(p->sys, p->x, p->poles, err)) != RU_OK)
        return st;
    p->dom = ru_poles_dominant(p->poles, ru_poles_count(p->sys));
    if (p->amp && (st = amplitude_curve(c, p, err)) != RU_OK)
        return st;
    st = ru_loop_create_named(p->sys, p->x, lo->part, lo->node, lo->load, &p->lh, err);
    if (st != RU_OK || !p->lh)
        return st;
    double f0 = p->dom >= 0 ? p->poles[p->dom].im_rad_per_s / (2 * M_PI) : 0;
    st = ru_loop_sweep_adaptive(p->lh, f0 > 0 ? f0 / 30 : 1, f0 > 0 ? f0 * 30 : 1e9,
                                RU_LOOP_GRID_POINTS, RU_RUN_DATA_LOOP_POINTS, p->loop_f,
                                p->loop_mag, p->loop_ph, &p->nloop, &p->loop, err);
    p->have_loop = st == RU_OK;
    return st;
}

static int plot_poles(const cli_plot_req *pr, const ru_circuit *c, const poles_result *p,
                      const char *text)
{
    if (!pr->dir && !pr->report)
        return 0;
    ru_pole drift[CLI_AMP_CURVE];
    double amp[CLI_AMP_CURVE];
    size_t nd = p->amp ? p->amp->ncurve : 0;
    for (size_t i = 0; i < nd; i++) {
        drift[i].re_per_s = p->amp->curve[i].growth_rate_per_s;
        drift[i].im_rad_per_s = 2 * M_PI * p->amp->curve[i].frequency_hz;
        amp[i] = p->amp->curve[i].amplitude_v;
    }
    ru_plot_poles pp = {ru_poles_count(p->sys), p->poles, p->dom, nd, amp, drift};
    ru_plot_bode loop = {p->have_loop && ru_loop_node(p->lh)[0] ? 2 : 1,
                         p->have_loop ? ru_loop_label(p->lh) : "",
                         p->nloop, p->loop_f, p->loop_mag, p->loop_ph,
                         p->loop.found ? p->loop.crossover_hz : NAN,
                         p->loop.found ? p->loop.gain : NAN};
    ru_plot_set set = {0};
    set.poles = &pp;
    set.loop = p->have_loop ? &loop : NULL;
    return cli_plot_set(pr, ru_circuit_title(c), &set, text);
}

int cmd_poles(int argc, char **argv)
{
    cli_opt opts[] = {{"loop", "PART", "amplifier whose loop gain is reported", NULL},
                      CLI_LOOP_NODE_OPTS,
                      {"amplitude", NULL,
                       "how the dominant pair drifts as the amplitude grows (describing "
                       "function) and the predicted settled amplitude", NULL},
                      CLI_TEMP_OPT,
                      {"json", NULL, "print JSON on stdout (keys in README)", NULL},
                      CLI_PLOT_OPTS,
                      {NULL, NULL, NULL, NULL}};
    const char *file;
    int rc = cli_parse(argc, argv, "ringup poles FILE [--loop PART | --loop-node NODE [--loop-load PARTS]] "
                       "[--amplitude] [--json]",
                       "Finds the DC operating point (supplies at their final values), the "
                       "poles of the\nlinearized circuit there, the dominant pair and, for "
                       "a named amplifier or node, the loop\ngain with its zero-phase "
                       "crossover (Barkhausen criterion).",
                       opts, &file);
    if (rc >= 0)
        return rc;
    cli_plot_req plots;
    if ((rc = cli_plot_check(opts, &plots)) != 0)
        return rc;
    ru_circuit *c = NULL;
    if ((rc = cli_load(file, cli_get(opts, "json") != NULL, &c)) != 0)
        return rc;
    if ((rc = cli_temp(opts, c)) != 0) {
        ru_circuit_destroy(c);
        return rc;
    }
    poles_result p = {.dom = -1};
    ru_error err;
    ru_error_clear(&err);
    cli_loop_opts lo;
    if ((rc = cli_loop_get(opts, &lo)) != 0) {
        ru_circuit_destroy(c);
        return rc;
    }
    if (cli_get(opts, "amplitude") && !(p.amp = calloc(1, sizeof *p.amp))) {
        ru_circuit_destroy(c);
        return 2;
    }
    ru_status st = compute(c, &lo, &p, &err);
    if (st != RU_OK)
        rc = cli_fail(&err);
    else if (cli_get(opts, "json"))
        print_json(c, &p);
    char *text = NULL;
    if (st == RU_OK) {
        cli_capture cap; /* the text for the report, on the terminal unless --json */
        cli_capture_begin(&cap, plots.report != NULL, !cli_get(opts, "json"));
        if (cli_capture_printing(&cap))
            print_text(c, &p);
        text = cli_capture_end(&cap);
        rc = plot_poles(&plots, c, &p, text);
    }
    free(text);
    free(p.x);
    free(p.poles);
    free(p.amp);
    ru_loop_destroy(p.lh);
    ru_system_destroy(p.sys);
    ru_circuit_destroy(c);
    return rc;
}
