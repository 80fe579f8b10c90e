/* laws.c: the amplifier laws (see laws.h for the sign convention).
 *
 * follower-tanh: E = center + gain*swing*tanh((vc - center)/swing) behind rout,
 *   i_out = (E - vo)/rout, no input current.
 * exp-stage: ic = is*(limexp(vc/(n vt)) - 1)*tanh(vo/vsat) sinks into out,
 *   so i_out = -ic; the base current ic/beta sinks into in, i_in = -ic/beta. */
#include "laws.h"

#include <math.h>
#include <string.h>

double ru_law_thermal_voltage(double temp_c)
{
    return RU_K_BOLTZMANN * (temp_c + 273.15) / RU_Q_ELECTRON;
}

double ru_law_limexp(double u, double *deriv)
{
    if (u > RU_LAW_U_MAX) {
        double e = exp(RU_LAW_U_MAX);
        *deriv = e;
        return e * (1.0 + u - RU_LAW_U_MAX);
    }
    /* Large negative u underflows gracefully to 0 (value and derivative). */
    double e = exp(u);
    *deriv = e;
    return e;
}

static void law_follower_tanh(const ru_amp *a, double vc, double vo, ru_law_eval *e)
{
    double th = tanh((vc - a->center_v) / a->swing_v);
    double emf = a->center_v + a->gain * a->swing_v * th;
    double g = 1.0 / a->rout_ohm;
    e->i_out = (emf - vo) * g;
    e->di_out_dvc = a->gain * (1.0 - th * th) * g;
    e->di_out_dvo = -g;
    e->i_in = 0.0;
    e->di_in_dvc = 0.0;
    e->di_in_dvo = 0.0;
}

static void law_exp_stage(const ru_amp *a, double vc, double vo, ru_law_eval *e)
{
    double nvt = a->n * ru_law_thermal_voltage(a->temp_c);
    double dex;
    double ex = ru_law_limexp(vc / nvt, &dex);
    double sat = tanh(vo / a->vsat_v);
    double ie = a->is_a * (ex - 1.0);            /* junction law, before saturation */
    double ic = ie * sat;
    double dic_dvc = a->is_a * dex / nvt * sat;
    double dic_dvo = ie * (1.0 - sat * sat) / a->vsat_v;
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

/* Indexed by ru_law; keep in the enum's order. */
static const ru_law_desc law_table[RU_LAW_COUNT] = {
    {RU_LAW_FOLLOWER_TANH, law_follower_tanh, 0},
    {RU_LAW_EXP_STAGE, law_exp_stage, 0},
};

const ru_law_desc *ru_law_get(ru_law law)
{
    if ((int)law < 0 || law >= RU_LAW_COUNT || law_table[law].law != law)
        return NULL;
    return &law_table[law];
}

int ru_law_eval_amp(const ru_amp *a, double vc_v, double vo_v, ru_law_eval *e)
{
    const ru_law_desc *d = ru_law_get(a->law);
    if (!d) {
        memset(e, 0, sizeof *e);
        return 0;
    }
    d->eval(a, vc_v, vo_v, e);
    return 1;
}
