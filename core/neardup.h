/* Near-duplicate search: every pair of hashes within a Hamming radius, found exactly (the same
 * pairs as an all-pairs comparison) with multi-index hashing (Norouzi, Punjani and Fleet, "Fast
 * Search in Hamming Space with Multi-Index Hashing", CVPR 2012). The candidate searches of
 * nearlink.c (docs/near-duplicates.md section 2) are built on kiln_neardup_search.
 *
 * Method. The nbits bits (64 for kiln_neardup_pairs) are cut into m contiguous substrings,
 * numbered t = 0..m-1 from the most significant bit. With nbits = q*m + e (0 <= e < m), substrings 0..e-1 have q + 1
 * bits and e..m-1 have q bits, so substring t starts at bit offset t*q + min(t, e) counted from
 * the most significant bit. Two hashes within distance radius differ in at most radius bits, so
 * by the pigeonhole principle they are within s = radius / m (rounded down) bits of each other on
 * at least one of the m substrings. One table at a time, the items are counting-sorted by the
 * value of substring t. With s = 0 (m = radius + 1, kiln_neardup_substrings's table) every
 * bucket of equal values is checked pair by pair with a popcount of the XOR; with s >= 1 (fewer,
 * longer substrings: "multi-index hashing" proper) each item is compared with the items of the
 * buckets whose values lie within s bits of its own. A pair is reported only by the first table
 * where its substrings are within s bits, so no memory is needed to remove duplicates. The
 * result is sorted by (i, j) and is the same whatever m is: m is chosen (choose_tables in
 * neardup.c) to make the estimated number of comparisons smallest, substrings of more than 20
 * bits being excluded for s >= 1 (the table of bucket offsets has 2^len entries).
 *
 * Cost. Sorting is O(m n) time. With s = 0 the checks are the sum over buckets of k(k-1)/2
 * comparisons, for uniformly random 64-bit hashes about n^2/2 * sum_t 2^-len_t: n^2/32 768 at
 * radius 3, n^2/158 at radius 6, n^2/10 at radius 10. With s >= 1 each item probes
 * sum_{k <= s} C(len, k) buckets of about n / 2^len items: at n = 10^6 and radius 6, four
 * 16-bit tables with s = 1 make about 1.3 * 10^9 comparisons where seven 9-bit tables make
 * 6.3 * 10^9. Either way the work grows with n^2 / 2^len and is near-linear only while buckets
 * stay small; clustered hashes (similar pictures) make some buckets large. A cluster of k
 * identical hashes yields k(k-1)/2 pairs: that output is inherent in listing every pair.
 * Memory is O(n) working space (about 24 bytes per participating item, 36 with substrings of
 * more than 16 bits) plus 4 * 2^len bytes of bucket offsets when s >= 1, plus the output, which
 * is 8 bytes a pair, grown by doubling, and for 4 096 pairs or more briefly doubled again by the
 * buffer of the final sort (if that buffer cannot be had, an in-place sort is used instead). */
#ifndef KILN_NEARDUP_H
#define KILN_NEARDUP_H

#include <stddef.h>
#include <stdint.h>

#include "err.h"
#include "units.h"

#define KILN_NEARDUP_MAX_RADIUS 16    /* so at most 17 substrings of at least 3 bits */

/* Appends to out every unordered pair (i, j), i < j < n, with Hamming distance
 * popcount(hash[i] ^ hash[j]) <= radius, as out->pair[k] = {i, j}. The appended pairs are
 * sorted by i, then j, and each appears once; pairs already in out are left as they were (not
 * re-sorted, not merged with the new ones). out may start as {0} (empty); its buffer is grown
 * with realloc, so it must be NULL or come from malloc (release it with kiln_pairs_free).
 * hash may be NULL when n is 0. The function only reads hash and keeps no reference to it.
 *
 * Errors: KILN_EINVAL when radius > KILN_NEARDUP_MAX_RADIUS, n > UINT32_MAX (indices are
 * uint32_t), or out (or hash with n > 0) is NULL; KILN_ENOMEM when working space or the output
 * cannot be allocated or its size overflows. On error out->n is restored to its value on entry
 * (out->pair and out->cap may have changed) and err, if not NULL, holds the message. */
int kiln_neardup_pairs(const uint64_t *hash, size_t n, unsigned radius, struct kiln_pairs *out,
                       struct kiln_err *err);

/* As kiln_neardup_pairs, but only items with use[i] != 0 take part (catalogue rows without a
 * hash, or unusable rows, pass use[i] = 0; their hash[i] is never read). Indices in
 * the output are still positions in hash (0..n-1), not ranks among used items. use == NULL
 * means every item takes part. Same errors. */
int kiln_neardup_pairs_masked(const uint64_t *hash, const uint8_t *use, size_t n,
                              unsigned radius, struct kiln_pairs *out, struct kiln_err *err);

/* The general search behind the functions above. hash[i] holds a hash of nbits bits (1 to 64)
 * in its most significant bits; the bits below are ignored. The substrings of the method are cut
 * from those nbits bits (kiln_neardup_substrings_bits). use as in kiln_neardup_pairs_masked. side
 * NULL: every pair within the radius; otherwise only pairs with side[i] != side[j] (a join of
 * two sets placed in one array, e.g. hashes against the hashes of rotated pictures). filter:
 * see the struct. Pairs are
 * (i, j), i < j, sorted, each once, appended to out as kiln_neardup_pairs does. Errors: those of
 * kiln_neardup_pairs_masked, and KILN_EINVAL when nbits is 0, above 64 or not above radius. */
struct kiln_neardup_query {
    const uint64_t *hash;
    const uint8_t *use;  /* NULL: every item takes part */
    const uint8_t *side; /* NULL: all pairs; else only pairs across sides */
    /* NULL, or a second 64-bit value per item: a pair is reported only if these also differ
     * in at most filter_radius bits (a coarse hash searched, a fine one confirming) */
    const uint64_t *filter;
    unsigned filter_radius;
    size_t n;
    unsigned nbits;  /* 1..64 */
    unsigned radius; /* 0..KILN_NEARDUP_MAX_RADIUS, below nbits */
};
int kiln_neardup_search(const struct kiln_neardup_query *q, struct kiln_pairs *out,
                        struct kiln_err *err);

/* The substring split for m = radius + 1 tables (see the comment at the top): fills start[t] (bit offset
 * from the most significant bit, 0..63) and len[t] (bits) for t = 0..m-1 and returns
 * m = radius + 1; returns 0 and writes nothing when radius > KILN_NEARDUP_MAX_RADIUS. Either
 * array may be NULL; otherwise it must hold KILN_NEARDUP_MAX_RADIUS + 1 entries. */
unsigned kiln_neardup_substrings(unsigned radius, unsigned *start, unsigned *len);
/* The same for hashes of nbits bits: m = radius + 1 substrings of nbits / m or nbits / m + 1
 * bits, the longer ones first, offsets counted from the most significant bit. Returns 0 when
 * radius > KILN_NEARDUP_MAX_RADIUS, nbits > 64 or radius + 1 > nbits. */
unsigned kiln_neardup_substrings_bits(unsigned radius, unsigned nbits, unsigned *start,
                                      unsigned *len);

/* Frees a pair list whose buffer came from malloc (as kiln_neardup_pairs leaves it) and resets
 * it to empty ({NULL, 0, 0}). p may be NULL. Do not call it on a list that points at caller
 * storage (such as a stack array). */
void kiln_pairs_free(struct kiln_pairs *p);

#endif
