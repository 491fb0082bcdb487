/* Multi-index hashing over hashes of up to 64 bits (method and cost in neardup.h). Each of the
 * radius + 1 substring tables is built in turn by a stable counting sort of (hash, index)
 * records on the substring's value, then every bucket of equal values is checked pair by pair;
 * the working space is reused from table to table, so memory stays O(n). */
#include "neardup.h"

#include <assert.h>
#include <stdbool.h>
#include <stdlib.h>
#include <string.h>

#include "checked.h"

/* Counting-sort digit: 16 bits keeps the count array at 512 KiB and every table of radius >= 3
 * (substrings of at most 16 bits) to a single pass; radius 0..2 take 2..4 passes. */
#define DIGIT_BITS 16u

#define MAX_TABLES (KILN_NEARDUP_MAX_RADIUS + 1)

unsigned kiln_neardup_substrings(unsigned radius, unsigned *start, unsigned *len)
{
    return kiln_neardup_substrings_bits(radius, 64, start, len);
}

unsigned kiln_neardup_substrings_bits(unsigned radius, unsigned nbits, unsigned *start,
                                      unsigned *len)
{
    if (radius > KILN_NEARDUP_MAX_RADIUS || nbits > 64 || radius + 1 > nbits)
        return 0;
    unsigned m = radius + 1, q = nbits / m, e = nbits % m;
    for (unsigned t = 0; t < m; t++) {
        if (start)
            start[t] = t * q + (t < e ? t : e);
        if (len)
            len[t] = q + (t < e);
    }
    return m;
}

void kiln_pairs_free(struct kiln_pairs *p)
{
    if (!p)
        return;
    free(p->pair);
    p->pair = NULL;
    p->n = p->cap = 0;
}

/* What the bucket scan needs: the current table's sorted records and the masks of the earlier
 * tables, which decide whether this table is the first where a pair agrees. */
struct scan {
    const uint64_t *hash;  /* hashes in this table's bucket order */
    const uint32_t *index; /* their item indices; ascending within a bucket (stable sort) */
    const uint8_t *side;   /* NULL, or only pairs of items on different sides are wanted */
    const uint64_t *filter; /* NULL, or pairs must also be this close in filter values */
    unsigned filter_radius;
    const uint64_t *mask;  /* mask[s] selects substring s's bits */
    unsigned table;        /* t: pairs close on a substring s < t were reported earlier */
    unsigned sub;          /* q: "close on a substring" means within q bits there */
    unsigned radius;
    struct kiln_pairs *out;
};

static int push_pair(struct kiln_pairs *out, uint32_t i, uint32_t j)
{
    size_t need;
    void *p = out->pair;
    if (!kiln_add_size(out->n, 1, &need) || !kiln_grow(&p, &out->cap, need, sizeof *out->pair))
        return KILN_ENOMEM;
    out->pair = p;
    out->pair[out->n][0] = i;
    out->pair[out->n][1] = j;
    out->n++;
    return KILN_OK;
}

/* Called only for pairs within the radius, which are rare, so it stays out of the inner loop. */
__attribute__((noinline)) static int scan_emit(const struct scan *sc, size_t a, size_t b)
{
    uint64_t d = sc->hash[a] ^ sc->hash[b];
    for (unsigned s = 0; s < sc->table; s++)
        if ((unsigned)__builtin_popcountll(d & sc->mask[s]) <= sc->sub)
            return KILN_OK; /* table s found it */
    if (sc->side && sc->side[sc->index[a]] == sc->side[sc->index[b]])
        return KILN_OK;
    if (sc->filter && (unsigned)__builtin_popcountll(sc->filter[sc->index[a]] ^
                                                     sc->filter[sc->index[b]]) > sc->filter_radius)
        return KILN_OK;
    assert(sc->index[a] < sc->index[b]);
    return push_pair(sc->out, sc->index[a], sc->index[b]);
}

/* All pairs of one bucket [begin, end). This loop is where the time goes (about n^2/158
 * comparisons at radius 6), so it is kept to a load, an XOR, a popcount and a compare. */
