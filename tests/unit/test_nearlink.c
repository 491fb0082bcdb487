/* Unit tests for core/nearlink: the candidate search against a brute force that applies the
 * three documented conditions (docs/near-duplicates.md, "Candidates") to every pair and every
 * orientation, and the unit rule against a plain re-implementation of its documented steps
 * (links in evidence order; component labels and sizes kept in arrays and relabelled by
 * scanning, no union-find), plus hand-made cases for each refusal. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <stdlib.h>
#include <string.h>

#include "../../core/nearlink.h"

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

#define HASH_MASK (~UINT64_C(1)) /* 63 bits, the lowest always 0 */

static uint64_t flip(uint64_t h, unsigned d, uint64_t *s)
{
    for (unsigned k = 0; k < d; k++)
        h ^= UINT64_C(1) << (1 + below(s, 63));
    return h;
}

static unsigned dist(uint64_t a, uint64_t b)
{
    unsigned d = 0;
    for (int k = 0; k < 64; k++)
        d += ((a >> k) & 1) != ((b >> k) & 1);
    return d;
}

/* ---- candidates -------------------------------------------------------------------------------- */


static int cmp_cand(const void *x, const void *y)
{
    const struct kiln_nearcand *p = x, *q = y;
    if (p->a != q->a)
        return p->a < q->a ? -1 : 1;
    if (p->b != q->b)
        return p->b < q->b ? -1 : 1;
    return (p->orientation > q->orientation) - (p->orientation < q->orientation);
}

/* The bits of the 6x6 lowest frequencies in the 63-bit layout. */
static uint64_t coarse_bits(void)
{
    uint64_t m = 0;
    for (unsigned v = 0; v < 6; v++)
        for (unsigned u = 0; u < 6; u++)
            if (u || v)
                m |= UINT64_C(1) << (64 - (8 * v + u));
    return m;
}

