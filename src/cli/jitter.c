/* jitter.c: `ringup jitter FILE`: phase noise by the perturbation projection vector
 * along the periodic steady state, period and RMS jitter, Leeson's formula beside it
 * (ringup/tone.h, ringup/ppv.h). */
#include "cli/cli.h"

#include "ringup/circuit.h"
#include "ringup/loader.h"
#include "ringup/outfile.h"
#include "ringup/format.h"
#include "ringup/json.h"
#include "ringup/plot.h"
#include "ringup/tone.h"

#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* Rows of the L(fm) table: the points nearest 10, 100, 1k, ... and the last. */
static void print_table(const ru_tone_noise *nv)
{
    char a[32];
    printf("\n  %-12s %-14s %s\n", "offset", "L(fm) PPV", nv->leeson_dbc ? "Leeson" : "");
    for (size_t i = 0; i < nv->npts; i++) {
        double l = log10(nv->offset_hz[i]);
        int decade = fabs(l - round(l)) < 0.02;
        if (!decade && i + 1 != nv->npts)
            continue;
        printf("  %-12s %7.1f dBc/Hz", ru_format_si(nv->offset_hz[i], "Hz", 3, a, sizeof a),
               nv->ppv_dbc[i]);
        if (nv->leeson_dbc)
            printf("   %7.1f dBc/Hz", nv->leeson_dbc[i]);
        printf("\n");
    }
}

static void print_sources(const ru_circuit *c, const ru_tone_noise *nv)
{
    printf("  noise sources      ");
    size_t shown = 0;
    for (size_t k = 0; k < nv->ppv.nsrc; k++) {
        const ru_ppv_source *s = &nv->ppv.src[k];
        double share = nv->ppv.c_s > 0 ? 100.0 * s->c_s / nv->ppv.c_s : 0.0;
        if (share < 0.05 && nv->ppv.nsrc > 6)
            continue;
        printf("%s%s %s %.1f %%",
               !shown ? "" : shown % 4 == 0 ? ",\n                     " : ", ",
               ru_circuit_part(c, (size_t)s->info.part)->name, s->info.label, share);
        shown++;
    }
    printf("%s (share of c)\n", shown ? "" : "none");
}

/* Leeson's far-out floor 2FkT/Ps (dBc/Hz). */
static double leeson_floor_dbc(const ru_tone_noise *nv)
{
    return 10 * log10(2 * nv->noise_factor * 1.380649e-23 * (nv->temp_c + 273.15) /
                      nv->carrier_w);
}

