/* nameindex.h: a hash index of names stored in an array of records (private to
 * the circuit layer): node names and part names of ru_circuit, so a lookup costs
 * O(1) and building a circuit of n parts O(n). The index holds record numbers;
 * the names stay in the records (base points at the first record's name, the
 * records lie `stride` bytes apart), so the array may move (realloc) as long as
 * base is passed anew at each call.
 *
 * Invariants: cap is 0 or a power of two at least twice the entries; slot holds
 * record number + 1, 0 when free (open addressing, linear probing). */
#ifndef RU_NAMEINDEX_H
#define RU_NAMEINDEX_H

#include "ringup/status.h"

#include <stddef.h>

typedef struct ru_name_index {
    size_t *slot;  /* cap slots: record number + 1, or 0 */
    size_t cap;    /* slots (a power of two), 0 before the first add */
    size_t count;  /* records indexed */
} ru_name_index;

/* The record number of name among records (base, stride), or -1. */
long ru_name_index_find(const ru_name_index *x, const void *base, size_t stride,
                        const char *name);

/* Indexes record i (its name must not be indexed yet); RU_ENOMEM when the table
 * cannot grow (the index is then unchanged). */
ru_status ru_name_index_add(ru_name_index *x, const void *base, size_t stride, size_t i);

/* Rebuilds the index over records 0..n-1 (after a rename or a copy). */
ru_status ru_name_index_rebuild(ru_name_index *x, const void *base, size_t stride,
                                size_t n);

void ru_name_index_free(ru_name_index *x);

#endif
