/* Unit tests for core/neardup: the multi-index search must return exactly the pairs of an
 * all-pairs comparison. The brute force below is the outside reference: it applies the
 * definition of Hamming distance (the number of bit positions where two hashes differ) to every
 * pair, with no index, substrings or deduplication, so it shares nothing with the method under
 * test except that definition. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <stdbool.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "../../core/neardup.h"

/* splitmix64 (Steele, Lea and Flood 2014; constants from Vigna's reference code, from memory):
 * a fixed-seed generator so every run tests the same data. */
static uint64_t splitmix64(uint64_t *s)
{
    uint64_t z = (*s += UINT64_C(0x9e3779b97f4a7c15));
    z = (z ^ (z >> 30)) * UINT64_C(0xbf58476d1ce4e5b9);
    z = (z ^ (z >> 27)) * UINT64_C(0x94d049bb133111eb);
    return z ^ (z >> 31);
}

static unsigned below(uint64_t *s, unsigned n)
{
    return (unsigned)(splitmix64(s) % n);
}

/* The definition, bit position by bit position. */
static unsigned hamming_by_bits(uint64_t a, uint64_t b)
{
    unsigned d = 0;
    for (unsigned k = 0; k < 64; k++)
        d += ((a >> k) & 1) != ((b >> k) & 1);
    return d;
}

/* The same count, fast enough for 2*10^8 pairs; checked against the definition below. */
static unsigned hamming(uint64_t a, uint64_t b)
{
    return (unsigned)__builtin_popcountll(a ^ b);
}

/* Flips d distinct random bit positions (a partial Fisher-Yates shuffle of 0..63). */
static uint64_t flip_bits(uint64_t h, unsigned d, uint64_t *s)
{
    unsigned pos[64];
    for (unsigned k = 0; k < 64; k++)
        pos[k] = k;
    for (unsigned k = 0; k < d; k++) {
        unsigned j = k + below(s, 64 - k);
        unsigned tmp = pos[k];
        pos[k] = pos[j];
        pos[j] = tmp;
        h ^= UINT64_C(1) << pos[k];
    }
    return h;
}

/* Reference pairs with their distance, in (i, j) order as the loops produce them. */
struct ref_pair {
    uint32_t i, j;
    unsigned d;
};

struct ref {
    struct ref_pair *p;
    size_t n, cap;
};

/* Every pair i < j of used items with distance <= maxd. */
static void brute_force(const uint64_t *h, const uint8_t *use, size_t n, unsigned maxd,
                        struct ref *ref)
{
    ref->n = 0;
    for (size_t i = 0; i < n; i++) {
        if (use && !use[i])
            continue;
        for (size_t j = i + 1; j < n; j++) {
            if (use && !use[j])
                continue;
            unsigned d = hamming(h[i], h[j]);
            if (d > maxd)
                continue;
            if (ref->n == ref->cap) {
                ref->cap = ref->cap ? 2 * ref->cap : 1024;
                ref->p = realloc(ref->p, ref->cap * sizeof *ref->p);
                assert_non_null(ref->p);
            }
            ref->p[ref->n++] = (struct ref_pair){(uint32_t)i, (uint32_t)j, d};
        }
    }
}

/* Asserts that got->pair[from..] is exactly the reference pairs with d <= radius, in order. */
static void expect_pairs(const struct kiln_pairs *got, size_t from, const struct ref *ref,
                         unsigned radius)
{
    size_t k = from;
    for (size_t r = 0; r < ref->n; r++) {
        if (ref->p[r].d > radius)
            continue;
        if (k >= got->n)
            fail_msg("radius %u: missing pair (%u, %u) at distance %u", radius, ref->p[r].i,
                     ref->p[r].j, ref->p[r].d);
        if (got->pair[k][0] != ref->p[r].i || got->pair[k][1] != ref->p[r].j)
            fail_msg("radius %u: pair %zu is (%u, %u), expected (%u, %u) at distance %u", radius,
                     k - from, got->pair[k][0], got->pair[k][1], ref->p[r].i, ref->p[r].j,
                     ref->p[r].d);
        k++;
    }
    if (k != got->n)
        fail_msg("radius %u: %zu extra pairs, first (%u, %u)", radius, got->n - k,
                 got->pair[k][0], got->pair[k][1]);
}