static void print_text(const ru_circuit *c, const ru_tone *t)
{
    ru_steady_view v;
    ru_tone_steady(t, &v);
    ru_tone_noise nv;
    ru_tone_noise_get(t, &nv);
    char a[40], b[40], d[40];
    printf("%s: %s\n", ru_circuit_file(c), ru_circuit_title(c));
    if (!nv.have) {
        printf("no periodic steady state on %s, so no phase noise: %s\n", ru_tone_probe(t),
               v.note);
        return;
    }
    printf("phase noise on %s by the perturbation projection vector "
           "(Demir-Mehrotra-Roychowdhury), %.4g C\n\n", ru_tone_probe(t), nv.temp_c);
    if (nv.ppv.nsrc == 0) {
        printf("  carrier            %s\nnote: %s\n",
               ru_format_si(v.frequency_hz, "Hz", 8, a, sizeof a), nv.note);
        return;
    }
    printf("  carrier            %s, amplitude %s\n",
           ru_format_si(v.frequency_hz, "Hz", 8, a, sizeof a),
           ru_format_si(v.amplitude_v, "V", 5, b, sizeof b));
    printf("  phase diffusion c  %.4g s   (Lorentzian half width pi f0^2 c = %s)\n",
           nv.ppv.c_s, ru_format_si(nv.lorentz_hz, "Hz", 3, a, sizeof a));
    double fc_max = 0.0;
    for (size_t k = 0; k < nv.ppv.nsrc; k++)
        fc_max = fmax(fc_max, nv.ppv.src[k].info.flicker_corner_hz);
    if (nv.ppv.c1_s_hz > 1e-9 * fc_max * nv.ppv.c_s)
        printf("  flicker            c1 = %.4g s Hz: 1/f^3 below %s\n", nv.ppv.c1_s_hz,
               ru_format_si(nv.flicker_hz, "Hz", 3, a, sizeof a));
    else if (fc_max > 0) /* within round-off of zero */
        printf("  flicker            no 1/f^3 region: the 1/f noise (corner %s) reaches the "
               "phase only\n                     through the PPV's mean, which vanishes "
               "here\n                     (as on any odd-symmetric orbit)\n",
               ru_format_si(fc_max, "Hz", 3, a, sizeof a));
    printf("  period jitter      %s   (sqrt(c T))\n",
           ru_format_si(nv.period_jitter_s, "s", 4, a, sizeof a));
    printf("  RMS jitter         %s over %s .. %s\n",
           ru_format_si(nv.rms_jitter_s, "s", 4, a, sizeof a),
           ru_format_si(nv.band_lo_hz, "Hz", 3, b, sizeof b),
           ru_format_si(nv.band_hi_hz, "Hz", 4, d, sizeof d));
    print_sources(c, &nv);
    print_table(&nv);
    if (nv.have_leeson)
        printf("\nLeeson: loaded Q %.4g (%s), carrier power %s (AC power in the "
               "resistances), F = %.3g%s\n",
               nv.q_loaded, nv.q_from_poles ? "from the poles with the active part off"
                                            : "from the loop gain's phase slope",
               ru_format_si(nv.carrier_w, "W", 4, a, sizeof a), nv.noise_factor,
               nv.leeson_flicker_hz > 0 ? ", flicker corner of the sources" : "");
    if (nv.have_leeson) {
        printf("        regions: ");
        if (nv.leeson_flicker_hz > 0 && nv.leeson_flicker_hz < nv.leeson_corner_hz)
            printf("1/f^3 below %s (the sources' flicker corner), ",
                   ru_format_si(nv.leeson_flicker_hz, "Hz", 3, a, sizeof a));
        else if (nv.leeson_flicker_hz > 0)
            printf("1/f^3 below %s (f0/2QL, under the flicker corner %s), 1/f above it, ",
                   ru_format_si(nv.leeson_corner_hz, "Hz", 3, a, sizeof a),
                   ru_format_si(nv.leeson_flicker_hz, "Hz", 3, b, sizeof b));
        if (!(nv.leeson_flicker_hz >= nv.leeson_corner_hz))
            printf("1/f^2 up to %s (f0/2QL), ",
                   ru_format_si(nv.leeson_corner_hz, "Hz", 3, a, sizeof a));
        printf("floor %.1f dBc/Hz (2FkT/Ps)%s\n", leeson_floor_dbc(&nv),
               nv.leeson_corner_hz > 0.5 * nv.f0_hz ? " beyond f0/2" : "");
        printf("        the PPV's 1/f^2 level equals Leeson's with F = %.3g (%.1f dB)\n",
               nv.effective_noise_factor, 10 * log10(nv.effective_noise_factor));
    }
    if (nv.note && nv.note[0])
        printf("\nnote: %s\n", nv.note);
    printf("check: v1 . x' = 1 within %.1g over the period, v1 periodic within %.1g; "
           "%.3f s\n", nv.ppv.norm_error, nv.ppv.periodicity_error, v.cpu_s + nv.ppv.cpu_s);
}

static void json_curve(ru_json *j, const char *key, const double *f, const double *l,
                       size_t n)
{
    ru_json_begin_array(j, key);
    for (size_t i = 0; i < n; i++) {
        ru_json_begin_object(j, NULL);
        ru_json_number(j, "offset_hz", f[i]);
        ru_json_number(j, "dbc_per_hz", l[i]);
        ru_json_end_object(j);
    }
    ru_json_end_array(j);
}

