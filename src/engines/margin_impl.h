/* margin_impl.h: the private layout of a margin analysis (margin.c builds the
 * rest of the circuit and its linearization; margin_hb.c balances it at the
 * fundamental for the amplitude curve).
 *
 * Invariants: rest is the circuit with the part replaced by its stand-in (an open:
 * a resistor of RU_MARGIN_OPEN_OHM, or a crystal's shunt capacitance); x is the
 * whole circuit's operating point carried onto rest's states by state name (the
 * part's own states drop out); A and M are rest's dr/dx and mass matrix there. */
#ifndef RU_MARGIN_IMPL_H
#define RU_MARGIN_IMPL_H

#include "ringup/margin.h"
#include "ringup/system.h"

#define RU_MARGIN_OPEN_OHM 1e30 /* the stand-in of a removed part */

struct ru_margin {
    ru_part part;          /* the part analysed (a copy) */
    ru_circuit *rest_c;    /* the rest of the circuit (owned) */
    ru_system *rest;       /* and its system (owned) */
    size_t n;              /* rest's states */
    int ka, kb;            /* rest's state of the part's first and second node; -1 when
                              that node is ground or held by a supply */
    double *x;             /* the operating point on rest's states (n) */
    double *A, *M;         /* rest's dr/dx and mass at x (n*n, row-major) */
    double idc_a;          /* DC current the part carries into its first node (A) */
    ru_system *full;       /* the whole circuit (owned), for parts with no formula */
    size_t nf;
    double *xf, *Af, *Mf;  /* its operating point, dr/dx and mass */
    int fa, fb;            /* its states of the part's nodes */
    double dom_re, dom_im; /* the whole circuit's dominant pole (NAN: none) */
};

/* Driving-point impedance (first node to second) of a linearization (A, M) of n
 * states with the port at states ka, kb (-1: held) at angular frequency w. */
ru_status ru_margin_port_z(size_t n, const double *A, const double *M, int ka, int kb,
                           double w, double *re, double *im, ru_error *err);

#endif