static int cmp_pair_ref(const void *a, const void *b)
{
    const uint32_t *x = a, *y = b;
    return x[0] != y[0] ? (x[0] > y[0]) - (x[0] < y[0]) : (x[1] > y[1]) - (x[1] < y[1]);
}

/* Runs the search at radius and compares it with a fresh brute force over the same items. */
static void check_against_brute(const uint64_t *h, const uint8_t *use, size_t n, unsigned radius)
{
    struct ref ref = {0};
    brute_force(h, use, n, radius, &ref);
    struct kiln_pairs got = {0};
    struct kiln_err err = {0};
    assert_int_equal(kiln_neardup_pairs_masked(h, use, n, radius, &got, &err), KILN_OK);
    expect_pairs(&got, 0, &ref, radius);
    kiln_pairs_free(&got);
    free(ref.p);
}

static void test_reference_distance(void **state)
{
    (void)state;
    uint64_t s = 1;
    for (int k = 0; k < 10000; k++) {
        uint64_t a = splitmix64(&s), b = k % 2 ? flip_bits(a, below(&s, 65), &s) : splitmix64(&s);
        assert_int_equal(hamming(a, b), hamming_by_bits(a, b));
    }
}

/* The documented split: m = r + 1 contiguous substrings from the most significant bit, the
 * 64 mod m longer ones (one extra bit) first. */
static void test_substrings(void **state)
{
    (void)state;
    unsigned start[KILN_NEARDUP_MAX_RADIUS + 1], len[KILN_NEARDUP_MAX_RADIUS + 1];
    for (unsigned r = 0; r <= KILN_NEARDUP_MAX_RADIUS; r++) {
        unsigned m = kiln_neardup_substrings(r, start, len);
        assert_int_equal(m, r + 1);
        unsigned next = 0;
        for (unsigned t = 0; t < m; t++) {
            assert_int_equal(start[t], next);
            assert_true(len[t] == 64 / m || len[t] == 64 / m + 1);
            if (t > 0)
                assert_true(len[t] <= len[t - 1]);
            next += len[t];
        }
        assert_int_equal(next, 64);
    }
    static const unsigned len6[] = {10, 9, 9, 9, 9, 9, 9}, start6[] = {0, 10, 19, 28, 37, 46, 55};
    assert_int_equal(kiln_neardup_substrings(6, start, len), 7);
    assert_memory_equal(len, len6, sizeof len6);
    assert_memory_equal(start, start6, sizeof start6);
    assert_int_equal(kiln_neardup_substrings(0, start, len), 1);
    assert_int_equal(len[0], 64);
    assert_int_equal(kiln_neardup_substrings(16, NULL, len), 17);
    assert_int_equal(len[12], 4); /* 64 = 13 * 4 + 4 * 3 */
    assert_int_equal(len[13], 3);
    assert_int_equal(kiln_neardup_substrings(17, start, len), 0);
}

#define NRANDOM 20000

/* 20 000 hashes: uniform random, with planted material scattered over random positions:
 * - 360 pairs at each distance 0..17 in turn (so every tested radius r has pairs at exactly r,
 *   which must be found, and at r + 1, which must not);
 * - 60 clusters of 2..12 hashes, each a random number (0..8) of bits from a centre, so
 *   members are at distances up to 16 from each other and chains form;
 * - 30 copies of one hash (435 pairs at distance 0). */
static uint64_t *planted_set(size_t n, uint64_t seed)
{
    uint64_t s = seed;
    uint64_t *h = malloc(n * sizeof *h);
    size_t *slot = malloc(n * sizeof *slot);
    assert_non_null(h);
    assert_non_null(slot);
    for (size_t i = 0; i < n; i++) {
        h[i] = splitmix64(&s);
        slot[i] = i;
    }
    for (size_t i = n - 1; i > 0; i--) {
        size_t j = (size_t)(splitmix64(&s) % (i + 1));
        size_t tmp = slot[i];
        slot[i] = slot[j];
        slot[j] = tmp;
    }
    size_t k = 0;
    for (unsigned p = 0; p < 360; p++) {
        uint64_t base = splitmix64(&s);
        h[slot[k++]] = base;
        h[slot[k++]] = flip_bits(base, p % 18, &s);
    }
    for (unsigned c = 0; c < 60; c++) {
        uint64_t centre = splitmix64(&s);
        unsigned size = 2 + below(&s, 11);
        for (unsigned j = 0; j < size; j++)
            h[slot[k++]] = flip_bits(centre, below(&s, 9), &s);
    }
    uint64_t same = splitmix64(&s);
    for (unsigned j = 0; j < 30; j++)
        h[slot[k++]] = same;
    assert_true(k <= n);
    free(slot);
    return h;
}

