/* Sorting records whose order begins with a 64-bit head (a digest's first bytes, a key): one
 * counting pass on the head's leading bits, then each small bucket by the full comparator. */
#ifndef KILN_SORT_H
#define KILN_SORT_H

#include <stddef.h>

/* Sorts n records of size bytes into the order of cmp, which must be a total order (no two
 * records equal) that sorts first by the unsigned 64-bit value at byte offset off of each record:
 * the result is then exactly qsort's. Records are spread over up to 65 536 buckets by the head's
 * leading bits (relative to the smallest head), so a sort of 10^6 digests makes about 4 * 10^6
 * comparisons instead of qsort's 2 * 10^7. The records are moved in place; the
 * buckets' counts take up to 1 MiB. Falls back to qsort for short arrays, equal heads, or when
 * that memory cannot be had. */
void kiln_sort_by_head(void *base, size_t n, size_t size, size_t off,
                       int (*cmp)(const void *, const void *));

#endif
