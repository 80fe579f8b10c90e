/* law_exp.c: the exp-stage law, a gain stage with a junction transistor's
 * exponential law: ic = is*(limexp(vc/(n vt)) - 1)*tanh(vo/vsat) sinks into out
 * (i_out = -ic), and the input draws the junction current over beta from in to
 * inv (i_in = -is*(exp - 1)/beta), not reduced by the saturation factor. */
#include "parts/laws.h"

#include <math.h>
#include <string.h>

#define A(f) offsetof(ru_part, amp.f)
static const ru_keyrec keys[] = {{"is", "A", A(is_a), 0, 1e-14},
                                 {"n", NULL, A(n), 0, 1.0},
                                 {"beta", NULL, A(beta), 0, 100.0},
                                 {"vsat", "V", A(vsat_v), 0, 0.2},
                                 {"temp", "C", A(temp_c), 0, 27.0},
                                 RU_LAW_NOISE_KEYS,
                                 {NULL, NULL, 0, 0, 0.0}};
#undef A

static ru_status check(const ru_part *p, const ru_part_env *env, ru_error *err)
{
    const ru_amp *a = &p->amp;
    if (a->is_a <= 0)
        return ru_part_bad(env, p, err, "is must be positive", a->is_a);
    if (a->beta <= 0)
        return ru_part_bad(env, p, err, "beta must be positive", a->beta);
    if (a->vsat_v <= 0)
        return ru_part_bad(env, p, err, "vsat must be positive", a->vsat_v);
    return ru_law_check_junction(p, env, err);
}

static void eval(const ru_amp *a, double vc, double vo, double xs, ru_law_eval *e)
{
    (void)xs;
    double nvt = a->n * ru_law_thermal_voltage(a->temp_c);
    double dex;
    double ex = ru_law_limexp(vc / nvt, &dex);
    double sat = tanh(vo / a->vsat_v);
    double ie = a->is_a * (ex - 1.0);            /* junction law, before saturation */
    double ic = ie * sat;
    double dic_dvc = a->is_a * dex / nvt * sat;
    double dic_dvo = ie * (1.0 - sat * sat) / a->vsat_v;
    memset(e, 0, sizeof *e);
    e->i_out = -ic;
    e->di_out_dvc = -dic_dvc;
    e->di_out_dvo = -dic_dvo;
    /* The input draws the junction current over beta, not reduced by the
     * saturation factor: in saturation a real base-emitter junction keeps
     * conducting and clamps the input, which the saturated collector current
     * alone would not do (the operating point could then fail to exist). */
    e->i_in = -ie / a->beta;
    e->di_in_dvc = -a->is_a * dex / nvt / a->beta;
    e->di_in_dvo = 0.0;
}

/* The describing-function contribution: the output current, memoryless. */
static double df_out(const ru_amp *a, const ru_law_at *at)
{
    ru_law_eval e;
    eval(a, at->vc, at->vo, 0.0, &e);
    return e.i_out;
}

const ru_law_desc ru_law_exp = {
    .law = RU_LAW_EXP_STAGE,
    .v = {"exp-stage", keys, NULL},
    .check = check,
    .eval = eval,
    .input_dc = 1,
    .df_out = df_out,
};
