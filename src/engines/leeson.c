/* leeson.c: Leeson's phase-noise formula and the loaded Q it needs (ringup/ppv.h).
 *
 * Loaded Q from the poles: the circuit linearised at its operating point with its
 * active element switched off (the loop of the named amplifier broken, every load
 * kept; or, without one, the negative slope of every poly-conductance removed), so
 * what is left is the resonator with all its loading. Its complex pole pair nearest
 * the tone, s = sigma +- j w, gives Q = |s| / (2 |sigma|) (the second-order
 * section's Q, from the pole's angle). An RC network has no complex pair: then,
 * with an amplifier loop, the open-loop Q of the loop gain's phase slope at the
 * tone, Q = (f0 / 2) |d phase / d f| (Razavi, "A study of phase noise in CMOS
 * oscillators", IEEE JSSC 31 (1996) 331; from memory). */
#include "ringup/ppv.h"

#include "ringup/smallsig.h"

#include <lapacke.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

/* Removes the small-signal slope of every poly-conductance whose slope at x is
 * negative (the negative resistance that sustains a van der Pol tank). */
static void remove_negative_poly(const ru_system *s, const double *x, double *A)
{
    const ru_circuit *c = ru_system_circuit(s);
    size_t n = ru_system_size(s);
    for (size_t i = 0; i < ru_circuit_part_count(c); i++) {
        const ru_part *p = ru_circuit_part(c, i);
        if (p->type != RU_PART_POLY)
            continue;
        double v = ru_system_node_voltage_dc(s, p->node[0], x) -
                   ru_system_node_voltage_dc(s, p->node[1], x);
        double g = 0.0, pw = 1.0;
        for (int k = 1; k < p->ncoeffs; k++, pw *= v)
            g += k * p->coeffs[k] * pw;
        if (!(g < 0))
            continue;
        int ra = ru_system_node_state(s, p->node[0]), rb = ru_system_node_state(s, p->node[1]);
        int r[2] = {ra, rb};
        double sg[2] = {1.0, -1.0};
        for (int a = 0; a < 2; a++) /* undo d(-i)/dv at a and d(+i)/dv at b */
            for (int b = 0; b < 2; b++)
                if (r[a] >= 0 && r[b] >= 0)
                    A[(size_t)r[a] * n + (size_t)r[b]] += sg[a] * sg[b] * g;
    }
}

/* Q of the complex pole pair of M^-1 A nearest 2 pi f0 (0: none, or not decaying). */
static double pair_q(const ru_system *s, double *A, double f0_hz)
{
    size_t n = ru_system_size(s);
    double *M = malloc((n * n + 2 * n) * sizeof *M);
    lapack_int *piv = malloc(n * sizeof *piv);
    double q = 0.0;
    if (!M || !piv)
        goto done;
    double *wr = M + n * n, *wi = wr + n;
    ru_system_mass(s, M);
    if (LAPACKE_dgesv(LAPACK_ROW_MAJOR, (lapack_int)n, (lapack_int)n, M, (lapack_int)n, piv,
                      A, (lapack_int)n) != 0)
        goto done;
    if (LAPACKE_dgeev(LAPACK_ROW_MAJOR, 'N', 'N', (lapack_int)n, A, (lapack_int)n, wr, wi,
                      NULL, 1, NULL, 1) != 0)
        goto done;
    double best = INFINITY, w0 = 2.0 * M_PI * f0_hz;
    for (size_t i = 0; i < n; i++) {
        if (!(wi[i] > 0))
            continue;
        double d = fabs(log(wi[i] / w0));
        if (d < best && d < log(2.0)) { /* within an octave of the tone */
            best = d;
            q = wr[i] < 0 ? hypot(wr[i], wi[i]) / (2.0 * -wr[i]) : 0.0;
        }
    }
done:
    free(M);
    free(piv);
    return q;
}

ru_status ru_loaded_q(const ru_system *s, const double *x_op, int loop_part, double f0_hz,
                      double *q, int *from_poles, ru_error *err)
{
    size_t n = ru_system_size(s);
    *q = NAN;
    *from_poles = 0;
    double *A = malloc((n * n + 2 * n) * sizeof *A);
    if (!A)
        return ru_error_set(err, RU_ENOMEM, NULL, 0, 0, "out of memory");
    ru_status st;
    if (loop_part >= 0) {
        st = ru_system_loop_split(s, loop_part, x_op, A, A + n * n, A + n * n + n, err);
    } else {
        ru_eval_point ep = {.t_s = 0, .dc = 1, .source_scale = 1};
        st = ru_system_residual(s, &ep, x_op, NULL, A);
        if (st == RU_OK)
            remove_negative_poly(s, x_op, A);
    }
    double qp = st == RU_OK ? pair_q(s, A, f0_hz) : 0.0;
    free(A);
    if (st != RU_OK)
        return st;
    if (qp > 0) {
        *q = qp;
        *from_poles = 1;
        return RU_OK;
    }
    if (loop_part < 0)
        return RU_OK; /* no resonator with loss: Q not known */
    double re1, im1, re2, im2, h = 1e-4;
    if ((st = ru_loopgain_at(s, loop_part, x_op, f0_hz * (1 - h), &re1, &im1, err)) != RU_OK ||
        (st = ru_loopgain_at(s, loop_part, x_op, f0_hz * (1 + h), &re2, &im2, err)) != RU_OK)
        return st;
    double dph = atan2(im2 * re1 - re2 * im1, re2 * re1 + im2 * im1); /* phase change */
    *q = 0.5 * f0_hz * fabs(dph / (2 * h * f0_hz));
    return RU_OK;
}

double ru_leeson_dbc(double f0_hz, double q_loaded, double carrier_w, double noise_factor,
                     double temp_c, double flicker_hz, double fm_hz)
{
    double kt = 1.380649e-23 * (temp_c + 273.15);
    double r = f0_hz / (2.0 * q_loaded * fm_hz);
    return 10.0 * log10(2.0 * noise_factor * kt / carrier_w * (1.0 + r * r) *
                        (1.0 + flicker_hz / fm_hz));
}
