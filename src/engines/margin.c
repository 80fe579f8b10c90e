/* margin.c: negative-resistance analysis (ringup/margin.h): the rest of the
 * circuit around a part, its impedance at the part's terminals over frequency, the
 * operating frequency and the margin there.
 *
 * The operating point is that of the whole circuit (the part's DC current and
 * voltage included); the rest is linearized there. The part's own impedance comes
 * from its formula (resistor, capacitor, inductor with its series resistance) or,
 * for other parts, from the whole circuit's driving-point admittance less the
 * rest's: Y_part = Y_whole - Y_rest, both linearized at the same point. A crystal
 * is its main motional arm (R, L_m, C_m); c0 and its other arms stay in the rest. */
#include "base/cplx.h"
#include "engines/margin_impl.h"
#include "parts/desc.h"

#include "ringup/smallsig.h"

#include <complex.h>
#include <lapacke.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define PI 3.14159265358979323846
#define SCAN_POINTS 400   /* log-spaced points that bracket the operating frequency */
#define BISECT_MAX 200

ru_status ru_margin_port_z(size_t n, const double *A, const double *M, int ka, int kb,
                           double w, double *re, double *im, ru_error *err)
{
    if (ka < 0 && kb < 0)
        return ru_error_set(err, RU_EINPUT, NULL, 0, 0,
                            "margin: both terminals are held (ground or a supply)");
    lapack_complex_double *K = malloc(n * n * sizeof *K), *v = malloc(n * sizeof *v);
    lapack_int *piv = malloc(n * sizeof *piv);
    ru_status st = RU_OK;
    if (!K || !v || !piv) {
        st = ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "margin: out of memory");
        goto done;
    }
    for (size_t i = 0; i < n * n; i++)
        K[i] = RU_CMPLX(-A[i], w * M[i]);
    for (size_t i = 0; i < n; i++)
        v[i] = 0;
    if (ka >= 0)
        v[ka] += 1.0; /* a unit current into the first node, out of the second */
    if (kb >= 0)
        v[kb] -= 1.0;
    if (LAPACKE_zgesv(LAPACK_ROW_MAJOR, (lapack_int)n, 1, K, (lapack_int)n, piv, v, 1)) {
        st = ru_error_set(err, RU_ENUMERIC, NULL, 0, 0,
                          "margin: the network is singular at %g Hz", w / (2 * PI));
        goto done;
    }
    lapack_complex_double z = (ka >= 0 ? v[ka] : 0) - (kb >= 0 ? v[kb] : 0);
    *re = creal(z);
    *im = cimag(z);
done:
    free(K);
    free(v);
    free(piv);
    return st;
}

/* Linearization of system s at x into A and M (n*n each, allocated). */
static ru_status linearize(const ru_system *s, const double *x, double **A, double **M,
                           ru_error *err)
{
    size_t n = ru_system_size(s);
    *A = malloc(n * n * sizeof **A);
    *M = malloc(n * n * sizeof **M);
    if (!*A || !*M)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "margin: out of memory");
    ru_eval_point ep = {.t_s = 0, .dc = 1, .source_scale = 1.0};
    ru_status st = ru_system_residual(s, &ep, x, NULL, *A);
    if (st != RU_OK)
        return ru_error_set(err, st, NULL, 0, 0, "margin: linearization failed");
    ru_system_mass(s, *M);
    return RU_OK;
}

/* The rest: the part replaced by what its descriptor leaves (a crystal without its
 * main arm: c0 and any other arm stay with the rest, as the figure held against the
 * ESR counts them), else by an open (a resistor far above any other). */
static ru_status make_rest(ru_margin *m, const ru_circuit *c, int part, ru_error *err)
{
    ru_status st = ru_circuit_clone(c, &m->rest_c);
    if (st != RU_OK)
        return ru_error_set(err, st, NULL, 0, 0, "margin: out of memory");
    ru_part q;
    if (!ru_part_margin_rest(&m->part, &q)) {
        ru_part_init(&q, RU_PART_RESISTOR, m->part.name);
        q.value = RU_MARGIN_OPEN_OHM;
    }
    q.node[0] = m->part.node[0];
    q.node[1] = m->part.node[1];
    q.line = m->part.line;
    q.col = m->part.col;
    if ((st = ru_circuit_replace_part(m->rest_c, (size_t)part, &q, err)) != RU_OK)
        return st;
    return ru_system_create(m->rest_c, &m->rest, err);
}

