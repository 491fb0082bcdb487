/* Unit tests for core/split: ratio parsing, the keyed unit hash, and the exact and stable
 * assignment rules (order independence, proportions, no leakage across splits). */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "../../core/split.h"

static uint32_t lcg(uint32_t *s)
{
    *s = *s * 1664525u + 1013904223u; /* Numerical Recipes LCG constants (from memory) */
    return *s >> 8;
}

static void random_digest(uint32_t *s, uint8_t d[KILN_SHA256_LEN])
{
    for (int i = 0; i < KILN_SHA256_LEN; i++)
        d[i] = (uint8_t)lcg(s);
}

struct spec {
    size_t n;
    uint32_t seed;
    int dups, groups, bad_rows;
};

/* The item list before it goes into a catalogue, so the test can add it in any order. */
struct proto {
    char path[32], group[16];
    const char *label;
    uint8_t sha[KILN_SHA256_LEN];
    int status;
};

static struct proto *make_protos(const struct spec *sp)
{
    static const char *const labels[] = {"alpha", "beta", "gamma"};
    struct proto *p = calloc(sp->n, sizeof *p);
    assert_non_null(p);
    uint32_t s = sp->seed;
    for (size_t i = 0; i < sp->n; i++) {
        snprintf(p[i].path, sizeof p[i].path, "img%05zu.png", i);
        uint32_t r = lcg(&s) % 10;
        p[i].label = labels[r < 5 ? 0 : r < 8 ? 1 : 2]; /* strata of about 50/30/20 % */
        random_digest(&s, p[i].sha);
        p[i].status = sp->bad_rows && i % 97 == 50 ? KILN_ST_CORRUPT : KILN_ST_OK;
        if (sp->dups && i % 13 == 5)
            memcpy(p[i].sha, p[i - 1].sha, KILN_SHA256_LEN);
        if (sp->groups && i % 10 == 0)
            snprintf(p[i].group, sizeof p[i].group, "G%02zu", (i / 10) % 40);
    }
    return p;
}

/* Adds the protos to cat in the order given by perm (NULL = as listed). */
static void fill_catalog(struct kiln_catalog *cat, const struct proto *p, size_t n,
                         const size_t *perm)
{
    struct kiln_err err = {0};
    kiln_catalog_init(cat);
    for (size_t k = 0; k < n; k++) {
        const struct proto *q = &p[perm ? perm[k] : k];
        struct kiln_item it;
        memset(&it, 0, sizeof it);
        it.source = "src";
        it.path = q->path;
        it.label = q->label;
        it.group = q->group;
        it.status = (uint8_t)q->status;
        it.format = "png";
        memcpy(it.sha256, q->sha, KILN_SHA256_LEN);
        it.split = KILN_SPLIT_NONE;
        assert_int_equal(kiln_catalog_add(cat, &it, &err), KILN_OK);
    }
    assert_int_equal(kiln_catalog_index_classes(cat, &err), KILN_OK);
}

static void assign(struct kiln_catalog *cat, const struct kiln_split_params *p,
                   struct kiln_split_report *rep)
{
    struct kiln_units u;
    struct kiln_err err = {0};
    assert_int_equal(kiln_units_build(cat, NULL, &u, &err), KILN_OK);
    assert_int_equal(kiln_split_assign(cat, &u, p, rep, &err), KILN_OK);
    kiln_units_free(&u);
}

static struct kiln_split_params params(const char *ratios, int mode, bool stratify,
                                       uint64_t seed)
{
    struct kiln_split_params p;
    memset(&p, 0, sizeof p);
    bool note;
    struct kiln_err err = {0};
    assert_int_equal(kiln_split_parse_ratios(ratios, &p, &note, &err), KILN_OK);
    p.mode = mode;
    p.stratify = stratify;
    p.seed = seed;
    return p;
}

