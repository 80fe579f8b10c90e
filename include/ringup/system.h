/* ringup/system.h: a circuit compiled to the ODE  x' = f(t, x)  with its Jacobian.
 *
 * States, in this order: the voltages of the free nodes (every node that no supply
 * drives), then the inductor currents (i(L) flows from the inductor's first node to
 * its second), then internal states that some amplifier laws may add. Nodes tied to
 * ground by a chain of supplies are "driven": their voltage is the supplies' sum,
 * known at every t, and they are not states.
 *
 * Form. Let r(t, x) be the net current into each free node from every part except
 * capacitors (plus C * dv_driven/dt for each capacitor to a driven node), and for
 * the other rows their time derivative directly (inductor: (v_a - v_b - R i)/L).
 * Then   M x' = r(t, x),   M = blockdiag(C, I),
 * where C is the constant capacitance matrix of the free nodes (capacitors plus the
 * stray capacitance from every free node to ground, 1 pF unless the file says
 * otherwise). The system factors C once; f = M^{-1} r and J = M^{-1} dr/dx.
 *
 * Algebraic states. With `stray: 0` C may be singular, and the system is a DAE
 * (differential-algebraic equations) of index 1:
 * - a free node with no capacitance at all is algebraic: its row is KCL, 0 = r_k(x);
 * - a group of free nodes joined by capacitors, with no capacitance to ground or to
 *   a driven node, has one algebraic degree of freedom, its common level: the
 *   group's lowest state is its reference (kind RU_STATE_COMMON) and the
 *   differences of the others from it are differential; the sum of the group's
 *   rows is KCL for the group, 0 = sum r_k(x).
 * Every such degree of freedom must be fixed by KCL: ru_system_create refuses (naming
 * the node) one that no resistive part, capacitor or supply joins to ground or to a
 * node with capacitance to ground (only inductors, current sources or amplifier
 * inputs reach it). A DAE has no f or J (ru_system_rhs and ru_system_jacobian
 * return RU_EINPUT): the DAE engine (ringup/transient.h) uses M and dr/dx as they
 * are, over the sparse pattern below, and the small-signal engines eliminate the
 * algebraic states (ringup/smallsig.h).
 *
 * Discontinuities. Step and pulse edges of zero width and a supply with rise 0 are
 * jumps; ru_system_breakpoints lists their times, and ru_system_apply_jump moves
 * the free node voltages by the charge-conserving share C^{-1} C_fd dv_d of the
 * driven nodes' jump (a capacitor to a supply that steps carries the step).
 *
 * A system is read-only after creation: calls take it as const and may run from
 * many threads at once, each with its own x and output arrays. */
#ifndef RINGUP_SYSTEM_H
#define RINGUP_SYSTEM_H

#include "ringup/circuit.h"
#include "ringup/status.h"

#include <stddef.h>