static void json_sources(ru_json *j, const ru_circuit *c, const ru_tone_noise *nv)
{
    ru_json_begin_array(j, "sources");
    for (size_t k = 0; k < nv->ppv.nsrc; k++) {
        const ru_ppv_source *s = &nv->ppv.src[k];
        ru_json_begin_object(j, NULL);
        ru_json_string(j, "part", ru_circuit_part(c, (size_t)s->info.part)->name);
        ru_json_string(j, "kind", s->info.label);
        ru_json_number(j, "flicker_corner_hz", s->info.flicker_corner_hz);
        ru_json_number(j, "phase_diffusion_s", s->c_s);
        ru_json_number(j, "share_percent",
                       nv->ppv.c_s > 0 ? 100.0 * s->c_s / nv->ppv.c_s : NAN);
        ru_json_end_object(j);
    }
    ru_json_end_array(j);
}

static void print_json(const ru_circuit *c, const ru_tone *t)
{
    ru_steady_view v;
    ru_tone_steady(t, &v);
    ru_tone_noise nv;
    ru_tone_noise_get(t, &nv);
    ru_json j;
    ru_json_init(&j, stdout, 1);
    ru_json_begin_object(&j, NULL);
    ru_json_string(&j, "probe", ru_tone_probe(t));
    ru_json_bool(&j, "found", nv.have);
    ru_json_number(&j, "frequency_hz", nv.have ? v.frequency_hz : NAN);
    ru_json_number(&j, "period_s", nv.have ? v.period_s : NAN);
    ru_json_number(&j, "amplitude_v", nv.have ? v.amplitude_v : NAN);
    ru_json_number(&j, "temp_c", nv.have ? nv.temp_c : NAN);
    ru_json_number(&j, "phase_diffusion_s", nv.have ? nv.ppv.c_s : NAN);
    ru_json_number(&j, "flicker_coefficient_s_hz", nv.have ? nv.ppv.c1_s_hz : NAN);
    ru_json_number(&j, "lorentzian_half_width_hz", nv.have ? nv.lorentz_hz : NAN);
    ru_json_number(&j, "flicker_corner_hz", nv.have ? nv.flicker_hz : NAN);
    ru_json_number(&j, "period_jitter_s", nv.have ? nv.period_jitter_s : NAN);
    ru_json_number(&j, "rms_jitter_s", nv.have ? nv.rms_jitter_s : NAN);
    ru_json_begin_array(&j, "band_hz");
    if (nv.have) {
        ru_json_number(&j, NULL, nv.band_lo_hz);
        ru_json_number(&j, NULL, nv.band_hi_hz);
    }
    ru_json_end_array(&j);
    json_curve(&j, "phase_noise", nv.offset_hz, nv.ppv_dbc, nv.have ? nv.npts : 0);
    if (nv.have && nv.ppv.nsrc)
        json_sources(&j, c, &nv);
    if (nv.have_leeson) {
        ru_json_begin_object(&j, "leeson");
        ru_json_number(&j, "loaded_q", nv.q_loaded);
        ru_json_string(&j, "q_from", nv.q_from_poles ? "poles" : "loop phase slope");
        ru_json_number(&j, "carrier_power_w", nv.carrier_w);
        ru_json_number(&j, "noise_factor", nv.noise_factor);
        ru_json_number(&j, "flicker_corner_hz", nv.leeson_flicker_hz);
        ru_json_number(&j, "resonator_corner_hz", nv.leeson_corner_hz);
        ru_json_number(&j, "floor_dbc_per_hz", leeson_floor_dbc(&nv));
        ru_json_number(&j, "effective_noise_factor", nv.effective_noise_factor);
        json_curve(&j, "phase_noise", nv.offset_hz, nv.leeson_dbc, nv.npts);
        ru_json_end_object(&j);
    } else {
        ru_json_null(&j, "leeson");
    }
    ru_json_begin_object(&j, "ppv_check");
    ru_json_number(&j, "normalisation_error", nv.have ? nv.ppv.norm_error : NAN);
    ru_json_number(&j, "periodicity_error", nv.have ? nv.ppv.periodicity_error : NAN);
    ru_json_end_object(&j);
    ru_json_number(&j, "cpu_s", v.cpu_s + (nv.have ? nv.ppv.cpu_s : 0.0));
    ru_json_begin_array(&j, "notes");
    if (!v.found && v.note[0])
        ru_json_string(&j, NULL, v.note);
    if (nv.note && nv.note[0])
        ru_json_string(&j, NULL, nv.note);
    ru_json_end_array(&j);
    ru_json_end_object(&j);
    ru_json_finish(&j);
}

