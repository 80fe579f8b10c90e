/* stray.c: the stray-capacitance sensitivity of the dominant pole pair
 * (ringup/stray.h): the pair with the strays as given against the pair with every
 * stray at a tenth, and the node that carries most of the move (first-order
 * sensitivity from the mode's right and left eigenvectors, then an exact check with
 * that node's stray alone at a tenth). A stray adds only to the mass matrix, so the
 * operating point and the state layout stay as they are. */
#include "ringup/stray.h"

#include "engines/modes.h"
#include "ringup/format.h"

#include <complex.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* The complex pole (im > 0) of system s at x nearest to `near`. */
static ru_status pole_near(const ru_system *s, const double *x, ru_pole near, ru_pole *out,
                           ru_error *err)
{
    size_t n = ru_system_size(s);
    ru_pole *p = malloc((n ? n : 1) * sizeof *p);
    if (!p)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "stray check: out of memory");
    ru_status st = ru_poles_compute(s, x, p, err);
    double best = INFINITY;
    for (size_t i = 0; st == RU_OK && i < ru_poles_count(s); i++) {
        double d = hypot(p[i].re_per_s - near.re_per_s, p[i].im_rad_per_s - near.im_rad_per_s);
        if (p[i].im_rad_per_s > 0 && d < best) {
            best = d;
            *out = p[i];
        }
    }
    free(p);
    if (st == RU_OK && !isfinite(best))
        return ru_error_set(err, RU_ENUMERIC, NULL, 0, 0,
                            "stray check: no complex pole pair with the strays reduced");
    return st;
}

/* The pair nearest `near` of c with its strays scaled by 0.1: every node's
 * (node < 0) or one node's. */
static ru_status pole_tenth(const ru_circuit *c, const double *x, int node, ru_pole near,
                            ru_pole *out, ru_error *err)
{
    ru_circuit *t = NULL;
    ru_system *s = NULL;
    ru_status st = ru_circuit_clone(c, &t);
    if (st != RU_OK)
        return ru_error_set(err, st, NULL, 0, 0, "stray check: out of memory");
    for (size_t k = 1; st == RU_OK && k < ru_circuit_node_count(c); k++)
        if (node < 0 || (int)k == node)
            st = ru_circuit_set_node_stray_f(t, (int)k, 0.1 * ru_circuit_node_stray_f(c, (int)k));
    if (st != RU_OK)
        ru_error_set(err, st, NULL, 0, 0, "stray check: cannot set the strays");
    else if ((st = ru_system_create(t, &s, err)) == RU_OK)
        st = pole_near(s, x, near, out, err);
    ru_system_destroy(s);
    ru_circuit_destroy(t);
    return st;
}

static double pole_dist_rel(ru_pole a, ru_pole b)
{
    return hypot(a.re_per_s - b.re_per_s, a.im_rad_per_s - b.im_rad_per_s) /
           hypot(a.re_per_s, a.im_rad_per_s);
}

/* The node whose stray moves the pole most to first order, and its share of the
 * sum of the nodes' moves (-1 when the mode cannot be had). */
static int rank_nodes(const ru_circuit *c, const ru_system *s, const double *x, ru_pole p,
                      double *share)
{
    size_t n = ru_system_size(s);
    double *v = malloc((6 * n + 1) * sizeof *v);
    int best = -1;
    ru_pole lam;
    if (!v || ru_mode_near(s, x, p, &lam, v, v + n, v + 2 * n, v + 3 * n) != RU_OK ||
        ru_mode_input(s, x, v + 2 * n, v + 3 * n, v + 4 * n, v + 5 * n) != RU_OK) {
        free(v);
        return -1;
    }
    double complex uv = 0, l = lam.re_per_s + I * lam.im_rad_per_s;
    for (size_t i = 0; i < n; i++)
        uv += (v[2 * n + i] - I * v[3 * n + i]) * (v[i] + I * v[n + i]);
    double sum = 0, top = 0;
    for (size_t k = 1; k < ru_circuit_node_count(c); k++) {
        int i = ru_system_node_state(s, (int)k);
        double dc = 0.9 * ru_circuit_node_stray_f(c, (int)k);
        if (i < 0 || !(dc > 0) || !(cabs(uv) > 0))
            continue;
        double complex w = v[4 * n + i] - I * v[5 * n + i], vk = v[i] + I * v[n + i];
        double d = cabs(l * dc * w * vk / uv);
        sum += d;
        if (d > top) {
            top = d;
            best = (int)k;
        }
    }
    *share = sum > 0 ? top / sum : 0;
    free(v);
    return best;
}

