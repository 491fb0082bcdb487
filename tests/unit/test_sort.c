/* Unit tests for core/sort (bucket sort by a 64-bit head) and the string heads of core/keyed.h:
 * every result is compared with the C library's qsort under the same comparator, on head
 * distributions that stress the buckets (full span, narrow span, far-apart clusters, many equal
 * heads, the extreme values), at sizes around the qsort threshold, with the bucket memory
 * refused, and on awkward strings against strcmp. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "../../core/keyed.h"
#include "../../core/sort.h"
#include "faults.h"

/* 48 bytes, the head in the middle: the head need not lead the record. */
struct wide {
    uint32_t index;
    uint8_t pad[12];
    uint64_t head;
    uint64_t payload[3];
};

static int cmp_wide(const void *a, const void *b)
{
    const struct wide *x = a, *y = b;
    if (x->head != y->head)
        return x->head < y->head ? -1 : 1;
    return (x->index > y->index) - (x->index < y->index);
}

static uint64_t splitmix(uint64_t *s)
{
    /* SplitMix64 (Steele, Lea and Flood, "Fast splittable pseudorandom number generators",
     * OOPSLA 2014; the constants of its published finaliser, written from memory) */
    uint64_t z = (*s += UINT64_C(0x9e3779b97f4a7c15));
    z = (z ^ (z >> 30)) * UINT64_C(0xbf58476d1ce4e5b9);
    z = (z ^ (z >> 27)) * UINT64_C(0x94d049bb133111eb);
    return z ^ (z >> 31);
}

enum spread { FULL, NARROW, CLUSTERS, FEW, EXTREMES, ALL_EQUAL, SPREADS };

static uint64_t make_head(enum spread sp, uint64_t *s)
{
    const uint64_t r = splitmix(s);
    switch (sp) {
    case FULL: return r;
    case NARROW: return UINT64_C(1) << 40 | (r % 1000); /* span below the bucket count */
    case CLUSTERS: return (r & 1 ? UINT64_MAX - 70000 : 5) + (r >> 1) % 70000;
    case FEW: return (r % 7) * UINT64_C(0x2492492492492492); /* long runs of equal heads */
    case EXTREMES: return r % 3 == 0 ? 0 : r % 3 == 1 ? UINT64_MAX : r;
    default: return 42;
    }
}

static void check_wide(size_t n, enum spread sp, uint64_t seed, size_t refuse)
{
    struct wide *got = calloc(n ? n : 1, sizeof *got), *want = calloc(n ? n : 1, sizeof *want);
    assert_non_null(got);
    assert_non_null(want);
    uint64_t s = seed;
    for (size_t i = 0; i < n; i++) {
        got[i].index = (uint32_t)(n - i); /* reversed, so the tie-break has work to do */
        got[i].head = make_head(sp, &s);
        got[i].payload[0] = splitmix(&s);
        got[i].payload[2] = got[i].head ^ got[i].index;
    }
    memcpy(want, got, n * sizeof *got);
    qsort(want, n, sizeof *want, cmp_wide);
    fault_malloc_size = refuse;
    const size_t refused = fault_malloc_refused;
    kiln_sort_by_head(got, n, sizeof *got, offsetof(struct wide, head), cmp_wide);
    fault_reset();
    if (refuse)
        assert_int_equal(fault_malloc_refused, refused + 1); /* the fallback did run */
    if (n && memcmp(got, want, n * sizeof *got) != 0)
        fail_msg("n=%zu spread=%d seed=%llu: differs from qsort", n, (int)sp,
                 (unsigned long long)seed);
    free(got);
    free(want);
}

static void test_same_as_qsort(void **state)
{
    (void)state;
    static const size_t sizes[] = {0, 1, 2, 3, 2047, 2048, 2049, 5000, 70001};
    for (size_t i = 0; i < sizeof sizes / sizeof sizes[0]; i++)
        for (int sp = 0; sp < SPREADS; sp++)
            check_wide(sizes[i], (enum spread)sp, 1000 * i + (uint64_t)sp, 0);
}

