/* amplifier.c: the behavioral amplifier: nodes in, out, ref (default gnd) and inv
 * (default: ref), for some laws out2 (a second output) and vdd (an upper rail),
 * and a law (laws.h, one file per law) that gives the currents it pushes into its
 * outputs (ref takes them back), the input current (into in, out of inv), its
 * constant capacitances and, for a law with one, its internal state's rate. The
 * variants of this type are the laws, chosen by `law` or by a preset (`model`).
 * Its loop (the return ratio of ringup/system.h) breaks the law's controlled
 * terms. Every law also takes the input-referred noise keys en, inoise and fc
 * (RU_LAW_NOISE_KEYS), which only phase-noise analysis reads. */
#include "parts/laws.h"

#include <stdio.h>
#include <string.h>

static const ru_term terms[] = {{"in", 1, 0, RU_TERM_REQUIRED, 0},
                                {"out", 1, 1, RU_TERM_REQUIRED, 0},
                                {"ref", 1, 2, RU_TERM_GND, 0},
                                {"inv", 1, 3, RU_TERM_SAME, 2},
                                {"out2", 1, 4, RU_TERM_NONE, 0},
                                {"vdd", 1, 5, RU_TERM_NONE, 0},
                                {NULL, 0, 0, 0, 0}};

/* The extra terminals: slot, key, law flag, what it is for messages. */
static const struct {
    int slot;
    const char *key;
    int flag;
    const char *what;
} extra[] = {{RU_AMP_OUT2, "out2", RU_LAW_TERM_OUT2, "its second output"},
             {RU_AMP_VDD, "vdd", RU_LAW_TERM_VDD, "its upper rail"}};

static const ru_variant *variant(int i)
{
    const ru_law_desc *d = ru_law_get((ru_law)i);
    return d ? &d->v : NULL;
}

static int variant_of(const ru_part *p) { return (int)p->amp.law; }
static void set_variant(ru_part *p, int i) { p->amp.law = (ru_law)i; }

/* The extra terminals: required or optional as the law says, refused on other
 * laws, on their own nodes. */
static ru_status check_extra(const ru_part *p, const ru_law_desc *d, const ru_part_env *env,
                             ru_error *err)
{
    for (size_t k = 0; k < sizeof extra / sizeof extra[0]; k++) {
        int node = p->node[extra[k].slot], uses = (d->terms & extra[k].flag) != 0;
        int takes = uses || (d->terms_optional & extra[k].flag) != 0;
        if (uses && node < 0)
            return ru_part_fail(env, p, err, "law %s needs %s: NODE (%s)", d->v.name,
                                extra[k].key, extra[k].what);
        if (!takes && node >= 0)
            return ru_part_fail(env, p, err, "key %s does not apply to law %s",
                                extra[k].key, d->v.name);
        if (node >= 0 && (node == p->node[RU_AMP_OUT] || node == p->node[RU_AMP_REF]))
            return ru_part_fail(env, p, err, "%s must differ from out and ref",
                                extra[k].key);
    }
    if (p->node[RU_AMP_OUT2] >= 0 && p->node[RU_AMP_OUT2] == p->node[RU_AMP_VDD])
        return ru_part_fail(env, p, err, "out2 and vdd must differ");
    return RU_OK;
}

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
    double all[] = {a->gain,     a->swing_v,     a->center_v,    a->rout_ohm, a->is_a,
                    a->n,        a->beta,        a->vsat_v,      a->temp_c,   a->itail_a,
                    a->sign,     a->gbw_hz,      a->vmax_v,      a->vmin_v,   a->knee_v,
                    a->slew_v_per_s, a->polarity, a->vth_v,      a->kmos_a_per_v2,
                    a->va_v,     a->cgs_f,       a->cgd_f,       a->vthn_v,
                    a->vthp_v,   a->kn_a_per_v2, a->kp_a_per_v2, a->cin_f,    a->cout_f,
                    a->en_v_per_rthz, a->in_a_per_rthz, a->fc_hz,
                    a->cje_f,    a->cjc_f,       a->tf_s,        a->rb_ohm};
    if (!ru_part_finite(all, (int)(sizeof all / sizeof all[0])))
        return ru_part_fail(env, p, err, "amplifier values must be finite");
    if (a->en_v_per_rthz < 0)
        return ru_part_bad(env, p, err, "en must not be negative", a->en_v_per_rthz);
    if (a->in_a_per_rthz < 0)
        return ru_part_bad(env, p, err, "inoise must not be negative", a->in_a_per_rthz);
    if (a->fc_hz < 0)
        return ru_part_bad(env, p, err, "fc must not be negative", a->fc_hz);
    const ru_law_desc *d = ru_law_get(a->law);
    if (!d)
        return ru_part_fail(env, p, err, "unknown amplifier law");
    ru_status st = check_extra(p, d, env, err);
    if (st != RU_OK)
        return st;
    return d->check ? d->check(p, env, err) : RU_OK;
}

