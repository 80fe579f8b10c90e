/* system_dae.c: the differential-algebraic split of a system (which states have
 * mass and which follow from KCL at every instant), the check that KCL fixes every
 * algebraic degree of freedom, the sparse pattern of dr/dx and M, and the storage
 * rates (see ringup/system.h).
 *
 * Split. Free nodes joined by capacitors form groups (union-find over capacitors
 * with both terminals free). A group with capacitance to ground (a stray above 0,
 * or a capacitor to ground or to a driven node) is differential throughout; C is
 * positive definite on it. A group without has C singular on it with the null
 * vector "every member up by the same amount": a lone node is algebraic, a larger
 * group's lowest state becomes its reference (RU_STATE_COMMON) and the others
 * stay differential (their differences from the reference are what the
 * capacitors hold). fd lists the differential free nodes; C restricted to them is
 * positive definite (each group keeps a node tied, through its capacitors, to
 * ground or to its reference), so system.c factors that block.
 *
 * Fixed by KCL. A degree of freedom without mass is defined only if something
 * with a conductance ties it to a fixed level: union-find over every part's
 * kcl_links (its descriptor; resistive parts, supplies, outputs behind a
 * resistance, not inductors, current sources or amplifier inputs) and
 * capacitances, anchored at ground and at nodes with a stray capacitance. An algebraic node or
 * group whose set is not anchored has no defined voltage (the network has an
 * inductor or current-source cut-set, index 2 or singular) and is refused.
 *
 * Pattern. One residual evaluation in recording mode lists every (row, column) a
 * stamp writes; the diagonal and C's entries are added, and the pairs are sorted
 * into compressed sparse columns once. */
#include "system/system_impl.h"

#include "parts/desc.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* ---- union-find ------------------------------------------------------------ */

static int uf_find(int *parent, int i)
{
    while (parent[i] != i) {
        parent[i] = parent[parent[i]];
        i = parent[i];
    }
    return i;
}

static void uf_join(int *parent, int a, int b)
{
    a = uf_find(parent, a);
    b = uf_find(parent, b);
    if (a != b)
        parent[a > b ? a : b] = a < b ? a : b; /* the smaller index is the root */
}

/* ---- the split --------------------------------------------------------------- */

/* grounded[root] for the capacitor groups of free nodes (parent over nodes): the
 * capacitances every part's descriptor declares. */
static void capacitor_groups(const ru_system *s, int *parent, char *grounded)
{
    for (size_t k = 0; k < s->nnodes; k++)
        parent[k] = (int)k;
    memset(grounded, 0, s->nnodes);
    for (size_t i = 0; i < s->nparts; i++) {
        ru_cap cap[RU_PART_CAPS_MAX];
        int nc = ru_sys_part_caps(s, i, cap);
        for (int j = 0; j < nc; j++)
            if (cap[j].c_f > 0 && s->node_state[cap[j].a] >= 0 &&
                s->node_state[cap[j].b] >= 0)
                uf_join(parent, cap[j].a, cap[j].b);
    }
    for (size_t k = 1; k < s->nnodes; k++)
        if (s->node_state[k] >= 0 && ru_circuit_node_stray_f(s->c, (int)k) > 0)
            grounded[uf_find(parent, (int)k)] = 1;
    for (size_t i = 0; i < s->nparts; i++) {
        ru_cap cap[RU_PART_CAPS_MAX];
        int nc = ru_sys_part_caps(s, i, cap);
        for (int j = 0; j < nc; j++) {
            int a = cap[j].a, b = cap[j].b;
            if (!(cap[j].c_f > 0))
                continue;
            if (s->node_state[a] >= 0 && s->node_state[b] < 0)
                grounded[uf_find(parent, a)] = 1;
            if (s->node_state[b] >= 0 && s->node_state[a] < 0)
                grounded[uf_find(parent, b)] = 1;
        }
    }
}

/* Kinds and groups of the free nodes from their capacitor groups. */
static void classify(ru_system *s, int *parent, const char *grounded)
{
    int *first = malloc(s->nnodes * sizeof *first); /* per root: lowest member state */
    int *size = calloc(s->nnodes, sizeof *size);
    if (!first || !size) { /* caller checked memory for s; treat as all differential */
        free(first);
        free(size);
        return;
    }
    for (size_t k = 0; k < s->nnodes; k++)
        first[k] = -1;
    for (size_t k = 1; k < s->nnodes; k++) {
        int st = s->node_state[k], root = uf_find(parent, (int)k);
        if (st < 0)
            continue;
        size[root]++;
        if (first[root] < 0 || st < first[root])
            first[root] = st;
    }
    for (size_t k = 1; k < s->nnodes; k++) {
        int st = s->node_state[k], root = uf_find(parent, (int)k);
        if (st < 0 || grounded[root])
            continue;
        if (size[root] == 1) {
            s->kind[st] = RU_STATE_ALGEBRAIC;
            s->nalg++;
        } else {
            s->group[st] = first[root];
            if (st == first[root]) {
                s->kind[st] = RU_STATE_COMMON;
                s->nalg++;
            }
        }
    }
    free(first);
    free(size);
}