static inline __attribute__((always_inline)) int scan_bucket_body(const struct scan *sc,
                                                                   size_t begin, size_t end)
{
    const uint64_t *h = sc->hash;
    unsigned r = sc->radius;
    for (size_t a = begin; a + 1 < end; a++) {
        uint64_t x = h[a];
        for (size_t b = a + 1; b < end; b++)
            if ((unsigned)__builtin_popcountll(x ^ h[b]) <= r) {
                int rc = scan_emit(sc, a, b);
                if (rc)
                    return rc;
            }
    }
    return KILN_OK;
}

static int scan_bucket(const struct scan *sc, size_t begin, size_t end)
{
    return scan_bucket_body(sc, begin, end);
}

/* Baseline x86-64 has no POPCNT instruction, and the library call that replaces it makes the
 * scan several times slower; every x86-64 CPU since about 2008 has it, so a copy of the scan is
 * compiled for it and chosen at run time. The choice changes speed only, never the result. */
#if (defined(__x86_64__) || defined(__i386__)) && defined(__GNUC__)
#define HAVE_POPCNT_SCAN 1
__attribute__((target("popcnt"))) static int scan_bucket_popcnt(const struct scan *sc,
                                                               size_t begin, size_t end)
{
    return scan_bucket_body(sc, begin, end);
}
#endif

/* Probing form (sub-radius q >= 1, Norouzi et al.'s multi-index hashing proper): record a, of
 * substring value v, is compared with every record in the buckets of the values within q bits
 * of v (ball lists the XOR masks, in[] the bucket offsets); each unordered pair is met from both
 * ends, so it is taken from the end with the smaller item index. */
static inline __attribute__((always_inline)) int probe_body(const struct scan *sc, size_t nu,
                                                            unsigned low, const uint32_t *ball,
                                                            size_t nball, const uint32_t *in)
{
    const uint64_t *h = sc->hash, tmask = sc->mask[sc->table];
    const uint32_t *idx = sc->index;
    unsigned r = sc->radius;
    for (size_t a = 0; a < nu; a++) {
        uint64_t x = h[a];
        uint32_t v = (uint32_t)((x & tmask) >> low), ia = idx[a];
        for (size_t k = 0; k < nball; k++) {
            uint32_t w = v ^ ball[k];
            for (uint32_t b = in[w]; b < in[w + 1]; b++)
                if (idx[b] > ia && (unsigned)__builtin_popcountll(x ^ h[b]) <= r) {
                    int rc = scan_emit(sc, a, b);
                    if (rc)
                        return rc;
                }
        }
    }
    return KILN_OK;
}

static int probe_table(const struct scan *sc, size_t nu, unsigned low, const uint32_t *ball,
                       size_t nball, const uint32_t *in)
{
    return probe_body(sc, nu, low, ball, nball, in);
}

#ifdef HAVE_POPCNT_SCAN
__attribute__((target("popcnt"))) static int probe_table_popcnt(const struct scan *sc, size_t nu,
                                                                unsigned low, const uint32_t *ball,
                                                                size_t nball, const uint32_t *in)
{
    return probe_body(sc, nu, low, ball, nball, in);
}
#endif

/* Substrings for m tables: as kiln_neardup_substrings_bits, for any m from 1 to nbits. */
static void split_bits(unsigned m, unsigned nbits, unsigned *start, unsigned *len)
{
    unsigned q = nbits / m, e = nbits % m;
    for (unsigned t = 0; t < m; t++) {
        start[t] = t * q + (t < e ? t : e);
        len[t] = q + (t < e);
    }
}

/* The number of tables m (and so the sub-radius q = radius / m) with the least estimated work:
 * m tables, each record probing the sum_{k <= q} C(len, k) buckets within q bits of its
 * substring, each holding about nu / 2^len records. Substrings of more than PROBE_MAX_BITS
 * are not indexed by value (the offset table would be too large), so they are not chosen
 * unless q = 0, the bucket-scan form. The choice changes speed only: every form finds exactly
 * the pairs within the radius. */