/* The output conducts to ref, a second output to ref, an upper rail to the
 * output; a junction input conducts from in to inv. */
static int dc_links(const ru_part *p, int links[RU_PART_LINKS_MAX][2])
{
    const ru_law_desc *d = ru_law_get(p->amp.law);
    int n = 0;
    links[n][0] = p->node[RU_AMP_OUT];
    links[n++][1] = p->node[RU_AMP_REF];
    if (d && d->input_dc) {
        links[n][0] = p->node[RU_AMP_IN];
        links[n++][1] = ru_part_inv_node(p);
    }
    if (p->node[RU_AMP_OUT2] >= 0) {
        links[n][0] = p->node[RU_AMP_OUT2];
        links[n++][1] = p->node[RU_AMP_REF];
    }
    if (p->node[RU_AMP_VDD] >= 0) {
        links[n][0] = p->node[RU_AMP_VDD];
        links[n++][1] = p->node[RU_AMP_OUT];
    }
    return n;
}

/* At an instant: an output behind an output resistance (follower, opamp, table, a
 * pair with rout, the inverter's channels) and a junction input tie their nodes; a
 * collector (exp-stage), a drain (mos-ekv) or a pair's outputs without rout are
 * current sources. */
static int kcl_links(const ru_part *p, int links[RU_PART_LINKS_MAX][2])
{
    const ru_law_desc *d = ru_law_get(p->amp.law);
    int n = 0;
    int source = p->amp.law == RU_LAW_EXP_STAGE || p->amp.law == RU_LAW_MOS_EKV ||
                 (p->amp.law == RU_LAW_DIFF_PAIR_TANH && !(p->amp.rout_ohm > 0));
    if (!source) {
        links[n][0] = p->node[RU_AMP_OUT];
        links[n++][1] = p->node[RU_AMP_REF];
    }
    if (d && d->input_dc) {
        links[n][0] = p->node[RU_AMP_IN];
        links[n++][1] = ru_part_inv_node(p);
    }
    if (!source && p->node[RU_AMP_OUT2] >= 0) {
        links[n][0] = p->node[RU_AMP_OUT2];
        links[n++][1] = p->node[RU_AMP_REF];
    }
    if (p->node[RU_AMP_VDD] >= 0) { /* the inverter's upper channel */
        links[n][0] = p->node[RU_AMP_VDD];
        links[n++][1] = p->node[RU_AMP_OUT];
    }
    return n;
}

/* The amplifier's nodes by slot (RU_AMP_*), inv resolved; out2 and vdd -1 when
 * not connected. */
static void nodes_of(const ru_part *p, int nd[RU_PART_NODES])
{
    for (int k = 0; k < RU_PART_NODES; k++)
        nd[k] = p->node[k];
    nd[RU_AMP_INV] = ru_part_inv_node(p);
}

/* The law's constant capacitances on the part's nodes (c > 0, distinct nodes). */
static int caps(const ru_part *p, ru_cap out[RU_PART_CAPS_MAX])
{
    const ru_law_desc *d = ru_law_get(p->amp.law);
    if (!d || !d->caps)
        return 0;
    ru_law_cap lc[RU_PART_CAPS_MAX];
    int nd[RU_PART_NODES], m = d->caps(&p->amp, lc), n = 0;
    nodes_of(p, nd);
    for (int k = 0; k < m && k < RU_PART_CAPS_MAX; k++) {
        int a = nd[lc[k].a], b = nd[lc[k].b];
        if (lc[k].c_f > 0 && a >= 0 && b >= 0 && a != b)
            out[n++] = (ru_cap){a, b, lc[k].c_f};
    }
    return n;
}

