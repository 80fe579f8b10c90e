/* models.c: `ringup models`: the presets in the models folder, with their law and
 * parameters. */
#include "cli/cli.h"

#include "ringup/format.h"
#include "ringup/json.h"
#include "ringup/loader.h"

#include <stdio.h>
#include <string.h>

static void print_text(const ru_model_info *m, size_t n, const char *dir)
{
    printf("%zu presets in %s\n\n", n, dir);
    for (size_t i = 0; i < n; i++) {
        printf("%-20s %s%s%s\n", m[i].name, m[i].law, m[i].kind[0] ? " / " : "", m[i].kind);
        if (m[i].description[0])
            printf("  %s\n", m[i].description);
        printf(" ");
        for (size_t k = 0; k < m[i].nparams; k++) {
            const ru_model_param *q = &m[i].params[k];
            char v[40];
            /* the input noise keys at 0 (none, every law has them) are left out of
               the text; the JSON lists them */
            if (q->value == 0.0 && (strstr(q->unit, "/rtHz") || !strcmp(q->name, "fc")))
                continue;
            if (q->unit[0] && strcmp(q->unit, "points") != 0 && strcmp(q->unit, "C") != 0)
                ru_format_si(q->value, q->unit, 4, v, sizeof v);
            else
                snprintf(v, sizeof v, "%g%s%s", q->value, q->unit[0] ? " " : "", q->unit);
            printf(" %s=%s", q->name, v);
        }
        printf("\n");
    }
}

static void print_json(const ru_model_info *m, size_t n)
{
    ru_json j;
    ru_json_init(&j, stdout, 1);
    ru_json_begin_array(&j, NULL);
    for (size_t i = 0; i < n; i++) {
        ru_json_begin_object(&j, NULL);
        ru_json_string(&j, "name", m[i].name);
        ru_json_string(&j, "law", m[i].law);
        if (m[i].kind[0])
            ru_json_string(&j, "kind", m[i].kind);
        ru_json_string(&j, "description", m[i].description);
        ru_json_begin_object(&j, "params");
        for (size_t k = 0; k < m[i].nparams; k++)
            ru_json_number(&j, m[i].params[k].name, m[i].params[k].value);
        ru_json_end_object(&j);
        ru_json_begin_object(&j, "units");
        for (size_t k = 0; k < m[i].nparams; k++)
            ru_json_string(&j, m[i].params[k].name, m[i].params[k].unit);
        ru_json_end_object(&j);
        ru_json_end_object(&j);
    }
    ru_json_end_array(&j);
    ru_json_finish(&j);
}

int cmd_models(int argc, char **argv)
{
    cli_opt opts[] = {{"dir", "DIR", "models folder (default: $RINGUP_MODELS or the build's)",
                       NULL},
                      {"json", NULL, "print JSON on stdout", NULL},
                      {NULL, NULL, NULL, NULL}};
    const char *file;
    int rc = cli_parse_nofile(argc, argv, "ringup models [--dir DIR] [--json]",
                              "Lists the amplifier and part presets a circuit file can "
                              "name with `model:`,\nwith their law and every parameter.",
                              opts, &file);
    if (rc >= 0)
        return rc;
    const char *dir = cli_get(opts, "dir");
    if (!dir)
        dir = ru_loader_default_models_dir();
    ru_model_info *m = NULL;
    size_t n = 0;
    ru_error err;
    ru_error_clear(&err);
    if (ru_models_list(dir, &m, &n, &err) != RU_OK)
        return cli_fail(&err);
    if (cli_get(opts, "json"))
        print_json(m, n);
    else
        print_text(m, n, dir);
    ru_models_free(m);
    return 0;
}
