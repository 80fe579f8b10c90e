/* law_diffpair.c: the diff-pair-tanh law, the long-tailed pair's large-signal
 * transfer: i_out = sign*itail*tanh(vc/(2 n vt)) - vo/rout (rout 0: none); the
 * inputs draw nothing (formula and source in ringup/part.h). */
#include "parts/laws.h"

#include <math.h>
#include <string.h>

#define A(f) offsetof(ru_part, amp.f)
static const ru_keyrec keys[] = {{"itail", "A", A(itail_a), 0, 1e-3},
                                 {"n", NULL, A(n), 0, 1.0},
                                 {"temp", "C", A(temp_c), 0, 27.0},
                                 {"rout", "ohm", A(rout_ohm), 0, 0.0},
                                 {"sign", NULL, A(sign), 0, 1.0},
                                 {NULL, NULL, 0, 0, 0.0}};
#undef A

static ru_status check(const ru_part *p, const ru_part_env *env, ru_error *err)
{
    const ru_amp *a = &p->amp;
    if (a->itail_a <= 0)
        return ru_part_bad(env, p, err, "itail must be positive", a->itail_a);
    if (a->sign != 1.0 && a->sign != -1.0)
        return ru_part_bad(env, p, err, "sign must be 1 or -1", a->sign);
    if (a->rout_ohm < 0)
        return ru_part_bad(env, p, err, "rout must not be negative (0: none)", a->rout_ohm);
    return ru_law_check_junction(p, env, err);
}

static void eval(const ru_amp *a, double vc, double vo, double xs, ru_law_eval *e)
{
    (void)xs;
    double two_nvt = 2.0 * a->n * ru_law_thermal_voltage(a->temp_c);
    double th = tanh(vc / two_nvt);
    double g = a->rout_ohm > 0 ? 1.0 / a->rout_ohm : 0.0;
    memset(e, 0, sizeof *e);
    e->i_out = a->sign * a->itail_a * th - vo * g;
    e->di_out_dvc = a->sign * a->itail_a * (1.0 - th * th) / two_nvt;
    e->di_out_dvo = -g;
}

/* The describing-function contribution: the output current, memoryless. */
static double df_out(const ru_amp *a, const ru_law_at *at)
{
    ru_law_eval e;
    eval(a, at->vc, at->vo, 0.0, &e);
    return e.i_out;
}

const ru_law_desc ru_law_diffpair = {
    .law = RU_LAW_DIFF_PAIR_TANH,
    .v = {"diff-pair-tanh", keys, NULL},
    .check = check,
    .eval = eval,
    .df_out = df_out,
};
