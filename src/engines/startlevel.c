/* startlevel.c: the dominant mode's start level from the actual kick: the
 * initial state's projection, the response to every source's ramp and jump, and
 * the accumulated thermal noise (equations in engines/startlevel.h). */
#include "base/cplx.h"
#include "engines/startlevel.h"

#include "engines/modes.h"

#include <complex.h>
#include <lapacke.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#define RU_K_B 1.380649e-23     /* Boltzmann constant, exact in the 2019 SI (J/K) */
#define EULER_GAMMA 0.5772156649015329
#define BP_MAX 4096             /* source breakpoints followed */
#define DRIVE_REL 1e-10         /* product integration: refinement tolerance */

typedef struct mode_ctx {
    const ru_system *s;
    size_t n;
    double complex lam;
    double complex *v, *u;   /* right vector, left vector (u^H J = lambda u^H) */
    double complex *ut;      /* M^{-T} u, so that u^H M^{-1} b = ut^H b */
    double complex uhv;      /* u^H v */
    double *x_op, *f;        /* operating point, scratch rhs */
    double *xscale;          /* state scales for Newton's convergence test */
    double *work;            /* scratch: 5n + n*n doubles */
    lapack_int *piv;
    double probe;            /* 2 |v_probe| */
    double scale;            /* |z| scale for the refinement tolerance */
} mode_ctx;

static void ctx_free(mode_ctx *c)
{
    free(c->v);
    free(c->u);
    free(c->ut);
    free(c->f);
    free(c->xscale);
    free(c->work);
    free(c->piv);
}

/* u^H y / (u^H v) for a real y. */
static double complex project(const mode_ctx *c, const double *y)
{
    double complex acc = 0;
    for (size_t i = 0; i < c->n; i++)
        acc += conj(c->u[i]) * y[i];
    return acc / c->uhv;
}

static ru_status ctx_init(mode_ctx *c, const ru_system *s, const double *x_op, ru_pole dom,
                          int pos, int neg)
{
    memset(c, 0, sizeof *c);
    c->s = s;
    c->n = ru_system_size(s);
    size_t n = c->n;
    double *w = malloc((4 * n + n * n + 2 * n) * sizeof *w);
    lapack_int *piv = malloc(n * sizeof *piv);
    c->v = malloc(n * sizeof *c->v);
    c->u = malloc(n * sizeof *c->u);
    c->ut = malloc(n * sizeof *c->ut);
    c->f = malloc(n * sizeof *c->f);
    c->xscale = malloc(n * sizeof *c->xscale);
    c->work = malloc((5 * n + n * n) * sizeof *c->work);
    c->piv = malloc(n * sizeof *c->piv);
    c->x_op = (double *)x_op;
    ru_status st = RU_ENOMEM;
    ru_pole lam;
    if (!w || !piv || !c->v || !c->u || !c->ut || !c->f || !c->xscale || !c->work ||
        !c->piv)
        goto done;
    ru_system_state_scale(s, c->xscale);
    if ((st = ru_mode_near(s, x_op, dom, &lam, w, w + n, w + 2 * n, w + 3 * n)) != RU_OK)
        goto done;
    c->lam = RU_CMPLX(lam.re_per_s, lam.im_rad_per_s);
    c->uhv = 0;
    for (size_t i = 0; i < n; i++) {
        c->v[i] = RU_CMPLX(w[i], w[n + i]);
        c->u[i] = RU_CMPLX(w[2 * n + i], w[3 * n + i]);
        c->uhv += conj(c->u[i]) * c->v[i];
    }
    /* Y = M^{-T} u (M is real), or a DAE's input projector (engines/modes.h) */
    double *rhs = w + 4 * n + n * n;
    st = RU_ENUMERIC;
    if (!(cabs(c->uhv) > 0) ||
        ru_mode_input(s, x_op, w + 2 * n, w + 3 * n, rhs, rhs + n) != RU_OK)
        goto done;
    for (size_t i = 0; i < n; i++)
        c->ut[i] = RU_CMPLX(rhs[i], rhs[n + i]);
    st = RU_OK;
    int kp = ru_system_node_state(s, pos), kn = ru_system_node_state(s, neg);
    double complex pv = (kp >= 0 ? c->v[kp] : 0) - (kn >= 0 ? c->v[kn] : 0);
    c->probe = 2.0 * cabs(pv);
    if (!(c->probe > 0))
        st = RU_ENUMERIC;
done:
    free(w);
    free(piv);
    return st;
}

/* ---- the sources' drive ---- */

