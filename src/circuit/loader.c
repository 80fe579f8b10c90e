/* loader.c: reads a circuit file (our YAML format, see README "Circuit file")
 * into an ru_circuit: the top level. The parsed document and its readers are in
 * yamldoc.c, `run:` and `measure:` in loader_run.c, parts and presets in
 * loader_parts.c; this file calls them and nothing calls back. Sections are read in a
 * fixed order (title, stray, parts, run, measure) whatever their order in the
 * file, so run and measure can check node and part names. Also here: swapping a
 * part's preset for batch runs (ru_circuit_apply_model) and listing the presets
 * of a models folder (ru_models_list). */
#define _POSIX_C_SOURCE 200809L /* opendir, readdir */
#include "circuit/loader_impl.h"

#include <dirent.h>
#include <errno.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#ifndef RU_MODELS_DIR
#define RU_MODELS_DIR "models"
#endif

const char *ru_loader_default_models_dir(void)
{
    const char *env = getenv("RINGUP_MODELS");
    return (env && env[0]) ? env : RU_MODELS_DIR;
}

/* Warns about the first node with no DC path to ground, at its first mention. */
static ru_status warn_floating(ru_circuit *c, const char *file)
{
    int node;
    if (!ru_circuit_find_floating_node(c, &node))
        return RU_OK;
    int line, col;
    ru_circuit_node_place(c, node, &line, &col);
    char text[RU_ERROR_TEXT + RU_ERROR_FILE];
    snprintf(text, sizeof text,
             "%s:%d:%d: warning: node %s has no DC path to ground (no chain of "
             "conducting parts joins it to ground: only capacitors or current sources, "
             "or nothing, lie between; its DC level is undefined)",
             file, line, col, ru_circuit_node_name(c, node));
    return ru_circuit_add_warning(c, text);
}

/* Warns about every node that only one part touches: no current can flow through
 * it, so it is almost always a misspelt node name (the warning says which name is
 * close) or a part left unconnected. */
static ru_status warn_single(ru_circuit *c, const char *file)
{
    size_t nn = ru_circuit_node_count(c), np = ru_circuit_part_count(c);
    int *count = calloc(nn ? nn : 1, sizeof *count), *last = malloc((nn ? nn : 1) * sizeof *last);
    ru_status st = count && last ? RU_OK : RU_ENOMEM;
    for (size_t i = 0; count && last && i < nn; i++)
        last[i] = -1;
    for (size_t i = 0; st == RU_OK && i < np; i++) {
        ru_terminal t[8];
        int k = ru_part_terminals(ru_circuit_part(c, i), t, 8);
        for (int j = 0; j < k && j < 8; j++) {
            int nd = t[j].node;
            if (nd > 0 && (size_t)nd < nn && last[nd] != (int)i) {
                count[nd]++;
                last[nd] = (int)i;
            }
        }
    }
    int floating = -1; /* already warned about (warn_floating) */
    ru_circuit_find_floating_node(c, &floating);
    for (size_t nd = 1; st == RU_OK && nd < nn; nd++) {
        if (count[nd] != 1 || (int)nd == floating)
            continue;
        int line, col;
        ru_circuit_node_place(c, (int)nd, &line, &col);
        const char *name = ru_circuit_node_name(c, (int)nd);
        char text[RU_ERROR_TEXT + RU_ERROR_FILE], dym[RU_NAME_MAX + 24];
        snprintf(text, sizeof text,
                 "%s:%d:%d: warning: node %s connects to one part only (%s): no current "
                 "can flow through it; a misspelt node name?%s",
                 file, line, col, name, ru_circuit_part(c, (size_t)last[nd])->name,
                 ru_circuit_suggest_node(c, name, dym, sizeof dym));
        st = ru_circuit_add_warning(c, text);
    }
    free(count);
    free(last);
    return st;
}

/* One stray value (F, >= 0) of pair p into *f. */
static ru_status stray_value(const ld_doc *d, const ru_ypair *p, const char *who,
                             ru_error *err, double *f)
{
    ru_status s = ru_ld_value(d, p, who, "F", err, f);
    if (s == RU_OK && !(*f >= 0))
        s = ru_ld_fail(d, ru_ld_val(p), err, "%s%skey %s must be 0 or more (got %g)",
                       who, ru_ld_sep(who), ru_ld_key(p), *f);
    return s;
}

