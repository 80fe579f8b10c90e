/* common.c: option parsing, loading and error printing shared by the commands. */
#include "cli/cli.h"

#include "ringup/batch.h"
#include "ringup/format.h"
#include "ringup/loader.h"

#include <errno.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

static void print_help(const char *usage_line, const char *about, const cli_opt *opts)
{
    printf("usage: %s\n\n%s\n\noptions:\n", usage_line, about);
    for (const cli_opt *o = opts; o->name; o++) {
        char left[64];
        snprintf(left, sizeof left, "--%s%s%s", o->name, o->arg ? " " : "",
                 o->arg ? o->arg : "");
        printf("  %-28s %s\n", left, o->help);
    }
    printf("  %-28s %s\n", "--help", "show this help");
}

static cli_opt *find_opt(cli_opt *opts, const char *name, size_t len)
{
    for (cli_opt *o = opts; o->name; o++)
        if (strlen(o->name) == len && !strncmp(o->name, name, len))
            return o;
    return NULL;
}

static int parse_args(int argc, char **argv, const char *usage_line, const char *about,
                      cli_opt *opts, const char **file, int need_file);

int cli_parse(int argc, char **argv, const char *usage_line, const char *about,
              cli_opt *opts, const char **file)
{
    return parse_args(argc, argv, usage_line, about, opts, file, 1);
}

int cli_parse_nofile(int argc, char **argv, const char *usage_line, const char *about,
                     cli_opt *opts, const char **file)
{
    return parse_args(argc, argv, usage_line, about, opts, file, 0);
}

static int parse_args(int argc, char **argv, const char *usage_line, const char *about,
                      cli_opt *opts, const char **file, int need_file)
{
    *file = NULL;
    for (int i = 1; i < argc; i++) {
        const char *a = argv[i];
        if (!strcmp(a, "--help") || !strcmp(a, "-h")) {
            print_help(usage_line, about, opts);
            return 0;
        }
        if (strncmp(a, "--", 2) != 0) {
            if (!need_file) {
                fprintf(stderr, "ringup %s: unexpected argument '%s'\n", argv[0], a);
                return 1;
            }
            if (*file) {
                fprintf(stderr, "ringup %s: more than one file given ('%s' and '%s')\n",
                        argv[0], *file, a);
                return 1;
            }
            *file = a;
            continue;
        }
        const char *eq = strchr(a + 2, '=');
        size_t len = eq ? (size_t)(eq - (a + 2)) : strlen(a + 2);
        cli_opt *o = find_opt(opts, a + 2, len);
        if (!o) {
            fprintf(stderr, "ringup %s: unknown option '%s' (see ringup %s --help)\n",
                    argv[0], a, argv[0]);
            return 1;
        }
        if (!o->arg) {
            if (eq) {
                fprintf(stderr, "ringup %s: option --%s takes no value\n", argv[0], o->name);
                return 1;
            }
            o->value = "1";
        } else if (eq) {
            o->value = eq + 1;
        } else if (i + 1 < argc) {
            o->value = argv[++i];
        } else {
            fprintf(stderr, "ringup %s: option --%s needs a value (%s)\n", argv[0],
                    o->name, o->arg);
            return 1;
        }
    }
    if (!*file && need_file) {
        fprintf(stderr, "ringup %s: no circuit file given (usage: %s)\n", argv[0],
                usage_line);
        return 1;
    }
    return -1;
}

const char *cli_get(const cli_opt *opts, const char *name)
{
    for (const cli_opt *o = opts; o->name; o++)
        if (!strcmp(o->name, name))
            return o->value;
    return NULL;
}

int cli_value(const cli_opt *opts, const char *name, const char *unit, double *out)
{
    const char *v = cli_get(opts, name);
    char why[128];
    if (!v)
        return 1;
    if (ru_value_parse(v, unit, out, why, sizeof why) != RU_OK) {
        fprintf(stderr, "ringup: option --%s: '%s' is not a valid value: %s\n", name, v,
                why);
        return 0;
    }
    return 1;
}

/* A range's end as "1 mHz" (SI prefix, no trailing zeros) or "1e+06" without a unit. */
static const char *bound_text(double v, const char *unit, char *buf, size_t size)
{
    if (!unit || !unit[0]) {
        snprintf(buf, size, "%g", v);
        return buf;
    }
    ru_format_si(v, unit, 4, buf, size);
    char *dot = strchr(buf, '.');
    if (dot) {
        char *end = dot + strspn(dot + 1, "0123456789") + 1; /* after the digits */
        char *z = end;
        while (z > dot + 1 && z[-1] == '0')
            z--;
        if (z == dot + 1)
            z = dot;
        memmove(z, end, strlen(end) + 1);
    }
    return buf;
}

int cli_range(const cli_opt *opts, const char *name, const char *unit, double lo,
              double hi, double *out)
{
    double v;
    if (!cli_value(opts, name, unit, &v))
        return 0;
    const char *text = cli_get(opts, name);
    if (!text)
        return 1;
    if (!(v >= lo && v <= hi)) {
        char a[32], b[32];
        fprintf(stderr, "ringup: option --%s: '%s' is outside %s to %s\n", name, text,
                bound_text(lo, unit, a, sizeof a), bound_text(hi, unit, b, sizeof b));
        return 0;
    }
    *out = v;
    return 1;
}

