/* ringup/smallsig.h: the small-signal engine: operating point, poles, loop gain
 * and network response of a compiled system.
 *
 * Operating point: damped Newton on r(x) = 0 with every source at its final DC
 * value, junction-voltage limiting inside the laws, and source stepping (scale the
 * sources from 0 to 1) when plain Newton fails. Poles: eigenvalues of
 * J = M^{-1} dr/dx at the operating point (LAPACKE dgeev), with a DAE's algebraic
 * states eliminated first. Loop gain and response solve (jwM - A) directly, which
 * needs no inverse of M, so a singular M (nodes without capacitance) is fine. Loop gain: the return
 * ratio of one amplifier, L(jw) = g^T (jw M - A0)^{-1} b (ru_system_loop_split):
 * the amplifier's dependence on its control voltage is broken, every load kept;
 * L = 1 at 0 degrees is the Barkhausen condition. Network response: node `in`
 * driven by an ideal 1 V source (its row replaced by v_in = 1), read node `out`. */
#ifndef RINGUP_SMALLSIG_H
#define RINGUP_SMALLSIG_H

#include "ringup/status.h"
#include "ringup/system.h"

#include <stddef.h>

#ifdef __cplusplus
extern "C" {
#endif

typedef struct ru_oppoint_stats {
    int iterations;     /* Newton iterations in all */
    int source_steps;   /* 0 when plain Newton converged */
    double residual;    /* final max |r| (A) */
} ru_oppoint_stats;

/* Operating point into x (n entries). x may hold a starting guess when
 * use_guess is 1; otherwise zeros are used. RU_ENOCONVERGE with a clear message
 * (which node's residual is largest) when it fails. */
ru_status ru_oppoint_solve(const ru_system *s, double *x, int use_guess,
                           ru_oppoint_stats *stats, ru_error *err);

typedef struct ru_pole {
    double re_per_s;      /* real part (1/s): growth rate when positive */
    double im_rad_per_s;  /* imaginary part (rad/s) */
} ru_pole;

/* The number of poles: ru_system_size less the algebraic states (a DAE's
 * algebraic states are eliminated, so only finite poles are counted). */
size_t ru_poles_count(const ru_system *s);

/* All ru_poles_count eigenvalues of the linearisation at x, sorted by real part,
 * largest first (ties: larger |im| first). poles must hold ru_poles_count entries
 * (ru_system_size is always enough). For a DAE the algebraic states are
 * eliminated first: y_a = -G_aa^{-1} G_ad y_d from their KCL rows, then the
 * eigenvalues of M_dd^{-1} (G_dd - G_da G_aa^{-1} G_ad) (src/engines/reduce.c),
 * which are exactly the finite eigenvalues of the pencil (dr/dx, M). */
ru_status ru_poles_compute(const ru_system *s, const double *x, ru_pole *poles,
                           ru_error *err);

/* Index of the dominant complex pair (largest real part among poles with
 * im > 0; the one with im > 0 is returned) or -1 when there is no complex pole. */
int ru_poles_dominant(const ru_pole *poles, size_t n);

/* Return ratio of amplifier `part` at frequency f_hz (state x is the operating
 * point): L = re + j im. */
ru_status ru_loopgain_at(const ru_system *s, int part, const double *x, double f_hz,
                         double *re, double *im, ru_error *err);

typedef struct ru_loop_summary {
    int found;              /* 1 when the phase crosses 0 deg (mod 360) in range */
    double crossover_hz;    /* frequency of the zero-phase crossing with the largest gain */
    double gain;            /* |L| there */
    double margin_db;       /* 20 log10 |L| there: > 0 means the loop starts */
} ru_loop_summary;

/* Sweeps L over npts log-spaced frequencies from fmin to fmax (mag, phase_deg may
 * be NULL) and finds the zero-phase crossings (refined by bisection). */
ru_status ru_loopgain_sweep(const ru_system *s, int part, const double *x,
                            double fmin_hz, double fmax_hz, size_t npts, double *f_hz,
                            double *mag, double *phase_deg, ru_loop_summary *sum,
                            ru_error *err);

/* ---- a loop-gain handle: one amplifier's return ratio or a node broken ---------
 *
 * Part: the amplifier's return ratio as above (ru_loopgain_at).
 * Node: Middlebrook's double injection (R. D. Middlebrook, "Measurement of loop gain
 * in feedback systems", Int. J. Electronics 38 (1975) 485-512) at a free node N with
 * every loading kept. N is split into a driver side and a load side: the load side
 * holds the terminals at N of the parts named in load_part, or, when none is named,
 * the control inputs at N (an amplifier's in and inv, a transconductor's control).
 * A probe joins the two sides: a series voltage injection (T_v = -v_driver/v_load)
 * and a shunt current injection (T_i = -i_driver/i_load) on the linearized circuit,
 * T = (T_v T_i - 1)/(T_v + T_i + 2) and L = -T, so that L = 1 at 0 degrees exactly
 * when the closed circuit has a pole on the jw axis there; a network of passive
 * parts alone has L = 0. */
typedef struct ru_loop ru_loop;

#define RU_LOOP_LABEL_MAX 256 /* ru_loop_label's text, with the NUL */
#define RU_LOOP_LOAD_TEXT 160 /* ru_loop_load's text, with the NUL */

typedef struct ru_loop_node_spec {
    int node;                           /* the node to break (circuit node index) */
    int nload;                          /* parts in load_part; 0: the control inputs */
    int load_part[RU_LOOP_LOAD_MAX];    /* part indices whose terminals at node form
                                           the load side */
} ru_loop_node_spec;

/* Constructors at operating point x (copied: x need not outlive the handle; the
 * system must). Part: RU_EINPUT when the part is not an amplifier. Node: RU_EINPUT
 * when the node is ground or held by a supply, a named part has no terminal on it,
 * or one side of the break would be empty (the message lists the parts at the
 * node). The destructor takes NULL. */
ru_status ru_loop_create_part(const ru_system *s, int part, const double *x,
                              ru_loop **out, ru_error *err);
ru_status ru_loop_create_node(const ru_system *s, const ru_loop_node_spec *spec,
                              const double *x, ru_loop **out, ru_error *err);
void ru_loop_destroy(ru_loop *l);

/* The loop a user names: amplifier `part`, or node `node` with the load side's
 * parts as a comma-separated list `load` (NULL: the control inputs); with part and
 * node both NULL, the circuit's measure section (loop, loop-node, loop-load). *out
 * stays NULL (RU_OK) when nothing names a loop. RU_EINPUT names an unknown part or
 * node (with the closest name). */
ru_status ru_loop_create_named(const ru_system *s, const double *x, const char *part,
                               const char *node, const char *load, ru_loop **out,
                               ru_error *err);

/* What was broken: "A1", or "node b (load side: A1 in)"; the node alone ("" for an
 * amplifier's loop) and its load side's terminals ("A1 in"). Owned by the handle. */
const char *ru_loop_label(const ru_loop *l);
const char *ru_loop_node(const ru_loop *l);
const char *ru_loop_load(const ru_loop *l);

/* L = re + j im at f_hz >= 0. */
ru_status ru_loop_eval(ru_loop *l, double f_hz, double *re, double *im, ru_error *err);

/* As ru_loopgain_sweep, on a handle. */
ru_status ru_loop_sweep(ru_loop *l, double fmin_hz, double fmax_hz, size_t npts,
                        double *f_hz, double *mag, double *phase_deg,
                        ru_loop_summary *sum, ru_error *err);

/* An adaptive sweep: nbase (>= 2) log-spaced points from fmin to fmax, then the
 * geometric midpoint of every step between neighbours above 1 dB or 10 degrees,
 * pass after pass (the response command's rule), until every step is smooth or
 * max_pts points are held (then the roughest steps first); the zero-phase crossing
 * with the largest |L| is put among the points and refined around (within 5 % of
 * it: steps of at most 0.1 dB and 1 degree). f_hz, mag and phase_deg (unwrapped;
 * any may be NULL) hold max_pts (> nbase) entries; *npts gets how many are used. */
ru_status ru_loop_sweep_adaptive(ru_loop *l, double fmin_hz, double fmax_hz,
                                 size_t nbase, size_t max_pts, double *f_hz, double *mag,
                                 double *phase_deg, size_t *npts, ru_loop_summary *sum,
                                 ru_error *err);

/* Transfer v(out)/v(in) with node `in` driven by an ideal source, at f_hz. */
ru_status ru_response_at(const ru_system *s, const double *x, int node_in,
                         int node_out, double f_hz, double *mag, double *phase_deg,
                         ru_error *err);

/* Largest |v(out)/v(in)| over [fmin_hz, fmax_hz]: a log-spaced scan of npts points
 * (>= 3), then golden-section refinement in log f around the best point. */
ru_status ru_response_peak(const ru_system *s, const double *x, int node_in,
                           int node_out, double fmin_hz, double fmax_hz, size_t npts,
                           double *f_peak_hz, double *mag_peak, ru_error *err);

#ifdef __cplusplus
}
#endif
#endif
