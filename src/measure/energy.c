/* energy.c: the energy balance that estimates the integrator's numerical damping
 * from the output samples alone (see energy.h for the formula).
 *
 * Per sample: the storage rates (the rhs for an ODE), every node voltage at t at once, and only when a capacitor
 * touches a driven node, every node voltage at t + h for the forward difference
 * of the driven nodes' slopes. Scratch is allocated at create. */
#include "measure/energy.h"
#include "system/system_impl.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

typedef struct store_cap {
    int a, b;   /* nodes */
    double c_f; /* capacitance (F) */
} store_cap;

typedef struct store_ind { /* a part's own state: l_h x^2 / 2 */
    int state;  /* state index (an inductor's current, a motional arm's i or vm) */
    double l_h; /* inductance (H), or capacitance (F) of a voltage state */
} store_ind;

struct ru_energy_balance {
    const ru_system *sys;
    store_cap *caps;   /* the parts' capacitances and the stray of each free node */
    size_t ncaps;
    store_ind *inds;
    size_t ninds;
    double *f;         /* x' at a sample */
    double *v, *vh;    /* nnodes: node voltages at t and at t + h (V) */
    double *dvs;       /* nnodes: dv/dt from the sources (unused, V/s) */
    double *v_ref;     /* nnodes: node voltages of the reference state (0: none) */
    double *x_ref;     /* n: the reference state (inductor currents read from it) */
    int driven_caps;   /* a capacitor has a driven terminal: vh is needed */
    double t_from_s;   /* accumulate from the last breakpoint on */
    int started;       /* a first sample has been taken */
    double t_prev, e_prev, p_prev; /* previous sample: time, energy, dE/dt */
    double e_first;    /* energy at the first accumulated sample */
    double int_p;      /* integral of dE/dt (J) */
    double int_e;      /* integral of E (J s) */
};

/* Forward-difference step for the driven nodes' slopes at t. */
static double slope_step(double t) { return 1e-9 * (fabs(t) + 1e-6); }

/* d v(node)/dt: from x' for a free node, by a forward difference for a driven one
 * (its voltage depends on t only and is right-continuous, so a forward difference
 * at a jump's time gives the slope after the jump), 0 for ground. */
static double node_dv(const ru_energy_balance *e, int node, double h)
{
    int k = e->sys->node_state[node];
    if (k >= 0)
        return e->f[k];
    if (k == RU_NS_GROUND)
        return 0.0;
    return (e->vh[node] - e->v[node]) / h;
}

static void energy_and_rate(ru_energy_balance *e, double t, const double *x, double *en,
                            double *rate)
{
    double E = 0, P = 0, h = slope_step(t);
    ru_src_eval se = {t, 0, 1.0};
    ru_system_storage_rates(e->sys, t, x, e->f);
    ru_sys_node_values(e->sys, &se, x, e->v, e->dvs);
    if (e->driven_caps) {
        se.t_s = t + h;
        ru_sys_node_values(e->sys, &se, x, e->vh, e->dvs);
    }
    for (size_t i = 0; i < e->ncaps; i++) {
        const store_cap *c = &e->caps[i];
        double v = e->v[c->a] - e->v[c->b];
        if (e->v_ref)
            v -= e->v_ref[c->a] - e->v_ref[c->b];
        double dv = node_dv(e, c->a, h) - node_dv(e, c->b, h);
        E += 0.5 * c->c_f * v * v;
        P += c->c_f * v * dv;
    }
    for (size_t i = 0; i < e->ninds; i++) {
        double cur = x[e->inds[i].state] - (e->x_ref ? e->x_ref[e->inds[i].state] : 0.0);
        E += 0.5 * e->inds[i].l_h * cur * cur;
        P += e->inds[i].l_h * cur * e->f[e->inds[i].state];
    }
    for (size_t q = 0; q < e->sys->ncpl; q++) { /* mutual inductance: M ia ib */
        const ru_sys_coupling *k = &e->sys->cpl[q];
        double ia = x[k->a] - (e->x_ref ? e->x_ref[k->a] : 0.0);
        double ib = x[k->b] - (e->x_ref ? e->x_ref[k->b] : 0.0);
        E += k->m_h * ia * ib;
        P += k->m_h * (ia * e->f[k->b] + ib * e->f[k->a]);
    }
    *en = E;
    *rate = P;
}

/* Every capacitance of a part (the mass matrix's) and the stores of its own
 * states, as its descriptor gives them. */
