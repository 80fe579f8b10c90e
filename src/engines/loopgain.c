/* loopgain.c: loop gain (return ratio of one amplifier) and network response.
 *
 * Loop gain: dr/dx = A0 + b g^T (ru_system_loop_split), L(jw) = g^T (jwM - A0)^{-1} b
 * by one complex LU solve (LAPACKE_zgesv) per frequency, as a loop handle
 * (loop_impl.h; the sweep is in loopsweep.c); ru_loopgain_at and ru_loopgain_sweep
 * are one-call forms over a temporary handle.
 * Response: (jwM - dr/dx) v = 0 for every row but the driven input node's, which
 * becomes v_in = 1; the answer is v_out. Ground and supply-driven output nodes
 * carry no signal (0). Invariants: all work arrays belong to one call. */
#include "base/cplx.h"
#include "engines/loop_impl.h"
#include "engines/smallsig_impl.h"

#include <complex.h>
#include <lapacke.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#define RU_PI 3.14159265358979323846
#define GOLDEN_MAX 100       /* golden-section steps of the peak search */

/* Linear pieces shared by the loop-gain and response solves. */
typedef struct lin_ctx {
    size_t n;
    double *A;                 /* A0 (loop) or dr/dx (response), n*n */
    double *M;                 /* mass matrix, n*n */
    double *b, *g;             /* loop: injection and sensing vectors (n) */
    lapack_complex_double *K;  /* jwM - A, n*n */
    lapack_complex_double *v;  /* right-hand side, then solution (n) */
    lapack_int *ipiv;          /* n */
} lin_ctx;

static void ctx_free(lin_ctx *c)
{
    free(c->A);
    free(c->M);
    free(c->b);
    free(c->g);
    free(c->K);
    free(c->v);
    free(c->ipiv);
}

static ru_status ctx_alloc(lin_ctx *c, size_t n, ru_error *err)
{
    memset(c, 0, sizeof *c);
    c->n = n;
    size_t m = n ? n : 1;
    c->A = malloc(m * m * sizeof *c->A);
    c->M = malloc(m * m * sizeof *c->M);
    c->b = malloc(m * sizeof *c->b);
    c->g = malloc(m * sizeof *c->g);
    c->K = malloc(m * m * sizeof *c->K);
    c->v = malloc(m * sizeof *c->v);
    c->ipiv = malloc(m * sizeof *c->ipiv);
    if (c->A && c->M && c->b && c->g && c->K && c->v && c->ipiv)
        return RU_OK;
    return ru_error_set(err, RU_ENOMEM, "", 0, 0, "small-signal: out of memory");
}

/* K = jwM - A. */
static void fill_k(lin_ctx *c, double w)
{
    for (size_t i = 0; i < c->n * c->n; i++)
        c->K[i] = RU_CMPLX(-c->A[i], w * c->M[i]);
}

static ru_status solve_k(lin_ctx *c, double f_hz, ru_error *err)
{
    lapack_int n = (lapack_int)c->n;
    lapack_int info = LAPACKE_zgesv(LAPACK_ROW_MAJOR, n, 1, c->K, n, c->ipiv, c->v, 1);
    if (info != 0)
        return ru_error_set(err, RU_ENUMERIC, "", 0, 0,
                            "small-signal: the network matrix is singular at %g Hz",
                            f_hz);
    return RU_OK;
}

/* ---- loop gain of one amplifier ---- */

static ru_status loop_setup(const ru_system *s, int part, const double *x, lin_ctx *c,
                            ru_error *err)
{
    const ru_circuit *ci = ru_system_circuit(s);
    if (part < 0 || (size_t)part >= ru_circuit_part_count(ci))
        return ru_error_set(err, RU_EINPUT, "", 0, 0, "loop gain: no part number %d",
                            part);
    const ru_part *p = ru_circuit_part(ci, (size_t)part);
    if (!ru_part_breaks_loop(p))
        return ru_error_set(err, RU_EINPUT, ru_circuit_file(ci), p->line, p->col,
                            "loop gain: part %s is a %s, not an amplifier", p->name,
                            ru_part_type_name(p->type));
    ru_status st = ctx_alloc(c, ru_system_size(s), err);
    if (st != RU_OK)
        return st;
    if (c->n == 0)
        return ru_error_set(err, RU_EINPUT, "", 0, 0, "loop gain: the system is empty");
    st = ru_system_loop_split(s, part, x, c->A, c->b, c->g, err);
    if (st != RU_OK)
        return st;
    ru_system_mass(s, c->M);
    return RU_OK;
}

static ru_status loop_eval(ru_loop *l, double f_hz, double complex *L, ru_error *err)
{
    lin_ctx *c = l->ctx;
    fill_k(c, 2.0 * RU_PI * f_hz);
    for (size_t i = 0; i < c->n; i++)
        c->v[i] = c->b[i];
    ru_status st = solve_k(c, f_hz, err);
    if (st != RU_OK)
        return st;
    double complex sum = 0;
    for (size_t i = 0; i < c->n; i++)
        sum += c->g[i] * c->v[i];
    *L = sum;
    return RU_OK;
}

