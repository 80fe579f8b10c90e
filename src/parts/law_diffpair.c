/* law_diffpair.c: the diff-pair-tanh law, the long-tailed pair's large-signal
 * transfer. With out2 both collector currents: out sinks itail/2 (1 + tanh(vc/(2 n
 * vt))) and out2 itail/2 (1 - tanh(...)), each behind rout to ref; with out alone
 * the mirror-loaded pair's output, i_out = sign*itail*tanh(vc/(2 n vt)) - vo/rout
 * (rout 0: none). The inputs draw nothing (formulas and source in ringup/part.h). */
#include "parts/laws.h"

#include <math.h>
#include <string.h>

#define A(f) offsetof(ru_part, amp.f)
static const ru_keyrec keys[] = {{"itail", "A", A(itail_a), 0, 1e-3},
                                 {"n", NULL, A(n), 0, 1.0},
                                 {"temp", "C", A(temp_c), 0, 27.0},
                                 {"rout", "ohm", A(rout_ohm), 0, 0.0},
                                 {"sign", NULL, A(sign), 0, 1.0},
                                 RU_LAW_NOISE_KEYS,
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
    if (p->node[RU_AMP_OUT2] >= 0 && a->sign != 1.0)
        return ru_part_bad(env, p, err,
                           "sign does not apply with out2 (swap out and out2 instead)",
                           a->sign);
    return ru_law_check_junction(p, env, err);
}

static void eval_at(const ru_amp *a, const ru_law_at *at, ru_law_eval *e)
{
    double two_nvt = 2.0 * a->n * ru_law_thermal_voltage(a->temp_c);
    double th = tanh(at->vc / two_nvt), slope = (1.0 - th * th) / two_nvt;
    double g = a->rout_ohm > 0 ? 1.0 / a->rout_ohm : 0.0;
    memset(e, 0, sizeof *e);
    e->di_out_dvo = -g;
    if (!at->out2) { /* the difference of the collector currents */
        e->i_out = a->sign * a->itail_a * th - at->vo * g;
        e->di_out_dvc = a->sign * a->itail_a * slope;
        return;
    }
    /* both collectors sink: the in side's into out, the inv side's into out2 */
    double half = 0.5 * a->itail_a;
    e->i_out = -half * (1.0 + th) - at->vo * g;
    e->di_out_dvc = -half * slope;
    e->i_out2 = -half * (1.0 - th) - at->vo2 * g;
    e->di_out2_dvc = half * slope;
    e->di_out2_dvo2 = -g;
}

/* The describing-function contribution: the output current, memoryless. */
static double df_out(const ru_amp *a, const ru_law_at *at)
{
    ru_law_eval e;
    eval_at(a, at, &e);
    return e.i_out;
}

const ru_law_desc ru_law_diffpair = {
    .law = RU_LAW_DIFF_PAIR_TANH,
    .v = {"diff-pair-tanh", keys, NULL},
    .check = check,
    .df_out = df_out,
    .terms_optional = RU_LAW_TERM_OUT2,
    .eval_at = eval_at,
};
