/* system.c: the bottom of the system layer (see ringup/system.h): source values,
 * node voltages, solves with the capacitance factor, accessors, the initial
 * state, breakpoints, charge-conserving jumps and tolerance scales. Building a
 * system (supplies, numbering, C and its factor) is in system_create.c, the
 * residual and Jacobian stamps in system_stamp.c, the differential-algebraic
 * split and the sparse pattern in system_dae.c. */
#include "system/system_impl.h"

#include "parts/desc.h"
#include "parts/wave.h"

#include <lapacke.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

void ru_sys_source(const ru_part *p, const ru_src_eval *e, double *v, double *dvdt)
{
    ru_wave_eval(&p->wave, e->t_s, e->dc, e->scale, v, dvdt);
}

/* The descriptor of part i (never NULL: the circuit accepted only known types). */
static const ru_part_desc *desc_of(const ru_system *s, size_t i)
{
    return ru_part_desc_get(ru_circuit_part(s->c, i)->type);
}


void ru_sys_node_values(const ru_system *s, const ru_src_eval *e, const double *x,
                        double *v, double *dv)
{
    for (size_t k = 0; k < s->nnodes; k++) {
        int st = s->node_state[k];
        v[k] = st >= 0 ? x[st] : 0.0;
        dv[k] = 0.0;
    }
    for (size_t i = 0; i < s->ndriven; i++) {
        int k = s->drive_order[i];
        const ru_drive *d = &s->drive[k];
        double w, dw;
        ru_sys_source(ru_circuit_part(s->c, (size_t)d->part), e, &w, &dw);
        v[k] = v[d->from] + d->sign * w;
        dv[k] = dv[d->from] + d->sign * dw;
    }
}

/* C_dd y = b over the differential free nodes, b of nfd entries. */
static void csolve_factor(const ru_system *s, double *b)
{
    size_t n = s->nfd;
    const double *L = s->cfac;
    for (size_t i = 0; i < n; i++) { /* L y = b; L(i,j) = 0 for j < crow0[i] */
        double acc = b[i];
        for (size_t j = s->crow0[i]; j < i; j++)
            acc -= L[i + j * n] * b[j];
        b[i] = acc / L[i + i * n];
    }
    for (size_t i = n; i-- > 0;) { /* L^T x = y; L(j,i) = 0 for j > ccol1[i] */
        double acc = b[i];
        const double *col = L + i * n;
        for (size_t j = i + 1; j <= s->ccol1[i]; j++)
            acc -= col[j] * b[j];
        b[i] = acc / col[i];
    }
}

void ru_sys_csolve(const ru_system *s, double *b)
{
    if (s->nalg == 0) {
        csolve_factor(s, b);
        return;
    }
    double local[RU_SYS_STACK_DOUBLES];
    double *q = s->nfd <= RU_SYS_STACK_DOUBLES ? local : malloc(s->nfd * sizeof *q);
    if (!q) { /* no scratch: no rates (the caller's figures are estimates only) */
        memset(b, 0, s->nfree * sizeof *b);
        return;
    }
    for (size_t i = 0; i < s->nfd; i++)
        q[i] = b[s->fd[i]];
    csolve_factor(s, q);
    memset(b, 0, s->nfree * sizeof *b);
    for (size_t i = 0; i < s->nfd; i++)
        b[s->fd[i]] = q[i];
    if (q != local)
        free(q);
}

/* row_i -= l * row_j over ncols entries. */
static void row_axpy(double *ri, const double *rj, double l, size_t ncols)
{
    for (size_t c = 0; c < ncols; c++)
        ri[c] -= l * rj[c];
}

void ru_sys_csolve_rows(const ru_system *s, double *B, size_t ncols)
{
    size_t n = s->nfree;
    const double *L = s->cfac;
    for (size_t i = 0; i < n; i++) {
        double *ri = B + i * ncols;
        for (size_t j = s->crow0[i]; j < i; j++)
            row_axpy(ri, B + j * ncols, L[i + j * n], ncols);
        for (size_t c = 0; c < ncols; c++)
            ri[c] /= L[i + i * n];
    }
    for (size_t i = n; i-- > 0;) {
        double *ri = B + i * ncols;
        const double *col = L + i * n;
        for (size_t j = i + 1; j <= s->ccol1[i]; j++)
            row_axpy(ri, B + j * ncols, col[j], ncols);
        for (size_t c = 0; c < ncols; c++)
            ri[c] /= col[i];
    }
}