/* Node pairs part i ties at every instant: its descriptor's kcl_links (dc_links
 * when it has none) and its capacitances; returns how many (at most
 * RU_PART_LINKS_MAX + RU_PART_CAPS_MAX). */
static int tied_pairs(const ru_system *s, size_t i,
                      int ab[RU_PART_LINKS_MAX + RU_PART_CAPS_MAX][2])
{
    const ru_part *p = ru_circuit_part(s->c, i);
    const ru_part_desc *d = ru_part_desc_get(p->type);
    int n = 0;
    if (d && d->kcl_links)
        n = d->kcl_links(p, ab);
    else if (d && d->dc_links)
        n = d->dc_links(p, ab);
    ru_cap cap[RU_PART_CAPS_MAX];
    int nc = ru_sys_part_caps(s, i, cap);
    for (int j = 0; j < nc; j++, n++)
        ab[n][0] = cap[j].a, ab[n][1] = cap[j].b;
    return n;
}

/* The group's nodes joined by commas ("a, b, c"), for a message. */
static void group_names(const ru_system *s, int ref, char *buf, size_t size)
{
    size_t len = 0;
    buf[0] = 0;
    for (size_t k = 1; k < s->nnodes && len + 1 < size; k++) {
        int st = s->node_state[k];
        if (st >= 0 && s->group[st] == ref)
            len += (size_t)snprintf(buf + len, size - len, "%s%s", len ? ", " : "",
                                    ru_circuit_node_name(s->c, (int)k));
    }
}

/* Every algebraic degree of freedom tied by conductances or capacitors to ground
 * or to a node with a stray capacitance. */
static ru_status check_fixed(const ru_system *s, int *parent, char *anchored,
                             ru_error *err)
{
    for (size_t k = 0; k < s->nnodes; k++)
        parent[k] = (int)k;
    for (size_t i = 0; i < s->nparts; i++) {
        int ab[RU_PART_LINKS_MAX + RU_PART_CAPS_MAX][2];
        int np = tied_pairs(s, i, ab);
        for (int q = 0; q < np; q++)
            uf_join(parent, ab[q][0], ab[q][1]);
    }
    memset(anchored, 0, s->nnodes);
    anchored[0] = 1; /* ground is the root of its own set */
    for (size_t k = 1; k < s->nnodes; k++)
        if (s->node_state[k] >= 0 && ru_circuit_node_stray_f(s->c, (int)k) > 0)
            anchored[uf_find(parent, (int)k)] = 1;
    for (size_t k = 1; k < s->nnodes; k++) {
        int st = s->node_state[k];
        if (st < 0 || s->kind[st] == RU_STATE_DIFFERENTIAL ||
            anchored[uf_find(parent, (int)k)])
            continue;
        int line, col;
        ru_circuit_node_place(s->c, (int)k, &line, &col);
        const char *name = ru_circuit_node_name(s->c, (int)k);
        if (s->kind[st] == RU_STATE_ALGEBRAIC)
            return ru_error_set(err, RU_EINPUT, ru_circuit_file(s->c), line, col,
                                "node %s has no capacitance, and no resistive part, "
                                "capacitor or supply joins it to ground or to a node "
                                "with capacitance (only inductors, current sources or "
                                "amplifier inputs reach it), so nothing fixes its "
                                "voltage: give it a stray capacitance (stray: {nodes: "
                                "{%s: 1p}}) or a resistor to ground",
                                name, name);
        char names[RU_ERROR_TEXT / 2];
        group_names(s, st, names, sizeof names);
        return ru_error_set(err, RU_EINPUT, ru_circuit_file(s->c), line, col,
                            "nodes %s are joined by capacitors with none to ground, and "
                            "no resistive part or supply joins them to ground, so "
                            "nothing fixes their common level: give one of them a "
                            "stray capacitance or a resistor to ground",
                            names);
    }
    return RU_OK;
}

ru_status ru_sys_split(ru_system *s, ru_error *err)
{
    size_t n = s->n ? s->n : 1;
    s->kind = calloc(n, sizeof *s->kind);
    s->group = malloc(n * sizeof *s->group);
    s->fd = malloc((s->nfree ? s->nfree : 1) * sizeof *s->fd);
    int *parent = malloc(s->nnodes * sizeof *parent);
    char *mark = malloc(s->nnodes);
    ru_status st = RU_OK;
    if (!s->kind || !s->group || !s->fd || !parent || !mark) {
        st = ru_error_set(err, RU_ENOMEM, "", 0, 0, "out of memory");
        goto done;
    }
    for (size_t i = 0; i < n; i++)
        s->group[i] = -1; /* kind 0 is RU_STATE_DIFFERENTIAL (calloc) */
    capacitor_groups(s, parent, mark);
    classify(s, parent, mark);
    if (s->nalg > 0)
        st = check_fixed(s, parent, mark, err);
    s->nfd = 0;
    for (size_t i = 0; i < s->nfree; i++)
        if (s->kind[i] == RU_STATE_DIFFERENTIAL)
            s->fd[s->nfd++] = (int)i;
done:
    free(parent);
    free(mark);
    return st;
}