static size_t index_of_path(const struct kiln_catalog *cat, const char *path)
{
    for (size_t i = 0; i < cat->n; i++)
        if (strcmp(cat->items[i].path, path) == 0)
            return i;
    fail_msg("path %s not found", path);
    return 0;
}

/* ---- ratios ---- */

static void test_parse_ratios(void **state)
{
    (void)state;
    static const struct {
        const char *text;
        unsigned nparts;
        uint64_t r[3]; /* millionths (split.h) */
        bool note;
    } ok[] = {
        {"80:10:10", 3, {80000000, 10000000, 10000000}, false},
        {"70:30", 2, {70000000, 0, 30000000}, false},
        {"0.8:0.1:0.1", 3, {800000, 100000, 100000}, false},
        {"80%:20%", 2, {80000000, 0, 20000000}, false},
        {"0.25:0.75", 2, {250000, 0, 750000}, false},
        {"33.5%:33.5%:33%", 3, {33500000, 33500000, 33000000}, false},
        {"3:1:1", 3, {3000000, 1000000, 1000000}, true}, /* weights not summing to 100 */
        {"80:0:20", 3, {80000000, 0, 20000000}, false},
    };
    struct kiln_err err = {0};
    for (size_t i = 0; i < sizeof ok / sizeof ok[0]; i++) {
        struct kiln_split_params p;
        memset(&p, 0, sizeof p);
        bool note = !ok[i].note;
        assert_int_equal(kiln_split_parse_ratios(ok[i].text, &p, &note, &err), KILN_OK);
        assert_int_equal(p.nparts, ok[i].nparts);
        for (int s = 0; s < 3; s++)
            assert_int_equal(p.ratio[s], ok[i].r[s]);
        assert_int_equal(note, ok[i].note);
        /* written back in the form given */
        char buf[64];
        kiln_split_format_ratios(&p, buf, sizeof buf);
        char want[64];
        snprintf(want, sizeof want, "%s", ok[i].text);
        for (char *c = want; *c; c++)
            if (*c == '%')
                memmove(c, c + 1, strlen(c)); /* percent signs are not kept */
        assert_string_equal(buf, want);
    }
    static const char *const bad[] = {
        "0:50:50",   /* no training share */
        "0.5:0.6",   /* fractions over 1 */
        "80:10:10:0", "abc", "", "80", "80:", ":20", "80::20", "-10:110", "80:10:10 ",
        "0.1234567:0.8765433", /* more than six decimals */
        "50%:40%",             /* percentages under 100 */
        "0.8:0.1",             /* fractions under 1 */
        "1e2:0", "0x50:50", "80,20", "80:20%%",
    };
    for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++) {
        struct kiln_split_params p;
        bool note;
        if (kiln_split_parse_ratios(bad[i], &p, &note, &err) != KILN_EINVAL) {
            print_error("'%s' was accepted\n", bad[i]);
            fail();
        }
        assert_non_null(strstr(err.msg, "ratios"));
    }
    assert_int_equal(kiln_split_mode_parse("stable"), KILN_MODE_STABLE);
    assert_int_equal(kiln_split_mode_parse("exact"), KILN_MODE_EXACT);
    assert_int_equal(kiln_split_mode_parse("random"), -1);
}

/* ---- the unit key ---- */

/* split.h: key = first 8 bytes, big-endian, of HMAC-SHA256(key = seed as 8 bytes
 * little-endian, message = "kiln-split-v2" || kind byte || id bytes). The two values were
 * computed once, outside kiln, with /usr/bin/python3:
 *   hmac.new(struct.pack('<Q', 42), b'kiln-split-v2' + bytes([0]) +
 *            hashlib.sha256(b'abc').digest(), hashlib.sha256).digest()[:8].hex()
 *     -> 4001cfa1b4831126
 *   hmac.new(struct.pack('<Q', 0x0123456789abcdef), b'kiln-split-v2' + bytes([1]) +
 *            b'specimen-17', hashlib.sha256).digest()[:8].hex()
 *     -> d03e448218a95dde */
