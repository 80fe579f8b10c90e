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
 * only residual terms. Each part stamps itself through its descriptor
 * (src/parts/, parts/stamp.h): this file fills the stamping context and knows no
 * part type. */
#include "system/system_impl.h"

#include "parts/desc.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

static double noise_unit(const void *ctx, uint64_t stream, double t_s)
{
    return ru_noise_unit(ctx, stream, t_s);
}

/* The stamping context of one evaluation (parts/stamp.h): v and dv are the
 * caller's scratch of nnodes entries each. */
static ru_stamp stamp_init(const ru_system *s, const ru_src_eval *e, const double *x,
                           double *v, double *dv, double *r, double *dr)
{
    ru_stamp st = {s->node_state, v, dv, x, r, dr, s->n, e->t_s, e->dc, e->scale, 0,
                   s->noise.on, s->noise.kt_j, s->noise.dt_s, noise_unit, &s->noise,
                   NULL, NULL};
    return st;
}

/* How Jacobian entries are kept: dense row-major n*n, as values over the system's
 * sparse pattern, or recorded as (row, column) pairs (building that pattern). */
typedef enum { JAC_DENSE, JAC_SPARSE, JAC_RECORD } jac_mode;

typedef struct jac_ctx {
    const ru_system *s;
    double *vals;      /* JAC_SPARSE: nnz values */
    ru_sys_pairs *rec; /* JAC_RECORD: the pairs seen */
    int outside;       /* JAC_SPARSE: an entry fell outside the pattern */
} jac_ctx;

static void jac_sparse(void *ctx, int row, int col, double val)
{
    jac_ctx *j = ctx;
    long at = ru_sys_pattern_find(j->s, row, col);
    if (at >= 0)
        j->vals[at] += val;
    else
        j->outside = 1;
}

static void jac_record(void *ctx, int row, int col, double val)
{
    (void)val;
    ru_sys_pairs_add(((jac_ctx *)ctx)->rec, row, col);
}

/* r (required) and dr (optional, kept as mode says) at an evaluation point. */
static ru_status residual_mode(const ru_system *s, const ru_src_eval *e, const double *x,
                               double *r, double *dr, int skip_part, jac_mode mode,
                               ru_sys_pairs *rec)
{
    size_t n = s->n;
    double local[RU_SYS_STACK_DOUBLES];
    double *v = 2 * s->nnodes <= RU_SYS_STACK_DOUBLES
                    ? local
                    : malloc(2 * s->nnodes * sizeof *v);
    if (!v)
        return RU_ENOMEM;
    jac_ctx jc = {s, dr, rec, 0};
    ru_stamp st = stamp_init(s, e, x, v, v + s->nnodes, r, dr);
    if (dr && mode != JAC_DENSE) {
        st.jac_add = mode == JAC_SPARSE ? jac_sparse : jac_record;
        st.jac_ctx = &jc;
    }
    ru_sys_node_values(s, e, x, v, v + s->nnodes);
    memset(r, 0, n * sizeof *r);
    if (dr && mode == JAC_DENSE)
        memset(dr, 0, n * n * sizeof *dr);
    else if (dr && mode == JAC_SPARSE)
        memset(dr, 0, (size_t)s->pat_nnz * sizeof *dr);
    for (size_t i = 0; i < s->nparts; i++) {
        const ru_part *p = ru_circuit_part(s->c, i);
        const ru_part_desc *d = ru_part_desc_get(p->type);
        st.skip = (int)i == skip_part;
        if (d && d->stamp)
            d->stamp(p, &st, (int)i, s->part_state[i]);
    }
    if (v != local)
        free(v);
    if (jc.outside)
        return RU_ERANGE; /* a stamp outside the pattern: a defect, not bad input */
    for (size_t i = 0; i < n; i++)
        if (!isfinite(r[i]))
            return RU_ENUMERIC;
    return RU_OK;
}

static ru_status residual_core(const ru_system *s, const ru_src_eval *e,
                               const double *x, double *r, double *dr, int skip_part)
{
    return residual_mode(s, e, x, r, dr, skip_part, JAC_DENSE, NULL);
}

