/* Unit tests for core/units: units are the connected components of "same group", "same file
 * bytes", "same pixels" and "same record" over ok items, checked against a naive
 * re-computation; kiln_units_exact gives the same components. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "../../core/units.h"

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

/* A synthetic catalogue: mostly unique content, every 13th item a byte duplicate of its
 * predecessor, every 31st a pixel duplicate of the item two back, every 10th in one of 40
 * groups, a few unusable rows, three classes and some unlabelled items. */
static void build_catalog(struct kiln_catalog *cat, size_t n, uint32_t seed)
{
    struct kiln_err err = {0};
    kiln_catalog_init(cat);
    static const char *const labels[] = {"alpha", "beta", "gamma"};
    for (size_t i = 0; i < n; i++) {
        struct kiln_item it;
        memset(&it, 0, sizeof it);
        char path[32], group[16];
        snprintf(path, sizeof path, "img%05zu.png", i);
        it.source = "src";
        it.path = path;
        it.format = "png";
        it.status = i % 97 == 50 ? KILN_ST_CORRUPT : KILN_ST_OK;
        uint32_t r = lcg(&seed) % 10;
        it.label = i % 50 == 3 ? "" : labels[r < 5 ? 0 : r < 8 ? 1 : 2];
        random_digest(&seed, it.sha256);
        random_digest(&seed, it.pixel_sha256);
        it.has_pixels = it.status == KILN_ST_OK;
        if (i % 13 == 5)
            memcpy(it.sha256, cat->items[i - 1].sha256, KILN_SHA256_LEN);
        if (i % 31 == 7)
            memcpy(it.pixel_sha256, cat->items[i - 2].pixel_sha256, KILN_SHA256_LEN);
        /* kiln build's record digests on most items; every 17th equal to one three back */
        it.has_record = i % 7 != 3 && it.status == KILN_ST_OK;
        for (int k = 0; k < KILN_RECORD_DIGEST_LEN; k++)
            it.record_digest[k] = (uint8_t)lcg(&seed);
        if (i % 17 == 9 && cat->items[i - 3].has_record && it.has_record)
            memcpy(it.record_digest, cat->items[i - 3].record_digest, KILN_RECORD_DIGEST_LEN);
        if (i % 10 == 0) {
            snprintf(group, sizeof group, "G%02zu", (i / 10) % 40);
            it.group = group;
        }
        it.split = KILN_SPLIT_NONE;
        assert_int_equal(kiln_catalog_add(cat, &it, &err), KILN_OK);
    }
    assert_int_equal(kiln_catalog_index_classes(cat, &err), KILN_OK);
}

/* Naive components: repeat "join every related pair" until nothing changes (O(n^2) per round,
 * a different algorithm from kiln's sort-and-union-find). comp[i] = smallest member index;
 * SIZE_MAX for unusable items. */
static int related(const struct kiln_item *a, const struct kiln_item *b)
{
    if (a->group[0] && strcmp(a->group, b->group) == 0)
        return 1;
    if (memcmp(a->sha256, b->sha256, KILN_SHA256_LEN) == 0)
        return 1;
    if (a->has_record && b->has_record &&
        memcmp(a->record_digest, b->record_digest, KILN_RECORD_DIGEST_LEN) == 0)
        return 1;
    return a->has_pixels && b->has_pixels &&
           memcmp(a->pixel_sha256, b->pixel_sha256, KILN_SHA256_LEN) == 0;
}

static size_t *naive_components(const struct kiln_catalog *cat)
{
    size_t *comp = malloc(cat->n * sizeof *comp);
    assert_non_null(comp);
    for (size_t i = 0; i < cat->n; i++)
        comp[i] = cat->items[i].status == KILN_ST_OK ? i : SIZE_MAX;
    int changed = 1;
    while (changed) {
        changed = 0;
        for (size_t i = 0; i < cat->n; i++)
            for (size_t j = i + 1; j < cat->n; j++) {
                if (comp[i] == SIZE_MAX || comp[j] == SIZE_MAX || comp[i] == comp[j])
                    continue;
                if (!related(&cat->items[i], &cat->items[j]))
                    continue;
                size_t m = comp[i] < comp[j] ? comp[i] : comp[j];
                comp[i] = comp[j] = m;
                changed = 1;
            }
    }
    return comp;
}

static void test_components_match_naive(void **state)
{
    (void)state;
    struct kiln_catalog cat;
    build_catalog(&cat, 600, 2024);
    struct kiln_units u;
    struct kiln_err err = {0};
    assert_int_equal(kiln_units_build(&cat, NULL, &u, &err), KILN_OK);
    size_t *comp = naive_components(&cat);
    size_t ncomp = 0, total = 0;
    for (size_t i = 0; i < cat.n; i++) {
        if (comp[i] == SIZE_MAX) {
            assert_int_equal(u.unit_of[i], KILN_NO_UNIT);
            continue;
        }
        assert_int_not_equal(u.unit_of[i], KILN_NO_UNIT);
        if (comp[i] == i)
            ncomp++;
        /* same naive component <=> same kiln unit */
        for (size_t j = 0; j < i; j++)
            if (comp[j] != SIZE_MAX)
                assert_int_equal(comp[i] == comp[j], u.unit_of[i] == u.unit_of[j]);
    }
    assert_int_equal(u.nunits, ncomp);
    for (size_t k = 0; k < u.nunits; k++)
        total += u.units[k].size;
    size_t ok = 0;
    for (size_t i = 0; i < cat.n; i++)
        ok += cat.items[i].status == KILN_ST_OK;
    assert_int_equal(total, ok);
    /* the construction does create merges of every kind */
    assert_true(u.merged_groups > 0 && u.merged_bytes > 0 && u.merged_pixels > 0 &&
                u.merged_records > 0);
    /* kiln_units_exact: the same components, named by their smallest member; rows that are
     * not ok stand alone */
    uint32_t *exact = malloc(cat.n * sizeof *exact);
    assert_non_null(exact);
    assert_int_equal(kiln_units_exact(&cat, exact, &err), KILN_OK);
    for (size_t i = 0; i < cat.n; i++)
        assert_int_equal(exact[i], comp[i] == SIZE_MAX ? i : comp[i]);
    free(exact);
    free(comp);
    kiln_units_free(&u);
    kiln_catalog_free(&cat);
}