int cli_int(const cli_opt *opts, const char *name, unsigned long long lo,
            unsigned long long hi, unsigned long long *out)
{
    const char *v = cli_get(opts, name);
    if (!v)
        return 1;
    int ok = v[0] != '\0' && strlen(v) <= 20;
    for (const char *q = v; ok && *q; q++)
        ok = *q >= '0' && *q <= '9';
    errno = 0;
    unsigned long long n = ok ? strtoull(v, NULL, 10) : 0;
    if (!ok || errno == ERANGE || n < lo || n > hi) {
        fprintf(stderr, "ringup: option --%s: '%s' is not a whole number from %llu to %llu\n",
                name, v, lo, hi);
        return 0;
    }
    *out = n;
    return 1;
}

int cli_fail(const ru_error *err)
{
    char buf[RU_ERROR_TEXT + RU_ERROR_FILE + 64];
    ru_error_format(err, buf, sizeof buf);
    fprintf(stderr, "%s\n", buf);
    return ru_status_exit_code(err->code);
}

int cli_load(const char *file, int quiet, ru_circuit **out)
{
    ru_error err;
    ru_error_clear(&err);
    ru_status st = ru_circuit_load(file, NULL, out, &err);
    if (st != RU_OK) {
        if (!err.code)
            err.code = st;
        return cli_fail(&err);
    }
    if (!quiet)
        for (size_t i = 0; i < ru_circuit_warning_count(*out); i++)
            fprintf(stderr, "%s\n", ru_circuit_warning(*out, i));
    return 0;
}

int cli_make_dir(const char *dir)
{
    char path[4096];
    snprintf(path, sizeof path, "%s", dir);
    for (char *p = path + 1; *p; p++) {
        if (*p != '/')
            continue;
        *p = '\0';
        if (mkdir(path, 0777) != 0 && errno != EEXIST)
            goto fail;
        *p = '/';
    }
    if (mkdir(path, 0777) != 0 && errno != EEXIST)
        goto fail;
    struct stat sb;
    if (stat(path, &sb) != 0 || !S_ISDIR(sb.st_mode)) {
        errno = ENOTDIR;
        goto fail;
    }
    return 0;
fail:
    fprintf(stderr, "%s: cannot create output folder: %s\n", dir, strerror(errno));
    return 3;
}

int cli_stop(const cli_opt *opts, ru_run_request *rq)
{
    const char *v = cli_get(opts, "stop");
    if (v && !strcmp(v, "auto")) {
        rq->stop_auto = 1;
        return 1;
    }
    return cli_positive(opts, "stop", "s", &rq->stop_s);
}

int cli_temp(const cli_opt *opts, ru_circuit *c)
{
    double t = 0;
    if (!cli_get(opts, "temp"))
        return 0;
    if (!cli_value(opts, "temp", "C", &t))
        return 1;
    ru_error err;
    ru_error_clear(&err);
    if (ru_circuit_set_temp(c, t, &err) != RU_OK) {
        fprintf(stderr, "ringup: --temp: %s\n", err.msg);
        return 1;
    }
    return 0;
}

int cli_accuracy(const cli_opt *opts, int *accuracy)
{
    static const char *const names[] = {"draft", "normal", "precise"};
    const char *acc = cli_get(opts, "accuracy");
    if (!acc)
        return 0;
    for (int i = 0; i < 3; i++)
        if (!strcmp(acc, names[i])) {
            *accuracy = i;
            return 0;
        }
    fprintf(stderr, "ringup: option --accuracy takes draft, normal or precise\n");
    return 1;
}

int cli_word3(const cli_opt *opts, const char *name, const char *const words[3], int *out)
{
    const char *w = cli_get(opts, name);
    for (int i = 0; w && i < 3; i++)
        if (!strcmp(w, words[i])) {
            *out = i;
            return 1;
        }
    if (w)
        fprintf(stderr, "ringup: option --%s takes %s, %s or %s (got '%s')\n", name, words[0],
                words[1], words[2], w);
    return !w;
}

int cli_positive(const cli_opt *opts, const char *name, const char *unit, double *out)
{
    if (!cli_value(opts, name, unit, out))
        return 0;
    if (cli_get(opts, name) && !(*out > 0)) {
        fprintf(stderr, "ringup: option --%s must be positive\n", name);
        return 0;
    }
    return 1;
}

int cli_variant_dir(const char *base, const char *name, char *buf, size_t size)
{
    char clean[RU_NAME_MAX * 2];
    size_t k = 0;
    for (const char *q = name; *q && k + 1 < sizeof clean; q++)
        clean[k++] = (*q == '/' || *q == ' ' || *q == '\\') ? '_' : *q;
    clean[k] = '\0';
    if ((size_t)snprintf(buf, size, "%s/%s", base, clean) >= size) {
        fprintf(stderr, "%s: output folder name too long\n", base);
        return 3;
    }
    return cli_make_dir(buf);
}