static void test_unit_key(void **state)
{
    (void)state;
    struct kiln_err err = {0};
    uint8_t abc[KILN_SHA256_LEN];
    assert_int_equal(kiln_sha256_buf("abc", 3, abc, &err), KILN_OK);
    uint64_t k;
    assert_int_equal(kiln_split_unit_key(42, KILN_UNIT_ID_CONTENT, abc, sizeof abc, &k, &err),
                     KILN_OK);
    assert_int_equal(k, UINT64_C(0x4001cfa1b4831126)); /* Python hmac, see above */
    assert_int_equal(kiln_split_unit_key(UINT64_C(0x0123456789abcdef), KILN_UNIT_ID_GROUP,
                                         "specimen-17", 11, &k, &err),
                     KILN_OK);
    assert_int_equal(k, UINT64_C(0xd03e448218a95dde)); /* Python hmac, see above */
    /* the key depends on the seed, the id and the kind byte */
    uint64_t a, b, c, d;
    assert_int_equal(kiln_split_unit_key(42, 0, abc, 32, &a, &err), KILN_OK);
    assert_int_equal(kiln_split_unit_key(43, 0, abc, 32, &b, &err), KILN_OK);
    abc[31] ^= 1;
    assert_int_equal(kiln_split_unit_key(42, 0, abc, 32, &c, &err), KILN_OK);
    abc[31] ^= 1;
    assert_int_equal(kiln_split_unit_key(42, 1, abc, 32, &d, &err), KILN_OK);
    assert_true(a != b && a != c && a != d && b != c && b != d && c != d);
    /* a long id (over the 256-byte stack buffer) works and still depends on its last byte */
    char longid[600];
    memset(longid, 'x', sizeof longid);
    assert_int_equal(kiln_split_unit_key(1, 1, longid, sizeof longid, &a, &err), KILN_OK);
    longid[599] = 'y';
    assert_int_equal(kiln_split_unit_key(1, 1, longid, sizeof longid, &b, &err), KILN_OK);
    assert_true(a != b);
}

/* ---- assignment ---- */

/* The split is a pure function of content, groups, labels and parameters (SPEC section 5): the
 * same items added in another order get the same split and unit key, item by item. */
static void test_order_independent(void **state)
{
    (void)state;
    const struct spec sp = {1000, 99, 1, 1, 1};
    struct proto *p = make_protos(&sp);
    size_t *perm = malloc(sp.n * sizeof *perm);
    assert_non_null(perm);
    for (size_t i = 0; i < sp.n; i++)
        perm[i] = i;
    uint32_t s = 5;
    for (size_t i = sp.n - 1; i > 0; i--) { /* Fisher-Yates shuffle */
        size_t j = lcg(&s) % (i + 1), t = perm[i];
        perm[i] = perm[j];
        perm[j] = t;
    }
    const struct kiln_split_params ps[] = {
        params("80:10:10", KILN_MODE_EXACT, false, 1),
        params("80:10:10", KILN_MODE_EXACT, true, 1),
        params("70:30", KILN_MODE_EXACT, true, 123456789),
        params("80:10:10", KILN_MODE_STABLE, false, 7),
    };
    for (size_t k = 0; k < sizeof ps / sizeof ps[0]; k++) {
        struct kiln_catalog a, b;
        struct kiln_split_report ra, rb;
        fill_catalog(&a, p, sp.n, NULL);
        fill_catalog(&b, p, sp.n, perm);
        assign(&a, &ps[k], &ra);
        assign(&b, &ps[k], &rb);
        for (size_t i = 0; i < b.n; i++) {
            const struct kiln_item *x = &b.items[i], *y = &a.items[index_of_path(&a, x->path)];
            assert_memory_equal(x->sha256, y->sha256, KILN_SHA256_LEN);
            assert_string_equal(x->group, y->group);
            assert_int_equal(x->split, y->split);
            assert_int_equal(x->unit_key, y->unit_key);
            if (x->status != KILN_ST_OK)
                assert_int_equal(x->split, KILN_SPLIT_NONE);
            else
                assert_true(x->split >= 0 && x->split < KILN_NSPLITS);
        }
        assert_memory_equal(ra.items, rb.items, sizeof ra.items);
        assert_int_equal(ra.units, rb.units);
        kiln_catalog_free(&a);
        kiln_catalog_free(&b);
    }
    free(perm);
    free(p);
}

