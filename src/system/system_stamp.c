/* system_stamp.c: the residual r(t, x), its Jacobian dr/dx, f = M^{-1} r,
 * J = M^{-1} dr/dx, the mass matrix and the loop split of one amplifier.
 *
 * Rows: a free node's row is the net current into the node from every part but
 * the capacitors (plus C * dv/dt of a driven node at a capacitor's far end); an
 * inductor's row is di/dt. Rows and columns of ground and driven nodes do not
 * exist and are skipped by the stamp helpers. Every call keeps its own scratch
 * (on its stack, or on the heap beyond RU_SYS_STACK_DOUBLES), so one system serves
 * many threads. An internal state's row is its rate (unit mass): an opamp's
 * dvint/dt, a thermal resistor's d rise/dt. Without dr (the rhs), the stamps add
 * only residual terms. */
#include "system/system_impl.h"

#include "parts/laws.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

/* Scratch and context of one residual evaluation. */
typedef struct stamp_ctx {
    const ru_system *s;
    const double *x;   /* states */
    double *v;         /* nnodes: node voltages */
    double *dv;        /* nnodes: dv/dt of driven nodes */
    double *r;         /* n: residual */
    double *dr;        /* n*n or NULL */
    int skip_part;     /* amplifier whose d i_out / d vc is left out of dr, or -1 */
} stamp_ctx;

static void add_r(stamp_ctx *k, int node, double val)
{
    int st = k->s->node_state[node];
    if (st >= 0)
        k->r[st] += val;
}

/* dr[row state][column of a node voltage] += val */
static void add_dn(stamp_ctx *k, int row, int node, double val)
{
    int col = k->s->node_state[node];
    if (row >= 0 && col >= 0 && k->dr)
        k->dr[(size_t)row * k->s->n + (size_t)col] += val;
}

/* A current i(v) flowing a -> b through a part, v = v(a) - v(b), g = di/dv. */
static void stamp_branch(stamp_ctx *k, int a, int b, double i, double g)
{
    int ra = k->s->node_state[a], rb = k->s->node_state[b];
    add_r(k, a, -i);
    add_r(k, b, i);
    if (!k->dr)
        return;
    add_dn(k, ra, a, -g);
    add_dn(k, ra, b, g);
    add_dn(k, rb, a, g);
    add_dn(k, rb, b, -g);
}

static void stamp_poly(stamp_ctx *k, const ru_part *p)
{
    double v = k->v[p->node[0]] - k->v[p->node[1]];
    double i = 0.0, g = 0.0;
    for (int j = p->ncoeffs - 1; j >= 0; j--) { /* Horner for i and di/dv */
        g = g * v + i;
        i = i * v + p->coeffs[j];
    }
    stamp_branch(k, p->node[0], p->node[1], i, g);
}

static void stamp_inductor(stamp_ctx *k, const ru_part *p, int st)
{
    int a = p->node[0], b = p->node[1];
    double i = k->x[st];
    add_r(k, a, -i);
    add_r(k, b, i);
    k->r[st] = (k->v[a] - k->v[b] - p->series_ohm * i) / p->value;
    if (!k->dr)
        return;
    size_t n = k->s->n;
    int ra = k->s->node_state[a], rb = k->s->node_state[b];
    if (ra >= 0)
        k->dr[(size_t)ra * n + (size_t)st] -= 1.0;
    if (rb >= 0)
        k->dr[(size_t)rb * n + (size_t)st] += 1.0;
    add_dn(k, st, a, 1.0 / p->value);
    add_dn(k, st, b, -1.0 / p->value);
    k->dr[(size_t)st * n + (size_t)st] -= p->series_ohm / p->value;
}

/* dr[row][col state] += val (row and column are state indices). */
static void add_ds(stamp_ctx *k, int row, int col, double val)
{
    if (row >= 0 && col >= 0 && k->dr)
        k->dr[(size_t)row * k->s->n + (size_t)col] += val;
}

/* Derivatives of a quantity on state row `row` w.r.t. vc = v(in) - v(inv) and
 * vo = v(out) - v(ref); nd holds in, out, ref, inv (inv resolved). */