static int nstates(const ru_part *p) { return ru_law_nstates(&p->amp); }

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

void ru_amp_ports(const ru_part *p, const double *v, double xs, ru_law_at *at)
{
    int nd[RU_PART_NODES];
    nodes_of(p, nd);
    *at = (ru_law_at){v[nd[RU_AMP_IN]] - v[nd[RU_AMP_INV]],
                      v[nd[RU_AMP_OUT]] - v[nd[RU_AMP_REF]], 0.0, 0.0, xs, 0};
    if (nd[RU_AMP_OUT2] >= 0) {
        at->vo2 = v[nd[RU_AMP_OUT2]] - v[nd[RU_AMP_REF]];
        at->out2 = 1;
    }
    if (nd[RU_AMP_VDD] >= 0)
        at->vs = v[nd[RU_AMP_VDD]] - v[nd[RU_AMP_REF]];
}

/* The port voltages of the part and its law's evaluation there. */
static void eval_here(const ru_part *p, const ru_stamp *st, int s, ru_law_eval *e)
{
    ru_law_at at;
    ru_amp_ports(p, st->v, s >= 0 ? st->x[s] : 0.0, &at);
    ru_law_eval_at(&p->amp, &at, e);
}

/* Derivatives of a quantity on row `row` w.r.t. the port voltages d = {vc, vo,
 * vo2, vs}: vc = v(in) - v(inv), the others from their terminal to ref. */
static void stamp_ports(ru_stamp *st, int row, const int *nd, const double d[4])
{
    static const int plus[4] = {RU_AMP_IN, RU_AMP_OUT, RU_AMP_OUT2, RU_AMP_VDD};
    for (int k = 0; k < 4; k++) {
        if (nd[plus[k]] < 0) /* zeros too: the system records its pattern from one call */
            continue;
        ru_stamp_dn(st, row, nd[plus[k]], d[k]);
        ru_stamp_dn(st, row, k == 0 ? nd[RU_AMP_INV] : nd[RU_AMP_REF], -d[k]);
    }
}

/* The row of node slot k, or -1 when that terminal is not connected. */
static int row_of(const ru_stamp *st, const int *nd, int k)
{
    return nd[k] >= 0 ? st->row[nd[k]] : -1;
}

/* i_out into out, i_out2 into out2, i_sup into vdd, their sum out of ref, i_in
 * into in and out of inv, the internal state's row, and C dv/dt of a driven node
 * across the law's capacitances. With st->skip the controlled terms (ru_law_desc:
 * each output's d/d vc and d rate/d vc, or d i_out/d xs for a law whose control is
 * its state) are left out of dr. */
