/* stamp.h: the stamping interface between a part and the system (private).
 *
 * The system (src/system/) fills one ru_stamp per residual evaluation and hands
 * it to every part's stamp function (parts/desc.h); a part adds its currents and
 * rates to the residual r and, when dr is set, their derivatives to the Jacobian
 * dr/dx through the helpers below, so a part never sees the system's own layout.
 *
 * Rows and columns: every free node has one row (the net current INTO the node
 * from every part but the capacitors, amperes) and one column (its voltage);
 * row[node] is that index, negative for ground and for nodes a supply drives
 * (their rows and columns do not exist and the helpers skip them). A part's own
 * states (an inductor's current, an opamp's integrator) are numbered from the
 * part's state0 on; their rows are their rates (unit mass) and their columns their
 * values. Jacobian entries go only through ru_stamp_dn and ru_stamp_ds (the
 * system may keep them sparse), every entry a part can touch on every call, whatever
 * its value (the system records the sparse pattern from one call). Sign convention: a current i flowing from node a through the part to
 * node b is -i on a's row and +i on b's row.
 *
 * Thread safety: an ru_stamp lives on the evaluating thread's stack; parts keep
 * nothing between calls. */
#ifndef RU_PARTS_STAMP_H
#define RU_PARTS_STAMP_H

#include "ringup/part.h"

#include <stddef.h>
#include <stdint.h>

typedef struct ru_stamp {
    const int *row;    /* per node: row and column index, < 0 for ground and driven */
    const double *v;   /* per node: voltage (V) */
    const double *dv;  /* per node: dv/dt (V/s), nonzero only at driven nodes */
    const double *x;   /* every state of the system */
    double *r;         /* residual, n entries */
    double *dr;        /* n*n row-major dr/dx, or NULL: residual terms only */
    size_t n;          /* states */
    double t_s;        /* time of the evaluation (s) */
    int dc;            /* 1: sources at their final values, slopes 0 */
    double scale;      /* multiplies every source value (source stepping) */
    int skip;          /* 1 while this part is the one whose loop is broken: leave
                          its controlled terms out of dr (ru_part_desc.loop) */
    int noise_on;      /* 1: thermal noise is on (time-domain evaluations) */
    double noise_kt_j; /* k T of the noise (J) */
    double noise_dt_s; /* band limit of the noise as a sample spacing (s) */
    double (*noise_unit)(const void *ctx, uint64_t stream, double t_s);
    const void *noise_ctx; /* for noise_unit: a unit normal per (stream, time) */
    /* Jacobian entries kept elsewhere than a dense dr (the system's sparse pattern,
       or recording the pattern itself): dr is then only a flag "Jacobian wanted" */
    void (*jac_add)(void *ctx, int row, int col, double val); /* NULL: dense dr */
    void *jac_ctx;
} ru_stamp;

/* r[row of node] += val: a current val INTO node. */
static inline void ru_stamp_add(ru_stamp *st, int node, double val)
{
    int k = st->row[node];
    if (k >= 0)
        st->r[k] += val;
}

/* dr[row][column of node's voltage] += val (row: an index from st->row or a state). */
static inline void ru_stamp_dn(ru_stamp *st, int row, int node, double val)
{
    int col = st->row[node];
    if (row >= 0 && col >= 0 && st->dr) {
        if (st->jac_add)
            st->jac_add(st->jac_ctx, row, col, val);
        else
            st->dr[(size_t)row * st->n + (size_t)col] += val;
    }
}

/* dr[row][col] += val, both plain indices (states or node rows). */
static inline void ru_stamp_ds(ru_stamp *st, int row, int col, double val)
{
    if (row >= 0 && col >= 0 && st->dr) {
        if (st->jac_add)
            st->jac_add(st->jac_ctx, row, col, val);
        else
            st->dr[(size_t)row * st->n + (size_t)col] += val;
    }
}

/* A current i(v) flowing a -> b through a part, v = v(a) - v(b), g = di/dv. */
static inline void ru_stamp_branch(ru_stamp *st, int a, int b, double i, double g)
{
    int ra = st->row[a], rb = st->row[b];
    ru_stamp_add(st, a, -i);
    ru_stamp_add(st, b, i);
    if (!st->dr)
        return;
    ru_stamp_dn(st, ra, a, -g);
    ru_stamp_dn(st, ra, b, g);
    ru_stamp_dn(st, rb, a, g);
    ru_stamp_dn(st, rb, b, -g);
}

/* A unit normal of the noise for stream (the part's index) at st->t_s. */
static inline double ru_stamp_noise(const ru_stamp *st, uint64_t stream)
{
    return st->noise_unit(st->noise_ctx, stream, st->t_s);
}

#endif
