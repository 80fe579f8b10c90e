/* loopnode.c: loop gain broken at a node by Middlebrook's double injection (R. D.
 * Middlebrook, "Measurement of loop gain in feedback systems", Int. J. Electronics
 * 38 (1975) 485-512), with every loading kept.
 *
 * The node N is split: the terminals of the load side (the parts named, or the
 * control inputs at N) move to a new node N', the others stay on N (the driver
 * side). The split circuit is compiled to a system of its own and linearized at
 * the operating point (N' at N's voltage); the stray capacitance the compiler gives
 * N' is taken out again (and, for a circuit without strays, the stray lent to every
 * node), so that with N' tied to N the network is the original.
 * A probe ties them: a branch current i_p from N into N' and a voltage
 * v(N') - v(N) = v_z. One LU factorization of the tied network at s = jw serves
 * both injections:
 *   voltage (v_z = 1):          a = v(N) (driver), b = v(N') (load), T_v = -a/b;
 *   current (1 A into N):       d = i_p (into the load), c = i_p - 1 (out of the
 *                               driver into the junction), T_i = -c/d;
 *   T = (T_v T_i - 1)/(T_v + T_i + 2),  L = -T = (b d - a c)/(2 b d - a d - b c),
 * the last form free of divisions by an injection's answer (an ideal amplifier
 * input takes no current: d = 0 and L = a/b). With the sides apart as a two-port
 * (X = N', Y = N, admittances Y_ij), 1/(1 + T) = 1/(1 + T_v) + 1/(1 + T_i) gives
 * L = (Y12 - Y21)/(Y11 + 2 Y12 + Y22): zero for a reciprocal network, and
 * 1 + T = (Y11 + Y12 + Y21 + Y22)/(Y11 + 2 Y12 + Y22) vanishes exactly at the
 * closed circuit's poles. Invariants: the handle owns the split circuit, its
 * system and every work array. */
#include "base/cplx.h"
#include "engines/loop_impl.h"
#include "engines/smallsig_impl.h"

#include "ringup/circuit.h"
#include "ringup/part.h"

#include <lapacke.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define RU_PI 3.14159265358979323846

typedef struct node_ctx {
    ru_circuit *split;         /* the circuit with the node split (owned) */
    ru_system *sys;            /* compiled from it (owned) */
    size_t n;                  /* states of the split system */
    int kd, kl;                /* states of the driver side (N) and the load side (N') */
    double *A, *M;             /* dr/dx and mass matrix of the split system, n*n */
    lapack_complex_double *K;  /* the tied network, (n+1)^2; row and column n: probe */
    lapack_complex_double *B;  /* (n+1) x 2: the two injections, then the answers */
    lapack_int *ipiv;          /* n + 1 */
    char moved[RU_LOOP_LOAD_TEXT]; /* the load side's terminals, "A1 in" */
} node_ctx;

static void node_free(void *p)
{
    node_ctx *c = p;
    if (!c)
        return;
    free(c->A);
    free(c->M);
    free(c->K);
    free(c->B);
    free(c->ipiv);
    ru_system_destroy(c->sys);
    ru_circuit_destroy(c->split);
    free(c);
}

/* A control input: it senses its node's voltage (an amplifier's in and inv, a
 * transconductor's control pair). */
static int is_control(const char *key)
{
    return !strcmp(key, "in") || !strcmp(key, "inv") || !strcmp(key, "control");
}

static int named(const ru_loop_node_spec *sp, int part)
{
    for (int i = 0; i < sp->nload; i++)
        if (sp->load_part[i] == part)
            return 1;
    return 0;
}

/* Appends text to buf (size) with ", " between items, "..." when full. */
static void add_item(char *buf, size_t size, const char *text)
{
    size_t len = strlen(buf);
    if (len + 4 >= size)
        return;
    int w = snprintf(buf + len, size - len, "%s%s", len ? ", " : "", text);
    if (w < 0 || (size_t)w >= size - len)
        snprintf(buf + (size - 4), 4, "...");
}

/* The parts with a terminal on node, "R1, C2, A1 in" (for messages). */
static void parts_at(const ru_circuit *c, int node, char *buf, size_t size)
{
    buf[0] = 0;
    for (size_t i = 0; i < ru_circuit_part_count(c); i++) {
        const ru_part *p = ru_circuit_part(c, i);
        ru_terminal t[RU_PART_NODES];
        int nt = ru_part_terminals(p, t, RU_PART_NODES);
        for (int k = 0; k < nt && k < RU_PART_NODES; k++)
            if (t[k].node == node) {
                char item[RU_NAME_MAX + 16];
                snprintf(item, sizeof item, "%s %s", p->name, t[k].key);
                add_item(buf, size, item);
            }
    }
}

