/* expect.c: `run --expect-start-within`, `--expect-amplitude`, `--expect-thd-below`:
 * the designer's expectations read from the options (refused out of range) and
 * checked against the run (exit 4 when one is missed). */
#include "cli/cli.h"

#include "ringup/format.h"
#include "ringup/loader.h"

#include <math.h>
#include <stdio.h>
#include <string.h>

int cli_expect_parse(const cli_opt *opts, cli_expect *e)
{
    e->start_within_s = e->amp_lo_v = e->amp_hi_v = e->thd_below_percent = NAN;
    if (!cli_positive(opts, "expect-start-within", "s", &e->start_within_s))
        return 0;
    if (!cli_value(opts, "expect-thd-below", "%", &e->thd_below_percent))
        return 0;
    if (cli_get(opts, "expect-thd-below") &&
        !(e->thd_below_percent > 0 && e->thd_below_percent <= 1)) {
        fprintf(stderr, "ringup: option --expect-thd-below: '%s' is not above 0 and at most "
                        "100%%\n",
                cli_get(opts, "expect-thd-below"));
        return 0;
    }
    if (isfinite(e->thd_below_percent))
        e->thd_below_percent *= 100.0; /* the parser returns a fraction for % */
    const char *amp = cli_get(opts, "expect-amplitude");
    if (amp) {
        char lo[64], why[128];
        const char *colon = strchr(amp, ':');
        size_t n = colon ? (size_t)(colon - amp) : 0;
        if (!colon || n >= sizeof lo) {
            fprintf(stderr, "ringup: option --expect-amplitude wants LO:HI, e.g. 1.8V:2.2V\n");
            return 0;
        }
        memcpy(lo, amp, n);
        lo[n] = '\0';
        if (ru_value_parse(lo, "V", &e->amp_lo_v, why, sizeof why) != RU_OK ||
            ru_value_parse(colon + 1, "V", &e->amp_hi_v, why, sizeof why) != RU_OK ||
            !(e->amp_lo_v >= 0 && e->amp_lo_v <= e->amp_hi_v && e->amp_hi_v > 0)) {
            fprintf(stderr, "ringup: option --expect-amplitude: '%s' is not LO:HI volts with 0 <= LO <= HI\n",
                    amp);
            return 0;
        }
    }
    return 1;
}

/* What an expectation got when the run gives no final figure: "not settled by T"
 * for a tone whose envelope still moves at the end, else the verdict. NULL: final.
 * A start-up time needs a settled start; an amplitude or THD a settled tone (a
 * settled driven tone has them too). */
static const char *not_final(const ru_run_report *r, int need_start, char *buf,
                             size_t size)
{
    const ru_measure_result *m = &r->meas;
    char t[40];
    if (m->settled && (m->started || !need_start))
        return NULL;
    if (m->started || (!need_start && isfinite(m->settled_amplitude_v))) {
        snprintf(buf, size, "not settled by %s", ru_format_si(m->t_last_s, "s", 4, t, sizeof t));
        return buf;
    }
    snprintf(buf, size, "no start (%s)", ru_verdict_name(r->verdict));
    return buf;
}

/* Prints each missed expectation to stderr; returns 1 when all are met. An
 * expectation on a run that did not start, or that has not settled by its end, is
 * not met: an unsettled figure is not final. */
int cli_expect_check(const cli_expect *e, const ru_run_report *r)
{
    const ru_measure_result *m = &r->meas;
    int ok = 1;
    char a[40], b[64], c[64];
    const char *nf = not_final(r, 1, b, sizeof b);
    if (isfinite(e->start_within_s) && (nf || !(m->startup_time_s <= e->start_within_s))) {
        fprintf(stderr, "expectation not met: start-up within %s (got %s)\n",
                ru_format_si(e->start_within_s, "s", 4, a, sizeof a),
                nf ? nf : ru_format_si(m->startup_time_s, "s", 4, b, sizeof b));
        ok = 0;
    }
    nf = not_final(r, 0, c, sizeof c);
    if (isfinite(e->amp_lo_v) && (nf || !(m->settled_amplitude_v >= e->amp_lo_v &&
                                          m->settled_amplitude_v <= e->amp_hi_v))) {
        fprintf(stderr, "expectation not met: settled amplitude in %g V .. %g V (got %s)\n",
                e->amp_lo_v, e->amp_hi_v,
                nf ? nf : ru_format_si(m->settled_amplitude_v, "V", 4, a, sizeof a));
        ok = 0;
    }
    if (isfinite(e->thd_below_percent) && (nf || !(m->thd_percent < e->thd_below_percent))) {
        fprintf(stderr, "expectation not met: THD below %g %% (got %s)\n",
                e->thd_below_percent,
                nf                       ? nf
                : isfinite(m->thd_percent) ? (snprintf(a, sizeof a, "%.4g %%", m->thd_percent), a)
                                         : "no THD: no settled tone");
        ok = 0;
    }
    return ok;
}