/* The quasi-static path xq(t): the DC circuit of the moment (every source at its
 * value at t, slopes 0) solved by damped Newton from the guess in x. */
static ru_status path_point(mode_ctx *c, double t, double *x)
{
    size_t n = c->n;
    ru_eval_point ep = {.t_s = t, .dc = 2, .source_scale = 1};
    double *r = c->work, *A = c->work + n, *dx = c->work + n + n * n, *xt = dx + n;
    for (int it = 0; it < 60; it++) {
        ru_status st = ru_system_residual(c->s, &ep, x, r, A);
        if (st != RU_OK)
            return st;
        double f0 = 0;
        for (size_t i = 0; i < n; i++)
            f0 = fmax(f0, fabs(r[i]));
        for (size_t i = 0; i < n; i++)
            dx[i] = -r[i];
        if (LAPACKE_dgesv(LAPACK_ROW_MAJOR, (lapack_int)n, 1, A, (lapack_int)n, c->piv,
                          dx, 1) != 0)
            return RU_ENUMERIC;
        double step = 0, lam = 1;
        for (int half = 0; half < 30; half++, lam *= 0.5) {
            for (size_t i = 0; i < n; i++)
                xt[i] = x[i] + lam * dx[i];
            double f1 = 0;
            if (ru_system_residual(c->s, &ep, xt, r, NULL) != RU_OK)
                continue;
            for (size_t i = 0; i < n; i++)
                f1 = fmax(f1, fabs(r[i]));
            if (f1 < f0 || f1 == 0)
                break;
        }
        for (size_t i = 0; i < n; i++) {
            step = fmax(step, fabs(lam * dx[i]) / c->xscale[i]);
            x[i] = xt[i];
        }
        if (step < 1e-12)
            return RU_OK;
    }
    return RU_ENOCONVERGE;
}

/* g(t) = [u^H M^{-1} r(t, xq) - u^H xq'] / (u^H v) on the path point xq (x): the
 * residual of the moving circuit there holds only the sources' slope terms, and
 * xq' = -A^{-1} d r_static / dt (implicit function theorem, the time derivative
 * by a central difference inside the piece). */
static ru_status drive_at(mode_ctx *c, double t, double dt, const double *x,
                          double complex *g)
{
    size_t n = c->n;
    double *r = c->work, *A = c->work + n, *d = c->work + n + n * n, *r2 = d + n;
    ru_eval_point lo = {.t_s = t - dt, .dc = 2, .source_scale = 1},
                  hi = {.t_s = t + dt, .dc = 2, .source_scale = 1},
                  now = {.t_s = t, .dc = 2, .source_scale = 1};
    ru_status st = ru_system_residual(c->s, &hi, x, d, NULL);
    if (st == RU_OK)
        st = ru_system_residual(c->s, &lo, x, r2, NULL);
    if (st == RU_OK)
        st = ru_system_residual(c->s, &now, x, r, A);
    if (st != RU_OK)
        return st;
    for (size_t i = 0; i < n; i++)
        d[i] = -(d[i] - r2[i]) / (2 * dt);
    if (LAPACKE_dgesv(LAPACK_ROW_MAJOR, (lapack_int)n, 1, A, (lapack_int)n, c->piv, d, 1) != 0)
        return RU_ENUMERIC;
    if (ru_system_algebraic_count(c->s) > 0) { /* no rhs: the residual through ut */
        ru_eval_point at = {.t_s = t, .dc = 0, .source_scale = 1};
        if ((st = ru_system_residual(c->s, &at, x, c->f, NULL)) != RU_OK)
            return st;
        double complex acc = 0;
        for (size_t i = 0; i < n; i++)
            acc += conj(c->ut[i]) * c->f[i];
        *g = acc / c->uhv - project(c, d);
        return RU_OK;
    }
    if ((st = ru_system_rhs(c->s, t, x, c->f)) != RU_OK)
        return st;
    *g = project(c, c->f) - project(c, d);
    return RU_OK;
}

/* I_k(mu) = integral_{-1}^{1} s^k e^{-mu s} ds, k = 0, 1, 2. */
static void moments(double complex mu, double complex mo[3])
{
    if (cabs(mu) < 1.0) { /* Taylor series: sum_j (-mu)^j / j! * integral s^(k+j) */
        for (int k = 0; k < 3; k++) {
            double complex term = 1.0, acc = 0;
            for (int j = 0; j < 30; j++) {
                if ((k + j) % 2 == 0)
                    acc += term * 2.0 / (k + j + 1);
                term *= -mu / (j + 1);
            }
            mo[k] = acc;
        }
        return;
    }
    double complex ep = cexp(mu), em = cexp(-mu);
    mo[0] = (ep - em) / mu;
    mo[1] = -(em + ep) / mu + mo[0] / mu;
    mo[2] = (ep - em) / mu + 2.0 * mo[1] / mu;
}

