/* Items keyed by a digest or a string, for the relations found by sorting (core/units.c,
 * core/audit.c): a key's first 8 bytes, read as a big-endian integer, settle almost every
 * comparison of a sort of 10^6 items without a call to memcmp, and are the head by which
 * kiln_sort_by_head spreads the items over buckets. */
#ifndef KILN_KEYED_H
#define KILN_KEYED_H

#include <stddef.h>
#include <stdint.h>
#include <string.h>

#include "catalog.h"
#include "sha256.h"
#include "sort.h"

struct kiln_keyed {
    uint64_t head; /* the key's first 8 bytes, big-endian (a short string padded with zeros) */
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

/* Padding with zeros keeps strcmp's order: a string that ends first is the smaller. */
static inline struct kiln_keyed kiln_keyed_string(const char *s, uint32_t index)
{
    uint64_t h = 0;
    int i = 0;
    for (; i < 8 && s[i]; i++)
        h = h << 8 | (unsigned char)s[i];
    return (struct kiln_keyed){i ? h << (8 * (8 - i)) : 0, s, index};
}

/* Orders by key (n bytes of digest, or the string when n is 0), then by item index. */
static inline int kiln_keyed_order(const struct kiln_keyed *x, const struct kiln_keyed *y, size_t n)
{
    if (x->head != y->head)
        return x->head < y->head ? -1 : 1;
    int c = n ? memcmp(x->key, y->key, n) : strcmp(x->key, y->key);
    return c ? c : (x->index > y->index) - (x->index < y->index);
}

/* Comparators (qsort has no context argument) for SHA-256 digests, record digests and
 * strings; total orders led by the head, as kiln_sort_by_head needs. */
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

/* Sorts entries with one of the comparators above. */
static inline void kiln_keyed_sort(struct kiln_keyed *buf, size_t n,
                                   int (*cmp)(const void *, const void *))
{
    kiln_sort_by_head(buf, n, sizeof *buf, offsetof(struct kiln_keyed, head), cmp);
}

/* Whether two entries have equal keys. */
static inline int kiln_keyed_same(const struct kiln_keyed *x, const struct kiln_keyed *y, size_t n)
{
    return x->head == y->head && (n ? memcmp(x->key, y->key, n) : strcmp(x->key, y->key)) == 0;
}

#endif
