/* laws.c: the table of amplifier laws (one entry per law, each defined in its
 * law_*.c file; see laws.h for the sign convention, ringup/part.h for the
 * formulas and their sources) and evaluation through it (shared helpers in
 * law_util.c). Every derivative is analytic; tests/test_laws.c checks each
 * against central differences. */
#include "parts/laws.h"

#include <math.h>
#include <string.h>

/* Indexed by ru_law: one line per law. */
static const ru_law_desc *const law_table[RU_LAW_COUNT] = {
    [RU_LAW_FOLLOWER_TANH] = &ru_law_follower,
    [RU_LAW_EXP_STAGE] = &ru_law_exp,
    [RU_LAW_DIFF_PAIR_TANH] = &ru_law_diffpair,
    [RU_LAW_OPAMP] = &ru_law_opamp,
    [RU_LAW_TABLE] = &ru_law_tab,
    [RU_LAW_MOS_EKV] = &ru_law_mos,
    [RU_LAW_CMOS_INVERTER] = &ru_law_inverter,
};

const ru_law_desc *ru_law_get(ru_law law)
{
    if ((int)law < 0 || law >= RU_LAW_COUNT || !law_table[law] || law_table[law]->law != law)
        return NULL;
    return law_table[law];
}

const char *ru_law_name(ru_law law)
{
    const ru_law_desc *d = ru_law_get(law);
    return d ? d->v.name : "?";
}

int ru_law_find(const char *name)
{
    for (int l = 0; name && l < RU_LAW_COUNT; l++)
        if (ru_law_get((ru_law)l) && strcmp(law_table[l]->v.name, name) == 0)
            return l;
    return -1;
}

double ru_law_rest_state(const ru_amp *a)
{
    const ru_law_desc *d = ru_law_get(a->law);
    return d && d->rest ? d->rest(a) : 0.0;
}

int ru_law_eval_at(const ru_amp *a, const ru_law_at *at, ru_law_eval *e)
{
    const ru_law_desc *d = ru_law_get(a->law);
    if (!d) {
        memset(e, 0, sizeof *e);
        return 0;
    }
    if (d->eval_at)
        d->eval_at(a, at, e);
    else
        d->eval(a, at->vc, at->vo, at->xs, e);
    return 1;
}

int ru_law_eval_state(const ru_amp *a, double vc_v, double vo_v, double xs,
                      ru_law_eval *e)
{
    const ru_law_at at = {vc_v, vo_v, 0.0, 0.0, xs, 0};
    return ru_law_eval_at(a, &at, e);
}

int ru_law_nstates(const ru_amp *a)
{
    const ru_law_desc *d = ru_law_get(a->law);
    if (!d)
        return 0;
    return d->nstates_of ? d->nstates_of(a) : d->nstates;
}

int ru_law_eval_amp(const ru_amp *a, double vc_v, double vo_v, ru_law_eval *e)
{
    return ru_law_eval_state(a, vc_v, vo_v, ru_law_rest_state(a), e);
}