int ru_sys_part_nstates(const ru_part *p)
{
    const ru_part_desc *d = ru_part_desc_get(p->type);
    return d && d->nstates ? d->nstates(p) : 0;
}

/* The capacitances of part i into cap; returns how many. */
int ru_sys_part_caps(const ru_system *s, size_t i, ru_cap cap[RU_PART_CAPS_MAX])
{
    const ru_part_desc *d = desc_of(s, i);
    return d->caps ? d->caps(ru_circuit_part(s->c, i), cap) : 0;
}

void ru_sys_pairs_add(ru_sys_pairs *p, int row, int col)
{
    if (p->failed)
        return;
    if (p->n == p->cap) {
        size_t cap = p->cap ? 2 * p->cap : 256;
        long *rc = realloc(p->rc, 2 * cap * sizeof *rc);
        if (!rc) {
            p->failed = 1;
            return;
        }
        p->rc = rc;
        p->cap = cap;
    }
    p->rc[2 * p->n] = row;
    p->rc[2 * p->n + 1] = col;
    p->n++;
}

long ru_sys_pattern_find(const ru_system *s, int row, int col)
{
    long lo = s->pat_colptr[col], hi = s->pat_colptr[col + 1] - 1;
    while (lo <= hi) {
        long mid = lo + (hi - lo) / 2, r = s->pat_rowind[mid];
        if (r == row)
            return mid;
        if (r < row)
            lo = mid + 1;
        else
            hi = mid - 1;
    }
    return -1;
}

/* ---- accessors ------------------------------------------------------------- */

const ru_circuit *ru_system_circuit(const ru_system *s) { return s->c; }
size_t ru_system_size(const ru_system *s) { return s->n; }
size_t ru_system_free_nodes(const ru_system *s) { return s->nfree; }

const char *ru_system_state_name(const ru_system *s, size_t i)
{
    return i < s->n ? s->names[i] : "?";
}

int ru_system_node_state(const ru_system *s, int node)
{
    if (node < 0 || (size_t)node >= s->nnodes)
        return RU_NS_RANGE;
    return s->node_state[node];
}

int ru_system_inductor_state(const ru_system *s, int part)
{
    if (part < 0 || (size_t)part >= s->nparts ||
        desc_of(s, (size_t)part)->state_group != RU_STATES_BRANCH)
        return -1;
    return s->part_state[part];
}

int ru_system_part_state(const ru_system *s, int part)
{
    if (part < 0 || (size_t)part >= s->nparts)
        return -1;
    return s->part_state[part];
}

/* Voltage of a node with the sources evaluated as e says. */
static double node_voltage_at(const ru_system *s, int node, ru_src_eval e, const double *x)
{
    if (node <= 0 || (size_t)node >= s->nnodes)
        return 0.0;
    double v = 0.0;
    while (s->node_state[node] == RU_NS_DRIVEN) { /* walk the chain to gnd/free */
        const ru_drive *d = &s->drive[node];
        double w, dw;
        ru_sys_source(ru_circuit_part(s->c, (size_t)d->part), &e, &w, &dw);
        v += d->sign * w;
        node = d->from;
    }
    return v + (s->node_state[node] >= 0 ? x[s->node_state[node]] : 0.0);
}

double ru_system_node_voltage(const ru_system *s, int node, double t, const double *x)
{
    ru_src_eval e = {t, 0, 1.0};
    return node_voltage_at(s, node, e, x);
}

double ru_system_node_voltage_dc(const ru_system *s, int node, const double *x)
{
    ru_src_eval e = {0.0, 1, 1.0};
    return node_voltage_at(s, node, e, x);
}

/* ---- initial state, breakpoints, jumps, scales ------------------------------ */

/* Jump (kind 1: v(t+) - v(t-) for t > 0) or value at 0+ (kind 0) of a driven
 * node: the supplies' sum along its chain. */
static double driven_delta(const ru_system *s, int node, double t, int kind)
{
    double v = 0.0;
    while (node > 0 && s->node_state[node] == RU_NS_DRIVEN) {
        const ru_drive *d = &s->drive[node];
        const ru_wave *w = &ru_circuit_part(s->c, (size_t)d->part)->wave;
        v += d->sign * (kind ? ru_wave_jump(w, t) : ru_wave_value(w, t));
        node = d->from;
    }
    return v;
}

