/* format.c: SI-prefixed number formatting (see ringup/format.h). */
#include "ringup/format.h"

#include <math.h>
#include <stdio.h>

char *ru_format_si(double v, const char *unit, int digits, char *buf, size_t size)
{
    static const char *const prefix[] = {"f", "p", "n", "u", "m", "", "k", "M", "G", "T"};
    if (!unit)
        unit = "";
    if (!isfinite(v)) {
        snprintf(buf, size, "-");
        return buf;
    }
    if (digits < 1)
        digits = 1;
    int e3 = 0;
    if (v != 0) {
        e3 = (int)floor(log10(fabs(v)) / 3.0);
        /* rounding may carry into the next group: 999.96 -> 1000 */
        double m = v / pow(10.0, 3 * e3);
        double r = pow(10.0, digits - 1 - (int)floor(log10(fabs(m))));
        if (fabs(round(m * r) / r) >= 1000.0)
            e3++;
    }
    if (e3 < -5)
        e3 = -5;
    if (e3 > 4)
        e3 = 4;
    double m = v / pow(10.0, 3 * e3);
    int intdig = (m == 0) ? 1 : (int)floor(log10(fabs(m))) + 1;
    int dec = digits - intdig;
    if (dec < 0)
        dec = 0;
    /* 9.99996 at 4 digits prints as 10.000: one digit too many after rounding */
    double scale = pow(10.0, dec);
    if (dec > 0 && fabs(round(m * scale) / scale) >= pow(10.0, intdig))
        dec--;
    snprintf(buf, size, "%.*f %s%s", dec, m, prefix[e3 + 5], unit);
    return buf;
}
