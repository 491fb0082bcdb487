/* Bucket sort by a 64-bit head with a comparator for each bucket; see sort.h for the contract. */
#include "sort.h"

#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#define BUCKET_BITS 16
/* Below this many records the buckets' set-up costs more than qsort's extra comparisons. */
#define MIN_RECORDS 2048

static inline uint64_t head_at(const unsigned char *rec, size_t off)
{
    uint64_t h;
    memcpy(&h, rec + off, sizeof h);
    return h;
}

static inline size_t bucket_of(const unsigned char *rec, size_t off, uint64_t lo, int shift)
{
    return (size_t)((head_at(rec, off) - lo) >> shift);
}

static inline void swap_records(unsigned char *x, unsigned char *y, unsigned char *tmp, size_t size)
{
    memcpy(tmp, x, size);
    memcpy(x, y, size);
    memcpy(y, tmp, size);
}

void kiln_sort_by_head(void *base, size_t n, size_t size, size_t off,
                       int (*cmp)(const void *, const void *))
{
    unsigned char *b = base;
    if (n < MIN_RECORDS) {
        if (n > 1)
            qsort(base, n, size, cmp);
        return;
    }
    uint64_t lo = UINT64_MAX, hi = 0;
    for (size_t i = 0; i < n; i++) {
        const uint64_t h = head_at(b + i * size, off);
        lo = h < lo ? h : lo;
        hi = h > hi ? h : hi;
    }
    size_t *end = NULL, *next = NULL;
    unsigned char *tmp = NULL;
    /* The span hi - lo mapped onto at most 2^BUCKET_BITS buckets, keeping the head's order. */
    const int bits = lo < hi ? 64 - __builtin_clzll(hi - lo) : 0;
    const int shift = bits > BUCKET_BITS ? bits - BUCKET_BITS : 0;
    const size_t nb = lo < hi ? (size_t)((hi - lo) >> shift) + 1 : 0;
    if (lo == hi || !(end = calloc(nb + 1, sizeof *end)) ||
        !(next = malloc(nb * sizeof *next)) || !(tmp = malloc(size))) {
        free(end);
        free(next);
        qsort(base, n, size, cmp);
        return;
    }
    for (size_t i = 0; i < n; i++)
        end[bucket_of(b + i * size, off, lo, shift) + 1]++;
    for (size_t k = 1; k <= nb; k++)
        end[k] += end[k - 1];
    /* In place (no second copy of the records: a split of 10^6 units is near its memory
     * bound): a record not in its bucket is swapped to the next free place of its own. */
    memcpy(next, end, nb * sizeof *next);
    for (size_t k = 0; k < nb; k++)
        while (next[k] < end[k + 1]) {
            unsigned char *rec = b + next[k] * size;
            const size_t d = bucket_of(rec, off, lo, shift);
            if (d == k)
                next[k]++;
            else
                swap_records(rec, b + next[d]++ * size, tmp, size);
        }
    for (size_t k = 0; k < nb; k++)
        if (end[k + 1] - end[k] > 1)
            qsort(b + end[k] * size, end[k + 1] - end[k], size, cmp);
    free(end);
    free(next);
    free(tmp);
}
