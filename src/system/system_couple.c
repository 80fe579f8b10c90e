/* system_couple.c: magnetic couplings between inductors in the mass matrix.
 *
 * An inductor's row is its rate with unit mass, di/dt = (v - R i)/L. Coupled
 * inductors obey L_set di/dt = v - R i with the inductance matrix L_set (self
 * inductances on the diagonal, M = k sqrt(La Lb) off it), so their rows become
 * B di/dt = (v - R i)/L with B = D^-1 L_set, D = diag(L): ones on the diagonal and
 * M/La on a's row in b's column (each coupling's descriptor gives them, ru_mutual).
 * Circuits without a coupling keep the identity there, to the last bit.
 *
 * B = D^-1/2 K D^1/2 with K the matrix of coupling coefficients (ones on the
 * diagonal), so B has the leading principal minors of K: when K is positive
 * definite (checked here by Cholesky: each |k| < 1 is not enough for three or more
 * windings) B factors as L U without pivoting. The solves of system.c apply
 * B^-1 to the coupled rows after the capacitance solve (ru_sys_lsolve). */
#include "system/system_impl.h"

#include <lapacke.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static ru_status couple_fail(const ru_system *s, const ru_part *p, ru_error *err,
                             const char *fmt, const char *a, const char *b)
{
    char what[RU_ERROR_TEXT];
    snprintf(what, sizeof what, fmt, a, b);
    return ru_error_set(err, RU_EINPUT, ru_circuit_file(s->c), p->line, p->col,
                        "part %s: %s", p->name, what);
}

/* The branch state of the part named name, which must be of type want with one
 * state; -1 (and err) otherwise. */
static int named_state(const ru_system *s, const ru_part *p, const char *name,
                       ru_part_type want, ru_error *err)
{
    int q = ru_circuit_find_part(s->c, name);
    const ru_part *o = q >= 0 ? ru_circuit_part(s->c, (size_t)q) : NULL;
    if (!o || o->type != want || s->part_state[q] < 0 || ru_sys_part_nstates(o) != 1) {
        couple_fail(s, p, err, "%s is not a%s of this circuit", name,
                    want == RU_PART_INDUCTOR ? "n inductor" : " part of the named type");
        return -1;
    }
    return s->part_state[q];
}

/* Index of state x in the sorted list lg of nlg states. */
static size_t lg_index(const ru_system *s, int x)
{
    size_t lo = 0, hi = s->nlg;
    while (lo < hi) {
        size_t mid = (lo + hi) / 2;
        if (s->lg[mid] < x)
            lo = mid + 1;
        else
            hi = mid;
    }
    return lo;
}

static int int_cmp(const void *a, const void *b)
{
    int x = *(const int *)a, y = *(const int *)b;
    return (x > y) - (x < y);
}

/* K positive definite (Cholesky), then B = L U in place (no pivoting). */
static ru_status factor_block(ru_system *s, ru_error *err)
{
    size_t m = s->nlg;
    double *K = calloc(m * m, sizeof *K);
    if (!K)
        return ru_error_set(err, RU_ENOMEM, "", 0, 0, "out of memory");
    for (size_t i = 0; i < m; i++) {
        K[i * m + i] = 1.0;
        s->lg_lu[i * m + i] = 1.0;
    }
    for (size_t q = 0; q < s->ncpl; q++) {
        size_t a = lg_index(s, s->cpl[q].a), b = lg_index(s, s->cpl[q].b);
        K[a * m + b] = K[b * m + a] = s->cpl[q].k;
        s->lg_lu[a * m + b] = s->cpl[q].ab;
        s->lg_lu[b * m + a] = s->cpl[q].ba;
    }
    lapack_int info = LAPACKE_dpotrf(LAPACK_ROW_MAJOR, 'L', (lapack_int)m, K, (lapack_int)m);
    free(K);
    if (info != 0)
        return ru_error_set(err, RU_EINPUT, ru_circuit_file(s->c), 0, 0,
                            "the couplings make the inductance matrix of the coupled "
                            "inductors not positive definite (no physical set of windings "
                            "has these coefficients k): lower some |k|");
    double *A = s->lg_lu;
    for (size_t k = 0; k < m; k++) /* Doolittle: L unit lower, U upper, in A */
        for (size_t i = k + 1; i < m; i++) {
            double l = A[i * m + k] / A[k * m + k];
            A[i * m + k] = l;
            for (size_t j = k + 1; j < m; j++)
                A[i * m + j] -= l * A[k * m + j];
        }
    return RU_OK;
}

