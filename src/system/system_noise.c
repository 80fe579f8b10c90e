/* system_noise.c: the parts' small-signal noise sources for phase-noise analysis
 * (ringup/system.h): which parts are noisy, how each noise enters the residual, and
 * its white density at a state. The order of sources is the order of the parts,
 * each part's own in a fixed order (ringup/system.h); it never depends on the state.
 *
 * Densities (one-sided): Johnson-Nyquist thermal noise 4kT/R of a resistance as a
 * current across it, or 4kTR as a voltage in series (Nyquist, Phys. Rev. 32 (1928)
 * 110); Schottky's shot noise 2q|I| of a junction current; an amplifier's given
 * input-referred densities en^2 and inoise^2. */
#include "system/system_impl.h"

#include "parts/laws.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

/* The sources part p has (0..RU_NOISE_PART_MAX), their kinds in kind[]. */
static int part_noise(const ru_part *p, ru_noise_kind kind[RU_NOISE_PART_MAX])
{
    int m = 0;
    switch (p->type) {
    case RU_PART_RESISTOR:
    case RU_PART_THERMAL:
        kind[m++] = RU_NOISE_THERMAL;
        break;
    case RU_PART_INDUCTOR:
        if (p->series_ohm > 0)
            kind[m++] = RU_NOISE_THERMAL;
        break;
    case RU_PART_CRYSTAL: /* its main arm's R (the extra arms sit off the tone) */
        if (!p->crystal.no_main)
            kind[m++] = RU_NOISE_THERMAL;
        break;
    case RU_PART_DIODE:
        kind[m++] = RU_NOISE_SHOT;
        break;
    case RU_PART_AMPLIFIER:
        if (p->amp.law == RU_LAW_EXP_STAGE)
            kind[m++] = RU_NOISE_SHOT;
        if (p->amp.en_v_per_rthz > 0)
            kind[m++] = RU_NOISE_INPUT_V;
        if (p->amp.in_a_per_rthz > 0)
            kind[m++] = RU_NOISE_INPUT_I;
        break;
    default:
        break;
    }
    return m;
}

size_t ru_system_noise_count(const ru_system *s)
{
    size_t m = 0;
    ru_noise_kind kind[RU_NOISE_PART_MAX];
    for (size_t i = 0; i < s->nparts; i++)
        m += (size_t)part_noise(ru_circuit_part(s->c, i), kind);
    return m;
}

/* Part index of source k, or -1; its kind and its place among the part's own. */
static int source_part(const ru_system *s, size_t k, ru_noise_kind *kind)
{
    ru_noise_kind kinds[RU_NOISE_PART_MAX];
    for (size_t i = 0; i < s->nparts; i++) {
        size_t m = (size_t)part_noise(ru_circuit_part(s->c, i), kinds);
        if (k < m) {
            *kind = kinds[k];
            return (int)i;
        }
        k -= m;
    }
    return -1;
}

static const char *const kind_label[RU_NOISE_KIND_COUNT] = {"thermal", "shot",
                                                            "input voltage", "input current"};

ru_status ru_system_noise_info(const ru_system *s, size_t k, ru_noise_info *info)
{
    ru_noise_kind kind = RU_NOISE_THERMAL;
    int part = source_part(s, k, &kind);
    memset(info, 0, sizeof *info);
    if (part < 0)
        return RU_ERANGE;
    info->part = part;
    info->kind = kind;
    int input = kind == RU_NOISE_INPUT_V || kind == RU_NOISE_INPUT_I;
    info->flicker_corner_hz = input ? ru_circuit_part(s->c, (size_t)part)->amp.fc_hz : 0.0;
    info->label = kind_label[kind];
    return RU_OK;
}

/* b of a current flowing a -> b through the part (it leaves a, enters b). */
static void branch_vec(const ru_system *s, int a, int b, double *col)
{
    int sa = s->node_state[a], sb = s->node_state[b];
    if (sa >= 0)
        col[sa] -= 1.0;
    if (sb >= 0)
        col[sb] += 1.0;
}

/* An amplifier's input voltage noise: vc = v(in) - v(inv) moves by e, so every
 * current and rate of its law moves by its d/d vc (on the rows the stamp puts them,
 * amplifier.c): col gets those derivatives, per volt of e. */