/* Each of the sort's own allocations refused in turn (the 65 536 counters of a full span, then
 * the one-record swap space): the qsort fallback gives the same order. EXTREMES and CLUSTERS
 * put heads at both ends of the 64-bit range, so the span is the full one. */
static void test_fallback_without_memory(void **state)
{
    (void)state;
    check_wide(70001, EXTREMES, 7, 65536 * sizeof(size_t));
    check_wide(70001, CLUSTERS, 8, 65536 * sizeof(size_t));
    check_wide(70001, EXTREMES, 9, sizeof(struct wide));
}

/* A string's head is its first 8 bytes padded with zeros, and orders as strcmp does. */
static void test_string_heads(void **state)
{
    (void)state;
    static const char *const s[] = {
        "",          "a",          "ab",        "abcdefg",   "abcdefgh",  "abcdefghi",
        "abcdefgh0", "abcdefgi",   "b",         "\xc3\xa9t", "\xc3\xa9",  "\x7f",
        "specimen-0001", "specimen-0002", "specimen-", "Z", "a b", "a\x01",
    };
    const size_t n = sizeof s / sizeof s[0];
    for (size_t i = 0; i < n; i++)
        for (size_t j = 0; j < n; j++) {
            struct kiln_keyed x = kiln_keyed_string(s[i], (uint32_t)i);
            struct kiln_keyed y = kiln_keyed_string(s[j], (uint32_t)j);
            const int c = strcmp(s[i], s[j]), k = kiln_keyed_cmp_string(&x, &y);
            if ((i != j && (c < 0) != (k < 0)) || (i == j && k != 0) ||
                (x.head < y.head && c >= 0) || (x.head > y.head && c <= 0))
                fail_msg("\"%s\" vs \"%s\": strcmp %d, keyed %d", s[i], s[j], c, k);
        }
    assert_int_equal(kiln_keyed_string("", 0).head, 0);
    assert_true(kiln_keyed_string("abcdefgh", 0).head == UINT64_C(0x6162636465666768));
    assert_true(kiln_keyed_string("ab", 0).head == UINT64_C(0x6162000000000000));
}

/* Group names of a realistic shape (a long shared prefix, so the heads tie in long runs) sorted
 * by kiln_keyed_sort are in strcmp order, ties by index. */
static int cmp_ref(const void *a, const void *b)
{
    const struct kiln_keyed *x = a, *y = b;
    int c = strcmp(x->key, y->key);
    return c ? c : (x->index > y->index) - (x->index < y->index);
}

static void test_keyed_strings_sorted(void **state)
{
    (void)state;
    enum { N = 30000 };
    char(*names)[24] = calloc(N, sizeof *names);
    struct kiln_keyed *got = calloc(N, sizeof *got), *want = calloc(N, sizeof *want);
    assert_non_null(names);
    assert_non_null(got);
    assert_non_null(want);
    uint64_t s = 99;
    for (uint32_t i = 0; i < N; i++) {
        const uint64_t r = splitmix(&s);
        if (r % 5 == 0)
            snprintf(names[i], sizeof names[i], "%c%u", (char)('a' + r % 26), (unsigned)(r >> 40));
        else
            snprintf(names[i], sizeof names[i], "specimen-%05u", (unsigned)(r % 4000));
        got[i] = want[i] = kiln_keyed_string(names[i], i);
    }
    qsort(want, N, sizeof *want, cmp_ref);
    kiln_keyed_sort(got, N, kiln_keyed_cmp_string);
    for (size_t i = 0; i < N; i++)
        if (got[i].index != want[i].index)
            fail_msg("position %zu: item %u, strcmp order has %u", i, got[i].index, want[i].index);
    free(names);
    free(got);
    free(want);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_same_as_qsort),
        cmocka_unit_test(test_fallback_without_memory),
        cmocka_unit_test(test_string_heads),
        cmocka_unit_test(test_keyed_strings_sorted),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