static ru_status break_fail(const ru_circuit *c, int node, ru_error *err, const char *what)
{
    char list[RU_LOOP_LABEL_MAX];
    int line, col;
    parts_at(c, node, list, sizeof list);
    ru_circuit_node_place(c, node, &line, &col);
    return ru_error_set(err, RU_EINPUT, ru_circuit_file(c), line, col,
                        "loop node %s: %s (terminals on it: %s)",
                        ru_circuit_node_name(c, node), what, list[0] ? list : "none");
}

/* A node name the circuit does not have, for the load side. */
static int new_node(ru_circuit *c, const char *base)
{
    char name[RU_NAME_MAX];
    for (int k = 0; k < 1000; k++) {
        if (k == 0 && strlen(base) + 2 < RU_NAME_MAX)
            snprintf(name, sizeof name, "%s'", base);
        else
            snprintf(name, sizeof name, "~load-side-%d", k);
        if (ru_circuit_find_node(c, name) < 0)
            return ru_circuit_node(c, name, 0, 0);
    }
    return -1;
}

/* Moves the load side's terminals from node to a new node of c->split; the label
 * lists them. */
static ru_status split_node(const ru_circuit *orig, const ru_loop_node_spec *sp,
                            node_ctx *c, char *label, size_t size, ru_error *err)
{
    int node = sp->node, nd = 0, nl = 0;
    if (ru_circuit_clone(orig, &c->split) != RU_OK)
        return ru_error_set(err, RU_ENOMEM, "", 0, 0, "loop gain: out of memory");
    int np = new_node(c->split, ru_circuit_node_name(orig, node));
    if (np < 0)
        return break_fail(orig, node, err, "no room for the load side's node");
    char *moved = c->moved;
    moved[0] = 0;
    for (size_t i = 0; i < ru_circuit_part_count(orig); i++) {
        ru_part *p = ru_circuit_part_mut(c->split, i);
        ru_terminal t[RU_PART_NODES];
        int nt = ru_part_terminals(p, t, RU_PART_NODES), here = 0;
        for (int k = 0; k < nt && k < RU_PART_NODES; k++) {
            if (t[k].node != node)
                continue;
            here = 1;
            if (sp->nload > 0 ? named(sp, (int)i) : is_control(t[k].key)) {
                char item[RU_NAME_MAX + 16];
                snprintf(item, sizeof item, "%s %s", p->name, t[k].key);
                add_item(moved, sizeof c->moved, item);
                p->node[t[k].slot] = np;
                nl++;
            } else {
                nd++;
            }
        }
        if (!here && named(sp, (int)i)) {
            char what[RU_NAME_MAX + 48];
            snprintf(what, sizeof what, "part %s has no terminal on it", p->name);
            return break_fail(orig, node, err, what);
        }
    }
    if (nl == 0)
        return break_fail(orig, node, err,
                          "no control input sits on it; name the parts on the far side "
                          "of the break (loop-load)");
    if (nd == 0)
        return break_fail(orig, node, err,
                          "every terminal would be on the load side; the driver side "
                          "needs at least one");
    snprintf(label, size, "node %s (load side: %s)", ru_circuit_node_name(orig, node),
             moved);
    return RU_OK;
}

