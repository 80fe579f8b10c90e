/* part_util.c: helpers every part family shares (parts/desc.h): the check
 * messages, the two-terminal checks, links and terminals, key units. Called by
 * the family files; calls nothing of theirs. */
#include "parts/desc.h"

#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <string.h>

int ru_part_variant_zero(const ru_part *p)
{
    (void)p;
    return 0;
}

void ru_part_set_variant_none(ru_part *p, int i)
{
    (void)p;
    (void)i;
}

const char *ru_key_unit(const ru_part_desc *d, const ru_keyrec *k)
{
    if (!k->unit)
        return "";
    if (strcmp(k->unit, "sig") == 0)
        return d->sig_unit ? d->sig_unit : "";
    return k->unit;
}

ru_status ru_part_fail(const ru_part_env *env, const ru_part *p, ru_error *err,
                       const char *fmt, ...)
{
    char text[RU_ERROR_TEXT];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(text, sizeof text, fmt, ap);
    va_end(ap);
    return ru_error_set(err, RU_EINPUT, env->file, p->line, p->col, "part %s: %s", p->name,
                        text);
}

ru_status ru_part_bad(const ru_part_env *env, const ru_part *p, ru_error *err,
                      const char *what, double v)
{
    return ru_error_set(err, RU_EINPUT, env->file, p->line, p->col, "part %s: %s (got %g)",
                        p->name, what, v);
}

int ru_part_finite(const double *v, int n)
{
    for (int i = 0; i < n; i++)
        if (!isfinite(v[i]))
            return 0;
    return 1;
}

ru_status ru_part_check_two(const ru_part *p, const ru_part_env *env, ru_error *err)
{
    if (p->node[0] == p->node[1])
        return ru_part_fail(env, p, err, "both terminals are on node %s",
                            env->node_name(env->user, p->node[0]));
    return RU_OK;
}

ru_status ru_part_check_rlc(const ru_part *p, const ru_part_env *env, ru_error *err)
{
    if (p->value <= 0)
        return ru_part_bad(env, p, err, "value must be positive", p->value);
    if (p->series_ohm < 0)
        return ru_part_bad(env, p, err, "series resistance must not be negative",
                           p->series_ohm);
    return ru_part_check_two(p, env, err);
}

int ru_part_links_two(const ru_part *p, int links[RU_PART_LINKS_MAX][2])
{
    links[0][0] = p->node[0];
    links[0][1] = p->node[1];
    return 1;
}

const ru_term ru_terms_two[] = {{"nodes", 2, 0, RU_TERM_REQUIRED, 0}, {NULL, 0, 0, 0, 0}};

int ru_part_inv_node(const ru_part *p)
{
    return p->node[3] >= 0 ? p->node[3] : p->node[2];
}
