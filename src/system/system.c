/* system.c: compiling a circuit to the ODE M x' = r(t, x) (see ringup/system.h):
 * supply resolution (which nodes are driven), state numbering and names, the
 * capacitance matrix and its Cholesky factor, node voltages, the initial state,
 * breakpoints, charge-conserving jumps and tolerance scales. The residual and
 * Jacobian stamps live in system_stamp.c. */
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

/* Whether part i is a supply (its wave drives a voltage). */
static int is_supply(const ru_system *s, size_t i)
{
    return desc_of(s, i)->source == RU_SOURCE_VOLTAGE;
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

void ru_sys_csolve(const ru_system *s, double *b)
{
    size_t n = s->nfree;
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

/* ---- construction -------------------------------------------------------- */

static int is_fixed(const ru_system *s, int node)
{
    return s->node_state[node] == RU_NS_GROUND || s->node_state[node] == RU_NS_DRIVEN;
}

static ru_status supply_error(const ru_system *s, const ru_part *p, ru_error *err,
                              const char *what)
{
    return ru_error_set(err, RU_EINPUT, ru_circuit_file(s->c), p->line, p->col,
                        "part %s: %s", p->name, what);
}

/* One pass over the unresolved supplies; *progress counts the ones resolved. */
static ru_status resolve_pass(ru_system *s, char *done, int *progress, ru_error *err)
{
    for (size_t i = 0; i < s->nparts; i++) {
        const ru_part *p = ru_circuit_part(s->c, i);
        if (!is_supply(s, i) || done[i])
            continue;
        int a = p->node[0], b = p->node[1];
        int fa = is_fixed(s, a), fb = is_fixed(s, b);
        if (fa && fb)
            return supply_error(s, p, err,
                                "both terminals are already fixed by gnd or other "
                                "supplies (a loop of supplies)");
        if (!fa && !fb)
            continue;
        int node = fb ? a : b;
        s->drive[node] = (ru_drive){(int)i, fb ? b : a, fb ? +1 : -1};
        s->node_state[node] = RU_NS_DRIVEN;
        s->drive_order[s->ndriven++] = node;
        done[i] = 1;
        (*progress)++;
    }
    return RU_OK;
}

static ru_status resolve_supplies(ru_system *s, ru_error *err)
{
    char *done = calloc(s->nparts ? s->nparts : 1, 1);
    if (!done)
        return ru_error_set(err, RU_ENOMEM, "", 0, 0, "out of memory");
    ru_status st = RU_OK;
    int progress = 1;
    while (st == RU_OK && progress) {
        progress = 0;
        st = resolve_pass(s, done, &progress, err);
    }
    for (size_t i = 0; st == RU_OK && i < s->nparts; i++) {
        const ru_part *p = ru_circuit_part(s->c, i);
        if (is_supply(s, i) && !done[i])
            st = supply_error(s, p, err,
                              "a supply needs one terminal on gnd or on another "
                              "supply's node");
    }
    free(done);
    return st;
}

int ru_sys_part_nstates(const ru_part *p)
{
    const ru_part_desc *d = ru_part_desc_get(p->type);
    return d && d->nstates ? d->nstates(p) : 0;
}

/* Numbers and names the states of the parts of one group (branch currents or
 * internal states) from state k on, in part order; returns the next free k. */
static size_t number_group(ru_system *s, size_t k, int group)
{
    for (size_t i = 0; i < s->nparts; i++) {
        const ru_part *p = ru_circuit_part(s->c, i);
        const ru_part_desc *d = desc_of(s, i);
        int ns = ru_sys_part_nstates(p);
        if (!ns || d->state_group != group)
            continue;
        s->part_state[i] = (int)k;
        for (int j = 0; j < ns; j++, k++)
            d->state_name(p, j, s->names[k], RU_STATE_NAME_MAX);
    }
    return k;
}

static void number_states(ru_system *s)
{
    size_t k = 0;
    for (size_t i = 1; i < s->nnodes; i++)
        if (s->node_state[i] != RU_NS_DRIVEN) {
            s->node_state[i] = (int)k;
            snprintf(s->names[k], RU_STATE_NAME_MAX, "%s",
                     ru_circuit_node_name(s->c, (int)i));
            k++;
        }
    for (size_t i = 0; i < s->nparts; i++)
        s->part_state[i] = -1;
    k = number_group(s, k, RU_STATES_BRANCH);
    number_group(s, k, RU_STATES_INTERNAL);
}

static void count_states(ru_system *s)
{
    s->nfree = 0;
    for (size_t i = 1; i < s->nnodes; i++)
        if (s->node_state[i] != RU_NS_DRIVEN)
            s->nfree++;
    s->nind = 0;
    s->nint = 0;
    for (size_t i = 0; i < s->nparts; i++) {
        size_t ns = (size_t)ru_sys_part_nstates(ru_circuit_part(s->c, i));
        if (desc_of(s, i)->state_group == RU_STATES_BRANCH)
            s->nind += ns;
        else
            s->nint += ns;
    }
    s->n = s->nfree + s->nind + s->nint;
}

/* The capacitances of part i into cap; returns how many. */
static int part_caps(const ru_system *s, size_t i, ru_cap cap[RU_PART_CAPS_MAX])
{
    const ru_part_desc *d = desc_of(s, i);
    return d->caps ? d->caps(ru_circuit_part(s->c, i), cap) : 0;
}

/* crow0 and ccol1 of the factor's lower triangle (see system_impl.h); the upper
 * triangle of cfac is not part of L and is ignored. */
static void factor_envelope(ru_system *s)
{
    size_t nf = s->nfree;
    const double *L = s->cfac;
    for (size_t i = 0; i < nf; i++) {
        size_t j = 0;
        while (j < i && L[i + j * nf] == 0.0)
            j++;
        s->crow0[i] = j;
        size_t k = nf - 1;
        while (k > i && L[k + i * nf] == 0.0)
            k--;
        s->ccol1[i] = k;
    }
}

static ru_status build_cmat(ru_system *s, ru_error *err)
{
    size_t nf = s->nfree;
    double stray = ru_circuit_stray_f(s->c);
    for (size_t i = 0; i < nf; i++)
        s->cmat[i * nf + i] = stray;
    for (size_t i = 0; i < s->nparts; i++) {
        ru_cap cap[RU_PART_CAPS_MAX];
        int nc = part_caps(s, i, cap);
        for (int j = 0; j < nc; j++) {
            int a = s->node_state[cap[j].a], b = s->node_state[cap[j].b];
            double c = cap[j].c_f;
            if (a >= 0)
                s->cmat[a * nf + a] += c;
            if (b >= 0)
                s->cmat[b * nf + b] += c;
            if (a >= 0 && b >= 0) {
                s->cmat[a * nf + b] -= c;
                s->cmat[b * nf + a] -= c;
            }
        }
    }
    memcpy(s->cfac, s->cmat, nf * nf * sizeof *s->cfac);
    if (nf == 0)
        return RU_OK;
    lapack_int info = LAPACKE_dpotrf(LAPACK_COL_MAJOR, 'L', (lapack_int)nf, s->cfac,
                                     (lapack_int)nf);
    if (info != 0)
        return ru_error_set(err, RU_ENUMERIC, ru_circuit_file(s->c), 0, 0,
                            "the capacitance matrix is not positive definite "
                            "(Cholesky failed at column %d)", (int)info);
    factor_envelope(s);
    return RU_OK;
}

static ru_status alloc_system(ru_system *s)
{
    size_t nn = s->nnodes ? s->nnodes : 1, np = s->nparts ? s->nparts : 1;
    s->node_state = calloc(nn, sizeof *s->node_state);
    s->drive = calloc(nn, sizeof *s->drive);
    s->drive_order = calloc(nn, sizeof *s->drive_order);
    s->part_state = calloc(np, sizeof *s->part_state);
    return (s->node_state && s->drive && s->drive_order && s->part_state) ? RU_OK
                                                                         : RU_ENOMEM;
}

static ru_status alloc_states(ru_system *s)
{
    size_t nf = s->nfree ? s->nfree : 1;
    s->cmat = calloc(nf * nf, sizeof *s->cmat);
    s->cfac = calloc(nf * nf, sizeof *s->cfac);
    s->crow0 = calloc(nf, sizeof *s->crow0);
    s->ccol1 = calloc(nf, sizeof *s->ccol1);
    s->names = calloc(s->n ? s->n : 1, sizeof *s->names);
    return (s->cmat && s->cfac && s->crow0 && s->ccol1 && s->names) ? RU_OK : RU_ENOMEM;
}

ru_status ru_system_create(const ru_circuit *c, ru_system **out, ru_error *err)
{
    *out = NULL;
    ru_system *s = calloc(1, sizeof *s);
    if (!s)
        return ru_error_set(err, RU_ENOMEM, "", 0, 0, "out of memory");
    s->c = c;
    s->nnodes = ru_circuit_node_count(c);
    s->nparts = ru_circuit_part_count(c);
    ru_status st = alloc_system(s);
    if (st == RU_OK) {
        s->node_state[0] = RU_NS_GROUND;
        st = resolve_supplies(s, err);
    } else {
        ru_error_set(err, st, "", 0, 0, "out of memory");
    }
    if (st == RU_OK) {
        count_states(s);
        st = s->n > RU_STATES_MAX
                 ? ru_error_set(err, RU_EINPUT, ru_circuit_file(c), 0, 0,
                                "the circuit has %zu states (%zu free nodes, %zu branch "
                                "currents, %zu internal), more than the %d the dense solver "
                                "takes (its time grows with the cube of the states)",
                                s->n, s->nfree, s->nind, s->nint, RU_STATES_MAX)
                 : alloc_states(s);
        if (st == RU_ENOMEM)
            ru_error_set(err, st, "", 0, 0, "out of memory");
    }
    if (st == RU_OK) {
        number_states(s);
        st = build_cmat(s, err);
    }
    if (st != RU_OK) {
        ru_system_destroy(s);
        return st;
    }
    *out = s;
    return RU_OK;
}

void ru_system_destroy(ru_system *s)
{
    if (!s)
        return;
    free(s->node_state);
    free(s->drive);
    free(s->drive_order);
    free(s->part_state);
    free(s->cmat);
    free(s->cfac);
    free(s->crow0);
    free(s->ccol1);
    free(s->names);
    free(s);
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
        int nc = part_caps(s, i, cap);
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
    ru_scale_env env = {voltage_scale(s), ru_circuit_stray_f(s->c) * (double)s->nfree, 0.0};
    for (size_t i = 0; i < s->nparts; i++) {
        const ru_part *p = ru_circuit_part(s->c, i);
        ru_cap cap[RU_PART_CAPS_MAX];
        int nc = part_caps(s, i, cap);
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
