/* record.c: a batch item (status, error, run report) as one JSON line and back
 * (see ringup/units.h, "run records").
 *
 * One table lists every report field a record carries, with its group ("measured",
 * "predicted", "solver" or the top level), key, type and place in ru_run_report;
 * the writer and the reader both walk it, so a field added to the table goes both
 * ways. Every figure a batch table or batch JSON prints must be in the table
 * (tests/cli_study.sh compares a merged study with one run). The WAV fields are
 * not carried: batch units write no audio. */
#include "ringup/units.h"

#include "batch/jsonl.h"

#include <math.h>
#include <stddef.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

typedef enum { F_DBL, F_INT, F_LONG, F_SIZE, F_STR, F_DBLS, F_ENUM, F_VERDICT } ftype;

/* Enumerations are carried as their int values (F_ENUM) or, the verdict, by name. */
_Static_assert(sizeof(ru_verdict) == sizeof(int), "enums are ints");
_Static_assert(sizeof(ru_integrator) == sizeof(int), "enums are ints");
_Static_assert(sizeof(ru_linsol) == sizeof(int), "enums are ints");

typedef struct field {
    const char *group; /* NULL: top level */
    const char *key;
    ftype type;
    size_t off;        /* in ru_run_report */
    size_t n;          /* F_STR: buffer size; F_DBLS: count */
} field;

#define RR(m) offsetof(ru_run_report, m)
#define M "measured"
#define P "predicted"
#define S "solver"
#define T "stop"
#define E "engine"
#define H "harmonic_balance"