#define PROBE_MAX_BITS 20
static unsigned choose_tables(size_t nu, unsigned nbits, unsigned radius)
{
    unsigned best = radius + 1;
    double best_cost = -1;
    for (unsigned m = 1; m <= radius + 1; m++) {
        unsigned q = radius / m, len = (nbits + m - 1) / m, lmin = nbits / m;
        if (q > 0 && len > PROBE_MAX_BITS)
            continue;
        double ballsize = 0, c = 1, buckets = 1;
        for (unsigned k = 0; k <= q && k <= len; k++) {
            ballsize += c;
            c = c * (double)(len - k) / (double)(k + 1);
        }
        for (unsigned k = 0; k < lmin; k++)
            buckets *= 2;
        /* (floating point only ranks the choices; no result depends on it) */
        double cost = (double)m * (double)nu * ballsize * ((double)nu / buckets + (q ? 4.0 : 0.0));
        if (best_cost < 0 || cost < best_cost) {
            best_cost = cost;
            best = m;
        }
    }
    return best;
}

/* One stable counting-sort pass on the digit (h >> shift) & (2^width - 1). */
static void sort_pass(const uint64_t *hs, const uint32_t *is, uint64_t *hd, uint32_t *id,
                      size_t n, unsigned shift, unsigned width, size_t *count)
{
    size_t nb = (size_t)1 << width;
    uint64_t dmask = nb - 1;
    memset(count, 0, (nb + 1) * sizeof *count);
    for (size_t i = 0; i < n; i++)
        count[((hs[i] >> shift) & dmask) + 1]++;
    for (size_t v = 0; v < nb; v++)
        count[v + 1] += count[v];
    for (size_t i = 0; i < n; i++) {
        size_t p = count[(hs[i] >> shift) & dmask]++;
        hd[p] = hs[i];
        id[p] = is[i];
    }
}

static int cmp_pair(const void *a, const void *b)
{
    const uint32_t *x = a, *y = b;
    if (x[0] != y[0])
        return (x[0] > y[0]) - (x[0] < y[0]);
    return (x[1] > y[1]) - (x[1] < y[1]);
}

/* Sorts np pairs of indices below n by (i, j). A large cluster of equal hashes can produce
 * hundreds of millions of pairs, where qsort takes most of the run time, so large outputs take
 * an LSD radix sort (digits of j, then of i; an even number of passes, so the result ends back
 * in pair) through a buffer of the same size. Small outputs, and large ones when that buffer
 * cannot be had, use qsort, which needs no buffer. Keys are unique, so both give one order. */
static void sort_output(uint32_t (*pair)[2], size_t np, size_t n)
{
    uint32_t (*tmp)[2] = np >= 4096 ? kiln_alloc_array(np, sizeof *tmp) : NULL;
    size_t *count = tmp ? kiln_alloc_array(((size_t)1 << DIGIT_BITS) + 1, sizeof *count) : NULL;
    if (!count) {
        free(tmp);
        qsort(pair, np, sizeof *pair, cmp_pair);
        return;
    }
    unsigned bits = 1;
    while (bits < 32 && ((n - 1) >> bits) != 0)
        bits++;
    unsigned ndig = (bits + DIGIT_BITS - 1) / DIGIT_BITS, width = (bits + ndig - 1) / ndig;
    size_t nb = (size_t)1 << width;
    uint32_t (*src)[2] = pair, (*dst)[2] = tmp;
    for (unsigned pass = 0; pass < 2 * ndig; pass++) {
        unsigned col = pass < ndig ? 1 : 0, shift = (pass % ndig) * width;
        memset(count, 0, (nb + 1) * sizeof *count);
        for (size_t k = 0; k < np; k++)
            count[((src[k][col] >> shift) & (nb - 1)) + 1]++;
        for (size_t v = 0; v < nb; v++)
            count[v + 1] += count[v];
        for (size_t k = 0; k < np; k++) {
            size_t p = count[(src[k][col] >> shift) & (nb - 1)]++;
            dst[p][0] = src[k][0];
            dst[p][1] = src[k][1];
        }
        uint32_t (*swap)[2] = src;
        src = dst;
        dst = swap;
    }
    assert(src == pair);
    free(tmp);
    free(count);
}

