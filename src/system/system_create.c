/* system_create.c: compiling a circuit to M x' = r(t, x) (see ringup/system.h):
 * supply resolution (which nodes are driven), state numbering and names, the
 * capacitance matrix and the Cholesky factor of its differential block, then the
 * differential-algebraic split and the sparse pattern (system_dae.c); and the
 * destructor. The top of the system layer: nothing here is called from its other
 * files. */
#include "system/system_impl.h"

#include "parts/desc.h"

#include <lapacke.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

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


/* crow0 and ccol1 of the factor's lower triangle (see system_impl.h); the upper
 * triangle of cfac is not part of L and is ignored. */
static void factor_envelope(ru_system *s)
{
    size_t nf = s->nfd;
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

static void build_cmat(ru_system *s)
{
    size_t nf = s->nfree;
    for (size_t k = 1; k < s->nnodes; k++)
        if (s->node_state[k] >= 0)
            s->cmat[(size_t)s->node_state[k] * (nf + 1)] =
                ru_circuit_node_stray_f(s->c, (int)k);
    for (size_t i = 0; i < s->nparts; i++) {
        ru_cap cap[RU_PART_CAPS_MAX];
        int nc = ru_sys_part_caps(s, i, cap);
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
}

/* The Cholesky factor of the differential free nodes' block of C (all of C for an
 * ODE; symmetric, so row- and column-major are the same). */
static ru_status factor_cmat(ru_system *s, ru_error *err)
{
    size_t nf = s->nfree, nd = s->nfd;
    for (size_t i = 0; i < nd; i++)
        for (size_t j = 0; j < nd; j++)
            s->cfac[i * nd + j] = s->cmat[(size_t)s->fd[i] * nf + (size_t)s->fd[j]];
    if (nd == 0)
        return RU_OK;
    lapack_int info = LAPACKE_dpotrf(LAPACK_COL_MAJOR, 'L', (lapack_int)nd, s->cfac,
                                     (lapack_int)nd);
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
        build_cmat(s);
        st = ru_sys_couplings(s, err);
    }
    if (st == RU_OK) {
        st = ru_sys_split(s, err);
    }
    if (st == RU_OK)
        st = factor_cmat(s, err);
    if (st == RU_OK)
        st = ru_sys_build_pattern(s, err);
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
    ru_sys_free_split(s);
    ru_sys_free_couplings(s);
    free(s);
}
