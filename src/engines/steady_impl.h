/* steady_impl.h: the periodic steady state's record (private), shared by
 * shooting.c (Newton, start and continuation), steady_wave.c (the final period's
 * waveform, extremes, harmonics) and the phase-noise engine, which integrates along
 * the same orbit.
 *
 * Invariants once solved (found = 1): x0 and period_s satisfy the periodicity and
 * phase equations to the final tolerance; phi is the monodromy matrix at (x0, T);
 * mult[0] is the multiplier closest to 1; grid holds ngrid states at k T / ngrid. */
#ifndef RU_STEADY_IMPL_H
#define RU_STEADY_IMPL_H

#include "ringup/steady.h"

struct ru_steady {
    ru_steady_view v;     /* what ru_steady_get hands out (pointers into this record) */
    size_t n;
    double *x0;           /* n */
    double *phi;          /* n*n */
    double *scale;        /* n: typical size of each state (tolerances, balancing) */
    double *probe_g;      /* n: probe = probe_g . x + probe_offset */
    double probe_offset;  /* the driven nodes' share of the probe (V) */
    ru_multiplier *mult;  /* n */
    double *grid_x;       /* ngrid*n */
    double *grid_probe;   /* ngrid */
    double rtol;          /* final integration tolerance */
    double transient_s;   /* time integrated before Newton (warm-up, continuation) */
    char note[RU_STEADY_NOTE];
};

/* The final period: waveform on the grid, probe extremes and DC level into st->v (st->x0, st->v.period_s set); adds to st->v.steps. */
ru_status ru_steady_wave(const ru_system *s, ru_steady *st, ru_error *err);

/* The start state and period into x, T (a given state: 1; the describing
 * function's balance: 1; a small kick that must grow first: 2); 0 when the circuit
 * does not oscillate (stable operating point, no describing-function amplitude).
 * Sets st->v.start. */
int ru_steady_start(const ru_system *s, const ru_steady_opts *o, const double *x_op,
                    ru_steady *st, double *x, double *T);

/* Integrates `periods` periods of *T from x (replaced by the end state); *T gets the
 * period measured from crossings when there is one, *swing the probe's last
 * max - min and *drift its relative change over the last quarter of the run. */
ru_status ru_steady_track(const ru_system *s, ru_steady *st, double *x, double *T,
                          double periods, double *swing, double *drift, ru_error *err);

/* Absolute tolerance of state i relative to rtol (as the transient engine). */
#define RU_STEADY_ATOL_OVER_RTOL 1e-2

#endif