static const field fields[] = {
    {NULL, "stop_s", F_DBL, RR(stop_s), 0},
    {NULL, "sample_s", F_DBL, RR(sample_s), 0},
    {NULL, "probe", F_STR, RR(probe), sizeof ((ru_run_report *)0)->probe},
    {NULL, "startup_level", F_DBL, RR(startup_level), 0},
    {NULL, "growth_mismatch", F_DBL, RR(growth_mismatch), 0},
    {NULL, "integrator_damping_per_s", F_DBL, RR(integrator_damping_per_s), 0},
    {NULL, "partial", F_INT, RR(partial), 0},
    {NULL, "verdict", F_VERDICT, RR(verdict), 0},
    {NULL, "seed_v", F_DBL, RR(seed_v), 0},
    {NULL, "noise_on", F_INT, RR(noise_on), 0},
    {NULL, "floor_v", F_DBL, RR(floor_v), 0},
    {T, "automatic", F_INT, RR(stop.automatic), 0},
    {T, "first_s", F_DBL, RR(stop.first_s), 0},
    {T, "cap_s", F_DBL, RR(stop.cap_s), 0},
    {T, "cap_basis_s", F_DBL, RR(stop.cap_basis_s), 0},
    {T, "cap_why", F_STR, RR(stop.cap_why), RU_NOTE_MAX},
    {T, "cap_cycles", F_DBL, RR(stop.cap_cycles), 0},
    {T, "cap_cpu_s", F_DBL, RR(stop.cap_cpu_s), 0},
    {T, "cpu_s", F_DBL, RR(stop.cpu_s), 0},
    {T, "chunks", F_INT, RR(stop.chunks), 0},
    {T, "reason", F_STR, RR(stop.reason), RU_NOTE_MAX},
    {E, "envelope", F_INT, RR(engine.envelope), 0},
    {E, "cycles_integrated", F_LONG, RR(engine.cycles_integrated), 0},
    {E, "cycles_spanned", F_DBL, RR(engine.cycles_spanned), 0},
    {E, "env_steps", F_LONG, RR(engine.env_steps), 0},
    {E, "fell_back", F_INT, RR(engine.fell_back), 0},
    {E, "rtol_cycle", F_DBL, RR(engine.rtol_cycle), 0},
    {M, "started", F_INT, RR(meas.started), 0},
    {M, "settled", F_INT, RR(meas.settled), 0},
    {M, "startup_time_s", F_DBL, RR(meas.startup_time_s), 0},
    {M, "growth_rate_per_s", F_DBL, RR(meas.growth_rate_per_s), 0},
    {M, "growth_fit_t0_s", F_DBL, RR(meas.growth_fit_t0_s), 0},
    {M, "growth_fit_t1_s", F_DBL, RR(meas.growth_fit_t1_s), 0},
    {M, "growth_fit_rms", F_DBL, RR(meas.growth_fit_rms), 0},
    {M, "growth_fit_level_v", F_DBL, RR(meas.growth_fit_level_v), 0},
    {M, "growth_fit_points", F_INT, RR(meas.growth_fit_points), 0},
    {M, "frequency_hz", F_DBL, RR(meas.frequency_hz), 0},
    {M, "settled_amplitude_v", F_DBL, RR(meas.settled_amplitude_v), 0},
    {M, "settling_time_s", F_DBL, RR(meas.settling_time_s), 0},
    {M, "fundamental_v", F_DBL, RR(meas.fundamental_v), 0},
    {M, "thd_percent", F_DBL, RR(meas.thd_percent), 0},
    {M, "harmonics_dbc", F_DBLS, RR(meas.harmonics_dbc), RU_HARMONICS - 1},
    {M, "dc_level_v", F_DBL, RR(meas.dc_level_v), 0},
    {M, "envelope_drift", F_DBL, RR(meas.envelope_drift), 0},
    {M, "window_spread", F_DBL, RR(meas.window_spread), 0},
    {M, "window_s", F_DBL, RR(meas.window_s), 0},
    {M, "window_points", F_SIZE, RR(meas.window_points), 0},
    {M, "t_first_s", F_DBL, RR(meas.t_first_s), 0},
    {M, "t_last_s", F_DBL, RR(meas.t_last_s), 0},
    {M, "first_cycle_t_s", F_DBL, RR(meas.first_cycle_t_s), 0},
    {M, "trough_v", F_DBL, RR(meas.trough_v), 0},
    {M, "trough_t_s", F_DBL, RR(meas.trough_t_s), 0},
    {M, "peak_envelope_v", F_DBL, RR(meas.peak_envelope_v), 0},
    {M, "peak_t_s", F_DBL, RR(meas.peak_t_s), 0},
    {M, "decay_before_per_s", F_DBL, RR(meas.decay_before_per_s), 0},
    {M, "dc_motion_v", F_DBL, RR(meas.dc_motion_v), 0},
    {M, "cycles", F_SIZE, RR(meas.cycles), 0},
    {M, "growth_note", F_STR, RR(meas.growth_note), RU_NOTE_MAX},
    {M, "settle_note", F_STR, RR(meas.settle_note), RU_NOTE_MAX},
    {M, "thd_note", F_STR, RR(meas.thd_note), RU_NOTE_MAX},
    {P, "have_op", F_INT, RR(pred.have_op), 0},
    {P, "op_iterations", F_INT, RR(pred.op.iterations), 0},
    {P, "op_source_steps", F_INT, RR(pred.op.source_steps), 0},
    {P, "op_residual", F_DBL, RR(pred.op.residual), 0},
    {P, "have_poles", F_INT, RR(pred.have_poles), 0},
    {P, "dominant_re_per_s", F_DBL, RR(pred.dominant.re_per_s), 0},
    {P, "dominant_im_rad_per_s", F_DBL, RR(pred.dominant.im_rad_per_s), 0},
    {P, "growth_rate_per_s", F_DBL, RR(pred.growth_rate_per_s), 0},
    {P, "frequency_hz", F_DBL, RR(pred.frequency_hz), 0},
    {P, "kick_amplitude_v", F_DBL, RR(pred.kick_amplitude_v), 0},
    {P, "noise_amplitude_v", F_DBL, RR(pred.noise_amplitude_v), 0},
    {P, "slowest_decay_per_s", F_DBL, RR(pred.slowest_decay_per_s), 0},
    {P, "start_kind", F_INT, RR(pred.start_kind), 0},
    {P, "start_driven", F_INT, RR(pred.start_driven), 0},
    {P, "start_rms_v", F_DBL, RR(pred.start_rms_v), 0},
    {P, "start_log_sd", F_DBL, RR(pred.start_log_sd), 0},
    {P, "startup_time_s", F_DBL, RR(pred.startup_time_s), 0},
    {P, "settled_amplitude_v", F_DBL, RR(pred.settled_amplitude_v), 0},
    {P, "settled_frequency_hz", F_DBL, RR(pred.df_frequency_hz), 0},
    {P, "have_hb", F_INT, RR(pred.have_hb), 0},
    {P, "have_loop", F_INT, RR(pred.have_loop), 0},
    {P, "loop_part", F_STR, RR(pred.loop_part), RU_NAME_MAX},
    {P, "loop_found", F_INT, RR(pred.loop.found), 0},
    {P, "loop_crossover_hz", F_DBL, RR(pred.loop.crossover_hz), 0},
    {P, "loop_gain", F_DBL, RR(pred.loop.gain), 0},
    {P, "loop_margin_db", F_DBL, RR(pred.loop.margin_db), 0},
    {H, "converged", F_INT, RR(pred.hb.converged), 0},
    {H, "harmonics", F_INT, RR(pred.hb.harmonics), 0},
    {H, "moved", F_DBL, RR(pred.hb.moved), 0},
    {H, "fundamental_v", F_DBL, RR(pred.hb.fundamental_v), 0},
    {H, "amplitude_v", F_DBL, RR(pred.hb.amplitude_v), 0},
    {H, "frequency_hz", F_DBL, RR(pred.hb.frequency_hz), 0},
    {H, "dc_level_v", F_DBL, RR(pred.hb.dc_level_v), 0},
    {H, "thd_percent", F_DBL, RR(pred.hb.thd_percent), 0},
    {H, "harmonics_dbc", F_DBLS, RR(pred.hb.harmonics_dbc), RU_HB_REPORT - 1},
    {H, "note", F_STR, RR(pred.hb.note), sizeof ((ru_run_report *)0)->pred.hb.note},
    {S, "steps", F_LONG, RR(solver.steps), 0},
    {S, "rhs_evals", F_LONG, RR(solver.rhs_evals), 0},
    {S, "jac_evals", F_LONG, RR(solver.jac_evals), 0},
    {S, "err_fails", F_LONG, RR(solver.err_fails), 0},
    {S, "newton_fails", F_LONG, RR(solver.newton_fails), 0},
    {S, "samples", F_LONG, RR(solver.samples), 0},
    {S, "rtol", F_DBL, RR(solver.rtol), 0},
    {S, "t_reached_s", F_DBL, RR(solver.t_reached_s), 0},
    {S, "h_last_s", F_DBL, RR(solver.h_last_s), 0},
    {S, "order_last", F_INT, RR(solver.order_last), 0},
    {S, "wall_s", F_DBL, RR(solver.wall_s), 0},
    {S, "integrator", F_ENUM, RR(solver.integrator), 0},
    {S, "linsol", F_ENUM, RR(solver.linsol), 0},
};
#define NFIELDS (sizeof fields / sizeof fields[0])

