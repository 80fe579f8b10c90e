/* replay.c: runs a fuzz target's LLVMFuzzerTestOneInput over stored inputs, so the
 * regression corpus (tests/fuzz/regress/), the malformed corpus, the examples and
 * the presets go through every target in every build (ctest fuzz_replay_*, also
 * under the sanitizers) without libFuzzer. Usage: replay FILE|DIR... ; prints the
 * number of inputs run; exits 1 when an input cannot be read (a crash is the
 * target's own). */
#define _POSIX_C_SOURCE 200809L
#include <dirent.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

static int run_file(const char *path, size_t *count)
{
    FILE *fp = fopen(path, "rb");
    if (!fp) {
        perror(path);
        return 1;
    }
    size_t cap = 1 << 16, n = 0;
    uint8_t *buf = malloc(cap);
    size_t got;
    while (buf && (got = fread(buf + n, 1, cap - n, fp)) > 0) {
        n += got;
        if (n == cap) {
            uint8_t *more = realloc(buf, cap * 2);
            if (!more) {
                free(buf);
                buf = NULL;
                break;
            }
            buf = more;
            cap *= 2;
        }
    }
    fclose(fp);
    if (!buf) {
        fprintf(stderr, "%s: out of memory\n", path);
        return 1;
    }
    LLVMFuzzerTestOneInput(buf, n);
    free(buf);
    (*count)++;
    return 0;
}

static int run_path(const char *path, size_t *count)
{
    struct stat sb;
    if (stat(path, &sb) != 0) {
        perror(path);
        return 1;
    }
    if (!S_ISDIR(sb.st_mode))
        return run_file(path, count);
    DIR *d = opendir(path);
    if (!d) {
        perror(path);
        return 1;
    }
    int bad = 0;
    struct dirent *e;
    while ((e = readdir(d))) {
        if (e->d_name[0] == '.')
            continue;
        char sub[4096];
        snprintf(sub, sizeof sub, "%s/%s", path, e->d_name);
        if (stat(sub, &sb) == 0 && S_ISREG(sb.st_mode))
            bad |= run_file(sub, count);
    }
    closedir(d);
    return bad;
}

int main(int argc, char **argv)
{
    size_t count = 0;
    int bad = 0;
    for (int i = 1; i < argc; i++)
        bad |= run_path(argv[i], &count);
    printf("%zu inputs run\n", count);
    return bad || count == 0;
}