/* Items that share a group or a SHA-256 land in the same split, in every mode. */
static void test_no_leakage(void **state)
{
    (void)state;
    const struct spec sp = {1000, 31337, 1, 1, 1};
    struct proto *p = make_protos(&sp);
    const struct kiln_split_params ps[] = {
        params("80:10:10", KILN_MODE_EXACT, true, 3),
        params("50:50", KILN_MODE_EXACT, false, 4),
        params("0.6:0.2:0.2", KILN_MODE_STABLE, false, 5),
    };
    for (size_t k = 0; k < sizeof ps / sizeof ps[0]; k++) {
        struct kiln_catalog cat;
        struct kiln_split_report rep;
        fill_catalog(&cat, p, sp.n, NULL);
        assign(&cat, &ps[k], &rep);
        size_t shared = 0;
        for (size_t i = 0; i < cat.n; i++)
            for (size_t j = i + 1; j < cat.n; j++) {
                const struct kiln_item *x = &cat.items[i], *y = &cat.items[j];
                if (x->status != KILN_ST_OK || y->status != KILN_ST_OK)
                    continue;
                if ((x->group[0] && strcmp(x->group, y->group) == 0) ||
                    memcmp(x->sha256, y->sha256, KILN_SHA256_LEN) == 0) {
                    assert_int_equal(x->split, y->split);
                    assert_int_equal(x->unit_key, y->unit_key);
                    shared++;
                }
            }
        assert_true(shared > 100); /* the catalogue has many such pairs */
        kiln_catalog_free(&cat);
    }
    free(p);
}

/* |count * R - r * N| <= R, i.e. count within one item of r/R * N, in exact integers. */
static void assert_within_one(size_t count, uint64_t r, uint64_t R, size_t n)
{
    __int128 d = (__int128)count * R - (__int128)r * n;
    if (d < 0)
        d = -d;
    if (d > (__int128)R) {
        print_error("count %zu, target %.3f\n", count, (double)r * (double)n / (double)R);
        fail();
    }
}

/* Exact mode with units of one item: split sizes are within one item of ratio x N. */
static void test_exact_counts(void **state)
{
    (void)state;
    static const char *const ratios[] = {"80:10:10", "70:30", "0.7:0.2:0.1", "1:1:1",
                                         "33%:33%:34%"};
    static const size_t sizes[] = {1000, 997, 10, 3};
    for (size_t ri = 0; ri < sizeof ratios / sizeof ratios[0]; ri++)
        for (size_t si = 0; si < sizeof sizes / sizeof sizes[0]; si++) {
            const struct spec sp = {sizes[si], (uint32_t)(17 + si), 0, 0, 0};
            struct proto *p = make_protos(&sp);
            struct kiln_catalog cat;
            struct kiln_split_report rep;
            struct kiln_split_params par = params(ratios[ri], KILN_MODE_EXACT, false, 2024);
            fill_catalog(&cat, p, sp.n, NULL);
            assign(&cat, &par, &rep);
            const uint64_t R = par.ratio[0] + par.ratio[1] + par.ratio[2];
            size_t count[KILN_NSPLITS] = {0};
            for (size_t i = 0; i < cat.n; i++)
                count[cat.items[i].split]++;
            for (int s = 0; s < KILN_NSPLITS; s++) {
                assert_within_one(count[s], par.ratio[s], R, sp.n);
                assert_int_equal(rep.items[s], count[s]);
            }
            assert_int_equal(rep.units, sp.n);
            kiln_catalog_free(&cat);
            free(p);
        }
}

