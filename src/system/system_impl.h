/* system_impl.h: the private layout of ru_system, shared by system.c (building,
 * topology, initial state, breakpoints, jumps, scales) and system_stamp.c (the
 * residual, its Jacobian, rhs, mass matrix and loop split).
 *
 * Invariants: node_state[0] == RU_NS_GROUND; every driven node k has a record
 * drive[k] whose `from` node is ground or a driven node listed earlier in
 * drive_order; free node states are 0..nfree-1 in node order; inductor states
 * follow in part order; cfac holds the Cholesky factor of the nfree x nfree
 * capacitance matrix (column-major lower, L(i,j) = cfac[i + j*nfree]) whose
 * entries outside its envelope are exact zeros: L(i,j) == 0 for j < crow0[i]
 * (row i) and for i > ccol1[j] (column j), so solves may skip them; internal
 * states (an opamp's vint, a thermal resistor's rise) follow the inductor
 * currents in part order, one per such part, with unit mass. Nothing changes after
 * ru_system_create returns except the noise settings, which ru_system_set_noise
 * sets before the system is used. */
#ifndef RINGUP_SYSTEM_IMPL_H
#define RINGUP_SYSTEM_IMPL_H

#include "ringup/system.h"
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
};

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

/* Internal states part p adds (0 or 1). */
int ru_sys_part_nstates(const ru_part *p);

/* Solves C y = b in place (b has nfree entries). */
void ru_sys_csolve(const ru_system *s, double *b);

/* Solves C Y = B in place for the first nfree rows of a row-major matrix B with
 * ncols columns (row i at B + i*ncols): every column as ru_sys_csolve would, with
 * the same operations in the same order, rows at a time. */
void ru_sys_csolve_rows(const ru_system *s, double *B, size_t ncols);

/* Scratch doubles on the stack for a residual evaluation; larger circuits use the
 * heap (the caller's own buffer either way: nothing is shared between calls). */
#define RU_SYS_STACK_DOUBLES 256

#endif