static void write_field(jl_buf *b, const field *f, const ru_run_report *r)
{
    const char *p = (const char *)r + f->off;
    switch (f->type) {
    case F_DBL: jl_num(b, f->key, *(const double *)p); break;
    case F_INT: jl_int(b, f->key, *(const int *)p); break;
    case F_LONG: jl_int(b, f->key, *(const long *)p); break;
    case F_SIZE: jl_int(b, f->key, (long long)*(const size_t *)p); break;
    case F_STR: jl_str(b, f->key, p); break;
    case F_ENUM: jl_int(b, f->key, *(const int *)p); break;
    case F_VERDICT: jl_str(b, f->key, ru_verdict_name(*(const ru_verdict *)p)); break;
    case F_DBLS:
        jl_open(b, f->key, '[');
        for (size_t k = 0; k < f->n; k++)
            jl_num(b, NULL, ((const double *)p)[k]);
        jl_close(b, ']');
        break;
    }
}

static void write_error(jl_buf *b, const ru_error *e)
{
    jl_open(b, "error", '{');
    jl_str(b, "file", e->file);
    jl_int(b, "line", e->line);
    jl_int(b, "col", e->col);
    jl_str(b, "msg", e->msg);
    jl_close(b, '}');
}

ru_status ru_unit_record_of_item(size_t index, const ru_batch_item *it,
                                 const char *extra_key, const double *extra,
                                 size_t nextra, char **line)
{
    jl_buf b;
    jl_init(&b);
    jl_int(&b, "unit", (long long)index);
    jl_str(&b, "status", ru_status_str(it->status));
    if (it->status != RU_OK)
        write_error(&b, &it->error);
    if (extra_key) {
        jl_open(&b, extra_key, '[');
        for (size_t k = 0; k < nextra; k++)
            jl_num(&b, NULL, extra[k]);
        jl_close(&b, ']');
    }
    const char *group = NULL;
    for (size_t i = 0; i < NFIELDS; i++) {
        const field *f = &fields[i];
        if (!(f->group == group || (f->group && group && !strcmp(f->group, group)))) {
            if (group)
                jl_close(&b, '}');
            if (f->group)
                jl_open(&b, f->group, '{');
            group = f->group;
        }
        write_field(&b, f, &it->report);
    }
    if (group)
        jl_close(&b, '}');
    jl_open(&b, "notes", '[');
    for (int k = 0; k < it->report.nnotes; k++)
        jl_str(&b, NULL, it->report.notes[k]);
    jl_close(&b, ']');
    return jl_finish(&b, line);
}

