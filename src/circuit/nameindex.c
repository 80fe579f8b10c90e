/* nameindex.c: hash index of the names in an array of records (nameindex.h):
 * FNV-1a over the name bytes, open addressing with linear probing, doubled when
 * half full. */
#include "circuit/nameindex.h"

#include <stdint.h>
#include <stdlib.h>
#include <string.h>

static size_t name_hash(const char *s)
{
    uint64_t h = 1469598103934665603ULL; /* FNV-1a (Fowler, Noll, Vo; from memory) */
    for (; *s; s++)
        h = (h ^ (unsigned char)*s) * 1099511628211ULL;
    return (size_t)(h ^ (h >> 32));
}

static const char *name_at(const void *base, size_t stride, size_t i)
{
    return (const char *)base + i * stride;
}

long ru_name_index_find(const ru_name_index *x, const void *base, size_t stride,
                        const char *name)
{
    if (!x->cap || !name)
        return -1;
    for (size_t at = name_hash(name) & (x->cap - 1); x->slot[at]; at = (at + 1) & (x->cap - 1))
        if (strcmp(name_at(base, stride, x->slot[at] - 1), name) == 0)
            return (long)(x->slot[at] - 1);
    return -1;
}

static void put(size_t *slot, size_t cap, const void *base, size_t stride, size_t i)
{
    size_t at = name_hash(name_at(base, stride, i)) & (cap - 1);
    while (slot[at])
        at = (at + 1) & (cap - 1);
    slot[at] = i + 1;
}

ru_status ru_name_index_add(ru_name_index *x, const void *base, size_t stride, size_t i)
{
    if (2 * (x->count + 1) > x->cap) {
        size_t cap = x->cap ? 2 * x->cap : 32;
        size_t *slot = calloc(cap, sizeof *slot);
        if (!slot)
            return RU_ENOMEM;
        for (size_t k = 0; k < x->cap; k++)
            if (x->slot[k])
                put(slot, cap, base, stride, x->slot[k] - 1);
        free(x->slot);
        x->slot = slot;
        x->cap = cap;
    }
    put(x->slot, x->cap, base, stride, i);
    x->count++;
    return RU_OK;
}

ru_status ru_name_index_rebuild(ru_name_index *x, const void *base, size_t stride,
                                size_t n)
{
    ru_name_index fresh = {NULL, 0, 0};
    for (size_t i = 0; i < n; i++)
        if (ru_name_index_add(&fresh, base, stride, i) != RU_OK) {
            ru_name_index_free(&fresh);
            return RU_ENOMEM;
        }
    ru_name_index_free(x);
    *x = fresh;
    return RU_OK;
}

void ru_name_index_free(ru_name_index *x)
{
    free(x->slot);
    x->slot = NULL;
    x->cap = x->count = 0;
}