static int plot_jitter(const cli_plot_req *pr, const ru_circuit *c, const ru_tone *t,
                       const char *text)
{
    ru_tone_noise nv;
    ru_tone_noise_get(t, &nv);
    if ((!pr->dir && !pr->report) || !nv.have || !(nv.ppv.c_s > 0))
        return 0;
    ru_plot_phase_noise pn = {nv.f0_hz, nv.npts, nv.offset_hz, nv.ppv_dbc, nv.leeson_dbc,
                              nv.ppv.c_s, nv.lorentz_hz, nv.flicker_hz,
                              nv.have_leeson ? nv.leeson_corner_hz : NAN, nv.period_jitter_s,
                              nv.have_leeson ? nv.leeson_flicker_hz : NAN,
                              nv.have_leeson ? leeson_floor_dbc(&nv) : NAN};
    ru_plot_set set = {0};
    set.phase_noise = &pn;
    return cli_plot_set(pr, ru_circuit_title(c), &set, text);
}

/* phase-noise.csv: offset_hz, ppv_dbc_per_hz, leeson_dbc_per_hz (ringup/outfile.h:
 * temporary + rename). */
static int write_csv(const char *dir, const ru_tone *t)
{
    ru_tone_noise nv;
    ru_tone_noise_get(t, &nv);
    if (!nv.have)
        return 0;
    char path[4096];
    snprintf(path, sizeof path, "%s/phase-noise.csv", dir);
    ru_outfile *f = NULL;
    ru_error err;
    ru_error_clear(&err);
    if (ru_outfile_open(path, &f, &err) != RU_OK)
        return cli_fail(&err);
    FILE *fp = ru_outfile_stream(f);
    fprintf(fp, "offset_hz,ppv_dbc_per_hz,leeson_dbc_per_hz\n");
    for (size_t i = 0; i < nv.npts; i++) {
        fprintf(fp, "%.8g,%.6g", nv.offset_hz[i], nv.ppv_dbc[i]);
        if (nv.leeson_dbc)
            fprintf(fp, ",%.6g\n", nv.leeson_dbc[i]);
        else
            fprintf(fp, ",\n");
    }
    if (ru_outfile_commit(f, &err) != RU_OK) /* any failed write shows here */
        return cli_fail(&err);
    return 0;
}

/* --band LO:HI into the request; returns 0 or 1 after a message. */
static int parse_band(const char *spec, ru_tone_request *rq)
{
    char lo[64], hi[64];
    const char *colon = spec ? strchr(spec, ':') : NULL;
    if (!spec)
        return 0;
    if (!colon || (size_t)(colon - spec) >= sizeof lo || strlen(colon + 1) >= sizeof hi) {
        fprintf(stderr, "ringup: --band must be LO:HI in Hz (got '%s')\n", spec);
        return 1;
    }
    memcpy(lo, spec, (size_t)(colon - spec));
    lo[colon - spec] = '\0';
    strcpy(hi, colon + 1);
    char why[128];
    if (ru_value_parse(lo, "Hz", &rq->band_lo_hz, why, sizeof why) != RU_OK ||
        ru_value_parse(hi, "Hz", &rq->band_hi_hz, why, sizeof why) != RU_OK ||
        !(rq->band_lo_hz >= RU_CLI_FREQ_MIN_HZ) || !(rq->band_hi_hz > rq->band_lo_hz) ||
        !(rq->band_hi_hz <= RU_CLI_FREQ_MAX_HZ)) {
        fprintf(stderr, "ringup: --band must be LO:HI in Hz with 1 mHz <= LO < HI <= 1 THz "
                        "(got '%s')\n",
                spec);
        return 1;
    }
    return 0;
}