static void loop_free(void *ctx)
{
    if (ctx)
        ctx_free(ctx);
    free(ctx);
}

ru_status ru_loop_create_part(const ru_system *s, int part, const double *x,
                              ru_loop **out, ru_error *err)
{
    *out = NULL;
    lin_ctx *c = calloc(1, sizeof *c);
    if (!c)
        return ru_error_set(err, RU_ENOMEM, "", 0, 0, "loop gain: out of memory");
    ru_status st = loop_setup(s, part, x, c, err);
    if (st != RU_OK) {
        loop_free(c);
        return st;
    }
    const ru_part *p = ru_circuit_part(ru_system_circuit(s), (size_t)part);
    return ru_loop_wrap(loop_eval, loop_free, c, p->name, out, err);
}

static ru_status sweep_args(double fmin_hz, double fmax_hz, size_t npts,
                            size_t min_pts, ru_error *err)
{
    if (!(isfinite(fmin_hz) && isfinite(fmax_hz) && fmin_hz > 0 && fmax_hz > fmin_hz))
        return ru_error_set(err, RU_ERANGE, "", 0, 0,
                            "sweep: need 0 < fmin < fmax (got %g, %g)", fmin_hz, fmax_hz);
    if (npts < min_pts)
        return ru_error_set(err, RU_ERANGE, "", 0, 0,
                            "sweep: need at least %zu points (got %zu)", min_pts, npts);
    return RU_OK;
}

static double log_point(double fmin, double fmax, size_t k, size_t npts)
{
    if (k + 1 == npts)
        return fmax;
    return fmin * pow(fmax / fmin, (double)k / (double)(npts - 1));
}

static double deg_of(double complex z) { return atan2(cimag(z), creal(z)) * 180.0 / RU_PI; }

/* One-call forms over a temporary handle. */
ru_status ru_loopgain_at(const ru_system *s, int part, const double *x, double f_hz,
                         double *re, double *im, ru_error *err)
{
    ru_loop *l = NULL;
    ru_status st = RU_OK;
    if (!(isfinite(f_hz) && f_hz >= 0))
        st = ru_error_set(err, RU_ERANGE, "", 0, 0,
                          "loop gain: frequency must be finite and >= 0 (got %g)", f_hz);
    if (st == RU_OK)
        st = ru_loop_create_part(s, part, x, &l, err);
    if (st == RU_OK)
        st = ru_loop_eval(l, f_hz, re, im, err);
    else {
        if (re)
            *re = NAN;
        if (im)
            *im = NAN;
    }
    ru_loop_destroy(l);
    return st;
}

ru_status ru_loopgain_sweep(const ru_system *s, int part, const double *x,
                            double fmin_hz, double fmax_hz, size_t npts, double *f_hz,
                            double *mag, double *phase_deg, ru_loop_summary *sum,
                            ru_error *err)
{
    ru_loop *l = NULL;
    ru_status st = sweep_args(fmin_hz, fmax_hz, npts, 2, err);
    if (st == RU_OK)
        st = ru_loop_create_part(s, part, x, &l, err);
    if (st == RU_OK)
        st = ru_loop_sweep(l, fmin_hz, fmax_hz, npts, f_hz, mag, phase_deg, sum, err);
    else if (sum)
        *sum = (ru_loop_summary){0, NAN, NAN, NAN};
    ru_loop_destroy(l);
    return st;
}

/* ---- network response ---- */

static ru_status response_setup(const ru_system *s, const double *x, int node_in,
                                int node_out, lin_ctx *c, int *k_in, int *k_out,
                                ru_error *err)
{
    const ru_circuit *ci = ru_system_circuit(s);
    int nn = (int)ru_circuit_node_count(ci);
    memset(c, 0, sizeof *c);
    if (node_in < 0 || node_in >= nn || node_out < 0 || node_out >= nn)
        return ru_error_set(err, RU_EINPUT, "", 0, 0,
                            "response: node numbers %d, %d are not in the circuit",
                            node_in, node_out);
    *k_in = ru_system_node_state(s, node_in);
    *k_out = ru_system_node_state(s, node_out);
    if (*k_in < 0)
        return ru_error_set(err, RU_EINPUT, "", 0, 0,
                            "response: input node %s is %s; drive a free node",
                            ru_circuit_node_name(ci, node_in),
                            *k_in == -1 ? "ground" : "driven by a supply");
    ru_status st = ctx_alloc(c, ru_system_size(s), err);
    if (st == RU_OK)
        st = ru_ss_linearize(s, x, c->A, c->M, err);
    return st;
}