ru_status ru_stray_check(const ru_circuit *c, const ru_system *s, const double *x_op,
                         ru_stray_result *out, ru_error *err)
{
    memset(out, 0, sizeof *out);
    out->node = -1;
    out->move_rel = out->node_move_rel = NAN;
    size_t n = ru_system_size(s), np = ru_poles_count(s);
    int any = 0;
    for (size_t k = 1; k < ru_circuit_node_count(c); k++)
        any |= ru_system_node_state(s, (int)k) >= 0 && ru_circuit_node_stray_f(c, (int)k) > 0;
    if (!any || n == 0 || n > RU_STRAY_MAX_STATES)
        return RU_OK;
    ru_pole *p = malloc(n * sizeof *p);
    if (!p)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "stray check: out of memory");
    ru_status st = ru_poles_compute(s, x_op, p, err);
    int d = st == RU_OK ? ru_poles_dominant(p, np) : -1;
    if (d >= 0)
        out->pole = p[d];
    free(p);
    if (st != RU_OK || d < 0)
        return st;
    if ((st = pole_tenth(c, x_op, -1, out->pole, &out->pole_tenth, err)) != RU_OK)
        return st;
    out->checked = 1;
    out->move_rel = pole_dist_rel(out->pole, out->pole_tenth);
    out->warn = out->move_rel > RU_STRAY_WARN_REL;
    if (!out->warn)
        return RU_OK;
    out->node = rank_nodes(c, s, x_op, out->pole, &out->node_share);
    if (out->node < 0)
        return RU_OK;
    out->node_stray_f = ru_circuit_node_stray_f(c, out->node);
    if ((st = pole_tenth(c, x_op, out->node, out->pole, &out->pole_node, err)) != RU_OK)
        return st;
    out->node_move_rel = pole_dist_rel(out->pole, out->pole_node);
    return RU_OK;
}

void ru_stray_warning(const ru_circuit *c, const ru_stray_result *r, char *buf, size_t size)
{
    if (!size)
        return;
    buf[0] = '\0';
    if (!r->checked || !r->warn)
        return;
    char f1[32], f2[32], cs[32];
    ru_format_si(r->pole.im_rad_per_s / (2 * M_PI), "Hz", 5, f1, sizeof f1);
    ru_format_si(r->pole_tenth.im_rad_per_s / (2 * M_PI), "Hz", 5, f2, sizeof f2);
    int line = 0, col = 0, m;
    if (r->node > 0)
        ru_circuit_node_place(c, r->node, &line, &col);
    if (line > 0)
        m = snprintf(buf, size, "%s:%d:%d: ", ru_circuit_file(c), line, col);
    else
        m = snprintf(buf, size, "%s: ", ru_circuit_file(c));
    if (m < 0 || (size_t)m >= size)
        return;
    m += snprintf(buf + m, size - (size_t)m,
                  "warning: the stray capacitance moves the dominant poles by %.3g %% "
                  "(%s with the strays as given, %s with every stray at a tenth)",
                  100 * r->move_rel, f1, f2);
    if (r->node < 0 || m < 0 || (size_t)m >= size)
        return;
    ru_format_si(r->node_stray_f, "F", 3, cs, sizeof cs);
    snprintf(buf + m, size - (size_t)m,
             "; most of it at node %s (%s; that one alone at a tenth moves them %.3g %%): "
             "give %s the capacitance it really has (`stray: {nodes: {%s: ...}}`)",
             ru_circuit_node_name(c, r->node), cs, 100 * r->node_move_rel,
             ru_circuit_node_name(c, r->node), ru_circuit_node_name(c, r->node));
}