int kiln_neardup_pairs(const uint64_t *hash, size_t n, unsigned radius, struct kiln_pairs *out,
                       struct kiln_err *err)
{
    return kiln_neardup_pairs_masked(hash, NULL, n, radius, out, err);
}

int kiln_neardup_pairs_masked(const uint64_t *hash, const uint8_t *use, size_t n,
                              unsigned radius, struct kiln_pairs *out, struct kiln_err *err)
{
    struct kiln_neardup_query q = {.hash = hash, .use = use, .n = n, .nbits = 64,
                                   .radius = radius};
    return kiln_neardup_search(&q, out, err);
}

int kiln_neardup_search(const struct kiln_neardup_query *query, struct kiln_pairs *out,
                        struct kiln_err *err)
{
    const uint64_t *hash = query->hash;
    const uint8_t *use = query->use;
    size_t n = query->n;
    unsigned radius = query->radius, nbits = query->nbits;
    if (radius > KILN_NEARDUP_MAX_RADIUS)
        return kiln_err_set(err, KILN_EINVAL,
                            "near-duplicate radius %u is out of range (0 to %u bits)", radius,
                            KILN_NEARDUP_MAX_RADIUS);
    if (nbits < 1 || nbits > 64 || radius + 1 > nbits)
        return kiln_err_set(err, KILN_EINVAL,
                            "near-duplicate hashes of %u bits cannot be searched at radius %u",
                            nbits, radius);
    if (n > UINT32_MAX)
        return kiln_err_set(err, KILN_EINVAL,
                            "too many hashes for the near-duplicate search: %zu (at most %u)", n,
                            (unsigned)UINT32_MAX);
    if (!out || (!hash && n > 0))
        return kiln_err_set(err, KILN_EINVAL, "missing argument to the near-duplicate search");

    size_t nu = 0;
    for (size_t i = 0; i < n; i++)
        nu += !use || use[i];
    if (nu < 2)
        return KILN_OK;

    unsigned start[MAX_TABLES], len[MAX_TABLES];
    uint64_t mask[MAX_TABLES];
    const uint64_t used = nbits == 64 ? UINT64_MAX : ~(UINT64_MAX >> nbits);
    const unsigned m = choose_tables(nu, nbits, radius), sub = radius / m;
    unsigned maxlen = 0;
    split_bits(m, nbits, start, len);
    for (unsigned t = 0; t < m; t++) {
        unsigned low = 64 - start[t] - len[t]; /* bit position of the substring's last bit */
        mask[t] = (len[t] == 64 ? UINT64_MAX : (UINT64_C(1) << len[t]) - 1) << low;
        maxlen = len[t] > maxlen ? len[t] : maxlen;
    }
    bool multipass = maxlen > DIGIT_BITS;
    unsigned cbits = maxlen < DIGIT_BITS ? maxlen : DIGIT_BITS;

