/* tone_noise.c: phase noise and jitter of the settled tone (ringup/tone.h): the PPV
 * engine along the periodic steady state, L(fm) on offsets from 10 Hz to f0/2, the
 * period and RMS jitter, and Leeson's formula beside it with the loaded Q from the
 * poles and the carrier power from the steady state. */
#include "analysis/tone_impl.h"

#include "parts/laws.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define RU_TONE_PER_DECADE 10

/* Offsets from 10 Hz (or f0/2 * 1e-5 for a tone below 200 Hz) to f0/2: ten per
 * decade on the decades (10, 12.6, 15.8, ... Hz), then f0/2 itself. */
static void offsets(ru_tone *t, double f0)
{
    double hi = 0.5 * f0, lo = hi > 100.0 ? 10.0 : hi * 1e-5;
    size_t n = 0;
    for (int i = 0; n + 1 < RU_TONE_OFFSETS_MAX; i++) {
        double f = lo * pow(10.0, (double)i / RU_TONE_PER_DECADE);
        if (f > hi * (1 - 1e-9))
            break;
        t->offset_hz[n++] = f;
    }
    if (n > 0 && hi / t->offset_hz[n - 1] < 1.0 + 1e-3)
        n--; /* f0/2 just above a grid point: keep the end exactly */
    t->offset_hz[n++] = hi;
    t->noise.npts = n;
}

/* State index of a part's internal state named "PART.what", or -1. */
static int part_state(const ru_system *s, const ru_part *p, const char *what)
{
    char want[RU_NAME_MAX + 16];
    snprintf(want, sizeof want, "%s.%s", p->name, what);
    for (size_t i = 0; i < ru_system_size(s); i++)
        if (!strcmp(ru_system_state_name(s, i), want))
            return (int)i;
    return -1;
}

/* The AC power of one part over the period's grid (0 for parts without loss). */
static double part_ac_power(const ru_system *s, const ru_part *p, size_t i,
                            const ru_steady_view *v)
{
    double mean = 0.0, sq = 0.0, pw = 0.0;
    int ist = p->type == RU_PART_INDUCTOR ? ru_system_inductor_state(s, (int)i)
              : p->type == RU_PART_THERMAL ? part_state(s, p, "rise")
                                            : -1;
    if (p->type != RU_PART_RESISTOR && !(p->type == RU_PART_INDUCTOR && p->series_ohm > 0) &&
        !(p->type == RU_PART_THERMAL && ist >= 0))
        return 0.0;
    for (size_t k = 0; k < v->ngrid; k++) {
        const double *x = v->grid_x + k * v->n;
        double u = p->type == RU_PART_INDUCTOR
                       ? x[ist]
                       : ru_system_node_voltage_dc(s, p->node[0], x) -
                             ru_system_node_voltage_dc(s, p->node[1], x);
        mean += u;
        sq += u * u;
    }
    mean /= (double)v->ngrid;
    sq /= (double)v->ngrid;
    double var = fmax(sq - mean * mean, 0.0);
    if (p->type == RU_PART_RESISTOR)
        pw = var / p->value;
    else if (p->type == RU_PART_INDUCTOR)
        pw = var * p->series_ohm;
    else { /* thermal resistor: its mean resistance over the period */
        double r = 0.0, d;
        for (size_t k = 0; k < v->ngrid; k++)
            r += ru_thermal_resistance(&p->thermal, v->grid_x[k * v->n + (size_t)ist], &d);
        pw = var / (r / (double)v->ngrid);
    }
    return pw;
}

static double carrier_power(const ru_circuit *c, const ru_system *s, const ru_steady_view *v)
{
    double ps = 0.0;
    for (size_t i = 0; i < ru_circuit_part_count(c); i++)
        ps += part_ac_power(s, ru_circuit_part(c, i), i, v);
    return ps;
}

