/* crystal.c: the quartz crystal as its Butterworth-Van Dyke equivalent circuit
 * (ringup/part.h, ru_crystal): the shunt capacitance c0 between the terminals (a
 * capacitance of the mass matrix, coupled to a driven terminal's slope as a
 * capacitor is) in parallel with motional arms, each a series R, L, C whose current
 * and capacitor voltage are the part's own states (no internal node, so no stray
 * capacitance sits on the arm). Per arm, with v = v(a) - v(b):
 *   di/dt  = (v - R i - vm) / L,   dvm/dt = i / C,
 * the current i leaving a and entering b; the arm's R carries the thermal noise of
 * a series voltage of density 4kTR, as the inductor's series resistance does.
 * Arm 0 is the main one (fs = the part's value, cm, esr or q), arms 1..narms the
 * extra ones; a crystal with no_main keeps c0 and the extra arms only. */
#include "parts/desc.h"

#include "ringup/format.h"

#include <math.h>
#include <stdio.h>
#include <string.h>

#define PI 3.14159265358979323846

#define P(f) offsetof(ru_part, f)
#define X(f) offsetof(ru_part, crystal.f)
static const ru_keyrec keys[] = {{"freq", "Hz", P(value), 1, 0.0},
                                 {"tol", "%", P(tol), 0, 0.0},
                                 {"esr", "ohm", X(esr_ohm), 0, 0.0},
                                 {"q", NULL, X(q), 0, 0.0},
                                 {"cm", "F", X(cm_f), 1, 0.0},
                                 {"c0", "F", X(c0_f), 1, 0.0},
                                 {"load", "F", X(load_f), 0, 0.0},
                                 {"drive-limit", "W", X(drive_limit_w), 0, 0.0},
                                 {"esr-tol", "%", X(esr_tol), 0, 0.0},
                                 {NULL, NULL, 0, 0, 0.0}};
static const ru_keyrec arm_keys[] = {{"freq", "Hz", X(arm_freq_hz), 1, 0.0},
                                     {"esr", "ohm", X(arm_esr_ohm), 1, 0.0},
                                     {"cm", "F", X(arm_cm_f), 1, 0.0},
                                     {NULL, NULL, 0, 0, 0.0}};
static const ru_listrec lists[] = {
    {"arms", NULL, 0, 0, RU_CRYSTAL_ARMS, {0, 0}, X(narms), 0,
     "mappings {freq, esr, cm}", NULL, "a mapping {freq, esr, cm}", NULL, arm_keys},
    {NULL, NULL, 0, 0, 0, {0, 0}, 0, 0, NULL, NULL, NULL, NULL, NULL}};
#undef X
#undef P
static const ru_variant only = {"crystal", keys, lists};
static const ru_variant *variant(int i) { return i == 0 ? &only : NULL; }

int ru_crystal_arm(const ru_part *p, int k, double *r_ohm, double *l_h, double *c_f)
{
    const ru_crystal *x = &p->crystal;
    if (p->type != RU_PART_CRYSTAL || k < 0 || k > x->narms)
        return 0;
    double f = k ? x->arm_freq_hz[k - 1] : p->value;
    double c = k ? x->arm_cm_f[k - 1] : x->cm_f;
    double w = 2 * PI * f, l = 1.0 / (w * w * c);
    double r = k ? x->arm_esr_ohm[k - 1] : (x->esr_ohm > 0 ? x->esr_ohm : w * l / x->q);
    *r_ohm = r;
    *l_h = l;
    *c_f = c;
    return 1;
}

double ru_crystal_load_freq_hz(const ru_part *p)
{
    const ru_crystal *x = &p->crystal;
    if (p->type != RU_PART_CRYSTAL || !(x->load_f > 0))
        return NAN;
    return p->value * sqrt(1.0 + x->cm_f / (x->c0_f + x->load_f));
}

void ru_crystal_impedance(const ru_part *p, double w, double *re_ohm, double *im_ohm)
{
    /* Admittance: j w c0 plus 1 / (R + j (w L - 1 / (w C))) for every arm. */
    double yr = 0, yi = w * p->crystal.c0_f, r, l, c;
    for (int k = p->crystal.no_main ? 1 : 0; ru_crystal_arm(p, k, &r, &l, &c); k++) {
        double x = w * l - 1.0 / (w * c), d = r * r + x * x;
        yr += r / d;
        yi -= x / d;
    }
    double d = yr * yr + yi * yi;
    *re_ohm = d > 0 ? yr / d : INFINITY;
    *im_ohm = d > 0 ? -yi / d : 0;
}