/* The whole circuit's operating point carried onto the rest's states by name. */
static ru_status map_state(ru_margin *m, ru_error *err)
{
    m->n = ru_system_size(m->rest);
    m->x = calloc(m->n ? m->n : 1, sizeof *m->x);
    if (!m->x)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "margin: out of memory");
    for (size_t i = 0; i < m->n; i++) {
        const char *name = ru_system_state_name(m->rest, i);
        size_t j = 0;
        while (j < m->nf && strcmp(ru_system_state_name(m->full, j), name))
            j++;
        if (j == m->nf)
            return ru_error_set(err, RU_ENUMERIC, NULL, 0, 0,
                                "margin: state %s of the rest has no match", name);
        m->x[i] = m->xf[j];
    }
    return RU_OK;
}

static ru_status whole_circuit(ru_margin *m, const ru_circuit *c, ru_error *err)
{
    ru_status st = ru_system_create(c, &m->full, err);
    if (st != RU_OK)
        return st;
    m->nf = ru_system_size(m->full);
    m->xf = calloc(m->nf ? m->nf : 1, sizeof *m->xf);
    ru_pole *p = calloc(m->nf ? m->nf : 1, sizeof *p);
    if (!m->xf || !p) {
        free(p);
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "margin: out of memory");
    }
    int fl;
    if (ru_circuit_find_floating_node(c, &fl)) {
        free(p);
        return ru_error_set(err, RU_EINPUT, ru_circuit_file(c), 0, 0,
                            "node %s has no DC path to ground: there is no operating "
                            "point to linearize at",
                            ru_circuit_node_name(c, fl));
    }
    if ((st = ru_oppoint_solve(m->full, m->xf, 0, NULL, err)) != RU_OK) {
        free(p);
        return st;
    }
    m->dom_re = m->dom_im = NAN;
    if (ru_poles_compute(m->full, m->xf, p, NULL) == RU_OK) {
        int d = ru_poles_dominant(p, ru_poles_count(m->full));
        if (d >= 0) {
            m->dom_re = p[d].re_per_s;
            m->dom_im = p[d].im_rad_per_s;
        }
    }
    free(p);
    m->fa = ru_system_node_state(m->full, m->part.node[0]);
    m->fb = ru_system_node_state(m->full, m->part.node[1]);
    return linearize(m->full, m->xf, &m->Af, &m->Mf, err);
}

/* DC current the part carries into its first node: the rest's residual there
 * (the whole circuit's is zero at its operating point). */
static void part_dc_current(ru_margin *m)
{
    double *r = calloc(m->n ? m->n : 1, sizeof *r);
    ru_eval_point ep = {.t_s = 0, .dc = 1, .source_scale = 1.0};
    m->idc_a = 0;
    if (r && ru_system_residual(m->rest, &ep, m->x, r, NULL) == RU_OK) {
        if (m->ka >= 0)
            m->idc_a = -r[m->ka];
        else if (m->kb >= 0)
            m->idc_a = r[m->kb];
    }
    free(r);
}