/* v(out)/v(in) at f_hz into *h. */
static ru_status response_eval(lin_ctx *c, int k_in, int k_out, double f_hz,
                               double complex *h, ru_error *err)
{
    if (k_out < 0) {
        *h = 0; /* ground or a supply-driven node: no small signal */
        return RU_OK;
    }
    fill_k(c, 2.0 * RU_PI * f_hz);
    for (size_t j = 0; j < c->n; j++) {
        c->K[(size_t)k_in * c->n + j] = j == (size_t)k_in ? 1.0 : 0.0;
        c->v[j] = j == (size_t)k_in ? 1.0 : 0.0;
    }
    ru_status st = solve_k(c, f_hz, err);
    if (st == RU_OK)
        *h = c->v[k_out];
    return st;
}

ru_status ru_response_at(const ru_system *s, const double *x, int node_in,
                         int node_out, double f_hz, double *mag, double *phase_deg,
                         ru_error *err)
{
    lin_ctx c;
    int k_in = -1, k_out = -1;
    double complex h = 0;
    ru_status st = RU_OK;
    memset(&c, 0, sizeof c);
    if (!(isfinite(f_hz) && f_hz >= 0))
        st = ru_error_set(err, RU_ERANGE, "", 0, 0,
                          "response: frequency must be finite and >= 0 (got %g)", f_hz);
    if (st == RU_OK)
        st = response_setup(s, x, node_in, node_out, &c, &k_in, &k_out, err);
    if (st == RU_OK)
        st = response_eval(&c, k_in, k_out, f_hz, &h, err);
    if (mag)
        *mag = st == RU_OK ? cabs(h) : NAN;
    if (phase_deg)
        *phase_deg = st == RU_OK ? deg_of(h) : NAN;
    ctx_free(&c);
    return st;
}

/* Golden-section search for the largest |H| over log f in [a, b]. */
static ru_status golden_peak(lin_ctx *c, int k_in, int k_out, double a, double b,
                             double *f_best, double *m_best, ru_error *err)
{
    const double gr = 0.6180339887498949;
    double la = log(a), lb = log(b);
    double x1 = lb - gr * (lb - la), x2 = la + gr * (lb - la);
    double complex h1, h2;
    ru_status st = response_eval(c, k_in, k_out, exp(x1), &h1, err);
    if (st == RU_OK)
        st = response_eval(c, k_in, k_out, exp(x2), &h2, err);
    for (int k = 0; st == RU_OK && k < GOLDEN_MAX && lb - la > 1e-12; k++) {
        if (cabs(h1) > cabs(h2)) {
            lb = x2, x2 = x1, h2 = h1;
            x1 = lb - gr * (lb - la);
            st = response_eval(c, k_in, k_out, exp(x1), &h1, err);
        } else {
            la = x1, x1 = x2, h1 = h2;
            x2 = la + gr * (lb - la);
            st = response_eval(c, k_in, k_out, exp(x2), &h2, err);
        }
    }
    if (st == RU_OK && cabs(h1) > *m_best) {
        *m_best = cabs(h1);
        *f_best = exp(x1);
    }
    if (st == RU_OK && cabs(h2) > *m_best) {
        *m_best = cabs(h2);
        *f_best = exp(x2);
    }
    return st;
}

ru_status ru_response_peak(const ru_system *s, const double *x, int node_in,
                           int node_out, double fmin_hz, double fmax_hz, size_t npts,
                           double *f_peak_hz, double *mag_peak, ru_error *err)
{
    lin_ctx c;
    int k_in = -1, k_out = -1;
    size_t best = 0;
    double f_best = NAN, m_best = -1.0;
    memset(&c, 0, sizeof c);
    ru_status st = sweep_args(fmin_hz, fmax_hz, npts, 3, err);
    if (st == RU_OK)
        st = response_setup(s, x, node_in, node_out, &c, &k_in, &k_out, err);
    for (size_t k = 0; st == RU_OK && k < npts; k++) {
        double f = log_point(fmin_hz, fmax_hz, k, npts);
        double complex h;
        st = response_eval(&c, k_in, k_out, f, &h, err);
        if (st == RU_OK && cabs(h) > m_best) {
            m_best = cabs(h);
            f_best = f;
            best = k;
        }
    }
    if (st == RU_OK) {
        double a = log_point(fmin_hz, fmax_hz, best > 0 ? best - 1 : 0, npts);
        double b = log_point(fmin_hz, fmax_hz, best + 1 < npts ? best + 1 : best, npts);
        st = golden_peak(&c, k_in, k_out, a, b, &f_best, &m_best, err);
    }
    if (f_peak_hz)
        *f_peak_hz = st == RU_OK ? f_best : NAN;
    if (mag_peak)
        *mag_peak = st == RU_OK ? m_best : NAN;
    ctx_free(&c);
    return st;
}
