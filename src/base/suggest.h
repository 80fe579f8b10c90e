/* suggest.h: "did you mean ...?" for a misspelt name (suggest.c). */
#ifndef RU_SUGGEST_H
#define RU_SUGGEST_H

#include <stddef.h>

/* The name of names[0..n) (NULL entries skipped) closest to word by the optimal
 * string alignment distance (insertions, deletions, substitutions and swaps of two
 * neighbours each cost 1; Damerau, Comm. ACM 7 (1964) 171), compared without case,
 * when it is close enough to be a slip of the keyboard: at most 1 edit for words of
 * up to 4 characters, 2 up to 8, 3 beyond. Ties go to the first. NULL when none. */
const char *ru_suggest(const char *word, const char *const *names, size_t n);

/* " (did you mean NAME?)" into buf when ru_suggest finds one, else ""; returns buf. */
const char *ru_suggest_text(const char *word, const char *const *names, size_t n,
                            char *buf, size_t size);

#endif