#define GC 0.7745966692414834 /* sqrt(3/5): Gauss-Legendre points -GC, 0, GC */

/* integral over [a, a + 2h] of e^{-lambda t} g(t), g the quadratic through the
 * values gv at the three Gauss-Legendre points. */
static double complex product_rule(const mode_ctx *c, double a, double h,
                                   const double complex gv[3])
{
    double complex mo[3];
    moments(c->lam * h, mo);
    double c2 = GC * GC;
    double complex w0 = (mo[2] - GC * mo[1]) / (2 * c2), w1 = (c2 * mo[0] - mo[2]) / c2,
                   w2 = (mo[2] + GC * mo[1]) / (2 * c2);
    return h * cexp(-c->lam * (a + h)) * (w0 * gv[0] + w1 * gv[1] + w2 * gv[2]);
}

/* One piece [a, b]: the rule on the whole and on both halves (nine path points,
 * followed in time order from x). *whole and *halves get both results. */
static ru_status piece(mode_ctx *c, double a, double b, double *x, double complex *whole,
                       double complex *halves)
{
    static const int by_time[9] = {3, 0, 4, 5, 1, 6, 7, 2, 8};
    double h = 0.5 * (b - a), q = 0.5 * h, tt[9];
    double complex gv[9];
    for (int i = 0; i < 3; i++) {
        tt[i] = a + h + (i - 1) * GC * h;               /* whole */
        tt[3 + i] = a + q + (i - 1) * GC * q;           /* left half */
        tt[6 + i] = a + 3 * q + (i - 1) * GC * q;       /* right half */
    }
    for (int k = 0; k < 9; k++) { /* time order: l0 w0 l1 l2 w1 r0 r1 w2 r2 */
        int i = by_time[k];
        ru_status st = path_point(c, tt[i], x);
        if (st == RU_OK)
            st = drive_at(c, tt[i], 1e-3 * GC * q, x, &gv[i]);
        if (st != RU_OK)
            return st;
    }
    *whole = product_rule(c, a, h, gv);
    *halves = product_rule(c, a, q, gv + 3) + product_rule(c, a + h, q, gv + 6);
    return RU_OK;
}

/* The drive over one interval between breakpoints, marched forward with pieces
 * that halve until the whole and the halves agree, and grow after a success; the
 * piece is kept below 10 / |sigma| (no overflow in the exact exponentials). */
static ru_status drive_interval(mode_ctx *c, double a, double b, double *x,
                                double complex *acc)
{
    double sg = fabs(creal(c->lam)), hmax = sg > 0 ? 10.0 / sg : INFINITY;
    double h = fmin(b - a, hmax) / 8, t = a;
    double *xs = c->work + 3 * c->n + c->n * c->n + c->n;
    int pieces = 0;
    while (t < b && pieces < 200000) {
        double e = fmin(t + h, b);
        if (b - e < 1e-9 * (b - a))
            e = b;
        double complex whole, halves;
        memcpy(xs, x, c->n * sizeof *x);
        ru_status st = piece(c, t, e, xs, &whole, &halves);
        if (st != RU_OK)
            return st;
        if (cabs(whole - halves) > DRIVE_REL * (c->scale + cabs(*acc) + cabs(halves)) &&
            (e - t) > 1e-9 * (b - a)) {
            h = 0.5 * (e - t);
            continue;
        }
        *acc += halves;
        memcpy(x, xs, c->n * sizeof *x);
        h = fmin(2 * (e - t), hmax);
        t = e;
        pieces++;
    }
    return t >= b ? RU_OK : RU_ENOCONVERGE;
}

/* 1 when a source keeps driving (a sine with an amplitude, a repeating pulse). */
static int periodic_source(const ru_circuit *ci)
{
    for (size_t i = 0; i < ru_circuit_part_count(ci); i++) {
        const ru_part *p = ru_circuit_part(ci, i);
        if (!ru_part_is_source(p))
            continue;
        if ((p->wave.kind == RU_WAVE_SINE && p->wave.amplitude != 0) ||
            (p->wave.kind == RU_WAVE_PULSE && p->wave.period_s > 0 && p->wave.v1 != p->wave.v0))
            return 1;
    }
    return 0;
}

