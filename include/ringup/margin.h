/* ringup/margin.h: negative-resistance analysis of a two-terminal part, the way
 * crystal oscillators are sized and signed off.
 *
 * The part is taken out and the rest of the circuit, linearized at the operating
 * point of the whole circuit, is driven at the part's terminals by a current:
 * Z(jw) = V/I is the impedance the rest presents to the part (Re Z < 0 is the
 * drive). For a crystal the part is its motional arm: the shunt capacitance c0
 * (and any other arm) stays with the rest. The oscillation runs where the
 * reactances cancel, X_part(w) + Im Z(w) = 0 (the series loop of part and rest
 * has Z_part + Z = 0 at a pole on the jw axis, so margin 1 is exactly the start
 * threshold), and there
 *   margin          = -Re Z / ESR                   (ESR: the part's resistance)
 *   time constant   = X'(w) / (-Re Z - ESR),  X' = d(X_part + Im Z)/dw
 * (the envelope's growth rate is 1 / time constant; for a crystal X' is about
 * 2 L_m and this is the usual 2 L_m / (|R_neg| - ESR)).
 *
 * With amplitude: the rest driven by a sinusoidal current of amplitude I (the
 * current of a high-Q part is sinusoidal to a fine approximation) is balanced at DC
 * and at the fundamental (describing function, 64 points per cycle of the actual
 * laws), giving Re Z(I) at the frequency where the reactances cancel for that I;
 * the settled current is where -Re Z(I) = ESR and the drive power ESR I^2 / 2.
 *
 * A margin handle is read-only after creation and may be shared by threads. */
#ifndef RINGUP_MARGIN_H
#define RINGUP_MARGIN_H

#include "ringup/circuit.h"
#include "ringup/status.h"

#include <stddef.h>

#ifdef __cplusplus
extern "C" {
#endif

typedef struct ru_margin ru_margin;

/* Constructor: the rest of circuit c around part index `part` (a two-terminal
 * part), linearized at c's operating point. RU_EINPUT (err names the part) for a
 * part that is not two-terminal, both of whose terminals are held (ground or a
 * supply), or a circuit with no operating point. */
ru_status ru_margin_create(const ru_circuit *c, int part, ru_margin **out, ru_error *err);
/* Destructor; NULL is harmless. */
void ru_margin_destroy(ru_margin *m);

/* The rest's impedance at the part's terminals (first node to second) at f_hz. */
ru_status ru_margin_rest_z(const ru_margin *m, double f_hz, double *re_ohm,
                           double *im_ohm, ru_error *err);

/* The part's own impedance at f_hz (the branch the rest drives). */
ru_status ru_margin_part_z(const ru_margin *m, double f_hz, double *re_ohm,
                           double *im_ohm, ru_error *err);

/* The inductance of the part's branch (inductor: L; crystal: L_m), NAN for parts
 * without one. */
double ru_margin_part_inductance(const ru_margin *m);

/* The dominant pole pair of the whole circuit at its operating point (im > 0), or
 * re = im = NAN when there is none. */
void ru_margin_dominant(const ru_margin *m, double *re_per_s, double *im_rad_per_s);

typedef struct ru_margin_result {
    int found;                     /* 1: the reactances cancel near the guess */
    double frequency_hz;           /* where they cancel */
    double negative_resistance_ohm;/* Re Z there (negative when it drives) */
    double rest_reactance_ohm;     /* Im Z there */
    double esr_ohm;                /* the part's resistance there */
    double margin;                 /* -Re Z / ESR (NAN: no ESR) */
    double reactance_slope_ohm_s;  /* X' = d(X_part + Im Z)/dw */
    double growth_rate_per_s;      /* (-Re Z - ESR) / X' */
    double time_constant_s;        /* 1 / growth rate (NAN when it does not grow) */
    char note[256];                /* why something is missing, "" otherwise */
} ru_margin_result;

/* Finds the operating frequency nearest f_guess_hz (> 0; the dominant poles' is a
 * good guess) on [fmin_hz, fmax_hz] and the figures there. */
ru_status ru_margin_analyse(const ru_margin *m, double f_guess_hz, double fmin_hz,
                            double fmax_hz, ru_margin_result *r, ru_error *err);

typedef struct ru_margin_point {
    double current_a;      /* amplitude of the part's current (peak, A) */
    double re_ohm;         /* Re Z of the rest at that current */
    double im_ohm;         /* Im Z */
    double frequency_hz;   /* where the reactances cancel at that current */
} ru_margin_point;

typedef struct ru_margin_amp {
    int found;             /* 1: -Re Z falls to the ESR at some current */
    double current_a;      /* settled current amplitude (peak) */
    double frequency_hz;   /* the tone there */
    double drive_power_w;  /* ESR I^2 / 2 */
    char note[256];
} ru_margin_amp;

/* Re Z against the part's current (describing function, see above), from the
 * linear limit up until -Re Z falls below the ESR (or max_pts points): curve may
 * be NULL; *npts gets the points written. f_lin_hz is the linear operating
 * frequency (ru_margin_analyse). */
ru_status ru_margin_amplitude(const ru_margin *m, double f_lin_hz, ru_margin_point *curve,
                              size_t max_pts, size_t *npts, ru_margin_amp *res,
                              ru_error *err);

#ifdef __cplusplus
}
#endif
#endif