static void stamp_amp_dv(stamp_ctx *k, int row, const int *nd, double dvc, double dvo)
{
    add_dn(k, row, nd[0], dvc);
    add_dn(k, row, nd[3], -dvc);
    add_dn(k, row, nd[1], dvo);
    add_dn(k, row, nd[2], -dvo);
}

/* Amplifier: i_out into out and out of ref, i_in into in and out of inv, and the
 * internal state's row. The skipped part's controlled terms (d i_out/d vc, and
 * d rate/d vc for a law with a state) are left out of dr. */
static void stamp_amp(stamp_ctx *k, const ru_part *p, int index)
{
    const int nd[4] = {p->node[0], p->node[1], p->node[2], ru_part_inv_node(p)};
    const int *ns = k->s->node_state;
    double vc = k->v[nd[0]] - k->v[nd[3]], vo = k->v[nd[1]] - k->v[nd[2]];
    int st = ru_sys_part_nstates(p) ? k->s->part_state[index] : -1;
    ru_law_eval e;
    ru_law_eval_state(&p->amp, vc, vo, st >= 0 ? k->x[st] : 0.0, &e);
    add_r(k, nd[1], e.i_out);
    add_r(k, nd[2], -e.i_out);
    add_r(k, nd[0], e.i_in);
    add_r(k, nd[3], -e.i_in);
    if (st >= 0)
        k->r[st] = e.dxs;
    if (!k->dr)
        return;
    int skip = index == k->skip_part;
    double gout = skip ? 0.0 : e.di_out_dvc;
    stamp_amp_dv(k, ns[nd[1]], nd, gout, e.di_out_dvo);
    stamp_amp_dv(k, ns[nd[2]], nd, -gout, -e.di_out_dvo);
    stamp_amp_dv(k, ns[nd[0]], nd, e.di_in_dvc, e.di_in_dvo);
    stamp_amp_dv(k, ns[nd[3]], nd, -e.di_in_dvc, -e.di_in_dvo);
    if (st < 0)
        return;
    add_ds(k, ns[nd[1]], st, e.di_out_dxs);
    add_ds(k, ns[nd[2]], st, -e.di_out_dxs);
    stamp_amp_dv(k, st, nd, skip ? 0.0 : e.ddxs_dvc, e.ddxs_dvo);
    add_ds(k, st, st, e.ddxs_dxs);
}

static void stamp_diode(stamp_ctx *k, const ru_part *p)
{
    double g;
    double i = ru_diode_current(&p->diode, k->v[p->node[0]] - k->v[p->node[1]], &g);
    stamp_branch(k, p->node[0], p->node[1], i, g);
}

/* Thermal resistor: current v/R(rise) a -> b, and the heat balance row. */
static void stamp_thermal(stamp_ctx *k, const ru_part *p, int st)
{
    int a = p->node[0], b = p->node[1];
    const int *ns = k->s->node_state;
    ru_thermal_eval e;
    ru_thermal_eval_at(&p->thermal, k->v[a] - k->v[b], k->x[st], &e);
    stamp_branch(k, a, b, e.i, e.di_dv);
    k->r[st] = e.dx;
    if (!k->dr)
        return;
    add_ds(k, ns[a], st, -e.di_dx);
    add_ds(k, ns[b], st, e.di_dx);
    add_dn(k, st, a, e.ddx_dv);
    add_dn(k, st, b, -e.ddx_dv);
    add_ds(k, st, st, e.ddx_dx);
}