/* The split system, its linearization at x and the work arrays. */
static ru_status setup(const ru_system *s, const ru_loop_node_spec *sp, const double *x,
                       node_ctx *c, char *label, size_t size, ru_error *err)
{
    const ru_circuit *orig = ru_system_circuit(s);
    int nn = (int)ru_circuit_node_count(orig);
    if (sp->node < 0 || sp->node >= nn)
        return ru_error_set(err, RU_EINPUT, "", 0, 0, "loop gain: no node number %d",
                            sp->node);
    if (sp->nload < 0 || sp->nload > RU_LOOP_LOAD_MAX)
        return ru_error_set(err, RU_EINPUT, "", 0, 0,
                            "loop gain: at most %d parts on the load side (got %d)",
                            RU_LOOP_LOAD_MAX, sp->nload);
    for (int i = 0; i < sp->nload; i++)
        if (sp->load_part[i] < 0 ||
            (size_t)sp->load_part[i] >= ru_circuit_part_count(orig))
            return ru_error_set(err, RU_EINPUT, "", 0, 0,
                                "loop gain: no part number %d", sp->load_part[i]);
    int k = ru_system_node_state(s, sp->node);
    if (k < 0)
        return break_fail(orig, sp->node, err,
                          k == -1 ? "ground cannot be broken"
                                  : "it is held by a supply: no signal to inject into");
    ru_status st = split_node(orig, sp, c, label, size, err);
    /* Without strays (stray: 0) the load side's node could hold no capacitance and
     * nothing resistive (an amplifier input alone), which the compiler refuses: the
     * split circuit gets 1 pF everywhere, taken out of M again below. */
    double stray0 = ru_circuit_stray_f(orig);
    if (st == RU_OK && !(stray0 > 0) && ru_circuit_set_stray_f(c->split, 1e-12) != RU_OK)
        st = ru_error_set(err, RU_ENUMERIC, "", 0, 0, "loop gain: cannot set the stray");
    if (st == RU_OK)
        st = ru_system_create(c->split, &c->sys, err);
    if (st != RU_OK)
        return st;
    size_t n0 = ru_system_size(s), nf = ru_system_free_nodes(s), n = n0 + 1;
    int np = (int)ru_circuit_node_count(c->split) - 1;
    if (ru_system_size(c->sys) != n || ru_system_node_state(c->sys, np) != (int)nf ||
        ru_system_node_state(c->sys, sp->node) != k)
        return ru_error_set(err, RU_ENUMERIC, "", 0, 0,
                            "loop gain: the split circuit's states do not match");
    c->n = n;
    c->kd = k;
    c->kl = (int)nf;
    double *xs = malloc(n * sizeof *xs);
    c->A = malloc(n * n * sizeof *c->A);
    c->M = malloc(n * n * sizeof *c->M);
    c->K = malloc((n + 1) * (n + 1) * sizeof *c->K);
    c->B = malloc(2 * (n + 1) * sizeof *c->B);
    c->ipiv = malloc((n + 1) * sizeof *c->ipiv);
    if (!xs || !c->A || !c->M || !c->K || !c->B || !c->ipiv) {
        free(xs);
        return ru_error_set(err, RU_ENOMEM, "", 0, 0, "loop gain: out of memory");
    }
    for (size_t i = 0; i < n0; i++) /* states past the free nodes move up by one */
        xs[i < nf ? i : i + 1] = x[i];
    xs[nf] = x[k];
    st = ru_ss_linearize(c->sys, xs, c->A, c->M, err);
    free(xs);
    for (int j = 1; j < nn; j++) { /* the stray lent where the file has none */
        int i = ru_system_node_state(s, j);
        if (i >= 0)
            c->M[(size_t)i * n + (size_t)i] -=
                ru_circuit_node_stray_f(c->split, j) - ru_circuit_node_stray_f(orig, j);
    }
    c->M[nf * n + nf] -= ru_circuit_node_stray_f(c->split, np);
    return st;
}

static ru_status node_eval(ru_loop *l, double f_hz, double complex *L, ru_error *err)
{
    node_ctx *c = l->ctx;
    size_t n = c->n, m = n + 1, kd = (size_t)c->kd, kl = (size_t)c->kl;
    double w = 2.0 * RU_PI * f_hz;
    for (size_t i = 0; i < m; i++) {
        for (size_t j = 0; j < m; j++)
            c->K[i * m + j] =
                i < n && j < n ? RU_CMPLX(-c->A[i * n + j], w * c->M[i * n + j]) : 0.0;
        c->B[2 * i] = c->B[2 * i + 1] = 0.0;
    }
    c->K[kd * m + n] = 1.0;  /* i_p leaves N ... */
    c->K[kl * m + n] = -1.0; /* ... and enters N' */
    c->K[n * m + kl] = 1.0;  /* v(N') - v(N) = v_z */
    c->K[n * m + kd] = -1.0;
    c->B[2 * n] = 1.0;       /* voltage injection: v_z = 1 */
    c->B[2 * kd + 1] = 1.0;  /* current injection: 1 A into N */
    lapack_int info =
        LAPACKE_zgesv(LAPACK_ROW_MAJOR, (lapack_int)m, 2, c->K, (lapack_int)m, c->ipiv,
                      c->B, 2);
    if (info != 0)
        return ru_error_set(err, RU_ENUMERIC, "", 0, 0,
                            "loop gain at %s: the network matrix is singular at %g Hz",
                            l->label, f_hz);
    double complex a = c->B[2 * kd], b = c->B[2 * kl];
    double complex d = c->B[2 * n + 1], cc = d - 1.0;
    double complex den = 2.0 * b * d - a * d - b * cc;
    if (cabs(den) == 0.0)
        return ru_error_set(err, RU_ENUMERIC, "", 0, 0,
                            "loop gain at %s is unbounded at %g Hz", l->label, f_hz);
    *L = (b * d - a * cc) / den;
    return RU_OK;
}