ru_status ru_sys_couplings(ru_system *s, ru_error *err)
{
    size_t cnt = 0;
    for (size_t i = 0; i < s->nparts; i++) {
        const ru_part_desc *d = ru_part_desc_get(ru_circuit_part(s->c, i)->type);
        cnt += d && d->mutual && d->refs && d->refs->count == 2;
    }
    if (cnt == 0)
        return RU_OK;
    s->cpl = calloc(cnt, sizeof *s->cpl);
    s->lg = calloc(2 * cnt, sizeof *s->lg);
    if (!s->cpl || !s->lg)
        return ru_error_set(err, RU_ENOMEM, "", 0, 0, "out of memory");
    for (size_t i = 0; i < s->nparts; i++) {
        const ru_part *p = ru_circuit_part(s->c, i);
        const ru_part_desc *d = ru_part_desc_get(p->type);
        if (!(d && d->mutual && d->refs && d->refs->count == 2))
            continue;
        const char(*names)[RU_NAME_MAX] =
            (const char(*)[RU_NAME_MAX])((const char *)p + d->refs->offset);
        int a = named_state(s, p, names[0], d->refs->type, err);
        int b = a >= 0 ? named_state(s, p, names[1], d->refs->type, err) : -1;
        if (a < 0 || b < 0)
            return RU_EINPUT;
        if (a == b)
            return couple_fail(s, p, err, "couples %s with itself%s", names[0], "");
        for (size_t q = 0; q < s->ncpl; q++)
            if ((s->cpl[q].a == a && s->cpl[q].b == b) || (s->cpl[q].a == b && s->cpl[q].b == a))
                return couple_fail(s, p, err, "%s and %s are coupled twice (one coupling "
                                   "per pair of inductors)", names[0], names[1]);
        ru_mutual mu;
        d->mutual(p, ru_circuit_part(s->c, (size_t)ru_circuit_find_part(s->c, names[0])),
                  ru_circuit_part(s->c, (size_t)ru_circuit_find_part(s->c, names[1])), &mu);
        s->cpl[s->ncpl++] = (ru_sys_coupling){a, b, mu.k, mu.m_h, mu.ab, mu.ba};
        s->lg[s->nlg++] = a;
        s->lg[s->nlg++] = b;
    }
    qsort(s->lg, s->nlg, sizeof *s->lg, int_cmp);
    size_t u = 0;
    for (size_t i = 0; i < s->nlg; i++)
        if (i == 0 || s->lg[i] != s->lg[u - 1])
            s->lg[u++] = s->lg[i];
    s->nlg = u;
    if (u > RU_COUPLED_MAX)
        return ru_error_set(err, RU_EINPUT, ru_circuit_file(s->c), 0, 0,
                            "%zu inductors are coupled; at most %d may be", u,
                            RU_COUPLED_MAX);
    s->lg_lu = calloc(u * u, sizeof *s->lg_lu);
    if (!s->lg_lu)
        return ru_error_set(err, RU_ENOMEM, "", 0, 0, "out of memory");
    return factor_block(s, err);
}

void ru_sys_free_couplings(ru_system *s)
{
    free(s->cpl);
    free(s->lg);
    free(s->lg_lu);
}

/* y = B^-1 y over the coupled states (y has nlg entries). */
static void block_solve(const ru_system *s, double *y)
{
    size_t m = s->nlg;
    const double *A = s->lg_lu;
    for (size_t i = 0; i < m; i++)
        for (size_t j = 0; j < i; j++)
            y[i] -= A[i * m + j] * y[j];
    for (size_t i = m; i-- > 0;) {
        for (size_t j = i + 1; j < m; j++)
            y[i] -= A[i * m + j] * y[j];
        y[i] /= A[i * m + i];
    }
}

void ru_sys_lsolve(const ru_system *s, double *b)
{
    double y[RU_COUPLED_MAX]; /* nlg <= RU_COUPLED_MAX (ru_sys_couplings) */
    for (size_t k = 0; k < s->nlg; k++)
        y[k] = b[s->lg[k]];
    block_solve(s, y);
    for (size_t k = 0; k < s->nlg; k++)
        b[s->lg[k]] = y[k];
}

void ru_sys_lsolve_rows(const ru_system *s, double *B, size_t ncols)
{
    double y[RU_COUPLED_MAX];
    for (size_t c = 0; s->nlg > 0 && c < ncols; c++) {
        for (size_t k = 0; k < s->nlg; k++)
            y[k] = B[(size_t)s->lg[k] * ncols + c];
        block_solve(s, y);
        for (size_t k = 0; k < s->nlg; k++)
            B[(size_t)s->lg[k] * ncols + c] = y[k];
    }
}

void ru_sys_couplings_mass(const ru_system *s, double *M, size_t n)
{
    for (size_t q = 0; q < s->ncpl; q++) {
        M[(size_t)s->cpl[q].a * n + (size_t)s->cpl[q].b] = s->cpl[q].ab;
        M[(size_t)s->cpl[q].b * n + (size_t)s->cpl[q].a] = s->cpl[q].ba;
    }
}
