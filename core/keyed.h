/* Items keyed by a digest or a string, for the relations found by sorting (core/units.c,
 * core/audit.c): a digest's first 8 bytes, read as a big-endian integer, settle almost every
 * comparison of a sort of 10^6 items without a call to memcmp. */
#ifndef KILN_KEYED_H
#define KILN_KEYED_H

#include <stddef.h>
#include <stdint.h>
#include <string.h>

#include "catalog.h"
#include "sha256.h"

struct kiln_keyed {
    uint64_t head; /* a digest's first 8 bytes, big-endian; 0 for a string key */
    const void *key;
    uint32_t index;
};

static inline struct kiln_keyed kiln_keyed_digest(const uint8_t *digest, uint32_t index)
{
    uint64_t h = 0;
    for (int i = 0; i < 8; i++)
        h = h << 8 | digest[i];
    return (struct kiln_keyed){h, digest, index};
}

static inline struct kiln_keyed kiln_keyed_string(const char *s, uint32_t index)
{
    return (struct kiln_keyed){0, s, index};
}

/* Orders by key (n bytes of digest, or the string when n is 0), then by item index. */
static inline int kiln_keyed_order(const struct kiln_keyed *x, const struct kiln_keyed *y, size_t n)
{
    if (x->head != y->head)
        return x->head < y->head ? -1 : 1;
    int c = n ? memcmp(x->key, y->key, n) : strcmp(x->key, y->key);
    return c ? c : (x->index > y->index) - (x->index < y->index);
}

/* qsort comparators (qsort has no context argument) for SHA-256 digests, record digests and
 * strings. */
static inline int kiln_keyed_cmp_sha256(const void *a, const void *b)
{
    return kiln_keyed_order(a, b, KILN_SHA256_LEN);
}

static inline int kiln_keyed_cmp_record(const void *a, const void *b)
{
    return kiln_keyed_order(a, b, KILN_RECORD_DIGEST_LEN);
}

static inline int kiln_keyed_cmp_string(const void *a, const void *b)
{
    return kiln_keyed_order(a, b, 0);
}

/* Whether two entries have equal keys. */
static inline int kiln_keyed_same(const struct kiln_keyed *x, const struct kiln_keyed *y, size_t n)
{
    return x->head == y->head && (n ? memcmp(x->key, y->key, n) : strcmp(x->key, y->key)) == 0;
}

#endif
