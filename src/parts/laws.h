/* laws.h: amplifier laws and the laws of the nonlinear two-terminal parts
 * (private): values and partial derivatives of the currents they push into their
 * nodes, and of the rates of their internal states.
 *
 * Amplifier convention: the law sees vc = v(in) - v(inv) (inv is ref unless
 * given), vo = v(out) - v(ref) and, for a law with an internal state, its value
 * xs. It returns i_out, the current it pushes INTO the out node (it leaves by
 * ref), i_in, the current it pushes INTO the in node (it leaves by inv), and the
 * state's rate dxs = d xs/dt. The output terms are the "controlled" quantity:
 * the loop gain breaks d i_out / d vc and, for a law with a state, d dxs / d vc
 * (the opamp's output depends on vc only through its integrator). The input terms
 * are the loading the amplifier puts on its control nodes.
 *
 * Laws with more terminals (ru_law_desc.terms) see, besides, vo2 = v(out2) -
 * v(ref) (a second output: the pair's second collector) and vs = v(vdd) - v(ref)
 * (an upper rail: the inverter's supply); they push i_out2 INTO out2 and i_sup
 * INTO vdd, and ref takes back the sum i_out + i_out2 + i_sup (KCL over the
 * part). Their controlled terms are every output current's d/d vc (d i_out2/d vc,
 * d i_sup/d vc as well). A law whose control acts through its state
 * (control_state: the exp-stage with a base resistance, its junction voltage
 * behind rb) has d i_out/d xs as its controlled term instead.
 *
 * Laws are table-driven (ru_law_get, laws.c): one file per law (law_*.c) defines
 * one ru_law_desc with its keys, checks, evaluator, internal state and
 * describing-function contribution; the amplifier part (amplifier.c) reaches
 * laws only through the table. Evaluators are pure functions of their arguments
 * and safe from any thread. Adding a law: DEVELOPERS.md. */
#ifndef RINGUP_LAWS_H
#define RINGUP_LAWS_H

#include "ringup/part.h"
#include "parts/desc.h"

/* Exponent argument above which exp() is continued linearly (junction-voltage
 * limiting). exp(40) = 2.35e17, so with is = 1e-14 A the limit is reached at
 * ic = 2.4 kA: it never changes a realistic operating point (at 27 C and n = 1
 * that is vc = 1.03 V) but keeps values and Jacobians finite when Newton or the
 * integrator tries wild voltages. Value and first derivative are continuous. */
#define RU_LAW_U_MAX 40.0

/* Boltzmann constant (J/K) and elementary charge (C), exact in the 2019 SI. */
#define RU_K_BOLTZMANN 1.380649e-23
#define RU_Q_ELECTRON 1.602176634e-19

#define RU_PI_LAW 3.14159265358979323846

/* The opamp's integrator is held within its rails widened by this many knees on
 * each side (anti-windup; see circuit.h). */
#define RU_OPAMP_BAND 20.0

typedef struct ru_law_eval {
    double i_out;      /* current pushed into the out node (A) */
    double di_out_dvc; /* d i_out / d vc (S): the controlled (transconductance) term */
    double di_out_dvo; /* d i_out / d vo (S): output conductance, negated */
    double di_out_dxs; /* d i_out / d xs (S for a voltage state) */
    double i_in;       /* current pushed into the in node (A) */
    double di_in_dvc;  /* d i_in / d vc (S) */
    double di_in_dvo;  /* d i_in / d vo (S) */
    double dxs;        /* rate of the internal state (unit/s; 0 without a state) */
    double ddxs_dvc;   /* d dxs / d vc: the controlled term of a law with a state */
    double ddxs_dvo;   /* d dxs / d vo */
    double ddxs_dxs;   /* d dxs / d xs (1/s) */
    double di_in_dxs;  /* d i_in / d xs (S for a voltage state) */
    double i_out2;     /* current pushed into out2 (A; laws with RU_LAW_TERM_OUT2) */
    double di_out2_dvc, di_out2_dvo2; /* its derivatives (S) */
    double di_out_dvs; /* d i_out / d vs (S; laws with RU_LAW_TERM_VDD) */
    double i_sup;      /* current pushed into vdd (A) */
    double di_sup_dvc, di_sup_dvo, di_sup_dvs; /* its derivatives (S) */
} ru_law_eval;

typedef void (*ru_law_fn)(const ru_amp *a, double vc_v, double vo_v, double xs,
                          ru_law_eval *e);