static ru_status bad(ru_error *err, const char *what, const char *key)
{
    return ru_error_set(err, RU_EINPUT, NULL, 0, 0, "not a run record: %s%s%s", what,
                        key ? " " : "", key ? key : "");
}

static void copy_str(char *dst, size_t size, const char *src)
{
    snprintf(dst, size, "%s", src ? src : "");
}

/* A whole number in range, or 0 with ok cleared. */
static long long whole(const jv *v, long long lo, long long hi, int *ok)
{
    double x = jv_num(v, NAN);
    if (!(x >= (double)lo && x <= (double)hi) || x != floor(x)) {
        *ok = 0;
        return 0;
    }
    return (long long)x;
}

static int read_field(const jv *v, const field *f, ru_run_report *r)
{
    char *p = (char *)r + f->off;
    int ok = 1;
    if (!v)
        return 0;
    switch (f->type) {
    case F_DBL:
        if (v->type != JV_NUM && v->type != JV_NULL)
            return 0;
        *(double *)p = jv_num(v, NAN);
        break;
    case F_INT: *(int *)p = (int)whole(v, -2147483647LL, 2147483647LL, &ok); break;
    case F_LONG: *(long *)p = (long)whole(v, -(1LL << 53), 1LL << 53, &ok); break;
    case F_SIZE: *(size_t *)p = (size_t)whole(v, 0, 1LL << 53, &ok); break;
    case F_STR:
        if (!jv_str(v))
            return 0;
        copy_str(p, f->n, jv_str(v));
        break;
    case F_ENUM: *(int *)p = (int)whole(v, 0, 64, &ok); break;
    case F_VERDICT: {
        ok = 0;
        for (int k = RU_VERDICT_STARTED; k <= RU_VERDICT_DRIVEN && !ok; k++)
            if (jv_str(v) && !strcmp(jv_str(v), ru_verdict_name((ru_verdict)k))) {
                *(ru_verdict *)p = (ru_verdict)k;
                ok = 1;
            }
        break;
    }
    case F_DBLS:
        if (v->type != JV_ARR || v->n != f->n)
            return 0;
        for (size_t k = 0; k < f->n; k++)
            ((double *)p)[k] = jv_num(&v->item[k], NAN);
        break;
    }
    return ok;
}

