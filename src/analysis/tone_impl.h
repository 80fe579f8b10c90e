/* tone_impl.h: the settled tone's record (private), shared by tone.c (system,
 * operating point, steady state, CSV) and tone_noise.c (phase noise, jitter,
 * Leeson). */
#ifndef RU_TONE_IMPL_H
#define RU_TONE_IMPL_H

#include "ringup/tone.h"

struct ru_tone {
    ru_system *sys;
    ru_steady *steady;
    double *x_op;                    /* operating point, NULL when not found */
    ru_tone_spectrum spec;           /* the probe's harmonics (NAN: not known) */
    char probe[2 * RU_NAME_MAX + 2];
    ru_ppv *ppv;                     /* phase noise (NULL: not asked) */
    ru_tone_noise noise;             /* its figures (pointers into the arrays below) */
    double offset_hz[RU_TONE_OFFSETS_MAX], ppv_dbc[RU_TONE_OFFSETS_MAX],
        leeson_dbc[RU_TONE_OFFSETS_MAX];
    char note[256];
};

/* Phase noise, jitter and Leeson's formula into t->noise (the steady state found). */
ru_status ru_tone_noise_run(const ru_circuit *c, ru_tone *t, const ru_tone_request *rq,
                            ru_error *err);

#endif
