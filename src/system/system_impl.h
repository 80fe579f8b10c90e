/* system_impl.h: the private layout of ru_system, shared by system_create.c
 * (building), system.c (node values, solves, initial state, breakpoints, jumps,
 * scales), system_stamp.c (the residual, its Jacobian, rhs, mass matrix and loop
 * split) and system_dae.c (the differential-algebraic split, the sparse pattern).
 *
 * Invariants: node_state[0] == RU_NS_GROUND; every driven node k has a record
 * drive[k] whose `from` node is ground or a driven node listed earlier in
 * drive_order; free node states are 0..nfree-1 in node order; inductor states
 * follow in part order; cfac holds the Cholesky factor of the nfd x nfd
 * capacitance matrix of the differential free nodes fd (all of them unless some
 * are algebraic; column-major lower, L(i,j) = cfac[i + j*nfd]) whose
 * entries outside its envelope are exact zeros: L(i,j) == 0 for j < crow0[i]
 * (row i) and for i > ccol1[j] (column j), so solves may skip them; internal
 * states (an opamp's vint, a thermal resistor's rise) follow the inductor
 * currents in part order, one per such part, with unit mass. Nothing changes after
 * ru_system_create returns except the noise settings, which ru_system_set_noise
 * sets before the system is used. */
#ifndef RINGUP_SYSTEM_IMPL_H
#define RINGUP_SYSTEM_IMPL_H

#include "ringup/system.h"
#include "parts/desc.h"
#include "system/noise.h"

#define RU_NS_GROUND (-1)
#define RU_NS_DRIVEN (-2)
#define RU_NS_RANGE (-3)

/* How a driven node gets its voltage: v(node) = v(from) + sign * wave(part). */
typedef struct ru_drive {
    int part;   /* the supply's part index */
    int from;   /* the supply's other terminal (ground or driven earlier) */
    int sign;   /* +1 when node is the supply's a terminal, -1 when it is b */
} ru_drive;

#define RU_STATE_NAME_MAX (RU_NAME_MAX + 8)

struct ru_system {
    const ru_circuit *c;   /* the circuit, not owned */
    size_t nnodes;         /* nodes including ground */
    size_t nparts;         /* parts in the circuit */
    size_t n;              /* states in all */
    size_t nfree;          /* free node voltages (states 0..nfree-1) */
    size_t nind;           /* inductor currents (states nfree..nfree+nind-1) */
    size_t nint;           /* internal states (after the inductor currents) */
    int *node_state;       /* per node: state index, RU_NS_GROUND or RU_NS_DRIVEN */
    ru_drive *drive;       /* per node: how a driven node is driven (else unused) */
    int *drive_order;      /* driven nodes, each after the node it hangs from */
    size_t ndriven;        /* entries of drive_order */
    int *part_state;       /* per part: inductor current or internal state, else -1 */
    double *cmat;          /* nfree*nfree capacitance matrix (F), symmetric */
    double *cfac;          /* its Cholesky factor (see above) */
    size_t *crow0;         /* per row i of the factor: first column with L(i,j) != 0 */
    size_t *ccol1;         /* per column j of the factor: last row with L(i,j) != 0 */
    char (*names)[RU_STATE_NAME_MAX]; /* per state: its name */
    ru_noise noise;        /* thermal noise of the resistors (off unless set) */
    /* differential-algebraic split (system_dae.c) */
    int *kind;             /* per state: an ru_state_kind */
    int *group;            /* per state: reference state of its capacitor group, -1 */
    size_t nalg;           /* algebraic degrees of freedom (RU_STATE_ALGEBRAIC/COMMON) */
    size_t nfd;            /* differential free nodes: the order of the factor cfac */
    int *fd;               /* their states, ascending (the identity when nalg is 0) */
    /* the sparse pattern of dr/dx and M together (compressed columns) */
    long pat_nnz;          /* entries */
    long *pat_colptr;      /* n + 1 column starts */
    long *pat_rowind;      /* rows, ascending in each column */
    double *pat_mass;      /* M over the pattern */
    /* magnetic couplings (system_couple.c) */
    struct ru_sys_coupling *cpl; /* one per coupling part */
    size_t ncpl;
    int *lg;               /* the coupled inductors' states, ascending (nlg) */
    size_t nlg;
    double *lg_lu;         /* nlg*nlg row-major: L U of their mass block B */
};

