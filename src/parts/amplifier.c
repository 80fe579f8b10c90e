/* amplifier.c: the behavioral amplifier: nodes in, out, ref (default gnd) and inv
 * (default: ref), and a law (laws.h, one file per law) that gives the current it
 * pushes into out (leaving by ref), the input current (into in, out of inv) and,
 * for a law with one, its internal state's rate. The variants of this type are
 * the laws, chosen by `law` or by a preset (`model`). Its loop (the return ratio
 * of ringup/system.h) breaks the law's controlled terms. */
#include "parts/laws.h"

#include <stdio.h>
#include <string.h>

static const ru_term terms[] = {{"in", 1, 0, RU_TERM_REQUIRED, 0},
                                {"out", 1, 1, RU_TERM_REQUIRED, 0},
                                {"ref", 1, 2, RU_TERM_GND, 0},
                                {"inv", 1, 3, RU_TERM_SAME, 2},
                                {NULL, 0, 0, 0, 0}};

static const ru_variant *variant(int i)
{
    const ru_law_desc *d = ru_law_get((ru_law)i);
    return d ? &d->v : NULL;
}

static int variant_of(const ru_part *p) { return (int)p->amp.law; }
static void set_variant(ru_part *p, int i) { p->amp.law = (ru_law)i; }

static ru_status check(const ru_part *p, const ru_part_env *env, ru_error *err)
{
    /* in may be ref (an inverting op-amp stage with in: gnd); the control voltage
     * v(in) - v(inv) must not vanish identically, and the output must not be tied
     * to its own reference */
    if (p->node[1] == p->node[2])
        return ru_part_fail(env, p, err, "out must differ from ref");
    if (p->node[0] == ru_part_inv_node(p))
        return ru_part_fail(env, p, err,
                            p->node[3] < 0 ? "in must differ from ref when no inv is "
                                             "given (the control voltage is v(in) - v(ref))"
                                           : "in and inv must differ");
    const ru_amp *a = &p->amp;
    double all[] = {a->gain,    a->swing_v, a->center_v, a->rout_ohm, a->is_a,
                    a->n,       a->beta,    a->vsat_v,   a->temp_c,   a->itail_a,
                    a->sign,    a->gbw_hz,  a->vmax_v,   a->vmin_v,   a->knee_v,
                    a->slew_v_per_s};
    if (!ru_part_finite(all, (int)(sizeof all / sizeof all[0])))
        return ru_part_fail(env, p, err, "amplifier values must be finite");
    const ru_law_desc *d = ru_law_get(a->law);
    if (!d)
        return ru_part_fail(env, p, err, "unknown amplifier law");
    return d->check ? d->check(p, env, err) : RU_OK;
}

/* The output conducts to ref; a junction input conducts from in to inv. */
static int dc_links(const ru_part *p, int links[RU_PART_LINKS_MAX][2])
{
    const ru_law_desc *d = ru_law_get(p->amp.law);
    links[0][0] = p->node[1];
    links[0][1] = p->node[2];
    if (!d || !d->input_dc)
        return 1;
    links[1][0] = p->node[0];
    links[1][1] = ru_part_inv_node(p);
    return 2;
}

static int nstates(const ru_part *p)
{
    const ru_law_desc *d = ru_law_get(p->amp.law);
    return d ? d->nstates : 0;
}

static void state_name(const ru_part *p, int k, char *buf, size_t size)
{
    (void)k;
    snprintf(buf, size, "%s.%s", p->name, ru_law_get(p->amp.law)->state);
}

static double state_rest(const ru_part *p, int k)
{
    (void)k;
    return ru_law_rest_state(&p->amp);
}

static double state_scale(const ru_part *p, int k, const ru_scale_env *e)
{
    (void)k;
    const ru_law_desc *d = ru_law_get(p->amp.law);
    return d && d->state_scale ? d->state_scale(&p->amp, e->v_scale) : e->v_scale;
}

/* Derivatives of a quantity on row `row` w.r.t. vc = v(in) - v(inv) and
 * vo = v(out) - v(ref); nd holds in, out, ref, inv (inv resolved). */