/* ---- the sparse pattern -------------------------------------------------------- */

static int pair_cmp(const void *pa, const void *pb)
{
    const long *a = pa, *b = pb; /* (row, column): sort by column, then row */
    if (a[1] != b[1])
        return a[1] < b[1] ? -1 : 1;
    return (a[0] > b[0]) - (a[0] < b[0]);
}

/* Compressed columns from the sorted pairs (duplicates merged). */
static ru_status pairs_to_csc(ru_system *s, ru_sys_pairs *pr)
{
    if (pr->n > 0) /* no pairs (no states): rc is NULL */
        qsort(pr->rc, pr->n, 2 * sizeof *pr->rc, pair_cmp);
    s->pat_colptr = calloc(s->n + 1, sizeof *s->pat_colptr);
    s->pat_rowind = malloc((pr->n ? pr->n : 1) * sizeof *s->pat_rowind);
    if (!s->pat_colptr || !s->pat_rowind)
        return RU_ENOMEM;
    long m = 0;
    for (size_t i = 0; i < pr->n; i++) {
        const long *e = pr->rc + 2 * i;
        if (m > 0 && i > 0 && e[0] == e[-2] && e[1] == e[-1])
            continue;
        s->pat_rowind[m++] = e[0];
        s->pat_colptr[e[1] + 1]++;
    }
    for (size_t j = 0; j < s->n; j++)
        s->pat_colptr[j + 1] += s->pat_colptr[j];
    s->pat_nnz = m;
    s->pat_mass = calloc((size_t)(m ? m : 1), sizeof *s->pat_mass);
    return s->pat_mass ? RU_OK : RU_ENOMEM;
}

/* M's values over the pattern: C on the free nodes, 1 on every other state. */
static void fill_mass(ru_system *s)
{
    size_t nf = s->nfree;
    for (size_t j = 0; j < s->n; j++)
        for (long q = s->pat_colptr[j]; q < s->pat_colptr[j + 1]; q++) {
            size_t i = (size_t)s->pat_rowind[q];
            if (i < nf && j < nf)
                s->pat_mass[q] = s->cmat[i * nf + j];
            else if (i == j)
                s->pat_mass[q] = 1.0;
        }
    for (size_t q = 0; q < s->ncpl; q++) { /* mutual inductances (system_couple.c) */
        const ru_sys_coupling *k = &s->cpl[q];
        s->pat_mass[ru_sys_pattern_find(s, k->a, k->b)] = k->ab;
        s->pat_mass[ru_sys_pattern_find(s, k->b, k->a)] = k->ba;
    }
}

ru_status ru_sys_build_pattern(ru_system *s, ru_error *err)
{
    size_t n = s->n, nf = s->nfree;
    ru_sys_pairs pr = {0};
    double *x = calloc(2 * (n ? n : 1), sizeof *x);
    ru_status st = x ? RU_OK : RU_ENOMEM;
    for (size_t i = 0; st == RU_OK && i < n; i++)
        ru_sys_pairs_add(&pr, (int)i, (int)i);
    for (size_t i = 0; st == RU_OK && i < nf; i++)
        for (size_t j = 0; j < nf; j++)
            if (i != j && s->cmat[i * nf + j] != 0)
                ru_sys_pairs_add(&pr, (int)i, (int)j);
    for (size_t q = 0; q < s->ncpl; q++) {
        ru_sys_pairs_add(&pr, s->cpl[q].a, s->cpl[q].b);
        ru_sys_pairs_add(&pr, s->cpl[q].b, s->cpl[q].a);
    }
    if (st == RU_OK && n > 0) {
        st = ru_sys_record_pattern(s, x, x + n, &pr);
        if (st == RU_ENUMERIC) /* a non-finite residual at 0 still lists the entries */
            st = RU_OK;
    }
    if (st == RU_OK && pr.failed)
        st = RU_ENOMEM;
    if (st == RU_OK)
        st = pairs_to_csc(s, &pr);
    if (st == RU_OK)
        fill_mass(s);
    free(pr.rc);
    free(x);
    if (st != RU_OK)
        return ru_error_set(err, st, "", 0, 0, "out of memory building the sparse pattern");
    return RU_OK;
}

void ru_sys_free_split(ru_system *s)
{
    free(s->kind);
    free(s->group);
    free(s->fd);
    free(s->pat_colptr);
    free(s->pat_rowind);
    free(s->pat_mass);
}

/* ---- accessors ---------------------------------------------------------------- */

ru_state_kind ru_system_state_kind(const ru_system *s, size_t i)
{
    return i < s->n ? (ru_state_kind)s->kind[i] : RU_STATE_DIFFERENTIAL;
}

int ru_system_state_group(const ru_system *s, size_t i)
{
    return i < s->n ? s->group[i] : -1;
}

size_t ru_system_algebraic_count(const ru_system *s) { return s->nalg; }

void ru_system_sparsity(const ru_system *s, ru_sparsity *p)
{
    p->n = s->n;
    p->nnz = s->pat_nnz;
    p->colptr = s->pat_colptr;
    p->rowind = s->pat_rowind;
    p->mass = s->pat_mass;
}