/* What a law sees: the voltages of its ports (see the head comment) and its state. */
typedef struct ru_law_at {
    double vc, vo; /* v(in) - v(inv), v(out) - v(ref) */
    double vo2;    /* v(out2) - v(ref): 0 without out2 */
    double vs;     /* v(vdd) - v(ref): 0 without vdd */
    double xs;     /* the internal state (0 without one) */
    int out2;      /* 1: out2 is connected (a law with an optional second output) */
} ru_law_at;

typedef void (*ru_law_at_fn)(const ru_amp *a, const ru_law_at *at, ru_law_eval *e);

/* The terminals beyond in, out, ref, inv that a law uses (ru_law_desc.terms). */
enum {
    RU_LAW_TERM_OUT2 = 1, /* out2: a second output, required */
    RU_LAW_TERM_VDD = 2   /* vdd: an upper rail, required */
};

/* The amplifier's node slots (ru_part.node[]), also the ends of a law's
 * capacitances (ru_law_cap). */
enum { RU_AMP_IN, RU_AMP_OUT, RU_AMP_REF, RU_AMP_INV, RU_AMP_OUT2, RU_AMP_VDD };

/* A constant capacitance c_f between two of the amplifier's terminals (RU_AMP_*;
 * inv resolved to ref when not given). */
typedef struct ru_law_cap {
    int a, b;
    double c_f;
} ru_law_cap;

/* The keys every law has, last in its key table: the input-referred noise densities
 * and their flicker corner (ru_amp.en_v_per_rthz, in_a_per_rthz, fc_hz; defaults 0,
 * so a file without them is noiseless there). The current noise is `inoise`, since
 * `in` is the input terminal. */
#define RU_LAW_NOISE_KEYS                                                         \
    {"en", "V/rtHz", offsetof(ru_part, amp.en_v_per_rthz), 0, 0.0},                \
    {"inoise", "A/rtHz", offsetof(ru_part, amp.in_a_per_rthz), 0, 0.0},            \
    {"fc", "Hz", offsetof(ru_part, amp.fc_hz), 0, 0.0}

typedef struct ru_law_desc {
    ru_law law;        /* which law this entry describes */
    ru_variant v;      /* its spelling, keys (offsets in ru_part: amp.*) and lists */
    /* checks of the law's values (the amplifier's terminals and finiteness are
       checked before) */
    ru_status (*check)(const ru_part *p, const ru_part_env *env, ru_error *err);
    ru_law_fn eval;    /* currents, state rate and derivatives */
    int nstates;       /* internal states the law adds (0 or 1) */
    const char *state; /* name of the state ("vint"), NULL without one */
    double (*rest)(const ru_amp *a);  /* the state's rest with every node at 0 V;
                                         NULL: 0 */
    double (*state_scale)(const ru_amp *a, double v_scale); /* NULL: v_scale */
    int input_dc;      /* 1: the input conducts at DC, in to inv (a junction) */
    /* The describing-function contribution: the output current as a memoryless
       function of vc at vo (ru_df_amp_gain integrates it over a cycle); NULL for
       a law whose output follows vc only through its state (no memoryless
       describing function; the harmonic balance of ru_df_analyse covers it). */
    double (*df_out)(const ru_amp *a, const ru_law_at *at);
    /* Laws with more terminals or a state-borne control (NULL: none of these) */
    int terms;             /* RU_LAW_TERM_* it requires */
    int terms_optional;    /* RU_LAW_TERM_* it takes when given (ru_law_at.out2) */
    ru_law_at_fn eval_at;  /* its evaluator seeing every port (then eval is NULL) */
    int (*nstates_of)(const ru_amp *a);  /* states when they depend on the values;
                                            NULL: nstates */
    int control_state;     /* 1: with its state, the controlled term is d i_out/d xs
                              and the control voltage is the state itself */
    /* its constant capacitances (the mass matrix); NULL: none. Entries with
       c_f == 0 are left out. */
    int (*caps)(const ru_amp *a, ru_law_cap out[RU_PART_CAPS_MAX]);
} ru_law_desc;

/* The law spelled name, or -1. */
int ru_law_find(const char *name);

/* Checks shared by the junction laws (exp-stage, diff-pair): n > 0, temp above
 * absolute zero. */
ru_status ru_law_check_junction(const ru_part *p, const ru_part_env *env, ru_error *err);

/* Checks shared by the MOS laws (mos-ekv, cmos-inverter): n >= 1, temp above
 * absolute zero, va >= 0. */
ru_status ru_law_check_mos(const ru_part *p, const ru_part_env *env, ru_error *err);