static ru_status read_error(const jv *e, ru_error *out, ru_error *err)
{
    int ok = 1;
    if (!e || e->type != JV_OBJ || !jv_str(jv_get(e, "file")) || !jv_str(jv_get(e, "msg")))
        return bad(err, "missing or bad", "error");
    copy_str(out->file, sizeof out->file, jv_str(jv_get(e, "file")));
    copy_str(out->msg, sizeof out->msg, jv_str(jv_get(e, "msg")));
    out->line = (int)whole(jv_get(e, "line"), 0, 1 << 30, &ok);
    out->col = (int)whole(jv_get(e, "col"), 0, 1 << 30, &ok);
    return ok ? RU_OK : bad(err, "bad place in", "error");
}

static ru_status read_item(const jv *root, size_t *index, ru_batch_item *it, ru_error *err)
{
    int ok = 1;
    *index = (size_t)whole(jv_get(root, "unit"), 0, 1LL << 53, &ok);
    const char *st = jv_str(jv_get(root, "status"));
    int code = -1;
    for (int s = 0; st && s < RU_STATUS_COUNT && code < 0; s++)
        if (!strcmp(st, ru_status_str((ru_status)s)))
            code = s;
    if (!ok || code < 0)
        return bad(err, "missing or bad", "unit or status");
    it->status = (ru_status)code;
    ru_error_clear(&it->error);
    if (it->status != RU_OK && read_error(jv_get(root, "error"), &it->error, err) != RU_OK)
        return RU_EINPUT;
    it->error.code = it->status;
    memset(&it->report, 0, sizeof it->report);
    for (size_t i = 0; i < NFIELDS; i++) {
        const field *f = &fields[i];
        const jv *g = f->group ? jv_get(root, f->group) : root;
        if (!read_field(jv_get(g, f->key), f, &it->report))
            return bad(err, "missing or bad", f->key);
    }
    const jv *notes = jv_get(root, "notes");
    if (!notes || notes->type != JV_ARR || notes->n > RU_MAX_NOTES)
        return bad(err, "missing or bad", "notes");
    for (size_t k = 0; k < notes->n; k++) {
        if (!jv_str(&notes->item[k]))
            return bad(err, "missing or bad", "notes");
        copy_str(it->report.notes[k], sizeof it->report.notes[k], jv_str(&notes->item[k]));
    }
    it->report.nnotes = (int)notes->n;
    return RU_OK;
}

ru_status ru_unit_item_of_record(const char *line, size_t *index, ru_batch_item *it,
                                 ru_error *err)
{
    jv *root = NULL;
    char why[128];
    if (jv_parse(line, strlen(line), &root, why, sizeof why) != RU_OK)
        return ru_error_set(err, RU_EINPUT, NULL, 0, 0, "not a JSON line: %s", why);
    ru_status s = root->type == JV_OBJ ? read_item(root, index, it, err)
                                       : bad(err, "not an object", NULL);
    jv_free(root);
    return s;
}

ru_status ru_unit_record_index(const char *line, size_t *index, ru_error *err)
{
    jv *root = NULL;
    char why[128];
    if (jv_parse(line, strlen(line), &root, why, sizeof why) != RU_OK)
        return ru_error_set(err, RU_EINPUT, NULL, 0, 0, "not a JSON line: %s", why);
    int ok = 1;
    *index = (size_t)whole(jv_get(root, "unit"), 0, 1LL << 53, &ok);
    jv_free(root);
    return ok ? RU_OK : ru_error_set(err, RU_EINPUT, NULL, 0, 0, "no unit index in the record");
}