static void test_candidates(void **state)
{
    (void)state;
    enum { N = 1500 };
    struct kiln_nearkey *fp = calloc(N, sizeof *fp);
    assert_non_null(fp);
    uint64_t s = 2024;
    /* random pictures, with planted: full-hash copies, centre-only copies (a label spoils the
     * full hash), turned copies, and low-information items that copy others */
    for (size_t i = 0; i < N; i++) {
        fp[i].hash = splitmix64(&s) & HASH_MASK;
        fp[i].centre = splitmix64(&s) & HASH_MASK;
        if (i < 20)
            continue;
        size_t j = below(&s, (unsigned)i);
        switch (i % 7) {
        case 1:
            fp[i].hash = flip(fp[j].hash, below(&s, 9), &s);
            fp[i].centre = flip(fp[j].centre, below(&s, 9), &s);
            break;
        case 2:
            fp[i].centre = flip(fp[j].centre, below(&s, 9), &s);
            break;
        case 3: {
            unsigned o = 2 + below(&s, 7);
            fp[i].hash = flip(kiln_nearfp_orient_hash(fp[j].hash, o), below(&s, 7), &s);
            break;
        }
        case 4:
            fp[i].hash = fp[j].hash;
            fp[i].flags = KILN_NEARFP_LOWINFO;
            break;
        case 5: /* a crop: the lowest frequencies nearly kept, the others changed */
            fp[i].hash = fp[j].hash ^ (splitmix64(&s) & ~coarse_bits() & HASH_MASK &
                                       splitmix64(&s) & splitmix64(&s));
            fp[i].hash = flip(fp[i].hash, below(&s, 4), &s);
            fp[i].centre = (fp[j].centre ^ (splitmix64(&s) & ~coarse_bits() & HASH_MASK)) &
                           HASH_MASK;
            break;
        default:
            break;
        }
    }
    struct kiln_nearlink_params p;
    kiln_nearlink_defaults(&p);
    struct kiln_nearcands got = {0};
    struct kiln_err err = {0};
    assert_int_equal(kiln_nearlink_candidates(fp, N, &p, &got, &err), KILN_OK);

    /* brute force */
    struct kiln_nearcand *want = NULL;
    size_t nw = 0, cap = 0;
    for (uint32_t a = 0; a < N; a++)
        for (uint32_t b = a + 1; b < N; b++) {
            if ((fp[a].flags | fp[b].flags) & KILN_NEARFP_LOWINFO)
                continue;
            for (unsigned o = 1; o <= 8; o++) {
                uint64_t hb = kiln_nearfp_orient_hash(fp[b].hash, o),
                         cb = kiln_nearfp_orient_hash(fp[b].centre, o);
                unsigned src = 0, d = dist(fp[a].hash, hb), dc = dist(fp[a].centre, cb);
                if (o == 1 && d <= p.radius_full)
                    src |= KILN_NEARCAND_FULL;
                if (o == 1 && dc <= p.radius_centre)
                    src |= KILN_NEARCAND_CENTRE;
                if (o > 1 && d <= p.radius_turned)
                    src |= KILN_NEARCAND_TURNED;
                if (o == 1 && d <= p.coarse_confirm &&
                    dist(kiln_nearlink_coarse(fp[a].hash), kiln_nearlink_coarse(fp[b].hash)) <=
                        p.radius_coarse)
                    src |= KILN_NEARCAND_COARSE;
                if (o == 1 && d <= p.coarse_confirm &&
                    dist(kiln_nearlink_coarse(fp[a].centre), kiln_nearlink_coarse(fp[b].centre)) <=
                        p.radius_coarse)
                    src |= KILN_NEARCAND_COARSE_CENTRE;
                if (!src)
                    continue;
                if (nw == cap) {
                    cap = cap ? 2 * cap : 256;
                    want = realloc(want, cap * sizeof *want);
                    assert_non_null(want);
                }
                want[nw++] = (struct kiln_nearcand){a, b, (uint8_t)o, (uint8_t)src, (uint8_t)d,
                                                    (uint8_t)dc};
            }
        }
    qsort(want, nw, sizeof *want, cmp_cand);
    size_t by_src[5] = {0, 0, 0, 0, 0};
    for (size_t k = 0; k < nw; k++)
        for (int b = 0; b < 5; b++)
            by_src[b] += (want[k].sources >> b) & 1;
    /* the planted material makes every search contribute */
    for (int b = 0; b < 5; b++)
        if (by_src[b] < 20)
            fail_msg("search %d found only %zu pairs: the test data does not exercise it", b,
                     by_src[b]);
    assert_int_equal(got.n, nw);
    for (size_t k = 0; k < nw; k++) {
        const struct kiln_nearcand *x = &got.c[k], *y = &want[k];
        if (x->a != y->a || x->b != y->b || x->orientation != y->orientation ||
            x->sources != y->sources || x->distance != y->distance ||
            x->centre_distance != y->centre_distance)
            fail_msg("candidate %zu: (%u, %u, o %u, sources %u, d %u/%u), brute force (%u, %u, o "
                     "%u, sources %u, d %u/%u)", k, x->a, x->b, x->orientation, x->sources,
                     x->distance, x->centre_distance, y->a, y->b, y->orientation, y->sources,
                     y->distance, y->centre_distance);
    }
    free(want);
    kiln_nearcands_free(&got);
    /* few items */
    assert_int_equal(kiln_nearlink_candidates(fp, 1, &p, &got, &err), KILN_OK);
    assert_int_equal(got.n, 0);
    p.radius_full = 17;
    assert_int_equal(kiln_nearlink_candidates(fp, N, &p, &got, &err), KILN_EINVAL);
    kiln_nearcands_free(&got);
    free(fp);
}

/* ---- the unit rule ------------------------------------------------------------------------------ */

#define NO_LABEL (-1)
#define MIXED (-2)

/* The documented rule, step by step, with arrays: comp[i] is item i's component (its smallest
 * item), relabelled over all items on every join. */