static void test_random_planted(void **state)
{
    (void)state;
    uint64_t *h = planted_set(NRANDOM, 20240607);
    struct ref ref = {0};
    brute_force(h, NULL, NRANDOM, KILN_NEARDUP_MAX_RADIUS + 1, &ref);
    static const unsigned radii[] = {0, 1, 3, 6, 10, 16};
    for (size_t k = 0; k < sizeof radii / sizeof *radii; k++) {
        unsigned r = radii[k];
        /* The data must make the comparison meaningful: pairs at exactly r and r + 1. */
        size_t at_r = 0, past_r = 0;
        for (size_t i = 0; i < ref.n; i++) {
            at_r += ref.p[i].d == r;
            past_r += ref.p[i].d == r + 1;
        }
        assert_true(at_r >= 20);
        assert_true(past_r >= 20);
        struct kiln_pairs got = {0};
        struct kiln_err err = {0};
        assert_int_equal(kiln_neardup_pairs(h, NRANDOM, r, &got, &err), KILN_OK);
        expect_pairs(&got, 0, &ref, r);
        kiln_pairs_free(&got);
    }
    free(ref.p);
    free(h);
}

/* Items left out by the mask are ignored, whatever their hash holds (here: copies of used
 * hashes, which would otherwise pair), and indices stay positions in the full array. */
static void test_mask(void **state)
{
    (void)state;
    uint64_t *h = planted_set(NRANDOM, 77);
    uint8_t *use = malloc(NRANDOM);
    assert_non_null(use);
    for (size_t i = 0; i < NRANDOM; i++) {
        use[i] = i % 7 != 3;
        if (!use[i])
            h[i] = h[i - 1];
    }
    check_against_brute(h, use, NRANDOM, 6);
    check_against_brute(h, use, NRANDOM, 0);
    memset(use, 0, NRANDOM);
    use[100] = 1;
    check_against_brute(h, use, NRANDOM, 6); /* one used item: no pairs */
    free(use);
    free(h);
}

static void test_small_n(void **state)
{
    (void)state;
    struct kiln_pairs got = {0};
    struct kiln_err err = {0};
    assert_int_equal(kiln_neardup_pairs(NULL, 0, 6, &got, &err), KILN_OK);
    assert_int_equal(got.n, 0);
    uint64_t one = 42;
    assert_int_equal(kiln_neardup_pairs(&one, 1, 16, &got, &err), KILN_OK);
    assert_int_equal(got.n, 0);
    uint64_t two[2] = {0, 1};
    assert_int_equal(kiln_neardup_pairs(two, 2, 0, &got, &err), KILN_OK);
    assert_int_equal(got.n, 0);
    assert_int_equal(kiln_neardup_pairs(two, 2, 1, &got, &err), KILN_OK);
    assert_int_equal(got.n, 1);
    assert_int_equal(got.pair[0][0], 0);
    assert_int_equal(got.pair[0][1], 1);
    kiln_pairs_free(&got);
    assert_null(got.pair);
    assert_int_equal(got.cap, 0);
    kiln_pairs_free(&got); /* freeing an empty list is harmless */
    kiln_pairs_free(NULL);
}

/* k identical hashes give all k(k-1)/2 pairs at every radius, each once, in (i, j) order. */
static void test_all_identical(void **state)
{
    (void)state;
    enum { K = 40 };
    uint64_t h[K];
    for (int i = 0; i < K; i++)
        h[i] = UINT64_C(0xfedcba9876543210);
    for (unsigned r = 0; r <= KILN_NEARDUP_MAX_RADIUS; r++) {
        struct kiln_pairs got = {0};
        struct kiln_err err = {0};
        assert_int_equal(kiln_neardup_pairs(h, K, r, &got, &err), KILN_OK);
        assert_int_equal(got.n, K * (K - 1) / 2);
        size_t k = 0;
        for (uint32_t i = 0; i < K; i++)
            for (uint32_t j = i + 1; j < K; j++, k++) {
                assert_int_equal(got.pair[k][0], i);
                assert_int_equal(got.pair[k][1], j);
            }
        kiln_pairs_free(&got);
    }
}