ru_status ru_loop_create_node(const ru_system *s, const ru_loop_node_spec *spec,
                              const double *x, ru_loop **out, ru_error *err)
{
    char label[RU_LOOP_LABEL_MAX] = "";
    *out = NULL;
    node_ctx *c = calloc(1, sizeof *c);
    if (!c)
        return ru_error_set(err, RU_ENOMEM, "", 0, 0, "loop gain: out of memory");
    ru_status st = setup(s, spec, x, c, label, sizeof label, err);
    if (st != RU_OK) {
        node_free(c);
        return st;
    }
    st = ru_loop_wrap(node_eval, node_free, c, label, out, err);
    if (st == RU_OK) {
        const ru_circuit *ci = ru_system_circuit(s);
        snprintf((*out)->node, sizeof (*out)->node, "%s",
                 ru_circuit_node_name(ci, spec->node));
        snprintf((*out)->load, sizeof (*out)->load, "%s", c->moved);
    }
    return st;
}

/* Part indices of a comma-separated list of names into sp. */
static ru_status load_list(const ru_circuit *c, const char *csv, ru_loop_node_spec *sp,
                           ru_error *err)
{
    const char *q = csv;
    while (*q) {
        const char *e = strchr(q, ',');
        size_t len = e ? (size_t)(e - q) : strlen(q);
        char name[RU_NAME_MAX], dym[RU_NAME_MAX + 24];
        if (len == 0 || len >= sizeof name)
            return ru_error_set(err, RU_EINPUT, "", 0, 0,
                                "loop load: '%s' is not a list of part names", csv);
        memcpy(name, q, len);
        name[len] = 0;
        int k = ru_circuit_find_part(c, name);
        if (k < 0)
            return ru_error_set(err, RU_EINPUT, "", 0, 0, "loop load: there is no part %s%s",
                                name, ru_circuit_suggest_part(c, name, dym, sizeof dym));
        if (sp->nload >= RU_LOOP_LOAD_MAX)
            return ru_error_set(err, RU_EINPUT, "", 0, 0,
                                "loop load: at most %d parts", RU_LOOP_LOAD_MAX);
        sp->load_part[sp->nload++] = k;
        q = e ? e + 1 : q + len;
    }
    return RU_OK;
}

ru_status ru_loop_create_named(const ru_system *s, const double *x, const char *part,
                               const char *node, const char *load, ru_loop **out,
                               ru_error *err)
{
    const ru_circuit *c = ru_system_circuit(s);
    const ru_measure_opts *mo = ru_circuit_measure_opts_const(c);
    char dym[RU_NAME_MAX + 24];
    ru_loop_node_spec sp = {0};
    *out = NULL;
    if (!part && !node) { /* the file's choice */
        part = mo->loop[0] ? mo->loop : NULL;
        node = mo->loop_node[0] ? mo->loop_node : NULL;
        for (int i = 0; node && !load && i < mo->nloop_load; i++)
            sp.load_part[sp.nload++] = ru_circuit_find_part(c, mo->loop_load[i]);
    }
    if (part && part[0]) {
        int k = ru_circuit_find_part(c, part);
        if (k < 0)
            return ru_error_set(err, RU_EINPUT, "", 0, 0, "loop part %s does not exist%s",
                                part, ru_circuit_suggest_part(c, part, dym, sizeof dym));
        return ru_loop_create_part(s, k, x, out, err);
    }
    if (!node || !node[0])
        return RU_OK;
    sp.node = ru_circuit_find_node(c, node);
    if (sp.node < 0)
        return ru_error_set(err, RU_EINPUT, "", 0, 0, "loop node %s does not exist%s",
                            node, ru_circuit_suggest_node(c, node, dym, sizeof dym));
    ru_status st = load ? load_list(c, load, &sp, err) : RU_OK;
    if (st == RU_OK)
        st = ru_loop_create_node(s, &sp, x, out, err);
    return st;
}
