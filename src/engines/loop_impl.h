/* loop_impl.h: the private layout of a loop-gain handle (ru_loop, ringup/smallsig.h)
 * shared by loopgain.c (one amplifier's return ratio), loopnode.c (a node broken by
 * Middlebrook's double injection) and loopsweep.c (the sweep and its crossings).
 *
 * A handle evaluates L(jw) through its own eval function on its own work arrays:
 * one handle serves one thread at a time; the system it reads stays shared. */
#ifndef RINGUP_LOOP_IMPL_H
#define RINGUP_LOOP_IMPL_H

#include "ringup/smallsig.h"

#include <complex.h>

struct ru_loop {
    /* L at f_hz into *L (L = 1 at 0 degrees is the Barkhausen condition). */
    ru_status (*eval)(ru_loop *l, double f_hz, double complex *L, ru_error *err);
    void (*free_ctx)(void *ctx);   /* releases ctx */
    void *ctx;                     /* the kind's own data */
    char label[RU_LOOP_LABEL_MAX]; /* what was broken, for messages and reports */
    char node[RU_NAME_MAX];        /* the node broken ("" for an amplifier's loop) */
    char load[RU_LOOP_LOAD_TEXT];  /* its load side's terminals, "A1 in, R2 nodes" */
};

/* Handle around eval/free_ctx/ctx (ctx is released by free_ctx on failure too). */
ru_status ru_loop_wrap(ru_status (*eval)(ru_loop *, double, double complex *, ru_error *),
                       void (*free_ctx)(void *), void *ctx, const char *label,
                       ru_loop **out, ru_error *err);

#endif