static void add_part(ru_energy_balance *e, const ru_part *p, int s0)
{
    ru_cap cap[RU_PART_CAPS_MAX];
    int nc = ru_part_caps(p, cap);
    for (int k = 0; k < nc; k++) {
        e->caps[e->ncaps++] = (store_cap){cap[k].a, cap[k].b, cap[k].c_f};
        if (e->sys->node_state[cap[k].a] == RU_NS_DRIVEN ||
            e->sys->node_state[cap[k].b] == RU_NS_DRIVEN)
            e->driven_caps = 1;
    }
    ru_store st[RU_PART_STORES_MAX];
    int ns = s0 >= 0 ? ru_part_stores(p, st) : 0;
    for (int k = 0; k < ns; k++)
        e->inds[e->ninds++] = (store_ind){s0 + st[k].state, st[k].coef};
}

static ru_status collect_parts(ru_energy_balance *e, const ru_circuit *c)
{
    size_t np = ru_circuit_part_count(c), nn = ru_circuit_node_count(c);
    e->caps = calloc(RU_PART_CAPS_MAX * np + nn, sizeof *e->caps);
    e->inds = calloc(np ? RU_PART_STORES_MAX * np : 1, sizeof *e->inds);
    if (!e->caps || !e->inds)
        return RU_ENOMEM;
    for (size_t i = 0; i < np; i++)
        add_part(e, ru_circuit_part(c, i), ru_system_part_state(e->sys, (int)i));
    for (size_t k = 1; k < nn; k++)
        if (ru_system_node_state(e->sys, (int)k) >= 0 &&
            ru_circuit_node_stray_f(c, (int)k) > 0)
            e->caps[e->ncaps++] = (store_cap){(int)k, 0, ru_circuit_node_stray_f(c, (int)k)};
    return RU_OK;
}

ru_status ru_energy_balance_create(const ru_system *s, double stop_s,
                                   ru_energy_balance **out)
{
    *out = NULL;
    ru_energy_balance *e = calloc(1, sizeof *e);
    if (!e)
        return RU_ENOMEM;
    e->sys = s;
    size_t n = ru_system_size(s);
    size_t nn = ru_circuit_node_count(ru_system_circuit(s));
    e->f = calloc(n ? n : 1, sizeof *e->f);
    e->v = calloc(nn ? nn : 1, sizeof *e->v);
    e->vh = calloc(nn ? nn : 1, sizeof *e->vh);
    e->dvs = calloc(nn ? nn : 1, sizeof *e->dvs);
    ru_status st = e->f && e->v && e->vh && e->dvs ? collect_parts(e, ru_system_circuit(s))
                                                   : RU_ENOMEM;
    if (st != RU_OK) {
        ru_energy_balance_destroy(e);
        return st;
    }
    double bp[256];
    size_t nb = ru_system_breakpoints(s, stop_s, bp, 256);
    e->t_from_s = (nb > 0 && nb <= 256) ? bp[nb - 1] : 0.0;
    if (nb > 256)
        e->t_from_s = INFINITY; /* many edges (a pulse train): no estimate */
    *out = e;
    return RU_OK;
}

ru_status ru_energy_balance_set_ref(ru_energy_balance *e, const double *x_ref)
{
    size_t n = ru_system_size(e->sys);
    size_t nn = ru_circuit_node_count(ru_system_circuit(e->sys));
    e->v_ref = calloc(nn ? nn : 1, sizeof *e->v_ref);
    e->x_ref = calloc(n ? n : 1, sizeof *e->x_ref);
    if (!e->v_ref || !e->x_ref)
        return RU_ENOMEM;
    memcpy(e->x_ref, x_ref, n * sizeof *x_ref);
    for (size_t k = 0; k < nn; k++)
        e->v_ref[k] = ru_system_node_voltage_dc(e->sys, (int)k, x_ref);
    return RU_OK;
}

void ru_energy_balance_destroy(ru_energy_balance *e)
{
    if (!e)
        return;
    free(e->v_ref);
    free(e->x_ref);
    free(e->caps);
    free(e->inds);
    free(e->f);
    free(e->v);
    free(e->vh);
    free(e->dvs);
    free(e);
}

void ru_energy_balance_push(ru_energy_balance *e, double t_s, const double *x)
{
    if (t_s < e->t_from_s)
        return;
    double E, P;
    energy_and_rate(e, t_s, x, &E, &P);
    if (e->started) {
        double h = t_s - e->t_prev;
        e->int_p += 0.5 * h * (P + e->p_prev);
        e->int_e += 0.5 * h * (E + e->e_prev);
    } else {
        e->e_first = E;
        e->started = 1;
    }
    e->t_prev = t_s;
    e->e_prev = E;
    e->p_prev = P;
}

double ru_energy_balance_damping(const ru_energy_balance *e)
{
    if (!e || !e->started || !(e->int_e > 0))
        return NAN;
    double residual = (e->e_prev - e->e_first) - e->int_p;
    return -residual / (2.0 * e->int_e);
}