    /* h0/i0: the participating records in index order, the source of every table's sort;
     * ha/ia (and hb/ib for multi-digit substrings) receive the sorted table. */
    uint64_t *h0 = kiln_alloc_array(nu, sizeof *h0);
    uint32_t *i0 = kiln_alloc_array(nu, sizeof *i0);
    uint64_t *ha = kiln_alloc_array(nu, sizeof *ha);
    uint32_t *ia = kiln_alloc_array(nu, sizeof *ia);
    uint64_t *hb = multipass ? kiln_alloc_array(nu, sizeof *hb) : NULL;
    uint32_t *ib = multipass ? kiln_alloc_array(nu, sizeof *ib) : NULL;
    size_t *count = kiln_alloc_array(((size_t)1 << cbits) + 1, sizeof *count);
    /* probing form: bucket offsets by value, and the XOR masks of weight <= sub */
    uint32_t *in = NULL, *ball = NULL;
    size_t nball = 0;
    if (sub > 0) {
        in = kiln_alloc_array(((size_t)1 << maxlen) + 1, sizeof *in);
        size_t cap = 0;
        for (uint32_t v = 0; v < (UINT32_C(1) << maxlen); v++)
            cap += (unsigned)__builtin_popcount(v) <= sub;
        ball = kiln_alloc_array(cap, sizeof *ball);
    }
    size_t n0 = out->n;
    int rc = KILN_OK;
    if (!h0 || !i0 || !ha || !ia || (multipass && (!hb || !ib)) || !count ||
        (sub > 0 && (!in || !ball))) {
        rc = kiln_err_set(err, KILN_ENOMEM,
                          "cannot allocate the near-duplicate index for %zu hashes", nu);
        goto done;
    }
    for (size_t i = 0, k = 0; i < n; i++)
        if (!use || use[i]) {
            h0[k] = hash[i] & used; /* bits below the hash play no part */
            i0[k++] = (uint32_t)i;
        }

    int (*scan_fn)(const struct scan *, size_t, size_t) = scan_bucket;
    int (*probe_fn)(const struct scan *, size_t, unsigned, const uint32_t *, size_t,
                    const uint32_t *) = probe_table;
#ifdef HAVE_POPCNT_SCAN
    if (__builtin_cpu_supports("popcnt")) {
        scan_fn = scan_bucket_popcnt;
        probe_fn = probe_table_popcnt;
    }
#endif

    for (unsigned t = 0; t < m && rc == KILN_OK; t++) {
        /* LSD radix sort on the substring's value; stable, so each bucket keeps index order and
         * a pair (a, b) with a before b in a bucket always has index[a] < index[b]. */
        unsigned low = 64 - start[t] - len[t];
        const uint64_t *hs = h0;
        const uint32_t *is = i0;
        uint64_t *hd = ha;
        uint32_t *id = ia;
        for (unsigned bit = 0; bit < len[t]; bit += DIGIT_BITS) {
            unsigned width = len[t] - bit < DIGIT_BITS ? len[t] - bit : DIGIT_BITS;
            sort_pass(hs, is, hd, id, nu, low + bit, width, count);
            hs = hd;
            is = id;
            hd = hd == ha ? hb : ha;
            id = id == ia ? ib : ia;
        }

        struct scan sc = {.hash = hs, .index = is, .side = query->side,
                          .filter = query->filter, .filter_radius = query->filter_radius,
                          .mask = mask, .table = t, .sub = sub, .radius = radius, .out = out};
        if (sub == 0) {
            for (size_t b = 0, e; b < nu && rc == KILN_OK; b = e) {
                for (e = b + 1; e < nu && ((hs[e] ^ hs[b]) & mask[t]) == 0; e++)
                    ;
                if (e - b >= 2)
                    rc = scan_fn(&sc, b, e);
            }
        } else {
            const uint32_t nv = UINT32_C(1) << len[t];
            nball = 0;
            for (uint32_t v = 0; v < nv; v++)
                if ((unsigned)__builtin_popcount(v) <= sub)
                    ball[nball++] = v;
            memset(in, 0, ((size_t)nv + 1) * sizeof *in);
            for (size_t a = 0; a < nu; a++)
                in[((hs[a] & mask[t]) >> low) + 1]++;
            for (uint32_t v = 0; v < nv; v++)
                in[v + 1] += in[v];
            rc = probe_fn(&sc, nu, low, ball, nball, in);
        }
        if (rc)
            rc = kiln_err_set(err, rc, "cannot grow the near-duplicate pair list past %zu pairs",
                              out->n - n0);
    }
    if (rc != KILN_OK)
        out->n = n0;
    else if (out->n > n0)
        sort_output(out->pair + n0, out->n - n0, n);
done:
    free(h0);
    free(i0);
    free(ha);
    free(ia);
    free(hb);
    free(ib);
    free(count);
    free(in);
    free(ball);
    return rc;
}