static void input_voltage_vec(const ru_system *s, size_t i, const double *v, const double *x,
                              double *col)
{
    const ru_part *p = ru_circuit_part(s->c, i);
    int nd[RU_PART_NODES];
    for (int k = 0; k < RU_PART_NODES; k++)
        nd[k] = p->node[k];
    nd[RU_AMP_INV] = ru_part_inv_node(p);
    int st = ru_sys_part_nstates(p) ? s->part_state[i] : -1;
    ru_law_at at;
    ru_amp_ports(p, v, st >= 0 ? x[st] : 0.0, &at);
    ru_law_eval e;
    ru_law_eval_at(&p->amp, &at, &e);
    const struct {
        int slot;
        double d;
    } rows[] = {{RU_AMP_OUT, e.di_out_dvc},
                {RU_AMP_OUT2, e.di_out2_dvc},
                {RU_AMP_VDD, e.di_sup_dvc},
                {RU_AMP_REF, -(e.di_out_dvc + e.di_out2_dvc + e.di_sup_dvc)},
                {RU_AMP_IN, e.di_in_dvc},
                {RU_AMP_INV, -e.di_in_dvc}};
    for (size_t k = 0; k < sizeof rows / sizeof rows[0]; k++) {
        int node = nd[rows[k].slot];
        int r = node >= 0 ? s->node_state[node] : -1;
        if (r >= 0)
            col[r] += rows[k].d;
    }
    if (st >= 0)
        col[st] += e.ddxs_dvc;
}

/* Density (one-sided) and entry vector b of the source of part i of the given kind
 * at node voltages v and state x; returns the density. */
static double source_at(const ru_system *s, size_t i, ru_noise_kind kind, const double *v,
                        const double *x, double kt_j, double *col)
{
    const ru_part *p = ru_circuit_part(s->c, i);
    int a = p->node[0], b = p->node[1];
    if (kind == RU_NOISE_INPUT_V) {
        input_voltage_vec(s, i, v, x, col);
        return p->amp.en_v_per_rthz * p->amp.en_v_per_rthz;
    }
    if (kind == RU_NOISE_INPUT_I) { /* from inv into in */
        branch_vec(s, ru_part_inv_node(p), p->node[RU_AMP_IN], col);
        return p->amp.in_a_per_rthz * p->amp.in_a_per_rthz;
    }
    switch (p->type) {
    case RU_PART_RESISTOR:
        branch_vec(s, a, b, col);
        return 4.0 * kt_j / p->value;
    case RU_PART_INDUCTOR: /* a series voltage e adds e/L to di/dt */
        col[s->part_state[i]] += 1.0 / p->value;
        return 4.0 * kt_j * p->series_ohm;
    case RU_PART_CRYSTAL: { /* the main arm's R, a series voltage: e/L on di/dt */
        double r, l, cm;
        ru_crystal_arm(p, 0, &r, &l, &cm);
        col[s->part_state[i]] += 1.0 / l;
        return 4.0 * kt_j * r;
    }
    case RU_PART_THERMAL: {
        double rise = x[s->part_state[i]], drdx;
        double r = ru_thermal_resistance(&p->thermal, rise, &drdx);
        double t_k = p->thermal.tamb_c + 273.15 + rise;
        branch_vec(s, a, b, col);
        return 4.0 * RU_K_BOLTZMANN * fmax(t_k, 0.0) / r;
    }
    case RU_PART_DIODE: {
        double g, id = ru_diode_current(&p->diode, v[a] - v[b], &g);
        branch_vec(s, a, b, col);
        return 2.0 * RU_Q_ELECTRON * fabs(id);
    }
    case RU_PART_AMPLIFIER: { /* exp-stage: shot noise of the output current */
        int inv = ru_part_inv_node(p);
        int st = ru_sys_part_nstates(p) ? s->part_state[i] : -1;
        ru_law_eval e;
        ru_law_eval_state(&p->amp, v[p->node[0]] - v[inv], v[p->node[1]] - v[p->node[2]],
                          st >= 0 ? x[st] : 0.0, &e);
        branch_vec(s, p->node[2], p->node[1], col); /* into out, out of ref */
        return 2.0 * RU_Q_ELECTRON * fabs(e.i_out);
    }
    default:
        return 0.0;
    }
}

ru_status ru_system_noise_columns(const ru_system *s, const double *x, double temp_c,
                                  double *B)
{
    if (!(temp_c > -273.15) || !isfinite(temp_c))
        return RU_ERANGE;
    size_t n = s->n, m = ru_system_noise_count(s);
    double *v = malloc((2 * s->nnodes + n) * sizeof *v);
    if (!v)
        return RU_ENOMEM;
    double *dv = v + s->nnodes, *col = dv + s->nnodes;
    ru_src_eval e = {0.0, 1, 1.0};
    ru_sys_node_values(s, &e, x, v, dv);
    double kt = RU_K_BOLTZMANN * (temp_c + 273.15);
    memset(B, 0, n * m * sizeof *B);
    ru_noise_kind kind[RU_NOISE_PART_MAX];
    size_t k = 0;
    for (size_t i = 0; i < s->nparts; i++) {
        int np = part_noise(ru_circuit_part(s->c, i), kind);
        for (int j = 0; j < np; j++, k++) {
            memset(col, 0, n * sizeof *col);
            double dens = source_at(s, i, kind[j], v, x, kt, col);
            ru_sys_csolve(s, col);
            ru_sys_lsolve(s, col);
            double g = sqrt(fmax(dens, 0.0));
            for (size_t r = 0; r < n; r++)
                B[r * m + k] = g * col[r];
        }
    }
    free(v);
    return RU_OK;
}