/* The arms present: 1 + narms, or narms without the main one. */
static int first_arm(const ru_part *p) { return p->crystal.no_main ? 1 : 0; }
static int arm_count(const ru_part *p) { return 1 + p->crystal.narms - first_arm(p); }

static ru_status check(const ru_part *p, const ru_part_env *env, ru_error *err)
{
    const ru_crystal *x = &p->crystal;
    double v[8] = {x->esr_ohm, x->q, x->cm_f, x->c0_f, x->load_f, x->drive_limit_w,
                   x->esr_tol, p->value};
    if (!ru_part_finite(v, 8))
        return ru_part_fail(env, p, err, "values must be finite");
    if (!(p->value > 0))
        return ru_part_bad(env, p, err, "freq must be positive", p->value);
    if (!(x->cm_f > 0))
        return ru_part_bad(env, p, err, "cm (the motional capacitance) must be positive",
                           x->cm_f);
    if (x->c0_f < 0)
        return ru_part_bad(env, p, err, "c0 must not be negative", x->c0_f);
    if (x->esr_ohm < 0)
        return ru_part_bad(env, p, err, "esr must not be negative", x->esr_ohm);
    if (x->q < 0)
        return ru_part_bad(env, p, err, "q must not be negative", x->q);
    if (x->esr_ohm > 0 && x->q > 0)
        return ru_part_fail(env, p, err, "give esr or q, not both (q = 2 pi freq L / esr)");
    if (!(x->esr_ohm > 0 || x->q > 0))
        return ru_part_fail(env, p, err, "needs esr (the motional resistance) or q");
    if (x->load_f < 0)
        return ru_part_bad(env, p, err, "load must not be negative", x->load_f);
    if (x->drive_limit_w < 0)
        return ru_part_bad(env, p, err, "drive-limit must not be negative",
                           x->drive_limit_w);
    if (x->esr_tol < 0 || x->esr_tol >= 1)
        return ru_part_bad(env, p, err, "esr-tol must be from 0 up to (not including) 100 %",
                           x->esr_tol);
    for (int k = 0; k < x->narms; k++) {
        double a[3] = {x->arm_freq_hz[k], x->arm_esr_ohm[k], x->arm_cm_f[k]};
        if (!ru_part_finite(a, 3) || !(a[0] > 0 && a[1] > 0 && a[2] > 0))
            return ru_part_fail(env, p, err, "arms, item %d: freq, esr and cm must be "
                                             "positive (got %g Hz, %g ohm, %g F)",
                                k + 1, a[0], a[1], a[2]);
    }
    return ru_part_check_two(p, env, err);
}

static int caps(const ru_part *p, ru_cap out[RU_PART_CAPS_MAX])
{
    if (!(p->crystal.c0_f > 0))
        return 0;
    out[0] = (ru_cap){p->node[0], p->node[1], p->crystal.c0_f};
    return 1;
}

static int nstates(const ru_part *p) { return 2 * arm_count(p); }

/* Per motional arm L i^2 / 2 and cm vm^2 / 2 (states i, vm in pairs). */
static int stores(const ru_part *p, ru_store out[RU_PART_STORES_MAX])
{
    double r, l, c;
    int n = 0;
    for (int a = first_arm(p); n + 2 <= RU_PART_STORES_MAX && ru_crystal_arm(p, a, &r, &l, &c);
         a++) {
        out[n] = (ru_store){n, l};
        out[n + 1] = (ru_store){n + 1, c};
        n += 2;
    }
    return n;
}

/* The main arm's current is a wave-file column (the first state), when it has one. */
static int currents(const ru_part *p) { return first_arm(p) == 0; }

static void state_name(const ru_part *p, int k, char *buf, size_t size)
{
    int arm = first_arm(p) + k / 2;
    if (arm == 0)
        snprintf(buf, size, k % 2 ? "%s.vm" : "i(%s)", p->name);
    else if (k % 2)
        snprintf(buf, size, "%s.arm%d.vm", p->name, arm);
    else
        snprintf(buf, size, "i(%s.arm%d)", p->name, arm);
}

/* The current a capacitance of the circuit's total size would carry at the voltage
 * scale at the arm's frequency, and the voltage that current puts on cm (the arm's
 * capacitor voltage is about Q times the terminal voltage at resonance). */