/* `stray: VALUE` or `stray: {default: VALUE, nodes: {NODE: VALUE, ...}}`: the
 * default here (before the parts); the nodes' own values in read_stray_nodes. */
static ru_status read_stray_default(const ld_doc *d, ru_circuit *c, const ru_ypair *sp,
                                    ru_error *err)
{
    static const char *const keys[] = {"default", "nodes", NULL};
    const ru_ynode *v = ru_ld_val(sp);
    double f;
    if (!v || v->type != RU_YAML_MAPPING) {
        ru_status s = stray_value(d, sp, "", err, &f);
        return s == RU_OK ? ru_circuit_set_stray_f(c, f) : s;
    }
    ru_status s = ru_ld_only_keys(d, v, "stray", keys, err);
    const ru_ypair *p = ru_ld_find(v, "default");
    if (s == RU_OK && p && (s = stray_value(d, p, "stray", err, &f)) == RU_OK)
        s = ru_circuit_set_stray_f(c, f);
    return s;
}

static ru_status read_stray_nodes(const ld_doc *d, ru_circuit *c, const ru_ypair *sp,
                                  ru_error *err)
{
    const ru_ynode *v = ru_ld_val(sp), *nodes;
    const ru_ypair *np = v && v->type == RU_YAML_MAPPING ? ru_ld_find(v, "nodes") : NULL;
    if (!np)
        return RU_OK;
    ru_status s = ru_ld_need_mapping(d, np, "stray", err, &nodes);
    for (size_t i = 0; s == RU_OK && i < nodes->n; i++) {
        const ru_ypair *p = &nodes->pairs[i];
        const char *name = ru_ld_key(p);
        int k = ru_circuit_find_node(c, name);
        double f;
        char dym[RU_NAME_MAX + 24];
        if (k < 0)
            return ru_ld_fail(d, p->key, err, "stray: nodes: node %s does not exist%s", name,
                              ru_circuit_suggest_node(c, name, dym, sizeof dym));
        if (k == 0)
            return ru_ld_fail(d, p->key, err,
                              "stray: nodes: ground has no stray capacitance");
        if ((s = stray_value(d, p, "stray: nodes", err, &f)) == RU_OK)
            s = ru_circuit_set_node_stray_f(c, k, f);
    }
    return s;
}

static ru_status read_top(ld_doc *d, const char *models_dir, ru_circuit **out,
                          ru_error *err)
{
    static const char *const keys[] = {"title", "stray", "temp", "parts", "run", "measure",
                                       "corners", NULL};
    ru_status s = ru_ld_only_keys(d, d->root, "", keys, err);
    const char *title = "";
    const ru_ypair *p = ru_ld_find(d->root, "title");
    if (s == RU_OK && p)
        s = ru_ld_scalar(d, p, "", err, &title);
    if (s == RU_OK && strlen(title) > RU_TITLE_MAX)
        s = ru_ld_fail(d, ru_ld_val(p), err, "key title is %zu bytes long, more than the %d "
                       "a title may have", strlen(title), RU_TITLE_MAX);
    ru_circuit *c = NULL;
    if (s == RU_OK && (s = ru_circuit_create(title, &c)) != RU_OK)
        ru_error_set(err, s, d->file, 0, 0, "out of memory creating the circuit");
    if (s == RU_OK)
        ru_circuit_set_file(c, d->file);
    const ru_ypair *sp = ru_ld_find(d->root, "stray");
    if (s == RU_OK && sp)
        s = read_stray_default(d, c, sp, err);
    if (s == RU_OK && (p = ru_ld_find(d->root, "parts")) == NULL)
        s = ru_ld_fail(d, d->root, err, "missing required key parts");
    ld_ctx ctx = {d, c, models_dir, err};
    if (s == RU_OK)
        s = ru_ld_parts(&ctx, p);
    if (s == RU_OK && sp)
        s = read_stray_nodes(d, c, sp, err);
    const ru_ypair *tp = ru_ld_find(d->root, "temp");
    double temp_c = RU_TEMP_REF_C;
    if (s == RU_OK && tp && (s = ru_ld_value(d, tp, "", "C", err, &temp_c)) == RU_OK &&
        ru_circuit_set_temp(c, temp_c, err) != RU_OK) { /* placed at the value */
        char why[RU_ERROR_TEXT];
        snprintf(why, sizeof why, "%s", err->msg);
        s = ru_ld_fail(d, ru_ld_val(tp), err, "key temp: %s", why);
    }
    if (s == RU_OK && ((s = warn_floating(c, d->file)) != RU_OK ||
                       (s = warn_single(c, d->file)) != RU_OK))
        ru_error_set(err, s, d->file, 0, 0, "out of memory adding a warning");
    if (s == RU_OK && (p = ru_ld_find(d->root, "run")) != NULL)
        s = ru_ld_run(d, c, p, err);
    if (s == RU_OK && (p = ru_ld_find(d->root, "measure")) != NULL)
        s = ru_ld_measure(d, c, p, err);
    if (s == RU_OK && (p = ru_ld_find(d->root, "corners")) != NULL)
        s = ru_ld_corners(d, c, p, err);
    if (s != RU_OK) {
        ru_circuit_destroy(c);
        c = NULL;
    }
    *out = c;
    return s;
}

