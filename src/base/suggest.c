/* suggest.c: the closest known name to a misspelt one (see suggest.h). Names are
 * short (keys, part types, presets, nodes), so the O(len^2) distance per name is
 * cheap; words longer than SUGGEST_MAX characters are never matched. */
#include "base/suggest.h"

#include <ctype.h>
#include <stdio.h>
#include <string.h>

#define SUGGEST_MAX 64

static size_t osa_distance(const char *a, const char *b)
{
    size_t n = strlen(a), m = strlen(b);
    size_t d[SUGGEST_MAX + 1][SUGGEST_MAX + 1];
    for (size_t i = 0; i <= n; i++)
        d[i][0] = i;
    for (size_t j = 0; j <= m; j++)
        d[0][j] = j;
    for (size_t i = 1; i <= n; i++) {
        for (size_t j = 1; j <= m; j++) {
            int ca = tolower((unsigned char)a[i - 1]), cb = tolower((unsigned char)b[j - 1]);
            size_t best = d[i - 1][j - 1] + (ca != cb);
            if (d[i - 1][j] + 1 < best)
                best = d[i - 1][j] + 1;
            if (d[i][j - 1] + 1 < best)
                best = d[i][j - 1] + 1;
            if (i > 1 && j > 1 && ca == tolower((unsigned char)b[j - 2]) &&
                tolower((unsigned char)a[i - 2]) == cb && d[i - 2][j - 2] + 1 < best)
                best = d[i - 2][j - 2] + 1;
            d[i][j] = best;
        }
    }
    return d[n][m];
}

const char *ru_suggest(const char *word, const char *const *names, size_t n)
{
    size_t len = word ? strlen(word) : 0;
    if (len == 0 || len > SUGGEST_MAX)
        return NULL;
    size_t limit = len <= 4 ? 1 : len <= 8 ? 2 : 3, best = limit + 1;
    const char *pick = NULL;
    for (size_t i = 0; i < n; i++) {
        if (!names[i] || strlen(names[i]) > SUGGEST_MAX || !strcmp(names[i], word))
            continue;
        size_t d = osa_distance(word, names[i]);
        if (d < best) {
            best = d;
            pick = names[i];
        }
    }
    return pick;
}

const char *ru_suggest_text(const char *word, const char *const *names, size_t n,
                            char *buf, size_t size)
{
    const char *s = ru_suggest(word, names, n);
    if (s)
        snprintf(buf, size, " (did you mean %s?)", s);
    else if (size)
        buf[0] = '\0';
    return buf;
}