static void stamp_part(stamp_ctx *k, const ru_src_eval *e, size_t i)
{
    const ru_part *p = ru_circuit_part(k->s->c, i);
    int a = p->node[0], b = p->node[1];
    double w, dw;
    switch (p->type) {
    case RU_PART_RESISTOR:
        stamp_branch(k, a, b, (k->v[a] - k->v[b]) / p->value, 1.0 / p->value);
        if (k->s->noise.on && !e->dc) /* Johnson-Nyquist current, 4kT/R one-sided */
            stamp_branch(k, a, b,
                         sqrt(2.0 * k->s->noise.kt_j / (p->value * k->s->noise.dt_s)) *
                             ru_noise_unit(&k->s->noise, (uint64_t)i, e->t_s),
                         0.0);
        break;
    case RU_PART_CAPACITOR: /* only the coupling to driven nodes (dv = 0 else) */
        add_r(k, a, p->value * k->dv[b]);
        add_r(k, b, p->value * k->dv[a]);
        break;
    case RU_PART_INDUCTOR:
        stamp_inductor(k, p, k->s->part_state[i]);
        if (k->s->noise.on && !e->dc && p->series_ohm > 0) /* 4kTR in the branch */
            k->r[k->s->part_state[i]] +=
                sqrt(2.0 * k->s->noise.kt_j * p->series_ohm / k->s->noise.dt_s) *
                ru_noise_unit(&k->s->noise, (uint64_t)i, e->t_s) / p->value;
        break;
    case RU_PART_CURRENT:
        ru_sys_source(p, e, &w, &dw);
        stamp_branch(k, a, b, w, 0.0);
        break;
    case RU_PART_POLY:
        stamp_poly(k, p);
        break;
    case RU_PART_AMPLIFIER:
        stamp_amp(k, p, (int)i);
        break;
    case RU_PART_DIODE:
        stamp_diode(k, p);
        break;
    case RU_PART_THERMAL:
        stamp_thermal(k, p, k->s->part_state[i]);
        break;
    default: /* supplies fix nodes and add no row terms */
        break;
    }
}

/* r (required) and dr (optional) at an evaluation point. */
static ru_status residual_core(const ru_system *s, const ru_src_eval *e,
                               const double *x, double *r, double *dr, int skip_part)
{
    size_t n = s->n;
    double local[RU_SYS_STACK_DOUBLES];
    double *v = 2 * s->nnodes <= RU_SYS_STACK_DOUBLES
                    ? local
                    : malloc(2 * s->nnodes * sizeof *v);
    if (!v)
        return RU_ENOMEM;
    stamp_ctx k = {s, x, v, v + s->nnodes, r, dr, skip_part};
    ru_sys_node_values(s, e, x, k.v, k.dv);
    memset(r, 0, n * sizeof *r);
    if (dr)
        memset(dr, 0, n * n * sizeof *dr);
    for (size_t i = 0; i < s->nparts; i++)
        stamp_part(&k, e, i);
    if (v != local)
        free(v);
    for (size_t i = 0; i < n; i++)
        if (!isfinite(r[i]))
            return RU_ENUMERIC;
    return RU_OK;
}

ru_status ru_system_residual(const ru_system *s, const ru_eval_point *ep,
                             const double *x, double *r, double *dr)
{
    ru_src_eval e = {ep->t_s, ep->dc, ep->source_scale};
    double local[RU_SYS_STACK_DOUBLES];
    double *rr = r ? r : s->n <= RU_SYS_STACK_DOUBLES ? local : malloc(s->n * sizeof *rr);
    if (!rr)
        return RU_ENOMEM;
    ru_status st = residual_core(s, &e, x, rr, dr, -1);
    if (rr != r && rr != local)
        free(rr);
    return st;
}

ru_status ru_system_rhs(const ru_system *s, double t, const double *x, double *f)
{
    ru_src_eval e = {t, 0, 1.0};
    ru_status st = residual_core(s, &e, x, f, NULL, -1);
    if (st == RU_OK)
        ru_sys_csolve(s, f);
    return st;
}

ru_status ru_system_jacobian(const ru_system *s, double t, const double *x, double *J)
{
    size_t n = s->n;
    ru_src_eval e = {t, 0, 1.0};
    double local[RU_SYS_STACK_DOUBLES];
    double *r = n <= RU_SYS_STACK_DOUBLES ? local : malloc(n * sizeof *r);
    if (!r)
        return RU_ENOMEM;
    ru_status st = residual_core(s, &e, x, r, J, -1);
    if (st == RU_OK) /* J[:nf, :] = C^{-1} dr[:nf, :], all columns at once */
        ru_sys_csolve_rows(s, J, n);
    if (r != local)
        free(r);
    return st;
}

void ru_system_mass(const ru_system *s, double *M)
{
    size_t n = s->n, nf = s->nfree;
    memset(M, 0, n * n * sizeof *M);
    for (size_t i = 0; i < nf; i++)
        for (size_t j = 0; j < nf; j++)
            M[i * n + j] = s->cmat[i * nf + j];
    for (size_t i = nf; i < n; i++)
        M[i * n + i] = 1.0;
}