static int jitter_request(const cli_opt *opts, ru_tone_request *rq)
{
    ru_tone_request_default(rq);
    rq->jitter = 1;
    double v = 0;
    if (!cli_value(opts, "temp", "C", &v))
        return 1;
    if (cli_get(opts, "temp")) {
        if (!(v > -273.15 && v <= 1000)) {
            fprintf(stderr, "ringup: --temp must be above -273.15 C and at most 1000 C "
                            "(got '%s')\n",
                    cli_get(opts, "temp"));
            return 1;
        }
        rq->temp_c = v;
    }
    if (!cli_range(opts, "noise-factor", "", 1, 1e6, &v)) /* F >= 1: Friis */
        return 1;
    if (cli_get(opts, "noise-factor"))
        rq->noise_factor = v;
    if (parse_band(cli_get(opts, "band"), rq))
        return 1;
    rq->loop_part = cli_get(opts, "loop");
    rq->out_dir = cli_get(opts, "out");
    return rq->out_dir ? cli_make_dir(rq->out_dir) : 0;
}

int cmd_jitter(int argc, char **argv)
{
    cli_opt opts[] = {{"temp", "C", "temperature of the resistors (27)", NULL},
                      {"band", "LO:HI", "offsets of the RMS jitter (10 Hz : f0/2)", NULL},
                      {"noise-factor", "F", "Leeson's noise factor (1)", NULL},
                      {"loop", "PART", "amplifier whose loop is broken for the loaded Q",
                       NULL},
                      {"out", "DIR", "write DIR/steady.csv and DIR/phase-noise.csv", NULL},
                      {"json", NULL, "print JSON on stdout (keys in README)", NULL},
                      CLI_PLOT_OPTS,
                      {NULL, NULL, NULL, NULL}};
    const char *file;
    int rc = cli_parse(argc, argv, "ringup jitter FILE [--temp C] [--band LO:HI] [--json]",
                       "Phase noise and jitter of the settled tone by the perturbation "
                       "projection vector\n(Demir, Mehrotra, Roychowdhury 2000) along the "
                       "periodic steady state, from the\nparts' thermal and shot noise and "
                       "the amplifiers' en and inoise, with Leeson's\nformula beside it.",
                       opts, &file);
    if (rc >= 0)
        return rc;
    cli_plot_req plots;
    if ((rc = cli_plot_check(opts, &plots)) != 0)
        return rc;
    ru_tone_request rq;
    if ((rc = jitter_request(opts, &rq)) != 0)
        return rc;
    ru_circuit *c = NULL;
    if ((rc = cli_load(file, cli_get(opts, "json") != NULL, &c)) != 0)
        return rc;
    if (!cli_get(opts, "temp")) /* the resistors are at the circuit's temperature */
        rq.temp_c = ru_circuit_temp_c(c);
    ru_tone *t = NULL;
    ru_error err;
    ru_error_clear(&err);
    if (ru_tone_run(c, &rq, &t, &err) != RU_OK) {
        rc = cli_fail(&err);
    } else {
        if (cli_get(opts, "json"))
            print_json(c, t);
        cli_capture cap; /* the text for the report, on the terminal unless --json */
        cli_capture_begin(&cap, plots.report != NULL, !cli_get(opts, "json"));
        if (cli_capture_printing(&cap))
            print_text(c, t);
        char *text = cli_capture_end(&cap);
        rc = plot_jitter(&plots, c, t, text);
        free(text);
        if (rc == 0 && rq.out_dir)
            rc = write_csv(rq.out_dir, t);
    }
    ru_tone_destroy(t);
    ru_circuit_destroy(c);
    return rc;
}