/* z_inf: the initial state against the path's start, the drive between the
 * breakpoints, and each jump (the state's charge-conserving jump against the
 * path's). */
static ru_status deterministic(mode_ctx *c, double t_stop_s, double complex *z_step,
                               double complex *z_inf, ru_error *err)
{
    size_t n = c->n;
    double *x = malloc(3 * n * sizeof *x), *bp = malloc(BP_MAX * sizeof *bp);
    double *xq = x + n, *dj = x + 2 * n;
    ru_status st = RU_ENOMEM;
    if (!x || !bp)
        goto done;
    if ((st = ru_system_initial_state(c->s, x, err)) != RU_OK)
        goto done;
    for (size_t i = 0; i < n; i++)
        dj[i] = x[i] - c->x_op[i];
    *z_step = project(c, dj);            /* the step picture: x0 against the end */
    c->scale = cabs(*z_step);
    memcpy(xq, x, n * sizeof *x);        /* the path at t = 0+ from the initial state */
    if (path_point(c, 0.0, xq) != RU_OK) {
        memcpy(xq, c->x_op, n * sizeof *x);
        if ((st = path_point(c, 0.0, xq)) != RU_OK)
            goto fail;
    }
    for (size_t i = 0; i < n; i++)
        dj[i] = x[i] - xq[i];
    double complex acc = project(c, dj);
    size_t nbp = ru_system_breakpoints(c->s, t_stop_s, bp, BP_MAX);
    double t0 = 0;
    for (size_t k = 0; k < nbp && k < BP_MAX; k++) {
        double t1 = bp[k];
        if (t1 > t0 && (st = drive_interval(c, t0, t1, xq, &acc)) != RU_OK)
            goto fail;
        /* the path just before t1, then after it */
        if ((st = path_point(c, t1 - 1e-9 * (t1 - t0), xq)) != RU_OK)
            goto fail;
        memcpy(dj, xq, n * sizeof *x);
        if ((st = path_point(c, t1, xq)) != RU_OK)
            goto fail;
        memset(x, 0, n * sizeof *x);     /* the state's jump at t1 (linear in the jump) */
        ru_system_apply_jump(c->s, t1, x);
        for (size_t i = 0; i < n; i++)
            dj[i] = x[i] - (xq[i] - dj[i]);
        acc += cexp(-c->lam * t1) * project(c, dj);
        t0 = t1;
    }
    *z_inf = acc;
    st = RU_OK;
    goto done;
fail:
    st = ru_error_set(err, st, NULL, 0, 0,
                      "the circuit's DC state along the supplies' ramp cannot be "
                      "followed");
done:
    free(x);
    free(bp);
    return st;
}

/* ---- thermal noise ---- */

/* sum_k |gamma_k|^2 S_k over every noise source (two-sided densities). */
static double noise_drive(const mode_ctx *c, double temp_c)
{
    const ru_circuit *ci = ru_system_circuit(c->s);
    double kt = RU_K_B * (temp_c + 273.15), acc = 0;
    for (size_t i = 0; i < ru_circuit_part_count(ci); i++) {
        const ru_part *p = ru_circuit_part(ci, i);
        double complex g = 0;
        double dens = 0;
        if (p->type == RU_PART_RESISTOR) { /* current a -> b: out of a, into b */
            int ka = ru_system_node_state(c->s, p->node[0]),
                kb = ru_system_node_state(c->s, p->node[1]);
            g = ((kb >= 0 ? conj(c->ut[kb]) : 0) - (ka >= 0 ? conj(c->ut[ka]) : 0)) / c->uhv;
            dens = 2 * kt / p->value;
        } else if (p->type == RU_PART_INDUCTOR && p->series_ohm > 0) {
            int k = ru_system_inductor_state(c->s, (int)i);
            g = conj(c->ut[k]) / p->value / c->uhv; /* di/dt += v_n / L */
            dens = 2 * kt * p->series_ohm;
        } else if (p->type == RU_PART_CRYSTAL) { /* each arm's R: di/dt += v_n / L */
            double r, l, cm;
            int k = ru_system_part_state(c->s, (int)i);
            for (int a = p->crystal.no_main ? 1 : 0; k >= 0 && ru_crystal_arm(p, a, &r, &l, &cm);
                 a++, k += 2) {
                double complex ga = conj(c->ut[k]) / l / c->uhv;
                acc += creal(ga * conj(ga)) * 2 * kt * r;
            }
        }
        acc += creal(g * conj(g)) * dens;
    }
    return acc;
}