/* Stratified exact mode: within one item per split per stratum (class). */
static void test_exact_stratified(void **state)
{
    (void)state;
    const struct spec sp = {1000, 8, 0, 0, 0};
    struct proto *p = make_protos(&sp);
    struct kiln_catalog cat;
    struct kiln_split_report rep;
    struct kiln_split_params par = params("80:10:10", KILN_MODE_EXACT, true, 77);
    fill_catalog(&cat, p, sp.n, NULL);
    assign(&cat, &par, &rep);
    const uint64_t R = par.ratio[0] + par.ratio[1] + par.ratio[2];
    size_t count[3][KILN_NSPLITS] = {{0}}, per[3] = {0};
    for (size_t i = 0; i < cat.n; i++) {
        int c = cat.items[i].class_index;
        assert_true(c >= 0 && c < 3);
        count[c][cat.items[i].split]++;
        per[c]++;
    }
    for (int c = 0; c < 3; c++) {
        assert_true(per[c] > 100); /* three real strata */
        for (int s = 0; s < KILN_NSPLITS; s++)
            assert_within_one(count[c][s], par.ratio[s], R, per[c]);
    }
    kiln_catalog_free(&cat);
    free(p);
}

/* Recomputes the id of item i's unit as units.h defines it (a group key beats a digest, the
 * byte-wise smallest wins), over the component of i under "same group or same SHA-256" found
 * by a naive closure, not by kiln's union-find. */
static void naive_unit_id(const struct kiln_catalog *cat, size_t i, int *kind, const void **id,
                          size_t *len, unsigned char *member)
{
    memset(member, 0, cat->n);
    member[i] = 1;
    int changed = 1;
    while (changed) {
        changed = 0;
        for (size_t a = 0; a < cat->n; a++) {
            if (!member[a])
                continue;
            for (size_t b = 0; b < cat->n; b++) {
                const struct kiln_item *x = &cat->items[a], *y = &cat->items[b];
                if (member[b] || y->status != KILN_ST_OK)
                    continue;
                if ((x->group[0] && strcmp(x->group, y->group) == 0) ||
                    memcmp(x->sha256, y->sha256, KILN_SHA256_LEN) == 0) {
                    member[b] = 1;
                    changed = 1;
                }
            }
        }
    }
    const char *g = NULL;
    const uint8_t *sha = NULL;
    for (size_t a = 0; a < cat->n; a++) {
        if (!member[a])
            continue;
        const struct kiln_item *x = &cat->items[a];
        if (x->group[0] && (!g || strcmp(x->group, g) < 0))
            g = x->group;
        if (!sha || memcmp(x->sha256, sha, KILN_SHA256_LEN) < 0)
            sha = x->sha256;
    }
    if (g) {
        *kind = KILN_UNIT_ID_GROUP;
        *id = g;
        *len = strlen(g);
    } else {
        *kind = KILN_UNIT_ID_CONTENT;
        *id = sha;
        *len = KILN_SHA256_LEN;
    }
}

/* Stable mode (split.h / split.c): split s is the first with r_s > 0 and
 * key * R < (r_0 + ... + r_s) * 2^64, recomputed here in 128-bit integers from the key that
 * kiln_split_unit_key gives for the unit id found independently. */
static int stable_rule(uint64_t key, const struct kiln_split_params *p)
{
    unsigned __int128 R = (unsigned __int128)p->ratio[0] + p->ratio[1] + p->ratio[2];
    unsigned __int128 lhs = (unsigned __int128)key * R, cum = 0;
    for (int s = 0; s < KILN_NSPLITS; s++) {
        cum += p->ratio[s];
        if (p->ratio[s] && lhs < cum * ((unsigned __int128)1 << 64))
            return s;
    }
    return -1;
}