/* Loads text (len bytes) named name; the common path of both constructors. */
static ru_status load_text(const char *text, size_t len, const char *name,
                           const char *models_dir, ru_circuit **out, ru_error *err)
{
    if (!models_dir)
        models_dir = ru_loader_default_models_dir();
    ld_doc d;
    ru_status s = ru_ld_open(&d, text, len, name, err);
    if (s == RU_OK)
        s = read_top(&d, models_dir, out, err);
    ru_ld_close(&d);
    return s;
}

ru_status ru_circuit_load_string(const char *text, const char *name,
                                 const char *models_dir, ru_circuit **out,
                                 ru_error *err)
{
    *out = NULL;
    ru_error_clear(err);
    if (!name)
        name = "<string>";
    if (!text)
        return ru_error_set(err, RU_EINPUT, name, 0, 0, "no text to load");
    return load_text(text, strlen(text), name, models_dir, out, err);
}

ru_status ru_circuit_load_buffer(const char *text, size_t len, const char *name,
                                 const char *models_dir, ru_circuit **out,
                                 ru_error *err)
{
    *out = NULL;
    ru_error_clear(err);
    if (!name)
        name = "<buffer>";
    if (!text && len)
        return ru_error_set(err, RU_EINPUT, name, 0, 0, "no text to load");
    return load_text(text ? text : "", len, name, models_dir, out, err);
}

ru_status ru_circuit_load(const char *path, const char *models_dir, ru_circuit **out,
                          ru_error *err)
{
    *out = NULL;
    ru_error_clear(err);
    char *text;
    size_t len;
    ru_status s = ru_ld_read_file(path, &text, &len, err);
    if (s == RU_OK)
        s = load_text(text, len, path, models_dir, out, err);
    free(text);
    return s;
}

/* ---- presets for batch runs and listings ------------------------------------ */

ru_status ru_circuit_apply_model(ru_circuit *c, const char *part, const char *model,
                                 const char *models_dir, ru_error *err)
{
    ru_error_clear(err);
    const char *file = ru_circuit_file(c);
    int k = part ? ru_circuit_find_part(c, part) : -1;
    if (k < 0)
        return ru_error_set(err, RU_EINPUT, file, 0, 0, "no part %s to give model %s",
                            part ? part : "(none)", model ? model : "(none)");
    ru_part np = *ru_circuit_part(c, (size_t)k);
    const ru_part_desc *d = ru_part_desc_get(np.type);
    if (!d || !d->presets) {
        char list[160] = ""; /* the types that take one */
        size_t len = 0;
        for (int t = 0, k = 0; t < RU_PART_TYPE_COUNT && len < sizeof list; t++) {
            const ru_part_desc *o = ru_part_desc_get((ru_part_type)t);
            if (o && o->presets)
                len += (size_t)snprintf(list + len, sizeof list - len, "%s%s", k++ ? ", " : "",
                                        o->name);
        }
        return ru_error_set(err, RU_EINPUT, file, np.line, np.col,
                            "part %s: a %s takes no model (only parts of type %s do)", part,
                            ru_part_type_name(np.type), list);
    }
    if (!model || !ru_ld_valid_preset_name(model))
        return ru_error_set(err, RU_EINPUT, file, np.line, np.col,
                            "part %s: '%s' is not a preset name (letters, digits, -, _ "
                            "and .)",
                            part, model ? model : "");
    int missing;
    char why[RU_ERROR_TEXT];
    ru_status s = ru_ld_preset_into(models_dir ? models_dir : ru_loader_default_models_dir(),
                                    model, &np, &missing, why, sizeof why, err);
    if (missing == 1)
        return ru_error_set(err, RU_EINPUT, file, np.line, np.col,
                            "part %s: no preset %s (%s)", part, model, why);
    if (missing == 2)
        return ru_error_set(err, RU_EINPUT, file, np.line, np.col, "part %s: %s", part,
                            why);
    if (s == RU_OK)
        s = ru_circuit_replace_part(c, (size_t)k, &np, err);
    return s;
}