/* exp(-x) I0(x) for x >= 0 (series, then the asymptotic expansion). */
static double i0_scaled(double x)
{
    if (x < 25) {
        double term = 1, acc = 1, q = 0.25 * x * x;
        for (int k = 1; k < 200 && term > 1e-17 * acc; k++) {
            term *= q / ((double)k * k);
            acc += term;
        }
        return acc * exp(-x);
    }
    return (1 + 1 / (8 * x) + 9 / (128 * x * x) + 225 / (3072 * x * x * x)) /
           sqrt(2 * M_PI * x);
}

/* Mean and standard deviation of ln |z + w| for a complex Gaussian w of E|w|^2 =
 * var (circular): the Rician distribution of r = |z + w|, integrated in r. */
static void rician_log(double z, double var, double *mean, double *sd)
{
    double s2 = 0.5 * var, s = sqrt(s2);
    if (z < 1e-12 * s) { /* |w|^2 exponential: E ln|w| = ln sqrt(var) - gamma/2 */
        *mean = 0.5 * log(var) - 0.5 * EULER_GAMMA;
        *sd = M_PI / sqrt(24.0);
        return;
    }
    double lo = fmax(0, z - 12 * s), hi = z + 12 * s, m0 = 0, m1 = 0, m2 = 0;
    const int N = 4000;
    for (int i = 0; i <= N; i++) {
        double r = lo + (hi - lo) * i / N;
        if (!(r > 0))
            continue;
        double d = r - z, p = r / s2 * exp(-d * d / (2 * s2)) * i0_scaled(r * z / s2);
        double wt = (i == 0 || i == N) ? 0.5 : 1.0, lr = log(r);
        m0 += wt * p;
        m1 += wt * p * lr;
        m2 += wt * p * lr * lr;
    }
    *mean = m1 / m0;
    *sd = sqrt(fmax(0, m2 / m0 - *mean * *mean));
}

ru_status ru_start_level_compute(const ru_system *s, const double *x_op, ru_pole dom,
                                 int probe_pos, int probe_neg, double t_stop_s,
                                 double noise_temp_c, ru_start_level *out,
                                 ru_error *err)
{
    memset(out, 0, sizeof *out);
    out->level_v = out->step_v = out->det_v = NAN;
    const ru_circuit *ci = ru_system_circuit(s);
    ru_kick kick = ru_circuit_run_opts_const(ci)->kick;
    out->kind = kick == RU_KICK_PRESET  ? RU_START_PRESET
                : kick == RU_KICK_NOISE ? RU_START_NOISE
                                        : RU_START_POWER_ON;
    mode_ctx c;
    ru_status st = ctx_init(&c, s, x_op, dom, probe_pos, probe_neg);
    if (st != RU_OK) {
        ctx_free(&c);
        return ru_error_set(err, st, NULL, 0, 0,
                            st == RU_ENOMEM ? "out of memory"
                                            : "the dominant mode's vectors cannot be had "
                                              "(or the probe does not see the mode)");
    }
    double complex z_step = 0, z_inf = 0;
    out->driven = periodic_source(ci);
    if ((st = deterministic(&c, t_stop_s, &z_step, &z_inf, err)) != RU_OK)
        goto done;
    out->step_v = c.probe * cabs(z_step);
    out->det_v = c.probe * cabs(z_inf);
    out->level_v = out->det_v;
    /* thermal noise: the noise kick, or power-on with its noise on (the default) */
    int noisy = ru_run_opts_noise(ru_circuit_run_opts_const(ci));
    if (noisy && out->kind != RU_START_NOISE && !(creal(c.lam) > 0))
        goto done; /* a decaying mode accumulates no level: the ramp's share stays */
    if (noisy) {
        double sigma = creal(c.lam);
        if (!(sigma > 0)) {
            st = ru_error_set(err, RU_ERANGE, NULL, 0, 0,
                              "the mode does not grow: noise accumulates no start level");
            goto done;
        }
        double var = noise_drive(&c, noise_temp_c) / (2 * sigma), mean, sd;
        if (!(var > 0) && out->kind != RU_START_NOISE)
            goto done; /* no thermal source in the circuit: the ramp's share stays */
        rician_log(cabs(z_inf), var, &mean, &sd);
        out->noise_rms_v = c.probe * sqrt(var);
        out->level_v = c.probe * exp(mean);
        out->log_sd = sd;
    }
done:
    ctx_free(&c);
    return st;
}