#ifdef __cplusplus
extern "C" {
#endif

typedef struct ru_system ru_system;

/* Most ODE states of a system (README "Limits"): the dense Jacobian and its LU
 * take n^2 doubles and n^3/3 operations per factorization. */
#define RU_STATES_MAX 1000

/* Constructor. Fails with RU_EINPUT (err names the part) when a supply has neither
 * terminal on ground or on a driven node, or two supplies fix the same node, and
 * when the circuit has more than RU_STATES_MAX states. The circuit must outlive
 * the system. */
ru_status ru_system_create(const ru_circuit *c, ru_system **out, ru_error *err);

/* Destructor; NULL is harmless. */
void ru_system_destroy(ru_system *s);

const ru_circuit *ru_system_circuit(const ru_system *s);

size_t ru_system_size(const ru_system *s);       /* number of states n */
size_t ru_system_free_nodes(const ru_system *s); /* states 0..free_nodes-1 are voltages */

/* Name of state i: the node name, "i(L1)" for an inductor current, or
 * "PART.name" for an internal state. */
const char *ru_system_state_name(const ru_system *s, size_t i);

/* State index of a node's voltage; -1 for ground, -2 for a driven node, -3 when
 * the node index is out of range. */
int ru_system_node_state(const ru_system *s, int node);

/* State index of an inductor's current, or -1 when the part is not an inductor. */
int ru_system_inductor_state(const ru_system *s, int part);

/* State index of any part's first own state (an inductor's current, a crystal's
 * main-arm current, an opamp's integrator), or -1 when the part has none. */
int ru_system_part_state(const ru_system *s, int part);

/* Voltage of any node (ground, driven or free) at time t for state x. */
double ru_system_node_voltage(const ru_system *s, int node, double t, const double *x);

/* Voltage of any node with every source at its final DC value (for showing an
 * operating point). */
double ru_system_node_voltage_dc(const ru_system *s, int node, const double *x);

/* The initial state for the circuit's kick (power-on: all zero, then the jump of
 * supplies that are at value at t = 0; preset: the preset voltages on top). */
ru_status ru_system_initial_state(const ru_system *s, double *x0, ru_error *err);

/* What kind of state i is (see the head comment). */
typedef enum ru_state_kind {
    RU_STATE_DIFFERENTIAL, /* has mass: a node with capacitance, a current, ... */
    RU_STATE_ALGEBRAIC,    /* a free node with no capacitance */
    RU_STATE_COMMON        /* the reference node of a capacitor group with none to
                              ground: the group's common level is algebraic */
} ru_state_kind;

ru_state_kind ru_system_state_kind(const ru_system *s, size_t i);

/* The reference state of the capacitor group that state i belongs to (i itself
 * for the reference), or -1 when i is in no such group. */
int ru_system_state_group(const ru_system *s, size_t i);

/* Algebraic degrees of freedom (RU_STATE_ALGEBRAIC and RU_STATE_COMMON states);
 * 0 for an ODE. */
size_t ru_system_algebraic_count(const ru_system *s);

/* The rates a state x implies for the stored energy: x' of every differential
 * state from M x' = r(t, x), solved over the differential block, with the
 * algebraic states' rates set to 0. For an ODE this is ru_system_rhs. For a DAE
 * the rate of every capacitor voltage and inductor current is exact (a capacitor
 * group's reference rate is 0, so the members' rates are relative to it). */
ru_status ru_system_storage_rates(const ru_system *s, double t, const double *x,
                                  double *xdot);

/* f(t, x) = M^{-1} r(t, x) (RU_EINPUT for a DAE). */
ru_status ru_system_rhs(const ru_system *s, double t, const double *x, double *f);

/* J = df/dx (n*n, row-major: J[i*n + j] = df_i/dx_j; RU_EINPUT for a DAE). */
ru_status ru_system_jacobian(const ru_system *s, double t, const double *x, double *J);

/* How sources are evaluated for the DC and small-signal engines. */
typedef struct ru_eval_point {
    double t_s;          /* time; ignored when dc is 1 */
    int dc;              /* 1: every source at its final (DC) value, derivatives 0;
                            2: every source at its value at t_s, derivatives 0 (the
                            DC circuit of that moment) */
    double source_scale; /* multiplies every source value (1 normally; source stepping) */
} ru_eval_point;

/* r(x) and dr/dx (either may be NULL) at an evaluation point, unscaled by M:
 * the right form for Newton (r = 0 at an operating point) and for frequency
 * response ((j w M - dr/dx) dx = b). dr is n*n row-major. */
ru_status ru_system_residual(const ru_system *s, const ru_eval_point *ep,
                             const double *x, double *r, double *dr);

/* f = M^{-1} r and J = M^{-1} dr/dx (either may be NULL; J is n*n row-major) at an
 * evaluation point. With ep->dc set the circuit is autonomous (every source at its
 * final value, no noise): the form the periodic steady-state engines integrate. */
ru_status ru_system_eval(const ru_system *s, const ru_eval_point *ep, const double *x,
                         double *f, double *J);

/* The mass matrix M = blockdiag(C, I), n*n row-major. */
void ru_system_mass(const ru_system *s, double *M);

/* The sparse pattern shared by dr/dx and M: compressed sparse columns, rows
 * ascending within each column, every diagonal entry present, fixed at creation
 * (every entry any stamp may touch, whatever its value at a given state). The
 * arrays belong to the system. */
typedef struct ru_sparsity {
    size_t n;            /* order */
    long nnz;            /* entries */
    const long *colptr;  /* n + 1: column j holds entries colptr[j] .. colptr[j+1]-1 */
    const long *rowind;  /* nnz: the row of each entry */
    const double *mass;  /* nnz: M's value at each entry (0 where only dr/dx has one) */
} ru_sparsity;

void ru_system_sparsity(const ru_system *s, ru_sparsity *p);

/* As ru_system_residual, with dr/dx as nnz values over ru_system_sparsity (r is
 * required, drvals may be NULL). The cost is linear in the circuit's size. */
ru_status ru_system_residual_sparse(const ru_system *s, const ru_eval_point *ep,
                                    const double *x, double *r, double *drvals);

/* Loop breaking for the return ratio of one amplifier part (index into the
 * circuit's parts). At state x (DC evaluation), splits dr/dx = A0 + b g^T where
 * g^T x is the amplifier's control voltage (v_in - v_inv; inv is ref unless the
 * part names one) and b holds the derivatives of every quantity the amplifier
 * controls (its output, not its input loading) with respect to that voltage. A0 is n*n, b and g have n entries. */
ru_status ru_system_loop_split(const ru_system *s, int part, const double *x,
                               double *A0, double *b, double *g, ru_error *err);

/* Times of jumps in (0, t_stop] (edges of zero width), sorted, at most max of
 * them; returns how many there are (may exceed max). t = 0 is handled by
 * ru_system_initial_state. Times of slope changes (ramp ends, edge ends) are
 * listed too, so an integrator can stop on them. */
size_t ru_system_breakpoints(const ru_system *s, double t_stop, double *bp, size_t max);

/* Earliest time from which every source is constant and no noise is on, so that
 * the system is autonomous (f depends on x alone) from then on; INFINITY when a
 * source keeps changing (a sine, a repeating pulse) or the thermal noise is on. */
double ru_system_autonomous_from(const ru_system *s);

/* At a breakpoint t: adds to the free node voltages the charge-conserving share of
 * the driven nodes' jump from t- to t+. Does nothing when nothing jumps at t. */
void ru_system_apply_jump(const ru_system *s, double t, double *x);

/* Turns on the Johnson-Nyquist thermal noise of every resistor (a current of
 * one-sided density 4kT/R across it) and of every inductor's series resistance (a
 * voltage of density 4kTR in its branch) for time-domain evaluations (not for DC
 * or small-signal ones), band-limited to about bandwidth_hz, at temp_c, from seed.
 * The noise is a deterministic function of (seed, part, t): reruns repeat it and
 * threads share nothing. Call before the system is used; RU_ERANGE on bad values. */
ru_status ru_system_set_noise(ru_system *s, unsigned long seed, double bandwidth_hz,
                              double temp_c);

/* Small-signal noise sources of the parts, for phase-noise analysis (independent of
 * the noise kick above). Each source is one independent noise of one-sided density
 * S(f) = S_white(x) (1 + fc / f) entering the residual along b(x):
 *   thermal     every resistor (4kT/R, a current across it), every inductor's series
 *               resistance (4kTR, a voltage in its branch), every thermal resistor
 *               (4kT/R(T) at its own temperature T = tamb + rise)
 *   shot        every diode (2q|i|) and every exp-stage output (2q|i_out|, the
 *               junction's collector current)
 *   input       an amplifier's `en` (en^2, a voltage in series with its input: the
 *               law's every d/d vc along it) and `inoise` (inoise^2, a current from
 *               inv into in), both with the amplifier's flicker corner `fc`
 * Resistors and inductors have no temperature of their own: they are at temp_c.
 * A part has at most RU_NOISE_PART_MAX sources, in the order above. */
#define RU_NOISE_PART_MAX 3

typedef enum ru_noise_kind {
    RU_NOISE_THERMAL, /* Johnson-Nyquist */
    RU_NOISE_SHOT,    /* Schottky's shot noise */
    RU_NOISE_INPUT_V, /* an amplifier's input voltage noise (en) */
    RU_NOISE_INPUT_I, /* an amplifier's input current noise (inoise) */
    RU_NOISE_KIND_COUNT
} ru_noise_kind;

typedef struct ru_noise_info {
    int part;                 /* index of the part in the circuit */
    ru_noise_kind kind;
    double flicker_corner_hz; /* fc (0: white) */
    const char *label;        /* "thermal", "shot", ... (static text) */
} ru_noise_info;

/* Number of noise sources; their order is fixed by the circuit. */
size_t ru_system_noise_count(const ru_system *s);

/* Source k (0 <= k < count); RU_ERANGE for k out of range. */
ru_status ru_system_noise_info(const ru_system *s, size_t k, ru_noise_info *info);

/* Noise columns at state x (sources at their DC values): B is n*m row-major with
 * m = ru_system_noise_count(s); column k is sqrt(S_white,k(x)) M^{-1} b_k(x), so
 * that x' = f(x) + B w(t) with w of unit one-sided density in every entry (two-sided
 * 1/2). Resistors and inductors are at temp_c. RU_ENOMEM, RU_ERANGE (bad temp_c). */
ru_status ru_system_noise_columns(const ru_system *s, const double *x, double temp_c,
                                  double *B);

/* Typical magnitude of each state (volts for nodes, amperes for inductors) for
 * absolute tolerances: from the supplies, sources and presets. scale has n entries. */
void ru_system_state_scale(const ru_system *s, double *scale);


#ifdef __cplusplus
}
#endif
#endif