/* Leeson's curve into t->noise, or a note saying why not. */
static ru_status leeson(const ru_circuit *c, ru_tone *t, const ru_tone_request *rq,
                        const ru_steady_view *v, ru_error *err)
{
    ru_tone_noise *nv = &t->noise;
    const char *loop = rq->loop_part ? rq->loop_part : ru_circuit_measure_opts_const(c)->loop;
    int lp = -1;
    if (loop && loop[0]) {
        ru_status lst = ru_circuit_loop_part(c, loop, &lp, err);
        if (lst != RU_OK)
            return lst;
    }
    if (!t->x_op) {
        snprintf(t->note, sizeof t->note, "Leeson's formula is not given: no operating "
                 "point for the loaded Q");
        return RU_OK;
    }
    ru_status st = ru_loaded_q(t->sys, t->x_op, lp, v->frequency_hz, &nv->q_loaded,
                               &nv->q_from_poles, err);
    if (st != RU_OK)
        return st;
    nv->carrier_w = carrier_power(c, t->sys, v);
    if (!(nv->carrier_w > 0) || !(nv->q_loaded > 0) || !isfinite(nv->q_loaded)) {
        snprintf(t->note, sizeof t->note, "Leeson's formula is not given: %s",
                 !(nv->carrier_w > 0)
                     ? "no resistance dissipates the carrier (lossless resonator)"
                     : "no loaded Q (no lossy resonator pole pair, and no amplifier loop "
                       "to take the phase slope from: name one with --loop)");
        return RU_OK;
    }
    nv->have_leeson = 1;
    nv->noise_factor = rq->noise_factor > 0 ? rq->noise_factor : 1.0;
    nv->leeson_flicker_hz = 0.0;
    for (size_t k = 0; k < nv->ppv.nsrc; k++)
        nv->leeson_flicker_hz = fmax(nv->leeson_flicker_hz, nv->ppv.src[k].info.flicker_corner_hz);
    nv->leeson_corner_hz = v->frequency_hz / (2.0 * nv->q_loaded);
    /* the F that puts Leeson's 1/f^2 term, (2FkT/Ps) (f0/(2 QL fm))^2, on the PPV's
     * f0^2 c / fm^2: F = 2 c QL^2 Ps / (kT) */
    nv->effective_noise_factor = 2.0 * nv->ppv.c_s * nv->q_loaded * nv->q_loaded *
                                 nv->carrier_w / (RU_K_BOLTZMANN * (nv->temp_c + 273.15));
    for (size_t i = 0; i < nv->npts; i++)
        t->leeson_dbc[i] = ru_leeson_dbc(v->frequency_hz, nv->q_loaded, nv->carrier_w,
                                         nv->noise_factor, nv->temp_c, nv->leeson_flicker_hz,
                                         t->offset_hz[i]);
    nv->leeson_dbc = t->leeson_dbc;
    return RU_OK;
}

ru_status ru_tone_noise_run(const ru_circuit *c, ru_tone *t, const ru_tone_request *rq,
                            ru_error *err)
{
    ru_steady_view v;
    ru_steady_get(t->steady, &v);
    ru_tone_noise *nv = &t->noise;
    memset(nv, 0, sizeof *nv);
    nv->note = t->note;
    t->note[0] = '\0';
    if (!v.found)
        return RU_OK;
    ru_ppv_opts o;
    ru_ppv_opts_default(&o);
    o.temp_c = rq->temp_c;
    if (!(o.temp_c > -273.15) || !isfinite(o.temp_c))
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0, "temperature %g C is below absolute "
                            "zero", o.temp_c);
    ru_status st = ru_ppv_solve(t->sys, t->steady, &o, &t->ppv, err);
    if (st != RU_OK)
        return st;
    ru_ppv_get(t->ppv, &nv->ppv);
    if (nv->ppv.nsrc == 0) {
        snprintf(t->note, sizeof t->note, "the circuit has no noise source (no resistor, "
                 "inductor series resistance, diode, junction stage or amplifier en or "
                 "inoise): c = 0, no phase noise");
        nv->have = 1;
        nv->f0_hz = v.frequency_hz;
        nv->temp_c = o.temp_c;
        nv->flicker_hz = NAN;
        return RU_OK;
    }
    double f0 = v.frequency_hz, c_s = nv->ppv.c_s, c1 = nv->ppv.c1_s_hz;
    nv->have = 1;
    nv->f0_hz = f0;
    nv->temp_c = o.temp_c;
    offsets(t, f0);
    for (size_t i = 0; i < nv->npts; i++)
        t->ppv_dbc[i] = c_s > 0 ? ru_ppv_dbc(f0, c_s, c1, t->offset_hz[i]) : -INFINITY;
    nv->offset_hz = t->offset_hz;
    nv->ppv_dbc = t->ppv_dbc;
    nv->lorentz_hz = M_PI * f0 * f0 * c_s;
    nv->flicker_hz = c1 > 0 && c_s > 0 ? c1 / c_s : NAN;
    nv->period_jitter_s = sqrt(c_s * v.period_s);
    nv->band_lo_hz = rq->band_lo_hz > 0 ? rq->band_lo_hz : t->offset_hz[0];
    nv->band_hi_hz = rq->band_hi_hz > 0 ? rq->band_hi_hz : t->offset_hz[nv->npts - 1];
    if (!(nv->band_hi_hz > nv->band_lo_hz))
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0,
                            "jitter band %g Hz to %g Hz is empty", nv->band_lo_hz,
                            nv->band_hi_hz);
    nv->rms_jitter_s = ru_ppv_rms_jitter(f0, c_s, c1, nv->band_lo_hz, nv->band_hi_hz);
    return leeson(c, t, rq, &v, err);
}

void ru_tone_noise_get(const ru_tone *t, ru_tone_noise *nv)
{
    *nv = t->noise;
}