/* Hashes shorter than 64 bits: the bits below them are ignored (here filled with noise that
 * would otherwise change every distance), the substrings are cut from the nbits bits, and the
 * result is the brute force over the masked values. With side, only pairs across the two sides
 * are reported, which the brute force filters the same way. */
static void test_bits_and_sides(void **state)
{
    (void)state;
    enum { N = 6000 };
    uint64_t *h = planted_set(N, 515), *masked = malloc(N * sizeof *masked), s = 9;
    uint8_t *side = malloc(N);
    assert_non_null(masked);
    assert_non_null(side);
    static const unsigned bits[] = {63, 35, 20};
    for (size_t b = 0; b < sizeof bits / sizeof *bits; b++) {
        const unsigned nb = bits[b];
        const uint64_t top = ~(UINT64_MAX >> nb);
        for (size_t i = 0; i < N; i++) {
            masked[i] = h[i] & top;
            side[i] = (uint8_t)below(&s, 2);
        }
        uint64_t *noisy = malloc(N * sizeof *noisy);
        assert_non_null(noisy);
        for (size_t i = 0; i < N; i++)
            noisy[i] = masked[i] | (splitmix64(&s) & ~top);
        for (unsigned r = 0; r <= 6 && r < nb; r += 3) {
            struct ref ref = {0};
            brute_force(masked, NULL, N, r, &ref);
            for (int two = 0; two <= 1; two++) {
                struct kiln_pairs got = {0};
                struct kiln_err err = {0};
                struct kiln_neardup_query q = {.hash = noisy, .side = two ? side : NULL, .n = N,
                                               .nbits = nb, .radius = r};
                assert_int_equal(kiln_neardup_search(&q, &got, &err), KILN_OK);
                struct ref want = {0};
                for (size_t k = 0; k < ref.n; k++)
                    if (!two || side[ref.p[k].i] != side[ref.p[k].j]) {
                        if (want.n == want.cap) {
                            want.cap = want.cap ? 2 * want.cap : 256;
                            want.p = realloc(want.p, want.cap * sizeof *want.p);
                            assert_non_null(want.p);
                        }
                        want.p[want.n++] = ref.p[k];
                    }
                expect_pairs(&got, 0, &want, r);
                kiln_pairs_free(&got);
                free(want.p);
            }
            free(ref.p);
        }
        free(noisy);
    }
    /* the split of 35 bits at radius 4: 5 substrings of 7 bits */
    unsigned start[KILN_NEARDUP_MAX_RADIUS + 1], len[KILN_NEARDUP_MAX_RADIUS + 1];
    assert_int_equal(kiln_neardup_substrings_bits(4, 35, start, len), 5);
    for (unsigned t = 0; t < 5; t++) {
        assert_int_equal(len[t], 7);
        assert_int_equal(start[t], 7 * t);
    }
    assert_int_equal(kiln_neardup_substrings_bits(5, 5, start, len), 0); /* radius >= nbits */
    struct kiln_pairs got = {0};
    struct kiln_err err = {0};
    struct kiln_neardup_query q = {.hash = h, .n = N, .nbits = 0, .radius = 0};
    assert_int_equal(kiln_neardup_search(&q, &got, &err), KILN_EINVAL);
    q.nbits = 65;
    assert_int_equal(kiln_neardup_search(&q, &got, &err), KILN_EINVAL);
    free(side);
    free(masked);
    free(h);
}

/* Many interleaved clusters of equal and nearly equal hashes: 3 000 items drawn from 30
 * centres, so about 150 000 pairs arrive from many buckets and tables out of order and go
 * through the large-output sort. */
static void test_many_clusters(void **state)
{
    (void)state;
    enum { N = 3000 };
    uint64_t s = 31, centre[30], h[N];
    for (int c = 0; c < 30; c++)
        centre[c] = splitmix64(&s);
    for (int i = 0; i < N; i++) {
        uint64_t c = centre[below(&s, 30)];
        h[i] = i % 4 ? c : flip_bits(c, below(&s, 4), &s);
    }
    check_against_brute(h, NULL, N, 0);
    check_against_brute(h, NULL, N, 3);
    check_against_brute(h, NULL, N, 6);
}

/* More than 2^16 items, so the output sort takes more than one digit per index. Brute force
 * over 10^5 items would take minutes, so the items are drawn from a pool of 5 000 values (about
 * 20 copies each; half the pool is planted within 0..8 bits of an earlier pool value, some
 * equal to it): the reference applies the definition to every pair of pool entries, then lists
 * every pair of items whose entries are that close (items of one entry pair with each other at
 * distance 0). */
