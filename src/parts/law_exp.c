/* law_exp.c: the exp-stage law, a gain stage with a junction transistor's
 * exponential law: ic = is*(limexp(vj/(n vt)) - 1)*tanh(vo/vsat)*(1 + vo/va) sinks
 * into out (i_out = -ic), and the input draws the junction current over beta from
 * in to inv, not reduced by the saturation factor. vj is vc itself, or with a base
 * resistance rb the internal junction voltage, a state charged through rb into
 * the junction and diffusion capacitances cje + tf*gj. cje (without rb) and cjc
 * are constant capacitances. Formulas and sources in ringup/part.h. */
#include "parts/laws.h"

#include <math.h>
#include <string.h>

#define A(f) offsetof(ru_part, amp.f)
static const ru_keyrec keys[] = {{"is", "A", A(is_a), 0, 1e-14},
                                 {"n", NULL, A(n), 0, 1.0},
                                 {"beta", NULL, A(beta), 0, 100.0},
                                 {"vsat", "V", A(vsat_v), 0, 0.2},
                                 {"temp", "C", A(temp_c), 0, 27.0},
                                 {"va", "V", A(va_v), 0, 0.0},
                                 {"cje", "F", A(cje_f), 0, 0.0},
                                 {"cjc", "F", A(cjc_f), 0, 0.0},
                                 {"tf", "s", A(tf_s), 0, 0.0},
                                 {"rb", "ohm", A(rb_ohm), 0, 0.0},
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
    const double v[5] = {a->va_v, a->cje_f, a->cjc_f, a->tf_s, a->rb_ohm};
    const char *what[5] = {"va must not be negative (0: none)", "cje must not be negative",
                           "cjc must not be negative", "tf must not be negative (0: none)",
                           "rb must not be negative (0: none)"};
    for (int k = 0; k < 5; k++)
        if (v[k] < 0)
            return ru_part_bad(env, p, err, what[k], v[k]);
    if (a->tf_s > 0 && a->rb_ohm == 0)
        return ru_part_bad(env, p, err,
                           "tf needs rb > 0 (the base resistance that charges the "
                           "diffusion charge; an RF transistor's is some 10 to 100 ohm)",
                           a->tf_s);
    if (a->rb_ohm > 0 && a->cje_f == 0 && a->tf_s == 0)
        return ru_part_bad(env, p, err,
                           "rb needs cje or tf (the base charge behind it), or leave rb "
                           "out",
                           a->rb_ohm);
    return ru_law_check_junction(p, env, err);
}

/* The collector current's output factor tanh(vo/vsat) (1 + max(vo, 0)/va) and
 * the derivative of ie times it, *dic = ie d/dvo (C1 at vo = 0, where the tanh
 * vanishes; without va the same operations as the bare tanh factor). */
static double out_factor(const ru_amp *a, double vo, double ie, double *dic)
{
    double sat = tanh(vo / a->vsat_v);
    double early = 1.0, dearly = 0.0;
    if (a->va_v > 0 && vo > 0) {
        early = 1.0 + vo / a->va_v;
        dearly = 1.0 / a->va_v;
    }
    *dic = ie * (1.0 - sat * sat) / a->vsat_v * early + ie * sat * dearly;
    return sat * early;
}

static void eval(const ru_amp *a, double vc, double vo, double xs, ru_law_eval *e)
{
    int inner = a->rb_ohm > 0; /* the junction behind rb: its voltage is the state */
    double vj = inner ? xs : vc;
    double nvt = a->n * ru_law_thermal_voltage(a->temp_c);
    double dex, u = vj / nvt;
    double ex = ru_law_limexp(u, &dex);
    double ie = a->is_a * (ex - 1.0); /* junction law, before saturation */
    double gj = a->is_a * dex / nvt;  /* d ie / d vj */
    double dic, k = out_factor(a, vo, ie, &dic);
    memset(e, 0, sizeof *e);
    e->i_out = -ie * k;
    e->di_out_dvo = -dic;
    if (!inner) {
        e->di_out_dvc = -gj * k;
        /* The input draws the junction current over beta, not reduced by the
         * saturation factor: in saturation a real base-emitter junction keeps
         * conducting and clamps the input, which the saturated collector current
         * alone would not do (the operating point could then fail to exist). */
        e->i_in = -ie / a->beta;
        e->di_in_dvc = -gj / a->beta;
        return;
    }
    e->di_out_dxs = -gj * k;
    double g = 1.0 / a->rb_ohm, irb = (vc - vj) * g;
    e->i_in = -irb;
    e->di_in_dvc = -g;
    e->di_in_dxs = g;
    /* (cje + tf gj) dvj/dt = irb - ie/beta; d gj/d vj = gj/(n vt) below the
     * limiting point, 0 on its linear continuation */
    double c = a->cje_f + a->tf_s * gj;
    double dc = u > RU_LAW_U_MAX ? 0.0 : a->tf_s * gj / nvt;
    double num = irb - ie / a->beta;
    e->dxs = num / c;
    e->ddxs_dvc = g / c;
    e->ddxs_dxs = ((-g - gj / a->beta) - e->dxs * dc) / c;
}

/* The describing-function contribution: the output current, memoryless. With rb,
 * the junction at its quasi-static voltage ((vc - vj)/rb = ie(vj)/beta, by
 * bisection: the left side falls and the right rises with vj, and the root lies
 * between 0 and vc): the low-frequency limit, the capacitances left out. */
static double df_out(const ru_amp *a, const ru_law_at *at)
{
    double xs = 0.0;
    if (a->rb_ohm > 0) {
        double lo = fmin(0.0, at->vc), hi = fmax(0.0, at->vc);
        double nvt = a->n * ru_law_thermal_voltage(a->temp_c), dex;
        for (int it = 0; it < 200 && hi - lo > 1e-15; it++) {
            double mid = 0.5 * (lo + hi);
            double ie = a->is_a * (ru_law_limexp(mid / nvt, &dex) - 1.0);
            if ((at->vc - mid) / a->rb_ohm > ie / a->beta)
                lo = mid;
            else
                hi = mid;
        }
        xs = 0.5 * (lo + hi);
    }
    ru_law_eval e;
    eval(a, at->vc, at->vo, xs, &e);
    return e.i_out;
}

static int nstates_of(const ru_amp *a) { return a->rb_ohm > 0 ? 1 : 0; }

static int caps(const ru_amp *a, ru_law_cap out[RU_PART_CAPS_MAX])
{
    out[0] = (ru_law_cap){RU_AMP_IN, RU_AMP_OUT, a->cjc_f};
    out[1] = (ru_law_cap){RU_AMP_IN, RU_AMP_INV, a->rb_ohm > 0 ? 0.0 : a->cje_f};
    return 2;
}

const ru_law_desc ru_law_exp = {
    .law = RU_LAW_EXP_STAGE,
    .v = {"exp-stage", keys, NULL},
    .check = check,
    .eval = eval,
    .state = "vbe",
    .input_dc = 1,
    .df_out = df_out,
    .nstates_of = nstates_of,
    .control_state = 1,
    .caps = caps,
};
