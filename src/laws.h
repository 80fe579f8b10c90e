/* laws.h: amplifier laws (private): value and partial derivatives of the currents
 * a behavioral amplifier pushes into its nodes.
 *
 * Convention: the law sees vc = v(in) - v(ref) and vo = v(out) - v(ref). It
 * returns i_out, the current it pushes INTO the out node, and i_in, the current
 * it pushes INTO the in node; the sum i_out + i_in leaves the ref node (KCL over
 * the part). The output terms are the "controlled" quantity (the loop gain breaks
 * d i_out / d vc); the input terms are the loading the amplifier puts on its
 * control node.
 *
 * Laws are table-driven (ru_law_get): each entry names the law, its evaluator and
 * how many internal states it adds (0 for every law so far; a law with states,
 * such as an op-amp with a dominant pole, will add an evaluator for those rows).
 * Evaluators are pure functions of their arguments and safe from any thread. */
#ifndef RINGUP_LAWS_H
#define RINGUP_LAWS_H

#include "ringup/circuit.h"

/* Exponent argument above which exp() is continued linearly (junction-voltage
 * limiting). exp(40) = 2.35e17, so with is = 1e-14 A the limit is reached at
 * ic = 2.4 kA: it never changes a realistic operating point (at 27 C and n = 1
 * that is vc = 1.03 V) but keeps values and Jacobians finite when Newton or the
 * integrator tries wild voltages. Value and first derivative are continuous. */
#define RU_LAW_U_MAX 40.0

/* Boltzmann constant (J/K) and elementary charge (C), exact in the 2019 SI. */
#define RU_K_BOLTZMANN 1.380649e-23
#define RU_Q_ELECTRON 1.602176634e-19

typedef struct ru_law_eval {
    double i_out;      /* current pushed into the out node (A) */
    double di_out_dvc; /* d i_out / d vc (S): the controlled (transconductance) term */
    double di_out_dvo; /* d i_out / d vo (S): output conductance, negated */
    double i_in;       /* current pushed into the in node (A) */
    double di_in_dvc;  /* d i_in / d vc (S) */
    double di_in_dvo;  /* d i_in / d vo (S) */
} ru_law_eval;

typedef void (*ru_law_fn)(const ru_amp *a, double vc_v, double vo_v, ru_law_eval *e);

typedef struct ru_law_desc {
    ru_law law;        /* which law this entry describes */
    ru_law_fn eval;    /* currents and derivatives */
    int nstates;       /* internal states the law adds (0 so far) */
} ru_law_desc;

/* The table entry of a law, or NULL for an unknown law. */
const ru_law_desc *ru_law_get(ru_law law);

/* Evaluates the amplifier's law; returns 0 for an unknown law (e zeroed). */
int ru_law_eval_amp(const ru_amp *a, double vc_v, double vo_v, ru_law_eval *e);

/* Thermal voltage kT/q (V) at temp_c degrees Celsius. */
double ru_law_thermal_voltage(double temp_c);

/* exp(u) continued linearly above RU_LAW_U_MAX; *deriv gets d/du. */
double ru_law_limexp(double u, double *deriv);

#endif