static void reference_rule(size_t n, const uint32_t *exact, const int32_t *label,
                           const struct kiln_nearcands *c, const struct kiln_nearmatch *m,
                           unsigned max_pictures, uint8_t *verdict, uint32_t *comp)
{
    for (size_t i = 0; i < n; i++) {
        comp[i] = (uint32_t)i;
        for (size_t j = 0; j < i; j++)
            if (exact[j] == exact[i]) {
                comp[i] = comp[j];
                break;
            }
    }
    /* evidence order: selection of the next best unprocessed checked link each time */
    uint8_t *done = calloc(c->n ? c->n : 1, 1);
    assert_non_null(done);
    for (size_t k = 0; k < c->n; k++)
        verdict[k] = KILN_NEARLINK_UNCHECKED;
    for (;;) {
        size_t best = SIZE_MAX;
        for (size_t k = 0; k < c->n; k++) {
            if (done[k] || !m[k].linked)
                continue;
            if (best == SIZE_MAX)
                best = k;
            else {
                const struct kiln_nearmatch *p = &m[k], *q = &m[best];
                const struct kiln_nearcand *x = &c->c[k], *y = &c->c[best];
                int32_t gp = p->trimmed ? p->global_trim : p->global,
                        gq = q->trimmed ? q->global_trim : q->global,
                        lp = p->trimmed ? p->local_trim : p->local,
                        lq = q->trimmed ? q->local_trim : q->local;
                int better = gp != gq                     ? gp > gq
                             : lp != lq                   ? lp > lq
                             : x->distance != y->distance ? x->distance < y->distance
                             : x->a != y->a                   ? x->a < y->a
                             : x->b != y->b                   ? x->b < y->b
                                                              : x->orientation < y->orientation;
                if (better)
                    best = k;
            }
        }
        if (best == SIZE_MAX)
            break;
        done[best] = 1;
        uint32_t ca = comp[c->c[best].a], cb = comp[c->c[best].b];
        if (ca == cb) {
            verdict[best] = KILN_NEARLINK_LINKED;
            continue;
        }
        /* labels and pictures of the two components */
        int64_t la = NO_LABEL, lb = NO_LABEL;
        unsigned pa = 0, pb = 0;
        for (size_t i = 0; i < n; i++) {
            int64_t *l = comp[i] == ca ? &la : comp[i] == cb ? &lb : NULL;
            if (!l)
                continue;
            if (label[i] >= 0)
                *l = *l == NO_LABEL || *l == label[i] ? label[i] : MIXED;
            int first = 1; /* a new exact unit within the component? */
            for (size_t j = 0; j < i; j++)
                if (comp[j] == comp[i] && exact[j] == exact[i])
                    first = 0;
            if (first)
                *(comp[i] == ca ? &pa : &pb) += 1;
        }
        int conflict = la != NO_LABEL && lb != NO_LABEL && (la != lb || la == MIXED);
        if (conflict) {
            verdict[best] = KILN_NEARLINK_REFUSED_LABEL;
        } else if (pa + pb > max_pictures) {
            verdict[best] = KILN_NEARLINK_REFUSED_SIZE;
        } else {
            verdict[best] = KILN_NEARLINK_LINKED;
            uint32_t to = ca < cb ? ca : cb, from = ca < cb ? cb : ca;
            for (size_t i = 0; i < n; i++)
                if (comp[i] == from)
                    comp[i] = to;
        }
    }
    free(done);
}

static void test_rule_random(void **state)
{
    (void)state;
    uint64_t s = 88;
    for (int round = 0; round < 200; round++) {
        size_t n = 2 + below(&s, 40), nc = below(&s, 60);
        uint32_t exact[64], unit[64], comp[64];
        int32_t label[64];
        for (size_t i = 0; i < n; i++) {
            exact[i] = below(&s, 3) ? (uint32_t)i : below(&s, (unsigned)n);
            label[i] = below(&s, 4) ? (int32_t)below(&s, 3) : -1;
        }
        struct kiln_nearcands c = {calloc(nc ? nc : 1, sizeof(struct kiln_nearcand)), nc, nc};
        struct kiln_nearmatch *m = calloc(nc ? nc : 1, sizeof *m);
        assert_true(c.c && m);
        for (size_t k = 0; k < nc; k++) {
            uint32_t a = below(&s, (unsigned)n), b = below(&s, (unsigned)n);
            c.c[k] = (struct kiln_nearcand){a < b ? a : b, a < b ? b : a, (uint8_t)(1 + below(&s, 8)),
                                            1, (uint8_t)below(&s, 7), 0};
            m[k].linked = below(&s, 5) != 0;
            m[k].global_trim = (int32_t)below(&s, 4) * 1000; /* ties, so later keys matter */
            m[k].local_trim = (int32_t)below(&s, 3) * 1000;
            m[k].global = (int32_t)below(&s, 4) * 1000;
            m[k].local = (int32_t)below(&s, 3) * 1000;
            m[k].trimmed = (uint8_t)below(&s, 2);
        }
        unsigned maxp = 2 + below(&s, 5);
        uint8_t *v = malloc(nc ? nc : 1), *rv = malloc(nc ? nc : 1);
        assert_true(v && rv);
        struct kiln_err err;
        assert_int_equal(kiln_nearlink_decide(n, exact, label, &c, m, maxp, v, unit, &err), KILN_OK);
        reference_rule(n, exact, label, &c, m, maxp, rv, comp);
        for (size_t k = 0; k < nc; k++)
            if (v[k] != rv[k])
                fail_msg("round %d, candidate %zu (%u, %u): verdict %s, reference %s", round, k,
                         c.c[k].a, c.c[k].b, kiln_nearlink_verdict_name(v[k]),
                         kiln_nearlink_verdict_name(rv[k]));
        for (size_t i = 0; i < n; i++)
            assert_int_equal(unit[i], comp[i]);
        free(v);
        free(rv);
        free(m);
        kiln_nearcands_free(&c);
    }
}