/* One coupling: the branch states a, b, its k, M (H) and the mass entries M/La
 * (row a, column b) and M/Lb (row b, column a). */
typedef struct ru_sys_coupling {
    int a, b;
    double k, m_h, ab, ba;
} ru_sys_coupling;

#define RU_COUPLED_MAX 64 /* most inductors in couplings (README "Limits") */

/* Reads the coupling parts (their descriptors' mutual), checks them (named
 * inductors, each pair once, a positive definite inductance matrix) and factors
 * the coupled block of M; nothing when there is none. After number_states. */
ru_status ru_sys_couplings(ru_system *s, ru_error *err);
void ru_sys_free_couplings(ru_system *s);

/* Applies the coupled block's inverse to the inductor rows of a full state vector
 * b (after ru_sys_csolve: M^-1 = blockdiag(C^-1, B^-1, I)), or of every column of
 * a row-major n x ncols matrix; nothing without couplings. */
void ru_sys_lsolve(const ru_system *s, double *b);
void ru_sys_lsolve_rows(const ru_system *s, double *B, size_t ncols);

/* Writes the coupling entries into a dense row-major n x n mass matrix. */
void ru_sys_couplings_mass(const ru_system *s, double *M, size_t n);

/* Growing list of (row, column) pairs seen while building the sparse pattern. */
typedef struct ru_sys_pairs {
    long *rc;              /* row, column, row, column, ... */
    size_t n, cap;         /* pairs held, room */
    int failed;            /* out of memory while growing */
} ru_sys_pairs;

void ru_sys_pairs_add(ru_sys_pairs *p, int row, int col);

/* One residual evaluation at x (t = 0) that records every Jacobian entry a stamp
 * touches, whatever its value (system_stamp.c); r is n scratch doubles. */
ru_status ru_sys_record_pattern(const ru_system *s, const double *x, double *r,
                                ru_sys_pairs *rec);

/* Position of entry (row, col) in the pattern's values, or -1 when it is not in it. */
long ru_sys_pattern_find(const ru_system *s, int row, int col);

/* After the capacitance matrix is built: the split into differential and
 * algebraic states, the check that every algebraic degree of freedom is fixed by
 * KCL, the list fd, and the sparse pattern (system_dae.c). */
ru_status ru_sys_split(ru_system *s, ru_error *err);
ru_status ru_sys_build_pattern(ru_system *s, ru_error *err);
void ru_sys_free_split(ru_system *s);

/* Evaluated sources: t, DC flag and scale (from ru_eval_point). */
typedef struct ru_src_eval {
    double t_s;    /* time (s) */
    int dc;        /* 1: final values, slopes 0; 2: values at t_s, slopes 0 */
    double scale;  /* multiplies every source */
} ru_src_eval;

/* Value and slope of a source part's wave at an evaluation point. */
void ru_sys_source(const ru_part *p, const ru_src_eval *e, double *v, double *dvdt);

/* Fills v[nnodes] with every node voltage and dv[nnodes] with dv/dt of the
 * driven nodes (0 for ground and free nodes). */
void ru_sys_node_values(const ru_system *s, const ru_src_eval *e, const double *x,
                        double *v, double *dv);

/* States part p adds (its descriptor's nstates). */
int ru_sys_part_nstates(const ru_part *p);

/* The capacitances of part i (its descriptor's caps) into cap; returns how many. */
int ru_sys_part_caps(const ru_system *s, size_t i, ru_cap cap[RU_PART_CAPS_MAX]);

/* Solves C y = b in place (b has nfree entries). With algebraic states (nalg > 0)
 * it solves the differential free nodes' block C_dd y_d = b_d and sets the other
 * entries to 0: the rate of every capacitor voltage, up to a capacitor group's
 * common level. */
void ru_sys_csolve(const ru_system *s, double *b);

/* Solves C Y = B in place for the first nfree rows of a row-major matrix B with
 * ncols columns (row i at B + i*ncols): every column as ru_sys_csolve would, with
 * the same operations in the same order, rows at a time. */
void ru_sys_csolve_rows(const ru_system *s, double *B, size_t ncols);

/* Scratch doubles on the stack for a residual evaluation; larger circuits use the
 * heap (the caller's own buffer either way: nothing is shared between calls). */
#define RU_SYS_STACK_DOUBLES 256

#endif