/* Unit id (units.h): a group key beats a content digest, and among equals the byte-wise
 * smallest wins; stratum = most frequent class, ties to the smallest, unlabelled smallest of
 * all; mixed = more than one label. Checked per unit against its members. */
static void test_unit_id_stratum_mixed(void **state)
{
    (void)state;
    struct kiln_catalog cat;
    build_catalog(&cat, 600, 77);
    struct kiln_units u;
    struct kiln_err err = {0};
    assert_int_equal(kiln_units_build(&cat, NULL, &u, &err), KILN_OK);
    size_t nmixed = 0;
    for (size_t k = 0; k < u.nunits; k++) {
        const struct kiln_unit *un = &u.units[k];
        const char *best_group = NULL;
        const uint8_t *best_sha = NULL;
        size_t tally[8] = {0}, size = 0; /* index class + 1 */
        for (size_t i = 0; i < cat.n; i++) {
            if (u.unit_of[i] != k)
                continue;
            const struct kiln_item *it = &cat.items[i];
            size++;
            tally[it->class_index + 1]++;
            if (it->group[0] && (!best_group || strcmp(it->group, best_group) < 0))
                best_group = it->group;
            if (!best_sha || memcmp(it->sha256, best_sha, KILN_SHA256_LEN) < 0)
                best_sha = it->sha256;
        }
        assert_int_equal(un->size, size);
        const struct kiln_item *id = &cat.items[un->id_item];
        assert_int_equal(u.unit_of[un->id_item], k);
        if (best_group) {
            assert_int_equal(un->id_kind, KILN_UNIT_ID_GROUP);
            assert_string_equal(id->group, best_group);
        } else {
            assert_int_equal(un->id_kind, KILN_UNIT_ID_CONTENT);
            assert_memory_equal(id->sha256, best_sha, KILN_SHA256_LEN);
        }
        int best = 0, distinct = 0;
        for (int c = 0; c < 8; c++) {
            distinct += tally[c] > 0;
            if (tally[c] > tally[best])
                best = c;
        }
        assert_int_equal(un->stratum, best - 1);
        assert_int_equal(un->mixed, distinct > 1);
        nmixed += un->mixed;
    }
    assert_true(nmixed > 0); /* groups span classes in this catalogue */
    kiln_units_free(&u);
    kiln_catalog_free(&cat);
}

/* Hand-made cases: a tie between two classes goes to the smaller class index; unlabelled ties
 * below every class; extra pairs (near duplicates) join; pairs with unusable items do not. */
static void test_small_cases(void **state)
{
    (void)state;
    struct kiln_catalog cat;
    struct kiln_err err = {0};
    kiln_catalog_init(&cat);
    const char *labels[6] = {"b", "a", "", "b", "c", "c"};
    const char *groups[6] = {"g1", "g1", "g2", "g2", "", ""};
    for (int i = 0; i < 6; i++) {
        struct kiln_item it;
        memset(&it, 0, sizeof it);
        char path[8];
        snprintf(path, sizeof path, "p%d", i);
        it.path = path;
        it.label = labels[i];
        it.group = groups[i];
        it.status = i == 5 ? KILN_ST_TRUNCATED : KILN_ST_OK;
        memset(it.sha256, 0x10 + i, KILN_SHA256_LEN);
        assert_int_equal(kiln_catalog_add(&cat, &it, &err), KILN_OK);
    }
    assert_int_equal(kiln_catalog_index_classes(&cat, &err), KILN_OK);
    assert_int_equal(cat.nclasses, 3); /* a, b, c from ok rows: indices 0, 1, 2 */
    struct kiln_pairs pairs = {0};
    uint32_t pr[2][2] = {{3, 4}, {4, 5}};
    pairs.pair = pr;
    pairs.n = 2;
    struct kiln_units u;
    assert_int_equal(kiln_units_build(&cat, &pairs, &u, &err), KILN_OK);
    /* units: {0,1} (g1), {2,3,4} (g2 joined with 4 by the pair), 5 unusable */
    assert_int_equal(u.nunits, 2);
    assert_int_equal(u.unit_of[5], KILN_NO_UNIT);
    assert_int_equal(u.unit_of[0], u.unit_of[1]);
    assert_int_equal(u.unit_of[2], u.unit_of[4]);
    assert_int_not_equal(u.unit_of[0], u.unit_of[2]);
    assert_int_equal(u.merged_near, 1);
    const struct kiln_unit *g1 = &u.units[u.unit_of[0]], *g2 = &u.units[u.unit_of[2]];
    assert_int_equal(g1->stratum, 0); /* a (0) and b (1) once each: tie to a */
    assert_int_equal(g1->mixed, 1);
    assert_int_equal(g2->stratum, -1); /* unlabelled, b, c once each: tie to unlabelled */
    assert_int_equal(g2->size, 3);
    assert_int_equal(g2->id_kind, KILN_UNIT_ID_GROUP);
    assert_string_equal(cat.items[g2->id_item].group, "g2");
    kiln_units_free(&u);
    kiln_catalog_free(&cat);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_components_match_naive),
        cmocka_unit_test(test_unit_id_stratum_mixed),
        cmocka_unit_test(test_small_cases),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
