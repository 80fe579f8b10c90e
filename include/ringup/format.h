/* ringup/format.h: numbers with SI prefixes for tables, plots and messages. */
#ifndef RINGUP_FORMAT_H
#define RINGUP_FORMAT_H

#include <stddef.h>

#ifdef __cplusplus
extern "C" {
#endif

/* Writes v with `digits` significant digits, an SI prefix (f p n u m k M G T; "u"
 * for micro) and unit: 0.0015, "s" -> "1.50 ms". NAN -> "-". Returns buf. */
char *ru_format_si(double v, const char *unit, int digits, char *buf, size_t size);

#ifdef __cplusplus
}
#endif
#endif