static int name_cmp(const void *a, const void *b)
{
    return strcmp(((const ru_model_info *)a)->name, ((const ru_model_info *)b)->name);
}

/* Names of the *.yaml files of dir into a growing array (names only). */
static ru_status list_names(const char *dir, ru_model_info **out, size_t *n, ru_error *err)
{
    DIR *dp = opendir(dir);
    if (!dp)
        return ru_error_set(err, RU_EIO, dir, 0, 0, "cannot open the models folder: %s",
                            strerror(errno));
    size_t cap = 0;
    ru_status s = RU_OK;
    struct dirent *de;
    while (s == RU_OK && (de = readdir(dp)) != NULL) {
        size_t len = strlen(de->d_name);
        if (len <= 5 || strcmp(de->d_name + len - 5, ".yaml") != 0 ||
            len - 5 >= RU_NAME_MAX)
            continue;
        if (*n == cap) {
            cap = cap ? 2 * cap : 16;
            ru_model_info *m = realloc(*out, cap * sizeof *m);
            if (!m) {
                s = ru_error_set(err, RU_ENOMEM, dir, 0, 0, "out of memory listing presets");
                break;
            }
            *out = m;
        }
        memset(&(*out)[*n], 0, sizeof **out);
        snprintf((*out)[*n].name, RU_NAME_MAX, "%.*s", (int)(len - 5), de->d_name);
        (*n)++;
    }
    closedir(dp);
    return s;
}

/* Loads one preset file into its listing entry. */
static ru_status list_one(const char *dir, ru_model_info *info, ru_error *err)
{
    char path[RU_ERROR_FILE];
    snprintf(path, sizeof path, "%s/%s.yaml", dir, info->name);
    char *text = NULL;
    size_t len = 0;
    ru_status s = ru_ld_read_file(path, &text, &len, err);
    ld_doc pd;
    memset(&pd, 0, sizeof pd);
    if (s == RU_OK)
        s = ru_ld_open(&pd, text, len, path, err);
    char who[RU_NAME_MAX + 16];
    snprintf(who, sizeof who, "preset %s", info->name);
    ru_part part;
    ru_part_init(&part, RU_PART_AMPLIFIER, info->name);
    ru_part_type type;
    const char *kind;
    if (s == RU_OK)
        s = ru_ld_preset_values(&pd, who, &part, &type, &kind, info, err);
    ru_ld_close(&pd);
    free(text);
    return s;
}

ru_status ru_models_list(const char *models_dir, ru_model_info **out, size_t *n,
                         ru_error *err)
{
    *out = NULL;
    *n = 0;
    ru_error_clear(err);
    const char *dir = models_dir ? models_dir : ru_loader_default_models_dir();
    ru_model_info *list = NULL;
    size_t count = 0;
    ru_status s = list_names(dir, &list, &count, err);
    if (s == RU_OK && count > 1)
        qsort(list, count, sizeof *list, name_cmp);
    for (size_t i = 0; s == RU_OK && i < count; i++)
        s = list_one(dir, &list[i], err);
    if (s != RU_OK) {
        free(list);
        return s;
    }
    *out = list;
    *n = count;
    return RU_OK;
}

void ru_models_free(ru_model_info *models) { free(models); }