static void stamp_dv(ru_stamp *st, int row, const int *nd, double dvc, double dvo)
{
    ru_stamp_dn(st, row, nd[0], dvc);
    ru_stamp_dn(st, row, nd[3], -dvc);
    ru_stamp_dn(st, row, nd[1], dvo);
    ru_stamp_dn(st, row, nd[2], -dvo);
}

/* i_out into out and out of ref, i_in into in and out of inv, and the internal
 * state's row. With st->skip the controlled terms (d i_out/d vc, and d rate/d vc
 * for a law with a state) are left out of dr. */
static void stamp(const ru_part *p, ru_stamp *st, int index, int s)
{
    (void)index;
    const int nd[4] = {p->node[0], p->node[1], p->node[2], ru_part_inv_node(p)};
    const int *row = st->row;
    double vc = st->v[nd[0]] - st->v[nd[3]], vo = st->v[nd[1]] - st->v[nd[2]];
    ru_law_eval e;
    ru_law_eval_state(&p->amp, vc, vo, s >= 0 ? st->x[s] : 0.0, &e);
    ru_stamp_add(st, nd[1], e.i_out);
    ru_stamp_add(st, nd[2], -e.i_out);
    ru_stamp_add(st, nd[0], e.i_in);
    ru_stamp_add(st, nd[3], -e.i_in);
    if (s >= 0)
        st->r[s] = e.dxs;
    if (!st->dr)
        return;
    double gout = st->skip ? 0.0 : e.di_out_dvc;
    stamp_dv(st, row[nd[1]], nd, gout, e.di_out_dvo);
    stamp_dv(st, row[nd[2]], nd, -gout, -e.di_out_dvo);
    stamp_dv(st, row[nd[0]], nd, e.di_in_dvc, e.di_in_dvo);
    stamp_dv(st, row[nd[3]], nd, -e.di_in_dvc, -e.di_in_dvo);
    if (s < 0)
        return;
    ru_stamp_ds(st, row[nd[1]], s, e.di_out_dxs);
    ru_stamp_ds(st, row[nd[2]], s, -e.di_out_dxs);
    stamp_dv(st, s, nd, st->skip ? 0.0 : e.ddxs_dvc, e.ddxs_dvo);
    ru_stamp_ds(st, s, s, e.ddxs_dxs);
}

/* b: d i_out/d vc on the rows of out (+) and ref (-), and d rate/d vc on the
 * state's row; g: e_in - e_inv. */
static void loop(const ru_part *p, const ru_stamp *st, int s, double *b, double *g)
{
    const int nd[4] = {p->node[0], p->node[1], p->node[2], ru_part_inv_node(p)};
    ru_law_eval le;
    ru_law_eval_state(&p->amp, st->v[nd[0]] - st->v[nd[3]], st->v[nd[1]] - st->v[nd[2]],
                      s >= 0 ? st->x[s] : 0.0, &le);
    int si = st->row[nd[0]], so = st->row[nd[1]], sr = st->row[nd[2]], sn = st->row[nd[3]];
    if (so >= 0)
        b[so] += le.di_out_dvc;
    if (sr >= 0)
        b[sr] -= le.di_out_dvc;
    if (s >= 0)
        b[s] += le.ddxs_dvc;
    if (si >= 0)
        g[si] += 1.0;
    if (sn >= 0)
        g[sn] -= 1.0;
}

static void describe(const ru_part *p, char *buf, size_t size)
{
    snprintf(buf, size, "%s%s%s", ru_law_name(p->amp.law), p->amp.model[0] ? " / " : "",
             p->amp.model);
}

const ru_part_desc ru_part_amplifier = {
    .type = RU_PART_AMPLIFIER,
    .name = "amplifier",
    .terms = terms,
    .selector = "law",
    .nvariants = RU_LAW_COUNT,
    .variant = variant,
    .variant_of = variant_of,
    .set_variant = set_variant,
    .record = offsetof(ru_part, amp),
    .record_size = sizeof(ru_amp),
    .presets = 1,
    .model = offsetof(ru_part, amp.model),
    .preset_by_variant = 1,
    .selector_or_model = 1,
    .check = check,
    .dc_links = dc_links,
    .state_group = RU_STATES_INTERNAL,
    .nstates = nstates,
    .state_name = state_name,
    .state_rest = state_rest,
    .state_scale = state_scale,
    .stamp = stamp,
    .loop = loop,
    .describe = describe,
};
