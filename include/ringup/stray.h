/* ringup/stray.h: how much the assumed stray capacitance moves the oscillation.
 *
 * Every free node carries a stray capacitance to ground (the file's `stray:`, 1 pF
 * unless set). Where a node's own capacitance is small (a motional node of a
 * crystal built from an inductor and a capacitor, a tank of a few pF) that guess
 * sets the frequency. ru_stray_check compares the dominant pole pair at the
 * operating point with the one of the same circuit with every stray at a tenth; a
 * move of more than RU_STRAY_WARN_REL of the pole's magnitude is worth a warning.
 * The node named is the one whose stray carries most of the move, ranked by the
 * pole's first-order sensitivity to each node's capacitance,
 *   d lambda = -lambda dC_k conj(w_k) v_k / (u^H v),  w = M^-T u,
 * (v, u the right and left eigenvectors of M^-1 dr/dx), then checked exactly: the
 * pole with that node's stray alone at a tenth. */
#ifndef RINGUP_STRAY_H
#define RINGUP_STRAY_H

#include "ringup/circuit.h"
#include "ringup/smallsig.h"
#include "ringup/status.h"
#include "ringup/system.h"

#ifdef __cplusplus
extern "C" {
#endif

#define RU_STRAY_WARN_REL 1e-3 /* a pole move (relative) worth a warning: 0.1 % */
#define RU_STRAY_MAX_STATES 600 /* larger systems are not checked (three eigen solves) */

typedef struct ru_stray_result {
    int checked;          /* 1: compared (0: no complex pair, no stray, too large) */
    ru_pole pole;         /* the dominant pair (im > 0) with the strays as given */
    ru_pole pole_tenth;   /* the same pair with every stray at a tenth */
    double move_rel;      /* |pole_tenth - pole| / |pole| */
    int warn;             /* move_rel > RU_STRAY_WARN_REL */
    int node;             /* the node whose stray moves it most (-1: none found) */
    double node_stray_f;  /* that node's stray (F) */
    double node_share;    /* its share of the first-order move (0..1) */
    ru_pole pole_node;    /* the pair with that node's stray alone at a tenth */
    double node_move_rel; /* |pole_node - pole| / |pole| */
} ru_stray_result;

/* Compares the dominant pair of system s (compiled from c) at operating point x_op
 * with the one at a tenth of the strays. RU_OK with out->checked = 0 when there is
 * nothing to compare; an error only for memory or a failed eigen solve. */
ru_status ru_stray_check(const ru_circuit *c, const ru_system *s, const double *x_op,
                         ru_stray_result *out, ru_error *err);

/* The warning text for a result with warn set ("" otherwise). */
void ru_stray_warning(const ru_circuit *c, const ru_stray_result *r, char *buf,
                      size_t size);

#ifdef __cplusplus
}
#endif
#endif