/* x_free += C^{-1} C_fd dv_d for the driven nodes' change dv_d (value at 0+ when
 * kind is 0, jump at t when kind is 1). Returns 0 when scratch was not available. */
static int charge_share(const ru_system *s, double t, int kind, double *x)
{
    size_t nf = s->nfree;
    double small[64];
    double *q = nf <= 64 ? small : malloc(nf * sizeof *q);
    if (!q)
        return 0;
    memset(q, 0, nf * sizeof *q);
    int any = 0;
    for (size_t i = 0; i < s->nparts; i++) {
        ru_cap cap[RU_PART_CAPS_MAX];
        int nc = ru_sys_part_caps(s, i, cap);
        for (int j = 0; j < nc; j++) {
            int a = cap[j].a, b = cap[j].b, sa = s->node_state[a], sb = s->node_state[b];
            double da = sa >= 0 ? 0.0 : driven_delta(s, a, t, kind);
            double db = sb >= 0 ? 0.0 : driven_delta(s, b, t, kind);
            if (sa >= 0 && db != 0.0) {
                q[sa] += cap[j].c_f * db;
                any = 1;
            }
            if (sb >= 0 && da != 0.0) {
                q[sb] += cap[j].c_f * da;
                any = 1;
            }
        }
    }
    if (any) {
        ru_sys_csolve(s, q);
        for (size_t i = 0; i < nf; i++)
            x[i] += q[i];
    }
    if (q != small)
        free(q);
    return 1;
}

/* States at rest (their descriptors' state_rest; 0 without one): an opamp's
 * vint at its rest, a thermal rise and an inductor current at 0. */
static void internal_rest(const ru_system *s, double *x0)
{
    for (size_t i = 0; i < s->nparts; i++) {
        const ru_part *p = ru_circuit_part(s->c, i);
        const ru_part_desc *d = desc_of(s, i);
        int ns = ru_sys_part_nstates(p);
        for (int j = 0; d->state_rest && j < ns; j++)
            x0[s->part_state[i] + j] = d->state_rest(p, j);
    }
}

ru_status ru_system_initial_state(const ru_system *s, double *x0, ru_error *err)
{
    memset(x0, 0, s->n * sizeof *x0);
    internal_rest(s, x0);
    if (!charge_share(s, 0.0, 0, x0))
        return ru_error_set(err, RU_ENOMEM, "", 0, 0, "out of memory");
    const ru_run_opts *ro = ru_circuit_run_opts_const(s->c);
    if (ro->kick != RU_KICK_PRESET)
        return RU_OK;
    for (int i = 0; i < ro->npreset && i < RU_PRESET_MAX; i++) {
        int node = ro->preset_node[i];
        int st = ru_system_node_state(s, node);
        if (st < 0) {
            int line, col;
            ru_circuit_node_place(s->c, node, &line, &col);
            return ru_error_set(err, RU_EINPUT, ru_circuit_file(s->c), line, col,
                                "preset node %s is %s; only free nodes can be preset",
                                ru_circuit_node_name(s->c, node),
                                st == RU_NS_GROUND ? "gnd"
                                : st == RU_NS_DRIVEN ? "driven by a supply"
                                                     : "not a node");
        }
        if (s->kind[st] == RU_STATE_ALGEBRAIC) {
            int line, col;
            ru_circuit_node_place(s->c, node, &line, &col);
            return ru_error_set(err, RU_EINPUT, ru_circuit_file(s->c), line, col,
                                "preset node %s has no capacitance, so its voltage "
                                "follows from the rest of the circuit at every "
                                "instant; preset a node with capacitance",
                                ru_circuit_node_name(s->c, node));
        }
        x0[st] = ro->preset_v[i];
    }
    return RU_OK;
}

/* Relative spacing below which breakpoints of different sources merge; the same
 * tolerance ru_wave_jump uses, so a merged time applies every source's jump. */
#define BP_MERGE 1e-12


