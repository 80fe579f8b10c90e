/* law_util.c: what the amplifier laws and the junction parts share: the thermal
 * voltage, the limited exponential, softplus, the junction checks (laws.h). */
#include "parts/laws.h"

#include <math.h>

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

ru_status ru_law_check_junction(const ru_part *p, const ru_part_env *env, ru_error *err)
{
    const ru_amp *a = &p->amp;
    if (a->n <= 0)
        return ru_part_bad(env, p, err, "n must be positive", a->n);
    if (a->temp_c <= -273.15)
        return ru_part_bad(env, p, err, "temp must be above absolute zero", a->temp_c);
    return RU_OK;
}

double ru_law_softplus(double z, double *deriv)
{
    if (z > 0) {
        double t = exp(-z);
        *deriv = 1.0 / (1.0 + t);
        return z + log1p(t);
    }
    double t = exp(z);
    *deriv = t / (1.0 + t);
    return log1p(t);
}