static void stamp(const ru_part *p, ru_stamp *st, int index, int s)
{
    (void)index;
    int nd[RU_PART_NODES];
    nodes_of(p, nd);
    const ru_law_desc *d = ru_law_get(p->amp.law);
    ru_law_eval e;
    eval_here(p, st, s, &e);
    ru_stamp_add(st, nd[RU_AMP_OUT], e.i_out);
    if (nd[RU_AMP_OUT2] >= 0)
        ru_stamp_add(st, nd[RU_AMP_OUT2], e.i_out2);
    if (nd[RU_AMP_VDD] >= 0)
        ru_stamp_add(st, nd[RU_AMP_VDD], e.i_sup);
    ru_stamp_add(st, nd[RU_AMP_REF], -(e.i_out + e.i_out2 + e.i_sup));
    ru_stamp_add(st, nd[RU_AMP_IN], e.i_in);
    ru_stamp_add(st, nd[RU_AMP_INV], -e.i_in);
    ru_cap cap[RU_PART_CAPS_MAX];
    for (int k = 0, nc = caps(p, cap); k < nc; k++) {
        ru_stamp_add(st, cap[k].a, cap[k].c_f * st->dv[cap[k].b]);
        ru_stamp_add(st, cap[k].b, cap[k].c_f * st->dv[cap[k].a]);
    }
    if (s >= 0)
        st->r[s] = e.dxs;
    if (!st->dr)
        return;
    int cstate = d && d->control_state && s >= 0;
    int cut_vc = st->skip && !cstate, cut_xs = st->skip && cstate;
    double out[4] = {cut_vc ? 0.0 : e.di_out_dvc, e.di_out_dvo, 0.0, e.di_out_dvs};
    double out2[4] = {cut_vc ? 0.0 : e.di_out2_dvc, 0.0, e.di_out2_dvo2, 0.0};
    double sup[4] = {cut_vc ? 0.0 : e.di_sup_dvc, e.di_sup_dvo, 0.0, e.di_sup_dvs};
    double ref[4], in[4] = {e.di_in_dvc, e.di_in_dvo, 0.0, 0.0}, inv[4];
    for (int k = 0; k < 4; k++) {
        ref[k] = -(out[k] + out2[k] + sup[k]);
        inv[k] = -in[k];
    }
    stamp_ports(st, row_of(st, nd, RU_AMP_OUT), nd, out);
    stamp_ports(st, row_of(st, nd, RU_AMP_OUT2), nd, out2);
    stamp_ports(st, row_of(st, nd, RU_AMP_VDD), nd, sup);
    stamp_ports(st, row_of(st, nd, RU_AMP_REF), nd, ref);
    stamp_ports(st, row_of(st, nd, RU_AMP_IN), nd, in);
    stamp_ports(st, row_of(st, nd, RU_AMP_INV), nd, inv);
    if (s < 0)
        return;
    double gxs = cut_xs ? 0.0 : e.di_out_dxs;
    ru_stamp_ds(st, row_of(st, nd, RU_AMP_OUT), s, gxs);
    ru_stamp_ds(st, row_of(st, nd, RU_AMP_REF), s, -gxs);
    ru_stamp_ds(st, row_of(st, nd, RU_AMP_IN), s, e.di_in_dxs);
    ru_stamp_ds(st, row_of(st, nd, RU_AMP_INV), s, -e.di_in_dxs);
    double rate[4] = {cut_vc ? 0.0 : e.ddxs_dvc, e.ddxs_dvo, 0.0, 0.0};
    stamp_ports(st, s, nd, rate);
    ru_stamp_ds(st, s, s, e.ddxs_dxs);
}

/* b: the controlled terms on the rows they act on (each output's d/d vc, ref
 * taking their sum back, and d rate/d vc on the state's row); g: e_in - e_inv.
 * For a law whose control is its state: b = d i_out/d xs on out (+) and ref (-),
 * g = e_state. */
static void loop(const ru_part *p, const ru_stamp *st, int s, double *b, double *g)
{
    int nd[RU_PART_NODES];
    nodes_of(p, nd);
    const ru_law_desc *d = ru_law_get(p->amp.law);
    ru_law_eval le;
    eval_here(p, st, s, &le);
    int so = row_of(st, nd, RU_AMP_OUT), sr = row_of(st, nd, RU_AMP_REF);
    if (d && d->control_state && s >= 0) {
        if (so >= 0)
            b[so] += le.di_out_dxs;
        if (sr >= 0)
            b[sr] -= le.di_out_dxs;
        g[s] += 1.0;
        return;
    }
    int s2 = row_of(st, nd, RU_AMP_OUT2), sv = row_of(st, nd, RU_AMP_VDD);
    int si = row_of(st, nd, RU_AMP_IN), sn = row_of(st, nd, RU_AMP_INV);
    if (so >= 0)
        b[so] += le.di_out_dvc;
    if (s2 >= 0)
        b[s2] += le.di_out2_dvc;
    if (sv >= 0)
        b[sv] += le.di_sup_dvc;
    if (sr >= 0)
        b[sr] -= le.di_out_dvc + le.di_out2_dvc + le.di_sup_dvc;
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
    .caps = caps,
    .kcl_links = kcl_links,
    .state_group = RU_STATES_INTERNAL,
    .nstates = nstates,
    .state_name = state_name,
    .state_rest = state_rest,
    .state_scale = state_scale,
    .stamp = stamp,
    .loop = loop,
    .output_term = 2, /* node[1]: out */
    .describe = describe,
};