ru_status ru_margin_create(const ru_circuit *c, int part, ru_margin **out, ru_error *err)
{
    *out = NULL;
    if (!c || part < 0 || (size_t)part >= ru_circuit_part_count(c))
        return ru_error_set(err, RU_EINPUT, NULL, 0, 0, "margin: no such part");
    const ru_part *p = ru_circuit_part(c, (size_t)part);
    ru_terminal term[RU_PART_NODES];
    if (ru_part_is_source(p) || ru_part_terminals(p, term, RU_PART_NODES) != 2)
        return ru_error_set(err, RU_EINPUT, ru_circuit_file(c), p->line, p->col,
                            "part %s: margin works on a two-terminal passive part "
                            "(resistor, capacitor, inductor, crystal, diode, ...), not a "
                            "%s", p->name, ru_part_type_name(p->type));
    ru_margin *m = calloc(1, sizeof *m);
    if (!m)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "margin: out of memory");
    m->part = *p;
    ru_status st = whole_circuit(m, c, err);
    if (st == RU_OK)
        st = make_rest(m, c, part, err);
    if (st == RU_OK)
        st = map_state(m, err);
    if (st == RU_OK) {
        m->ka = ru_system_node_state(m->rest, p->node[0]);
        m->kb = ru_system_node_state(m->rest, p->node[1]);
        if (m->ka < 0 && m->kb < 0)
            st = ru_error_set(err, RU_EINPUT, ru_circuit_file(c), p->line, p->col,
                              "part %s: both of its nodes are held (ground or a supply), "
                              "so the rest of the circuit presents no impedance to it",
                              p->name);
    }
    if (st == RU_OK)
        st = linearize(m->rest, m->x, &m->A, &m->M, err);
    if (st != RU_OK) {
        ru_margin_destroy(m);
        return st;
    }
    part_dc_current(m);
    *out = m;
    return RU_OK;
}

void ru_margin_destroy(ru_margin *m)
{
    if (!m)
        return;
    ru_system_destroy(m->rest);
    ru_circuit_destroy(m->rest_c);
    ru_system_destroy(m->full);
    free(m->x);
    free(m->A);
    free(m->M);
    free(m->xf);
    free(m->Af);
    free(m->Mf);
    free(m);
}

ru_status ru_margin_rest_z(const ru_margin *m, double f_hz, double *re_ohm,
                           double *im_ohm, ru_error *err)
{
    return ru_margin_port_z(m->n, m->A, m->M, m->ka, m->kb, 2 * PI * f_hz, re_ohm, im_ohm,
                            err);
}

ru_status ru_margin_part_z(const ru_margin *m, double f_hz, double *re_ohm,
                           double *im_ohm, ru_error *err)
{
    double w = 2 * PI * f_hz;
    const ru_part *p = &m->part;
    if (ru_part_impedance(p, w, re_ohm, im_ohm)) /* closed form */
        return RU_OK;
    double wr, wi, rr, ri; /* whole and rest impedances */
    ru_status st = ru_margin_port_z(m->nf, m->Af, m->Mf, m->fa, m->fb, w, &wr, &wi, err);
    if (st == RU_OK)
        st = ru_margin_rest_z(m, f_hz, &rr, &ri, err);
    if (st != RU_OK)
        return st;
    double complex y = 1.0 / RU_CMPLX(wr, wi) - 1.0 / RU_CMPLX(rr, ri);
    if (!(cabs(y) > 0))
        return ru_error_set(err, RU_ENUMERIC, NULL, 0, 0,
                            "margin: part %s draws no small-signal current", p->name);
    double complex z = 1.0 / y;
    *re_ohm = creal(z);
    *im_ohm = cimag(z);
    return RU_OK;
}

double ru_margin_part_inductance(const ru_margin *m)
{
    ru_store st[RU_PART_STORES_MAX]; /* the store of its first branch current */
    if (ru_part_currents(&m->part) > 0 && ru_part_stores(&m->part, st) > 0 && st[0].state == 0)
        return st[0].coef;
    return NAN;
}

void ru_margin_dominant(const ru_margin *m, double *re_per_s, double *im_rad_per_s)
{
    *re_per_s = m->dom_re;
    *im_rad_per_s = m->dom_im;
}

/* X_part + Im Z at f. */
static ru_status total_x(const ru_margin *m, double f, double *x, ru_error *err)
{
    double pr = 0, pi = 0, rr = 0, ri = 0;
    ru_status st = ru_margin_part_z(m, f, &pr, &pi, err);
    if (st == RU_OK)
        st = ru_margin_rest_z(m, f, &rr, &ri, err);
    *x = st == RU_OK ? pi + ri : NAN;
    return st;
}