static double state_scale(const ru_part *p, int k, const ru_scale_env *e)
{
    double r = NAN, l = NAN, c = NAN;
    ru_crystal_arm(p, first_arm(p) + k / 2, &r, &l, &c);
    double w = 1.0 / sqrt(l * c);
    double i = fmax(e->v_scale * w * fmax(e->c_total_f, c), e->i_source_a);
    return k % 2 ? i / (w * c) : i;
}

static void stamp(const ru_part *p, ru_stamp *st, int index, int s0)
{
    int a = p->node[0], b = p->node[1], ra = st->row[a], rb = st->row[b];
    double c0 = p->crystal.c0_f;
    if (c0 > 0) { /* c0's coupling to a driven terminal's slope, as a capacitor */
        ru_stamp_add(st, a, c0 * st->dv[b]);
        ru_stamp_add(st, b, c0 * st->dv[a]);
    }
    double v = st->v[a] - st->v[b], r, l, c;
    for (int j = 0, arm = first_arm(p); ru_crystal_arm(p, arm, &r, &l, &c); j++, arm++) {
        int s = s0 + 2 * j;
        double i = st->x[s], vm = st->x[s + 1];
        ru_stamp_add(st, a, -i);
        ru_stamp_add(st, b, i);
        st->r[s] = (v - r * i - vm) / l;
        st->r[s + 1] = i / c;
        if (st->dr) {
            ru_stamp_ds(st, ra, s, -1.0);
            ru_stamp_ds(st, rb, s, 1.0);
            ru_stamp_dn(st, s, a, 1.0 / l);
            ru_stamp_dn(st, s, b, -1.0 / l);
            ru_stamp_ds(st, s, s, -r / l);
            ru_stamp_ds(st, s, s + 1, -1.0 / l);
            ru_stamp_ds(st, s + 1, s, 1.0 / c);
        }
        if (st->noise_on && !st->dc) /* 4kTR in the arm; arm k on its own stream */
            st->r[s] += sqrt(2.0 * st->noise_kt_j * r / st->noise_dt_s) *
                        ru_stamp_noise(st, (uint64_t)index | ((uint64_t)arm << 40)) / l;
    }
}

static void describe(const ru_part *p, char *buf, size_t size)
{
    char f[32], r[32], cm[32], c0[32], lm[32];
    double rr = NAN, l = NAN, c = NAN;
    ru_crystal_arm(p, 0, &rr, &l, &c);
    ru_format_si(p->value, "Hz", 7, f, sizeof f);
    ru_format_si(rr, "ohm", 3, r, sizeof r);
    ru_format_si(c, "F", 4, cm, sizeof cm);
    ru_format_si(p->crystal.c0_f, "F", 3, c0, sizeof c0);
    ru_format_si(l, "H", 4, lm, sizeof lm);
    int n = snprintf(buf, size, "fs %s, esr %s, cm %s (Lm %s), c0 %s", f, r, cm, lm, c0);
    if (n > 0 && (size_t)n < size && p->crystal.narms > 0)
        snprintf(buf + n, size - (size_t)n, ", %d more arm%s", p->crystal.narms,
                 p->crystal.narms > 1 ? "s" : "");
}

/* margin's rest: the crystal without its main arm (c0 and the other arms stay). */
static int margin_rest(const ru_part *p, ru_part *out)
{
    *out = *p;
    out->crystal.no_main = 1;
    return 1;
}

/* Its main arm's impedance at w, R + j (w L - 1 / (w cm)) (margin holds the rest,
 * c0 and the other arms, against it); none without a main arm. */
static int impedance(const ru_part *p, double w, double *re_ohm, double *im_ohm)
{
    double r, l, cm;
    if (p->crystal.no_main || !ru_crystal_arm(p, 0, &r, &l, &cm))
        return 0;
    *re_ohm = r;
    *im_ohm = w * l - 1.0 / (w * cm);
    return 1;
}

const ru_part_desc ru_part_crystal = {
    .type = RU_PART_CRYSTAL,
    .name = "crystal",
    .terms = ru_terms_two,
    .nvariants = 1,
    .variant = variant,
    .variant_of = ru_part_variant_zero,
    .set_variant = ru_part_set_variant_none,
    .record = offsetof(ru_part, crystal),
    .record_size = sizeof(ru_crystal),
    .check = check,
    .caps = caps,
    .state_group = RU_STATES_INTERNAL,
    .stores = stores,
    .currents = currents,
    .nstates = nstates,
    .state_name = state_name,
    .state_scale = state_scale,
    .stamp = stamp,
    .impedance = impedance,
    .margin_rest = margin_rest,
    .describe = describe,
};
