/* ringup/part.h: one part of a circuit as plain data (ru_part and the records of
 * its kinds: waveform, amplifier law, diode, thermal resistor), its defaults, and
 * the file spellings of part types and laws.
 *
 * The physics of every part type lives in src/parts/ (one file per family, reached
 * through one descriptor table); this header is what callers see. A part names its
 * nodes by index (ru_circuit_node_name() in ringup/circuit.h; 0 is ground). Values
 * are in SI units as the field comments say. Nothing here allocates or keeps
 * state. ringup/circuit.h includes this header. */
#ifndef RINGUP_PART_H
#define RINGUP_PART_H

#include <stddef.h>

#ifdef __cplusplus
extern "C" {
#endif

#define RU_NAME_MAX 64   /* longest part, node or model name, with the NUL */
#define RU_POLY_MAX 8    /* most coefficients of a poly-conductance (c_0..c_7) */
#define RU_TABLE_MAX 64  /* most points of a `table` amplifier's transfer curve */
#define RU_PART_NODES 6  /* node slots of a part */

typedef enum {
    RU_PART_RESISTOR,  /* nodes a,b; value in ohm */
    RU_PART_CAPACITOR, /* nodes a,b; value in farad */
    RU_PART_INDUCTOR,  /* nodes a,b; value in henry; series_ohm; state i(a->b) */
    RU_PART_SUPPLY,    /* ideal voltage source: v(a) - v(b) = wave(t) */
    RU_PART_CURRENT,   /* ideal current source: wave(t) amps flow a -> b inside it */
    RU_PART_POLY,      /* poly-conductance: i(a->b) = sum coeffs[k] v^k, v = v(a)-v(b) */
    RU_PART_AMPLIFIER, /* behavioral amplifier: nodes in, out, ref, inv (see ru_amp) */
    RU_PART_DIODE,     /* junction diode: nodes anode, cathode (see ru_diode) */
    RU_PART_THERMAL,   /* thermal resistor (lamp or NTC): nodes a,b (see ru_thermal) */
    RU_PART_TRANSCONDUCTOR, /* gm*(v(cp) - v(cn)) flows p -> n through it: nodes p, n,
                               cp, cn; value is gm (S) */
    RU_PART_CRYSTAL,   /* quartz crystal: nodes a,b; value is the series-resonant
                          frequency fs (Hz), tol its tolerance (see ru_crystal) */
    RU_PART_COUPLING,  /* magnetic coupling of two inductors: no nodes (see ru_coupling) */
    RU_PART_TYPE_COUNT
} ru_part_type;

/* The file spelling of a part type ("resistor", ..., "poly-conductance",
 * "amplifier", "diode", "thermal-resistor"). */
const char *ru_part_type_name(ru_part_type t);

typedef enum {
    RU_WAVE_DC,    /* value, ramped linearly from 0 over rise_s at power-on */
    RU_WAVE_STEP,  /* from v0 to v1 at at_s, linear edge over edge_s (0: a jump) */
    RU_WAVE_SINE,  /* offset + amplitude sin(2 pi freq (t - at_s) + phase), t >= at_s */
    RU_WAVE_PULSE  /* v0, then v1 from at_s for width_s, repeating every period_s */
} ru_wave_kind;

/* Waveform of a supply (volts) or current source (amperes). */
typedef struct ru_wave {
    ru_wave_kind kind;
    double value;     /* dc: final value */
    double rise_s;    /* dc: ramp time from 0 at t = 0 (0: at value from t = 0) */
    double v0;        /* step/pulse: value before the edge */
    double v1;        /* step/pulse: value after the edge */
    double at_s;      /* step/pulse/sine: start time */
    double edge_s;    /* step/pulse: linear transition time (0: a jump) */
    double width_s;   /* pulse: time at v1 (edges included) */
    double period_s;  /* pulse: repeat period (0: one pulse) */
    double offset;    /* sine: DC offset (also the value before at_s) */
    double amplitude; /* sine: peak amplitude */
    double freq_hz;   /* sine: frequency */
    double phase_deg; /* sine: phase at at_s */
} ru_wave;

typedef enum {
    RU_LAW_FOLLOWER_TANH, /* see ru_amp */
    RU_LAW_EXP_STAGE,
    RU_LAW_DIFF_PAIR_TANH,
    RU_LAW_OPAMP,
    RU_LAW_TABLE,
    RU_LAW_MOS_EKV,
    RU_LAW_CMOS_INVERTER,
    RU_LAW_COUNT
} ru_law;

/* The file spelling of a law ("follower-tanh", "exp-stage", "diff-pair-tanh",
 * "opamp", "table", "mos-ekv", "cmos-inverter"). */
const char *ru_law_name(ru_law law);

/* Parameters of a behavioral amplifier. The control voltage is vc = v(in) - v(inv)
 * (inv is the inverting input; it is the ref node unless given), the output
 * voltage vo = v(out) - v(ref). The output current enters out and leaves by ref;
 * an input current enters in and leaves by inv (KCL holds over the part).
 *
 * follower-tanh: a Thevenin source E = center + gain*swing*tanh((vc - center)/swing)
 *   behind rout from out to ref; the input draws no current.
 * exp-stage: a current ic = is*(exp(vc/(n*vt)) - 1)*tanh(vo/vsat) flows into out
 *   and leaves by ref (a sink at out, as a junction transistor's collector); the
 *   input draws the junction current over beta, is*(exp(vc/(n*vt)) - 1)/beta, from
 *   in to inv (ref unless given); vt = k*T/q at temp_c. The tanh factor is the
 *   smooth saturation of the output only: 1 when vo is well above vsat, 0 at vo = 0. The input is not
 *   reduced by it, so in saturation the junction still clamps the input as a real
 *   base-emitter junction does.
 *   Device keys (all 0 by default: none): va, the Early voltage, multiplies ic by
 *   (1 + vo/va) for vo > 0 (Early 1952; the output resistance (va + vce)/ic, e.g.
 *   Gray, Hurst, Lewis & Meyer ch. 1, from memory). cjc is a constant base-
 *   collector capacitance (in-out). Without rb, cje is a constant base-emitter
 *   capacitance (in-inv). With rb > 0 the junction sits behind the base
 *   resistance: its voltage vj (state "PART.vbe", relative to inv) obeys
 *     (cje + tf gj) dvj/dt = (vc - vj)/rb - is (exp(vj/(n vt)) - 1)/beta,
 *   gj = d/dvj of is exp(vj/(n vt)), the base's junction and diffusion charges
 *   (charge-control model: q = tf ic, Beaufoy & Sparkes 1957, from memory; ft =
 *   gm/(2 pi (cje + tf gm + cjc))), the collector current follows vj (ic = is
 *   (exp(vj/(n vt)) - 1) tanh(vo/vsat) (1 + vo/va)) and the input draws (vc - vj)/rb.
 *   tf needs rb; rb needs cje or tf. Small signal this is the hybrid-pi model
 *   with rbb' = rb, c_pi = cje + tf gm, c_mu = cjc, r_o from va.
 * diff-pair-tanh: the long-tailed (emitter-coupled) pair, the bases' difference vc,
 *   the tail to ref. With out2 (both collectors): out, the in side's collector,
 *   sinks itail/2 (1 + tanh(vc/(2 n vt))) and out2, the inv side's, itail/2 (1 -
 *   tanh(vc/(2 n vt))) (two Shockley junctions sharing the tail; own derivation),
 *   sign must be 1. Without out2 (the pair with an ideal current-mirror load): the
 *   current pushed INTO out is the collectors' difference, sign*itail*tanh(vc/(2 n
 *   vt)) (Source: the emitter-coupled pair's large-signal transfer, e.g. Gray,
 *   Hurst, Lewis & Meyer, "Analysis and Design of Analog Integrated Circuits", ch.
 *   3; from memory): with a load resistor R from out to ref, sign +1 gives a
 *   non-inverting stage of small-signal gain +itail*R/(2 n vt), sign -1 an
 *   inverting one. rout (0: none) is an output resistance from each output to ref.
 *   The inputs draw nothing. ref carries the output currents back, so it should be
 *   gnd or a stiff node; the pair's second input is `inv`.
 * opamp: a dominant-pole operational amplifier (two-stage macro model) with one
 *   internal state, the integrator voltage vint (state "PART.vint", volts
 *   relative to ref):
 *     dvint/dt = slew*tanh(wt*vc/slew) - wp*vint - K(vint)
 *     wt = 2 pi gbw (unity-gain frequency), wp = wt/gain (the open-loop pole)
 *   and the output is rail(vint) behind rout: i_out = (rail(vint) - vo)/rout.
 *   Small signal: vint/vc = gain/(1 + s/wp), the open-loop gain A0/(1 + j f/fp)
 *   with fp = gbw/A0 (Source: the single-pole op-amp model, e.g. Sedra & Smith,
 *   "Microelectronic Circuits", ch. 2; from memory). Large signal: the input
 *   stage saturates, so |dvint/dt| stays below slew (smooth slew-rate limit).
 *   rail(u) = vmin + knee*(sp((u - vmin)/knee) - sp((u - vmax)/knee)), sp(z) =
 *   ln(1 + e^z) (softplus): u between the rails passes, beyond them it bends over
 *   within a few knee to vmax or vmin (rail(vmax) = vmax - knee ln 2). K is the
 *   anti-windup force, slew*(sp((vint - vmax - 20 knee)/knee) - sp((vmin - 20 knee
 *   - vint)/knee)): negligible inside the rails widened by 20 knees, it holds vint
 *   there once driven, so a driven-out output recovers after 20 knee/slew or
 *   less, not after unwinding a huge integrator. DC: vint = gain*vc while inside
 *   that band, so the static transfer is rail(gain*vc). vint starts at its rest
 *   with every node at 0 V (0 V unless a rail is within 20 knees of 0). The
 *   inputs draw nothing.
 * table: a measured static transfer vout = f(vc) from npoints (2..RU_TABLE_MAX)
 *   points with strictly increasing vin, interpolated by the monotone piecewise
 *   cubic Hermite curve (Fritsch & Carlson, SIAM J. Numer. Anal. 17 (1980) 238,
 *   with the weighted-harmonic-mean slopes of Fritsch & Butland (1984), the same
 *   curve as scipy's PchipInterpolator): C1, and monotone on every interval where
 *   the data are; beyond the ends it continues linearly with the end slopes. The
 *   source f(vc) sits behind rout from out to ref; the input draws nothing.
 * mos-ekv: an MOS transistor by the charge-based EKV model (Enz, Krummenacher &
 *   Vittoz, "An analytical MOS transistor model valid in all regions of operation
 *   and dedicated to low-voltage and low-current applications", Analog Integrated
 *   Circuits and Signal Processing 8 (1995) 83-114), with a constant slope factor
 *   n: gate in, drain out, source and bulk together on ref (vgs is v(in) - v(inv),
 *   inv being ref unless given).
 *   The drain current (drain to source, n-channel)
 *     id = is (F(vp/ut) - F((vp - vds)/ut)) (1 + |vds|/va),  F(u) = ln^2(1 + e^(u/2))
 *     vp = (vgs - vth)/n,  is = 2 n k ut^2,  ut = kT/q
 *   is one expression from weak inversion (id = is e^(vp/ut) (1 - e^(-vds/ut)))
 *   through moderate to strong inversion (saturation: k/(2n) (vgs - vth)^2), in
 *   both directions of vds; va (0: none) adds channel-length modulation (common
 *   practice, not part of EKV 1995). polarity -1 is the p-channel device: every
 *   voltage and current reversed, vth its magnitude. i_out = -polarity id (an
 *   n-channel drain sinks). The gate draws no current; cgs (in-inv) and cgd
 *   (in-out) are constant capacitances.
 * cmos-inverter: two mos-ekv devices between the rails: gates on in, drains on
 *   out, the n device's source on ref and the p device's on vdd (a terminal, the
 *   upper rail). i_out = id_p(vdd - vin, vdd - vout) - id_n(vin, vout), and the
 *   supply current id_p enters by vdd; the same n, temp and va for both devices.
 *   cin (in-ref), cgd (in-out) and cout (out-ref) are constant capacitances. */
typedef struct ru_amp {
    ru_law law;
    char model[RU_NAME_MAX]; /* preset name the values came from, "" when inline */
    double gain;             /* follower: small-signal gain (V/V); opamp: DC gain A0 */
    double swing_v;          /* follower: soft-clipping scale (V) */
    double center_v;         /* follower: input and output center (V) */
    double rout_ohm;         /* follower, opamp, table: output resistance (ohm, > 0);
                                diff-pair: parallel output resistance (0: none) */
    double is_a;             /* exp-stage: saturation current (A) */
    double n;                /* exp-stage, diff-pair: emission coefficient; mos-ekv,
                                cmos-inverter: the EKV slope factor (>= 1) */
    double beta;             /* exp-stage: current gain ic/ib */
    double vsat_v;           /* exp-stage: saturation knee (V) */
    double temp_c;           /* exp-stage, diff-pair: junction temperature (deg C) */
    double itail_a;          /* diff-pair: tail current (A, > 0) */
    double sign;             /* diff-pair: +1 non-inverting, -1 inverting */
    double gbw_hz;           /* opamp: gain-bandwidth product (Hz, > 0) */
    double vmax_v;           /* opamp: upper output rail (V, relative to ref) */
    double vmin_v;           /* opamp: lower output rail (V, < vmax) */
    double knee_v;           /* opamp: softness of the rails (V, > 0) */
    double slew_v_per_s;     /* opamp: slew-rate limit (V/s, > 0) */
    int npoints;             /* table: points used (2..RU_TABLE_MAX) */
    double pt_vin[RU_TABLE_MAX];  /* table: input voltages (V), strictly increasing */
    double pt_vout[RU_TABLE_MAX]; /* table: output voltages (V) */
    double polarity;         /* mos-ekv: +1 n-channel, -1 p-channel */
    double vth_v;            /* mos-ekv: threshold voltage VT0 (V, magnitude for p) */
    double kmos_a_per_v2;    /* mos-ekv: transfer parameter beta = mu Cox W/L (A/V^2) */
    double va_v;             /* mos-ekv, cmos-inverter: channel-length modulation
                                voltage; exp-stage: Early voltage (V, 0: none) */
    double cgs_f, cgd_f;     /* mos-ekv: gate-source and gate-drain capacitances (F);
                                cmos-inverter: cgd is in-out (both devices) */
    double vthn_v, vthp_v;   /* cmos-inverter: thresholds of the n and p devices (V,
                                both positive) */
    double kn_a_per_v2;      /* cmos-inverter: n device's beta (A/V^2) */
    double kp_a_per_v2;      /* cmos-inverter: p device's beta (A/V^2) */
    double cin_f, cout_f;    /* cmos-inverter: in-ref and out-ref capacitances (F) */
    /* every law: input-referred noise for phase-noise analysis (0: none) */
    double en_v_per_rthz;    /* voltage noise density in series with in (V/sqrt(Hz)) */
    double in_a_per_rthz;    /* current noise density from inv into in (A/sqrt(Hz)) */
    double fc_hz;            /* their flicker corner: density^2 (1 + fc/f) (Hz) */
    double cje_f, cjc_f;     /* exp-stage: base-emitter (in-inv, or behind rb) and
                                base-collector (in-out) junction capacitances (F) */
    double tf_s;             /* exp-stage: forward transit time (s; 0: none) */
    double rb_ohm;           /* exp-stage: base resistance (ohm; 0: none) */
} ru_amp;

/* Junction diode (two-terminal part): i(anode -> cathode) = is*(exp(vj/(n vt)) - 1)
 * with vj = vd - rs*i, vd = v(anode) - v(cathode), vt = kT/q at temp_c (Source:
 * Shockley's ideal-diode law with series resistance, e.g. Sze, "Physics of
 * Semiconductor Devices"; from memory). Exponents above 40 continue linearly
 * (junction-voltage limiting, as the exp-stage). */
typedef struct ru_diode {
    char model[RU_NAME_MAX]; /* preset name, "" when inline */
    double is_a;             /* saturation current (A, > 0) */
    double n;                /* emission coefficient (> 0) */
    double rs_ohm;           /* series resistance (ohm, >= 0) */
    double temp_c;           /* junction temperature (deg C) */
} ru_diode;

typedef enum {
    RU_THERMAL_LAMP, /* R = r0*(1 + alpha*(T - t0)): a metal filament */
    RU_THERMAL_NTC   /* R = r0*exp(bth*(1/T - 1/T0)), T in kelvin: a thermistor */
} ru_thermal_kind;

/* Thermal resistor (two-terminal part): a resistor whose resistance follows its
 * own temperature T = tamb + rise. The rise is an internal state ("PART.rise",
 * kelvin above ambient, 0 at start) obeying the first-order heat balance
 *   cth d(rise)/dt = v^2/R(T) - rise/rth
 * (a thermal RC: steady rise P*rth, time constant rth*cth). */
typedef struct ru_thermal {
    char model[RU_NAME_MAX]; /* preset name, "" when inline */
    ru_thermal_kind kind;    /* lamp or ntc */
    double r0_ohm;           /* resistance at t0 (ohm, > 0) */
    double alpha_per_k;      /* lamp: temperature coefficient (1/K) */
    double beta_k;           /* ntc: B constant (K, > 0) */
    double t0_c;             /* reference temperature of r0 (deg C) */
    double tamb_c;           /* ambient temperature (deg C) */
    double rth_k_per_w;      /* thermal resistance to ambient (K/W, > 0) */
    double cth_j_per_k;      /* heat capacity (J/K, > 0) */
} ru_thermal;

/* Magnetic coupling of two inductors (parts of type inductor, by name): mutual
 * inductance M = k sqrt(L1 L2), |k| < 1, so that
 *   v1 = L1 di1/dt + M di2/dt + R1 i1,   v2 = M di1/dt + L2 di2/dt + R2 i2,
 * with v and i of each inductor taken from its first node to its second (the
 * first node is the dotted end: currents entering both first nodes add their
 * fluxes when k > 0). */
typedef struct ru_coupling {
    char inductor[2][RU_NAME_MAX]; /* the two inductors' part names */
    double k;                      /* coupling coefficient, -1 < k < 1 */
} ru_coupling;

/* Fills d and t with their defaults (documented in README). */
void ru_diode_defaults(ru_diode *d);
void ru_thermal_defaults(ru_thermal *t, ru_thermal_kind kind);

#define RU_CRYSTAL_ARMS 4 /* most extra motional arms (overtones, spurious modes) */

/* Quartz crystal (two-terminal part), the Butterworth-Van Dyke equivalent circuit:
 * the shunt capacitance c0 between a and b in parallel with motional arms, each a
 * series R, L, C. The main arm resonates in series at fs (the part's value, Hz):
 * L = 1 / ((2 pi fs)^2 cm), R = esr, or 2 pi fs L / q when q is given instead; the
 * extra arms (overtones and spurious modes) carry their own freq, esr and cm. Each
 * arm's current i (a -> b) and the voltage on its cm are internal states of the
 * part ("i(X1)", "X1.vm"; arm k: "i(X1.k)", "X1.vmk"), with
 *   L di/dt = v(a) - v(b) - R i - vm,   cm dvm/dt = i,
 * so the arm has no node of its own (and no stray capacitance). esr's thermal
 * noise is a series voltage of density 4kTR in each arm. load (the load
 * capacitance the crystal is specified at) gives the load-resonance frequency
 * fL = fs sqrt(1 + cm / (c0 + load)) the reports count ppm from; drive_limit the
 * drive power (esr I_rms^2) above which a run warns. Monte Carlo draws fs with the
 * part's tol (often given in ppm) and esr with esr_tol. */
typedef struct ru_crystal {
    double esr_ohm;        /* main arm's motional resistance (0: from q) */
    double q;              /* main arm's quality factor, instead of esr (0: esr) */
    double cm_f;           /* main arm's motional capacitance (F, > 0) */
    double c0_f;           /* shunt capacitance (F, >= 0) */
    double load_f;         /* specified load capacitance (F; 0: none) */
    double drive_limit_w;  /* largest drive power (W; 0: none) */
    double esr_tol;        /* relative tolerance of every arm's esr (Monte Carlo) */
    int narms;             /* extra arms */
    double arm_freq_hz[RU_CRYSTAL_ARMS]; /* their series-resonant frequencies (Hz) */
    double arm_esr_ohm[RU_CRYSTAL_ARMS]; /* their resistances (ohm, > 0) */
    double arm_cm_f[RU_CRYSTAL_ARMS];    /* their motional capacitances (F, > 0) */
    int no_main;           /* 1: the main arm is left out (what the rest of a circuit
                              keeps in a negative-resistance analysis) */
} ru_crystal;


/* A tolerance on one numeric key of a part (`tol: {beta: 30%, is: 50%}`; on a
 * source, a plain `tol: 5%` is one on its level), drawn by Monte Carlo and taken to
 * its ends by corners. The value of a resistor, capacitor, inductor or crystal
 * keeps its own field (ru_part.tol). */
#define RU_KEY_TOLS 8    /* most key tolerances of one part */
#define RU_KEY_MAX 16    /* longest key spelling, with the NUL */
typedef struct ru_key_tol {
    char key[RU_KEY_MAX]; /* a numeric key of the part's type or law ("beta") */
    double tol;           /* relative tolerance, from 0 up to 1 */
} ru_key_tol;

/* Fills a with the law's defaults (documented in README). */
void ru_amp_defaults(ru_amp *a, ru_law law);

/* One part. Node indices refer to ru_circuit_node_name(); 0 is ground. */
typedef struct ru_part {
    char name[RU_NAME_MAX];
    ru_part_type type;
    int node[RU_PART_NODES]; /* a,b for two-terminal parts; in,out,ref,inv,out2,vdd
                                for amplifiers (inv -1: the same node as ref; out2
                                and vdd -1: not connected) */
    double value;            /* R (ohm), C (F), L (H), a transconductor's gm (S) */
    double series_ohm;       /* inductor: series resistance (ohm, >= 0) */
    double tol;              /* relative tolerance for Monte Carlo (0.01 = 1 %) */
    double tempco;           /* resistor, capacitor, inductor: relative change of value
                                per kelvin from RU_TEMP_REF_C (file: ppm/K, 100ppm) */
    int temp_given;          /* 1: the part's own keys set its temperature (temp,
                                tamb), which the circuit's temp then leaves alone */
    double coeffs[RU_POLY_MAX]; /* poly-conductance c_0.. (A/V^k) */
    int ncoeffs;             /* number of coefficients used */
    ru_wave wave;            /* supply, current */
    ru_amp amp;              /* amplifier */
    ru_diode diode;          /* diode */
    ru_thermal thermal;      /* thermal resistor */
    ru_crystal crystal;      /* crystal (fs in value, its tolerance in tol) */
    ru_coupling coupling;    /* coupling of two inductors */
    int nkey_tols;           /* tolerances on other keys (Monte Carlo, corners) */
    ru_key_tol key_tol[RU_KEY_TOLS];
    int line, col;           /* where the part is defined in its file (1-based; 0 none) */
} ru_part;

/* Arm k of crystal p (0 the main arm, 1..narms the extra ones): its R, L and C;
 * returns 0 when p has no such arm (or p is not a crystal). */
int ru_crystal_arm(const ru_part *p, int k, double *r_ohm, double *l_h,
                   double *c_f);

/* The load-resonance frequency fs sqrt(1 + cm / (c0 + load)) (Hz; NAN without a
 * load capacitance). */
double ru_crystal_load_freq_hz(const ru_part *p);

/* The crystal's impedance between a and b at angular frequency w > 0 (every arm and
 * c0, the Butterworth-Van Dyke network). */
void ru_crystal_impedance(const ru_part *p, double w_rad_per_s, double *re_ohm,
                          double *im_ohm);

/* Fills p with zeros, the type's defaults and ground nodes (an amplifier's inv
 * is -1: the same as ref). */
void ru_part_init(ru_part *p, ru_part_type type, const char *name);

/* The control-input nodes of an amplifier: in and inv (inv resolved to ref). */
int ru_part_inv_node(const ru_part *p);

/* One terminal of a part as its file names it. */
typedef struct ru_terminal {
    const char *key; /* "nodes", "in", "out", "ref", "inv", "control" (static text) */
    int node;        /* node index (0: ground) */
    int slot;        /* its place in ru_part.node[] */
} ru_terminal;

/* The terminals of p in order (a terminal left at its default "same as another"
 * is not listed: an amplifier's inv when it is ref) into out[0..max-1]; returns
 * how many there are (may exceed max). */
int ru_part_terminals(const ru_part *p, ru_terminal *out, int max);

/* The double of p's numeric key `key` as its type (and law, wave or kind) lists
 * it, NULL when p has no such key; *unit (when unit is not NULL) gets the unit it
 * is written in ("" for a plain number, "%" for a fraction). */
double *ru_part_key_ptr(ru_part *p, const char *key, const char **unit);
const double *ru_part_key_cptr(const ru_part *p, const char *key, const char **unit);

/* The key whose double is p->value ("value"; a crystal's "freq"), NULL: none. */
const char *ru_part_value_key(const ru_part *p);

/* The key a plain `tol: X` applies to on a part with no `tol` key of its own: its
 * value key (a transconductor's gm), else a source's level (dc value, step or
 * pulse `to`, sine amplitude); NULL: a plain tol is not taken (give the keys:
 * `tol: {beta: 30%}`). */
const char *ru_part_level_key(const ru_part *p);

/* Multiplies every level of a source (the keys in its unit: a dc value, a step's
 * from and to, a sine's offset and amplitude) by f; other parts are left alone. */
void ru_part_scale_level(ru_part *p, double f);

/* The value that matters of p for listings, e.g. "10 kohm", "sine 1 V at 1000 Hz",
 * "follower-tanh / soft-follower" (SI prefixes; "" for an unknown type). */
void ru_part_describe(const ru_part *p, char *buf, size_t size);

/* What the engines ask of a part, answered by its type's descriptor (so that no
 * engine names part types):
 *   ru_part_is_source    1 for an independent source (a supply, a current): it
 *                        ramps at power-on and may drive the circuit
 *   ru_part_breaks_loop  1 when the system can break its loop for the return
 *                        ratio (an amplifier)
 *   ru_part_output_node  the node of its output a probe defaults to, -1: none
 *   ru_part_currents     how many of its first states are branch currents a wave
 *                        file lists (an inductor's, a crystal's main arm)
 *   ru_part_impedance    its small-signal impedance at w (rad/s) in closed form
 *                        into re/im; 1 when it has one (R, C, L, a crystal's arm) */
int ru_part_is_source(const ru_part *p);
int ru_part_breaks_loop(const ru_part *p);
int ru_part_output_node(const ru_part *p);
int ru_part_currents(const ru_part *p);
int ru_part_impedance(const ru_part *p, double w, double *re_ohm, double *im_ohm);

#ifdef __cplusplus
}
#endif
#endif