/* Bisection in log f on a sign change of the total reactance. */
static ru_status refine(const ru_margin *m, double lo, double xlo, double hi, double *f,
                        ru_error *err)
{
    for (int it = 0; it < BISECT_MAX && hi / lo - 1 > 1e-15; it++) {
        double mid = sqrt(lo * hi), xm;
        ru_status st = total_x(m, mid, &xm, err);
        if (st != RU_OK)
            return st;
        if ((xm < 0) == (xlo < 0)) {
            lo = mid;
            xlo = xm;
        } else {
            hi = mid;
        }
    }
    *f = sqrt(lo * hi);
    return RU_OK;
}

/* The series-resonance-like crossing (total reactance rising through 0) nearest
 * the guess, on a log scan of [fmin, fmax]. */
static ru_status find_crossing(const ru_margin *m, double guess, double fmin, double fmax,
                               double *f, int *found, ru_error *err)
{
    double fp = fmin, xp, best = INFINITY;
    ru_status st = total_x(m, fp, &xp, err);
    *found = 0;
    for (int i = 1; i <= SCAN_POINTS && st == RU_OK; i++) {
        double fc = fmin * pow(fmax / fmin, (double)i / SCAN_POINTS), xc;
        if ((st = total_x(m, fc, &xc, err)) != RU_OK)
            break;
        if (xp < 0 && xc >= 0) {
            double fr;
            if ((st = refine(m, fp, xp, fc, &fr, err)) != RU_OK)
                break;
            double d = fabs(log(fr / guess));
            if (d < best) {
                best = d;
                *f = fr;
                *found = 1;
            }
        }
        fp = fc;
        xp = xc;
    }
    return st;
}

ru_status ru_margin_analyse(const ru_margin *m, double f_guess_hz, double fmin_hz,
                            double fmax_hz, ru_margin_result *r, ru_error *err)
{
    memset(r, 0, sizeof *r);
    r->frequency_hz = r->negative_resistance_ohm = r->rest_reactance_ohm = NAN;
    r->esr_ohm = r->margin = r->reactance_slope_ohm_s = NAN;
    r->growth_rate_per_s = r->time_constant_s = NAN;
    if (!(fmin_hz > 0 && fmax_hz > fmin_hz && f_guess_hz > 0))
        return ru_error_set(err, RU_ERANGE, NULL, 0, 0, "margin: bad frequency range");
    double f = NAN;
    ru_status st = find_crossing(m, f_guess_hz, fmin_hz, fmax_hz, &f, &r->found, err);
    if (st != RU_OK)
        return st;
    if (!r->found) {
        snprintf(r->note, sizeof r->note,
                 "the reactances of the part and the rest do not cancel between %.4g Hz "
                 "and %.4g Hz: no series resonance to oscillate at",
                 fmin_hz, fmax_hz);
        return RU_OK;
    }
    double pr, pi, rr, ri, x1, x2, h = 1e-6 * f;
    if ((st = ru_margin_part_z(m, f, &pr, &pi, err)) != RU_OK ||
        (st = ru_margin_rest_z(m, f, &rr, &ri, err)) != RU_OK ||
        (st = total_x(m, f + h, &x2, err)) != RU_OK ||
        (st = total_x(m, f - h, &x1, err)) != RU_OK)
        return st;
    r->frequency_hz = f;
    r->negative_resistance_ohm = rr;
    r->rest_reactance_ohm = ri;
    r->esr_ohm = pr;
    r->reactance_slope_ohm_s = (x2 - x1) / (2 * PI * 2 * h);
    r->margin = pr > 0 ? -rr / pr : NAN;
    r->growth_rate_per_s = -(rr + pr) / r->reactance_slope_ohm_s;
    if (r->growth_rate_per_s > 0)
        r->time_constant_s = 1.0 / r->growth_rate_per_s;
    if (!(pr > 0))
        snprintf(r->note, sizeof r->note,
                 "part %s has no resistance of its own: no margin (the rest's "
                 "resistance %.4g ohm is the whole loss or drive)",
                 m->part.name, rr);
    else if (!(r->growth_rate_per_s > 0))
        snprintf(r->note, sizeof r->note,
                 "-Re Z (%.4g ohm) does not exceed the ESR (%.4g ohm): it does not start",
                 -rr, pr);
    return RU_OK;
}