size_t ru_system_breakpoints(const ru_system *s, double t_stop, double *bp, size_t max)
{
    size_t count = 0;
    double t = 0.0;
    for (;;) {
        double next = INFINITY;
        for (size_t i = 0; i < s->nparts; i++)
            if (desc_of(s, i)->source != RU_SOURCE_NONE)
                next = fmin(next, ru_wave_next_breakpoint(&ru_circuit_part(s->c, i)->wave, t));
        if (!(next <= t_stop))
            break;
        if (count < max)
            bp[count] = next;
        count++;
        t = next * (1.0 + BP_MERGE); /* edges this close count as one time */
    }
    return count;
}

double ru_system_autonomous_from(const ru_system *s)
{
    if (s->noise.on)
        return INFINITY;
    double t = 0.0;
    for (size_t i = 0; i < s->nparts; i++) {
        if (desc_of(s, i)->source != RU_SOURCE_NONE)
            t = fmax(t, ru_wave_constant_from(&ru_circuit_part(s->c, i)->wave));
    }
    return t;
}

void ru_system_apply_jump(const ru_system *s, double t, double *x)
{
    if (!(t > 0))
        return; /* t = 0 belongs to ru_system_initial_state */
    (void)charge_share(s, t, 1, x); /* scratch only fails beyond 64 free nodes */
}

/* Scales for absolute tolerances. Node voltages: one figure for all, the
 * largest of 1 V, the sum of wave peaks along any supply chain and any preset
 * voltage. Inductor currents: the amplitude an LC tank of that inductor and the
 * circuit's whole capacitance (capacitors plus strays) would carry at that
 * voltage, V sqrt(C_total / L), or the largest current source peak when that is
 * larger. C_total overstates a single tank's C when there are several tanks, so
 * the scale errs large by sqrt of that ratio at most. Internal states: an
 * opamp's vint the node-voltage scale or its rails' size, if larger; a thermal
 * rise the steady rise P rth that the voltage scale across r0 would give, kept
 * within 1 K .. 1000 K. */

/* Volts: 1 V or the largest supply chain sum, source peak or preset. */
static double voltage_scale(const ru_system *s)
{
    double vmax = 1.0;
    for (size_t i = 0; i < s->ndriven; i++) {
        double sum = 0.0;
        for (int k = s->drive_order[i]; k > 0 && s->node_state[k] == RU_NS_DRIVEN;
             k = s->drive[k].from)
            sum += ru_wave_peak(&ru_circuit_part(s->c, (size_t)s->drive[k].part)->wave);
        vmax = fmax(vmax, sum);
    }
    const ru_run_opts *ro = ru_circuit_run_opts_const(s->c);
    if (ro->kick == RU_KICK_PRESET)
        for (int i = 0; i < ro->npreset && i < RU_PRESET_MAX; i++)
            vmax = fmax(vmax, fabs(ro->preset_v[i]));
    return vmax;
}

void ru_system_state_scale(const ru_system *s, double *scale)
{
    size_t ndefault = 0; /* free nodes at the circuit's default stray */
    double strays = 0.0;
    for (size_t k = 1; k < s->nnodes; k++) {
        if (s->node_state[k] < 0)
            continue;
        if (ru_circuit_node_stray_set(s->c, (int)k))
            strays += ru_circuit_node_stray_f(s->c, (int)k);
        else
            ndefault++;
    }
    ru_scale_env env = {voltage_scale(s), strays + ru_circuit_stray_f(s->c) * (double)ndefault,
                        0.0};
    for (size_t i = 0; i < s->nparts; i++) {
        const ru_part *p = ru_circuit_part(s->c, i);
        ru_cap cap[RU_PART_CAPS_MAX];
        int nc = ru_sys_part_caps(s, i, cap);
        for (int j = 0; j < nc; j++)
            env.c_total_f += cap[j].c_f;
        if (desc_of(s, i)->source == RU_SOURCE_CURRENT)
            env.i_source_a = fmax(env.i_source_a, ru_wave_peak(&p->wave));
    }
    for (size_t i = 0; i < s->nfree; i++)
        scale[i] = env.v_scale;
    for (size_t i = s->nfree; i < s->n; i++)
        scale[i] = 1.0;
    for (size_t i = 0; i < s->nparts; i++) {
        const ru_part *p = ru_circuit_part(s->c, i);
        const ru_part_desc *d = desc_of(s, i);
        int ns = ru_sys_part_nstates(p);
        for (int j = 0; d->state_scale && j < ns; j++)
            scale[s->part_state[i] + j] = d->state_scale(p, j, &env);
    }
}