static void test_stable_rule(void **state)
{
    (void)state;
    const struct spec sp = {1000, 4242, 1, 1, 1};
    struct proto *p = make_protos(&sp);
    struct kiln_catalog cat;
    struct kiln_split_report rep;
    struct kiln_split_params par = params("70:20:10", KILN_MODE_STABLE, false, 99);
    fill_catalog(&cat, p, sp.n, NULL);
    assign(&cat, &par, &rep);
    unsigned char *member = malloc(cat.n);
    assert_non_null(member);
    size_t count[KILN_NSPLITS] = {0}, grouped = 0;
    struct kiln_err err = {0};
    for (size_t i = 0; i < cat.n; i++) {
        const struct kiln_item *it = &cat.items[i];
        if (it->status != KILN_ST_OK) {
            assert_int_equal(it->split, KILN_SPLIT_NONE);
            continue;
        }
        int kind;
        const void *id;
        size_t len;
        naive_unit_id(&cat, i, &kind, &id, &len, member);
        grouped += kind == KILN_UNIT_ID_GROUP;
        uint64_t key;
        assert_int_equal(kiln_split_unit_key(par.seed, kind, id, len, &key, &err), KILN_OK);
        assert_int_equal(it->unit_key, key);
        assert_int_equal(it->split, stable_rule(key, &par));
        count[it->split]++;
    }
    assert_true(grouped > 0);
    /* every split gets something at 70:20:10 over ~900 units (not a proportion check) */
    assert_true(count[0] > 0 && count[1] > 0 && count[2] > 0);
    free(member);

    /* Adding data never moves an existing unit (SPEC section 5): 300 more items, same seed. */
    const struct spec sp2 = {1300, 4242, 1, 1, 1};
    struct proto *p2 = make_protos(&sp2); /* the first 1000 are the same items */
    assert_memory_equal(p2[999].sha, p[999].sha, KILN_SHA256_LEN);
    struct kiln_catalog big;
    fill_catalog(&big, p2, sp2.n, NULL);
    assign(&big, &par, &rep);
    for (size_t i = 0; i < cat.n; i++) {
        const struct kiln_item *x = &cat.items[i], *y = &big.items[i];
        assert_string_equal(x->path, y->path);
        /* New items join old groups under the same group names and duplicate only new items,
         * so no unit id changes: same key, same split. */
        assert_int_equal(x->unit_key, y->unit_key);
        assert_int_equal(x->split, y->split);
    }
    kiln_catalog_free(&big);
    free(p2);
    kiln_catalog_free(&cat);
    free(p);
}

/* A two-way split never uses val; a zero share never receives units. */
static void test_two_way_and_zero_share(void **state)
{
    (void)state;
    const struct spec sp = {500, 1, 1, 1, 0};
    struct proto *p = make_protos(&sp);
    static const char *const ratios[] = {"70:30", "80:0:20"};
    for (int mode = 0; mode < 2; mode++)
        for (int r = 0; r < 2; r++) {
            struct kiln_catalog cat;
            struct kiln_split_report rep;
            struct kiln_split_params par = params(ratios[r], mode, mode == 0, 10);
            fill_catalog(&cat, p, sp.n, NULL);
            assign(&cat, &par, &rep);
            assert_int_equal(rep.items[KILN_SPLIT_VAL], 0);
            assert_true(rep.items[KILN_SPLIT_TRAIN] > 0 && rep.items[KILN_SPLIT_TEST] > 0);
            for (size_t i = 0; i < cat.n; i++)
                assert_int_not_equal(cat.items[i].split, KILN_SPLIT_VAL);
            kiln_catalog_free(&cat);
        }
    free(p);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_parse_ratios),     cmocka_unit_test(test_unit_key),
        cmocka_unit_test(test_order_independent), cmocka_unit_test(test_no_leakage),
        cmocka_unit_test(test_exact_counts),     cmocka_unit_test(test_exact_stratified),
        cmocka_unit_test(test_stable_rule),      cmocka_unit_test(test_two_way_and_zero_share),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