/* Hand-made: the evidence order decides which of two conflicting links wins. Items 0 (label 0)
 * and 2 (label 1) both resemble 1 (no label); the stronger link (1, 2) is taken first, so the
 * weaker (0, 1) would join labels 0 and 1 and is refused. With max_pictures 2 the third
 * picture of a chain is refused for size. A failed check is not a link. */
static void test_rule_cases(void **state)
{
    (void)state;
    uint32_t exact[6] = {0, 1, 2, 3, 4, 5}, unit[6];
    int32_t label[6] = {0, -1, 1, -1, -1, -1};
    struct kiln_nearcand cc[4] = {
        {0, 1, 1, 1, 3, 0}, {1, 2, 1, 1, 2, 0}, {3, 4, 1, 1, 0, 0}, {4, 5, 1, 1, 0, 0}};
    struct kiln_nearcands c = {cc, 4, 4};
    struct kiln_nearmatch m[4] = {{0}};
    m[0].linked = m[1].linked = m[2].linked = m[3].linked = 1;
    m[0].trimmed = m[1].trimmed = m[2].trimmed = m[3].trimmed = 1;
    m[0].global_trim = 900000;
    m[1].global_trim = 1000000;
    m[2].global_trim = 1048576;
    m[3].global_trim = 1000000;
    uint8_t v[4];
    struct kiln_err err;
    assert_int_equal(kiln_nearlink_decide(6, exact, label, &c, m, 2, v, unit, &err), KILN_OK);
    assert_int_equal(v[1], KILN_NEARLINK_LINKED);
    assert_int_equal(v[0], KILN_NEARLINK_REFUSED_LABEL);
    assert_int_equal(v[2], KILN_NEARLINK_LINKED);
    assert_int_equal(v[3], KILN_NEARLINK_REFUSED_SIZE);
    static const uint32_t want[6] = {0, 1, 1, 3, 3, 5};
    assert_memory_equal(unit, want, sizeof want);
    /* exact units count once: 4 and 5 in one exact unit are one picture */
    exact[5] = 4;
    m[3].linked = 0;
    assert_int_equal(kiln_nearlink_decide(6, exact, label, &c, m, 2, v, unit, &err), KILN_OK);
    assert_int_equal(v[3], KILN_NEARLINK_UNCHECKED);
    assert_int_equal(unit[5], 3);
    /* an exact unit holding two labels takes no near link to a labelled item */
    uint32_t ex2[3] = {0, 0, 2}, u2[3];
    int32_t l2[3] = {0, 1, 0};
    struct kiln_nearcand c2c = {1, 2, 1, 1, 0, 0};
    struct kiln_nearcands c2 = {&c2c, 1, 1};
    struct kiln_nearmatch m2 = {0};
    m2.linked = 1;
    uint8_t v2;
    assert_int_equal(kiln_nearlink_decide(3, ex2, l2, &c2, &m2, 8, &v2, u2, &err), KILN_OK);
    assert_int_equal(v2, KILN_NEARLINK_REFUSED_LABEL);
    assert_int_equal(u2[1], 0);
    assert_int_equal(u2[2], 2);
    /* bad input */
    ex2[2] = 3;
    assert_int_equal(kiln_nearlink_decide(3, ex2, l2, &c2, &m2, 8, &v2, u2, &err), KILN_EINVAL);
    assert_non_null(strstr(err.msg, "out of range"));
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_candidates),
        cmocka_unit_test(test_rule_random),
        cmocka_unit_test(test_rule_cases),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