ru_status ru_sys_record_pattern(const ru_system *s, const double *x, double *r,
                                ru_sys_pairs *rec)
{
    ru_src_eval e = {0.0, 0, 1.0};
    double flag = 0.0; /* dr non-NULL: "Jacobian wanted"; entries go to rec */
    return residual_mode(s, &e, x, r, &flag, -1, JAC_RECORD, rec);
}

ru_status ru_system_residual_sparse(const ru_system *s, const ru_eval_point *ep,
                                    const double *x, double *r, double *drvals)
{
    ru_src_eval e = {ep->t_s, ep->dc, ep->source_scale};
    return residual_mode(s, &e, x, r, drvals, -1, JAC_SPARSE, NULL);
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
    if (s->nalg > 0)
        return RU_EINPUT; /* a DAE has no explicit form */
    ru_src_eval e = {t, 0, 1.0};
    ru_status st = residual_core(s, &e, x, f, NULL, -1);
    if (st == RU_OK) {
        ru_sys_csolve(s, f);
        ru_sys_lsolve(s, f);
    }
    return st;
}

ru_status ru_system_storage_rates(const ru_system *s, double t, const double *x,
                                  double *xdot)
{
    ru_src_eval e = {t, 0, 1.0};
    ru_status st = residual_core(s, &e, x, xdot, NULL, -1);
    if (st == RU_OK) {
        ru_sys_csolve(s, xdot); /* algebraic rows (KCL residuals) become rates 0 */
        ru_sys_lsolve(s, xdot);
    }
    return st;
}

ru_status ru_system_jacobian(const ru_system *s, double t, const double *x, double *J)
{
    if (s->nalg > 0)
        return RU_EINPUT;
    size_t n = s->n;
    ru_src_eval e = {t, 0, 1.0};
    double local[RU_SYS_STACK_DOUBLES];
    double *r = n <= RU_SYS_STACK_DOUBLES ? local : malloc(n * sizeof *r);
    if (!r)
        return RU_ENOMEM;
    ru_status st = residual_core(s, &e, x, r, J, -1);
    if (st == RU_OK) { /* J = M^{-1} dr: C^{-1} on the node rows, all columns at once */
        ru_sys_csolve_rows(s, J, n);
        ru_sys_lsolve_rows(s, J, n);
    }
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
    ru_sys_couplings_mass(s, M, n);
}

/* b and g of the part's loop (its descriptor's loop), with v the node voltages
 * at the DC evaluation point and x the states. */
static void loop_vectors(const ru_system *s, int part, double *v, const double *x,
                         double *b, double *g)
{
    const ru_part *p = ru_circuit_part(s->c, (size_t)part);
    const ru_part_desc *d = ru_part_desc_get(p->type);
    ru_src_eval e = {0.0, 1, 1.0};
    ru_stamp st = stamp_init(s, &e, x, v, v + s->nnodes, NULL, NULL);
    memset(b, 0, s->n * sizeof *b);
    memset(g, 0, s->n * sizeof *g);
    d->loop(p, &st, s->part_state[part], b, g);
}

ru_status ru_system_loop_split(const ru_system *s, int part, const double *x,
                               double *A0, double *b, double *g, ru_error *err)
{
    const ru_part *p = part >= 0 ? ru_circuit_part(s->c, (size_t)part) : NULL;
    const ru_part_desc *d = p ? ru_part_desc_get(p->type) : NULL;
    if (!d || !d->loop)
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
    if (s->nalg > 0)
        return RU_EINPUT;
    size_t n = s->n;
    ru_src_eval e = {ep->t_s, ep->dc, ep->source_scale};
    double local[RU_SYS_STACK_DOUBLES];
    double *r = f ? f : n <= RU_SYS_STACK_DOUBLES ? local : malloc(n * sizeof *r);
    if (!r)
        return RU_ENOMEM;
    ru_status st = residual_core(s, &e, x, r, J, -1);
    if (st == RU_OK && f) {
        ru_sys_csolve(s, f);
        ru_sys_lsolve(s, f);
    }
    if (st == RU_OK && J) {
        ru_sys_csolve_rows(s, J, n);
        ru_sys_lsolve_rows(s, J, n);
    }
    if (r != f && r != local)
        free(r);
    return st;
}
