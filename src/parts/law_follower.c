/* law_follower.c: the follower-tanh law, a buffer of gain a little under 1 with
 * soft clipping: a Thevenin source E = center + gain*swing*tanh((vc - center)/swing)
 * behind rout from out to ref, i_out = (E - vo)/rout; the input draws nothing. */
#include "parts/laws.h"

#include <math.h>
#include <string.h>

#define A(f) offsetof(ru_part, amp.f)
static const ru_keyrec keys[] = {{"gain", NULL, A(gain), 0, 0.98},
                                 {"swing", "V", A(swing_v), 0, 1.0},
                                 {"center", "V", A(center_v), 0, 0.0},
                                 {"rout", "ohm", A(rout_ohm), 0, 50.0},
                                 RU_LAW_NOISE_KEYS,
                                 {NULL, NULL, 0, 0, 0.0}};
#undef A

static ru_status check(const ru_part *p, const ru_part_env *env, ru_error *err)
{
    const ru_amp *a = &p->amp;
    if (a->swing_v <= 0)
        return ru_part_bad(env, p, err, "swing must be positive", a->swing_v);
    if (a->rout_ohm <= 0)
        return ru_part_bad(env, p, err, "rout must be positive", a->rout_ohm);
    return RU_OK;
}

static void eval(const ru_amp *a, double vc, double vo, double xs, ru_law_eval *e)
{
    (void)xs;
    double th = tanh((vc - a->center_v) / a->swing_v);
    double emf = a->center_v + a->gain * a->swing_v * th;
    double g = 1.0 / a->rout_ohm;
    memset(e, 0, sizeof *e);
    e->i_out = (emf - vo) * g;
    e->di_out_dvc = a->gain * (1.0 - th * th) * g;
    e->di_out_dvo = -g;
    e->i_in = 0.0;
    e->di_in_dvc = 0.0;
    e->di_in_dvo = 0.0;
}

/* The describing-function contribution: the output current, memoryless. */
static double df_out(const ru_amp *a, const ru_law_at *at)
{
    ru_law_eval e;
    eval(a, at->vc, at->vo, 0.0, &e);
    return e.i_out;
}

const ru_law_desc ru_law_follower = {
    .law = RU_LAW_FOLLOWER_TANH,
    .v = {"follower-tanh", keys, NULL},
    .check = check,
    .eval = eval,
    .df_out = df_out,
};