static void test_large_n(void **state)
{
    (void)state;
    enum { P = 5000, N = 100000 };
    uint64_t s = 4242;
    uint64_t *pool = malloc(P * sizeof *pool), *h = malloc(N * sizeof *h);
    uint32_t *of = malloc(N * sizeof *of), *member = malloc(N * sizeof *member);
    size_t *first = calloc(P + 1, sizeof *first);
    assert_true(pool && h && of && member && first);
    for (int k = 0; k < P; k++)
        pool[k] = k % 2 ? flip_bits(pool[below(&s, (unsigned)k)], below(&s, 9), &s)
                        : splitmix64(&s);
    for (int i = 0; i < N; i++) {
        of[i] = below(&s, P);
        h[i] = pool[of[i]];
        first[of[i] + 1]++;
    }
    for (int k = 0; k < P; k++)
        first[k + 1] += first[k];
    for (int i = 0; i < N; i++) /* members of each pool index, ascending */
        member[first[of[i]]++] = (uint32_t)i;
    for (int k = P; k > 0; k--) /* first[k] ended at the end of list k: shift back */
        first[k] = first[k - 1];
    first[0] = 0;

    static const unsigned radii[] = {0, 2, 6};
    for (size_t q = 0; q < sizeof radii / sizeof *radii; q++) {
        unsigned r = radii[q];
        struct kiln_pairs want = {0};
        for (int a = 0; a < P; a++)
            for (int b = a; b < P; b++) {
                if (hamming(pool[a], pool[b]) > r)
                    continue;
                for (size_t x = first[a]; x < first[a + 1]; x++)
                    for (size_t y = first[b]; y < first[b + 1]; y++) {
                        uint32_t i = member[x], j = member[y];
                        if (a == b && i >= j)
                            continue;
                        if (want.n == want.cap) {
                            want.cap = want.cap ? 2 * want.cap : 4096;
                            want.pair = realloc(want.pair, want.cap * sizeof *want.pair);
                            assert_non_null(want.pair);
                        }
                        want.pair[want.n][0] = i < j ? i : j;
                        want.pair[want.n++][1] = i < j ? j : i;
                    }
            }
        qsort(want.pair, want.n, sizeof *want.pair, cmp_pair_ref);
        assert_true(want.n > 900000);
        struct kiln_pairs got = {0};
        struct kiln_err err = {0};
        assert_int_equal(kiln_neardup_pairs(h, N, r, &got, &err), KILN_OK);
        assert_int_equal(got.n, want.n);
        assert_memory_equal(got.pair, want.pair, want.n * sizeof *want.pair);
        kiln_pairs_free(&got);
        kiln_pairs_free(&want);
    }
    free(pool);
    free(h);
    free(of);
    free(member);
    free(first);
}

/* Radius 0 is exact equality: duplicates pair, hashes one bit apart (anywhere) do not. */
static void test_radius_zero(void **state)
{
    (void)state;
    uint64_t s = 5;
    enum { N = 600 };
    uint64_t h[N];
    for (int i = 0; i < N; i++) {
        if (i >= 10 && i % 3 == 0)
            h[i] = h[below(&s, (unsigned)i)]; /* an exact copy of an earlier hash */
        else if (i >= 10 && i % 3 == 1)
            h[i] = h[below(&s, (unsigned)i)] ^ (UINT64_C(1) << below(&s, 64));
        else
            h[i] = splitmix64(&s);
    }
    struct ref ref = {0};
    brute_force(h, NULL, N, 0, &ref);
    assert_true(ref.n >= 150);
    for (size_t k = 0; k < ref.n; k++)
        assert_true(h[ref.p[k].i] == h[ref.p[k].j]);
    free(ref.p);
    check_against_brute(h, NULL, N, 0);
}

/* Off-by-one errors in cutting the substrings show at their first and last bits. For every
 * radius r and substring t, around a few random bases: the first or last bit of t flipped;
 * the last bit of t with the first of t + 1; and the first (or last) bit of every substring
 * except t, a pair at distance exactly r that agrees on substring t alone, so only table t can
 * find it. Flipping that bit of every substring (distance r + 1, no substring in common) gives
 * pairs that must not be found. */