/* The EKV drain current of an n-channel device with source and bulk at 0 V, gate
 * at vg and drain at vd (Enz, Krummenacher & Vittoz 1995, with the constant slope
 * factor n):
 *   id = is (F(vp/ut) - F((vp - vd)/ut)) (1 + |vd|/va),  F(u) = ln^2(1 + e^(u/2)),
 *   vp = (vg - vth)/n,  is = 2 n beta ut^2
 * (va 0: no channel-length modulation); *gg = d id/d vg, *gd = d id/d vd. Finite
 * for any finite voltages (F grows as u^2/4, underflows to 0). */
double ru_ekv_current(double vth_v, double beta, double n, double ut_v, double va_v,
                      double vg_v, double vd_v, double *gg, double *gd);

/* The table entries, one per law file. */
extern const ru_law_desc ru_law_follower, ru_law_exp, ru_law_diffpair, ru_law_opamp,
    ru_law_tab, ru_law_mos, ru_law_inverter;

/* The table entry of a law, or NULL for an unknown law. */
const ru_law_desc *ru_law_get(ru_law law);

/* Evaluates the amplifier's law with its internal state (if any) at xs; returns
 * 0 for an unknown law (e zeroed). */
int ru_law_eval_state(const ru_amp *a, double vc_v, double vo_v, double xs,
                      ru_law_eval *e);

/* Evaluates the law at every port voltage (a law without extra terminals sees
 * vc, vo and xs only); returns 0 for an unknown law (e zeroed). */
int ru_law_eval_at(const ru_amp *a, const ru_law_at *at, ru_law_eval *e);

/* The port voltages of amplifier part p at node voltages v (out2 and vdd when
 * connected) with its internal state xs (amplifier.c). */
void ru_amp_ports(const ru_part *p, const double *v, double xs, ru_law_at *at);

/* The number of internal states of the amplifier's law (0 for an unknown law). */
int ru_law_nstates(const ru_amp *a);

/* Softplus ln(1 + e^z) without overflow for any z; *deriv gets the logistic
 * function 1/(1 + e^-z), its derivative. */
double ru_law_softplus(double z, double *deriv);

/* Same with the state at its rest value ru_law_rest_state(a). */
int ru_law_eval_amp(const ru_amp *a, double vc_v, double vo_v, ru_law_eval *e);

/* Initial value of the law's internal state: its rest with every node at 0 V
 * (opamp: the root of wp v + K(v) = 0, within 1e-15 relative; 0 V for rails
 * far from 0); 0 for a law without a state. */
double ru_law_rest_state(const ru_amp *a);

/* Thermal voltage kT/q (V) at temp_c degrees Celsius. */
double ru_law_thermal_voltage(double temp_c);

/* exp(u) continued linearly above RU_LAW_U_MAX; *deriv gets d/du. */
double ru_law_limexp(double u, double *deriv);

/* The opamp's smooth rail: rail(u) between vmin and vmax (see circuit.h);
 * *deriv gets d rail / du. */
double ru_law_rail(const ru_amp *a, double u, double *deriv);

/* The table law's curve f(v) and df/dv (monotone cubic, linear beyond the ends). */
double ru_law_table_curve(const ru_amp *a, double v, double *deriv);

/* Diode current i(anode -> cathode) at vd = v(anode) - v(cathode), and
 * *g = di/dvd. With rs > 0 the junction voltage vj = vd - rs i is solved by
 * Newton's method from above (the residual vj + rs i(vj) - vd is increasing and
 * convex, so the iteration falls monotonically onto the root), to rounding; g is
 * then exact by the implicit-function theorem: g = gj/(1 + rs gj). */
double ru_diode_current(const ru_diode *d, double vd_v, double *g);

/* A thermal resistor at voltage v across it and rise x (K above tamb). */
typedef struct ru_thermal_eval {
    double r_ohm;     /* R(T) */
    double i;         /* v / R (A, a -> b) */
    double di_dv;     /* 1/R (S) */
    double di_dx;     /* d i / d rise (A/K) */
    double dx;        /* d rise/dt = (v^2/R - rise/rth)/cth (K/s) */
    double ddx_dv;    /* (K/s/V) */
    double ddx_dx;    /* (1/s) */
} ru_thermal_eval;

void ru_thermal_eval_at(const ru_thermal *t, double v, double rise_k, ru_thermal_eval *e);

/* R(T) and dR/dT for the thermal resistor at rise_k above ambient. Below the
 * physical range (lamp: 1 + alpha (T - t0) under 1 %; ntc: T under 20 K) the
 * law continues smoothly (C1) so that wild trial values stay finite. */
double ru_thermal_resistance(const ru_thermal *t, double rise_k, double *dr_dx);

#endif