/* b: the controlled terms of the part: d i_out/d vc on the rows of out (+) and
 * ref (-), and d rate/d vc on its internal state's row; g: e_in - e_inv.
 * v holds the node voltages at the DC evaluation point, x the states. */
static void loop_vectors(const ru_system *s, int part, const double *v, const double *x,
                         double *b, double *g)
{
    const ru_part *p = ru_circuit_part(s->c, (size_t)part);
    const int nd[4] = {p->node[0], p->node[1], p->node[2], ru_part_inv_node(p)};
    memset(b, 0, s->n * sizeof *b);
    memset(g, 0, s->n * sizeof *g);
    int st = ru_sys_part_nstates(p) ? s->part_state[part] : -1;
    ru_law_eval le;
    ru_law_eval_state(&p->amp, v[nd[0]] - v[nd[3]], v[nd[1]] - v[nd[2]],
                      st >= 0 ? x[st] : 0.0, &le);
    int si = s->node_state[nd[0]], so = s->node_state[nd[1]], sr = s->node_state[nd[2]],
        sn = s->node_state[nd[3]];
    if (so >= 0)
        b[so] += le.di_out_dvc;
    if (sr >= 0)
        b[sr] -= le.di_out_dvc;
    if (st >= 0)
        b[st] += le.ddxs_dvc;
    if (si >= 0)
        g[si] += 1.0;
    if (sn >= 0)
        g[sn] -= 1.0;
}

ru_status ru_system_loop_split(const ru_system *s, int part, const double *x,
                               double *A0, double *b, double *g, ru_error *err)
{
    const ru_part *p = part >= 0 ? ru_circuit_part(s->c, (size_t)part) : NULL;
    if (!p || p->type != RU_PART_AMPLIFIER)
        return ru_error_set(err, RU_EINPUT, ru_circuit_file(s->c), p ? p->line : 0,
                            p ? p->col : 0, "part %s is not an amplifier: no loop to break",
                            p ? p->name : "?");
    ru_src_eval e = {0.0, 1, 1.0};
    size_t nn = s->nnodes;
    double *r = malloc((s->n + 2 * nn + 1) * sizeof *r);
    if (!r)
        return ru_error_set(err, RU_ENOMEM, "", 0, 0, "out of memory");
    ru_status st = residual_core(s, &e, x, r, A0, part);
    if (st == RU_OK) {
        ru_sys_node_values(s, &e, x, r + s->n, r + s->n + nn);
        loop_vectors(s, part, r + s->n, x, b, g);
    }
    free(r);
    if (st != RU_OK)
        return ru_error_set(err, st, ru_circuit_file(s->c), p->line, p->col,
                            st == RU_ENOMEM ? "part %s: out of memory"
                                            : "part %s: the residual is not finite "
                                              "at this state",
                            p->name);
    return RU_OK;
}

ru_status ru_system_set_noise(ru_system *s, unsigned long seed, double bandwidth_hz,
                              double temp_c)
{
    if (!(bandwidth_hz > 0) || !isfinite(bandwidth_hz) || !(temp_c > -273.15) ||
        !isfinite(temp_c))
        return RU_ERANGE;
    s->noise.on = 1;
    s->noise.seed = (uint64_t)seed;
    s->noise.dt_s = 0.5 / bandwidth_hz;
    s->noise.kt_j = 1.380649e-23 * (temp_c + 273.15); /* exact 2019 SI k */
    return RU_OK;
}

ru_status ru_system_eval(const ru_system *s, const ru_eval_point *ep, const double *x,
                         double *f, double *J)
{
    size_t n = s->n;
    ru_src_eval e = {ep->t_s, ep->dc, ep->source_scale};
    double local[RU_SYS_STACK_DOUBLES];
    double *r = f ? f : n <= RU_SYS_STACK_DOUBLES ? local : malloc(n * sizeof *r);
    if (!r)
        return RU_ENOMEM;
    ru_status st = residual_core(s, &e, x, r, J, -1);
    if (st == RU_OK && f)
        ru_sys_csolve(s, f);
    if (st == RU_OK && J)
        ru_sys_csolve_rows(s, J, n);
    if (r != f && r != local)
        free(r);
    return st;
}