static void test_substring_boundaries(void **state)
{
    (void)state;
    uint64_t s = 99;
    for (unsigned r = 0; r <= KILN_NEARDUP_MAX_RADIUS; r++) {
        unsigned start[KILN_NEARDUP_MAX_RADIUS + 1], len[KILN_NEARDUP_MAX_RADIUS + 1];
        unsigned m = kiln_neardup_substrings(r, start, len);
        uint64_t first[KILN_NEARDUP_MAX_RADIUS + 1], last[KILN_NEARDUP_MAX_RADIUS + 1];
        uint64_t all_first = 0, all_last = 0;
        for (unsigned t = 0; t < m; t++) {
            /* bit offset p from the most significant bit is value bit 63 - p */
            first[t] = UINT64_C(1) << (63 - start[t]);
            last[t] = UINT64_C(1) << (63 - (start[t] + len[t] - 1));
            all_first |= first[t];
            all_last |= last[t];
        }
        uint64_t h[8 * (6 * (KILN_NEARDUP_MAX_RADIUS + 1) + 3)];
        size_t n = 0;
        for (int b = 0; b < 8; b++) {
            uint64_t base = b == 0 ? 0 : b == 1 ? UINT64_MAX : splitmix64(&s);
            h[n++] = base;
            for (unsigned t = 0; t < m; t++) {
                h[n++] = base ^ first[t];
                h[n++] = base ^ last[t];
                if (t + 1 < m)
                    h[n++] = base ^ last[t] ^ first[t + 1];
                h[n++] = base ^ all_first ^ first[t];
                h[n++] = base ^ all_last ^ last[t];
            }
            h[n++] = base ^ all_first;
            h[n++] = base ^ all_last;
        }
        assert_true(n <= sizeof h / sizeof *h);
        check_against_brute(h, NULL, n, r);
    }
}

/* New pairs are appended after what out already holds, which is left alone. */
static void test_append(void **state)
{
    (void)state;
    struct kiln_pairs got = {0};
    got.cap = 1;
    got.pair = malloc(sizeof *got.pair);
    assert_non_null(got.pair);
    got.pair[0][0] = 9;
    got.pair[0][1] = 3;
    got.n = 1;
    uint64_t h[4] = {0xff, 0x1ff, 0xff, 0};
    struct kiln_err err = {0};
    assert_int_equal(kiln_neardup_pairs(h, 4, 1, &got, &err), KILN_OK);
    assert_int_equal(got.n, 4);
    static const uint32_t want[4][2] = {{9, 3}, {0, 1}, {0, 2}, {1, 2}};
    assert_memory_equal(got.pair, want, sizeof want);
    kiln_pairs_free(&got);
}

static void test_errors(void **state)
{
    (void)state;
    struct kiln_pairs got = {0};
    struct kiln_err err = {0};
    uint64_t h[3] = {1, 2, 3};
    assert_int_equal(kiln_neardup_pairs(h, 3, 17, &got, &err), KILN_EINVAL);
    assert_int_equal(err.code, KILN_EINVAL);
    assert_non_null(strstr(err.msg, "radius 17"));
    assert_int_equal(kiln_neardup_pairs(h, 3, 17, &got, NULL), KILN_EINVAL);
    assert_int_equal(kiln_neardup_pairs(NULL, 3, 6, &got, &err), KILN_EINVAL);
    assert_int_equal(kiln_neardup_pairs(h, 3, 6, NULL, &err), KILN_EINVAL);
#if SIZE_MAX > UINT32_MAX
    /* Rejected before hash is read, so the short array is never overrun. */
    err.msg[0] = 0;
    assert_int_equal(kiln_neardup_pairs(h, (size_t)UINT32_MAX + 1, 6, &got, &err), KILN_EINVAL);
    assert_non_null(strstr(err.msg, "too many hashes"));
#endif
    assert_int_equal(got.n, 0);
    assert_null(got.pair);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_reference_distance),
        cmocka_unit_test(test_substrings),
        cmocka_unit_test(test_random_planted),
        cmocka_unit_test(test_mask),
        cmocka_unit_test(test_bits_and_sides),
        cmocka_unit_test(test_small_n),
        cmocka_unit_test(test_all_identical),
        cmocka_unit_test(test_many_clusters),
        cmocka_unit_test(test_large_n),
        cmocka_unit_test(test_radius_zero),
        cmocka_unit_test(test_substring_boundaries),
        cmocka_unit_test(test_append),
        cmocka_unit_test(test_errors),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
