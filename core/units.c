/* Union-find over catalogue items. Every relation is found by sorting item indices by the
 * relation's value and joining neighbours, so the result is independent of row order. */
#include "units.h"

#include <stdlib.h>
#include <string.h>

#include "checked.h"
#include "keyed.h"
#include "disjoint.h"

static int cmp_u64(const void *a, const void *b)
{
    uint64_t x = *(const uint64_t *)a, y = *(const uint64_t *)b;
    return (x > y) - (x < y);
}

enum relation { REL_BYTES, REL_PIXELS, REL_GROUP, REL_RECORD };

static size_t join_equal(const struct kiln_catalog *cat, struct kiln_uf *uf, struct kiln_keyed *buf,
                         enum relation rel)
{
    size_t n = 0;
    for (size_t i = 0; i < cat->n; i++) {
        const struct kiln_item *it = &cat->items[i];
        if (it->status != KILN_ST_OK)
            continue;
        if (rel == REL_BYTES)
            buf[n++] = kiln_keyed_digest(it->sha256, (uint32_t)i);
        else if (rel == REL_PIXELS && it->has_pixels)
            buf[n++] = kiln_keyed_digest(it->pixel_sha256, (uint32_t)i);
        else if (rel == REL_GROUP && it->group[0])
            buf[n++] = kiln_keyed_string(it->group, (uint32_t)i);
        else if (rel == REL_RECORD && it->has_record)
            buf[n++] = kiln_keyed_digest(it->record_digest, (uint32_t)i);
    }
    int (*cmp)(const void *, const void *) = rel == REL_GROUP    ? kiln_keyed_cmp_string
                                             : rel == REL_RECORD ? kiln_keyed_cmp_record
                                                                 : kiln_keyed_cmp_sha256;
    kiln_keyed_sort(buf, n, cmp);
    size_t joined = 0;
    for (size_t i = 1; i < n; i++) {
        const size_t len = rel == REL_GROUP    ? 0
                           : rel == REL_RECORD ? KILN_RECORD_DIGEST_LEN
                                               : KILN_SHA256_LEN;
        const bool same = kiln_keyed_same(&buf[i - 1], &buf[i], len);
        if (same && kiln_uf_union(uf, buf[i - 1].index, buf[i].index))
            joined++;
    }
    return joined;
}

void kiln_units_free(struct kiln_units *u)
{
    free(u->unit_of);
    free(u->units);
    memset(u, 0, sizeof *u);
}

int kiln_units_exact(const struct kiln_catalog *cat, uint32_t *exact, struct kiln_err *err)
{
    if (cat->n >= KILN_NO_UNIT)
        return kiln_err_set(err, KILN_ETOOLARGE, "catalogue of %zu rows is too large", cat->n);
    struct kiln_uf uf = {exact};
    struct kiln_keyed *buf = kiln_alloc_array(cat->n ? cat->n : 1, sizeof *buf);
    if (!buf)
        return kiln_err_set(err, KILN_ENOMEM, "cannot allocate unit tables for %zu items", cat->n);
    for (size_t i = 0; i < cat->n; i++)
        exact[i] = (uint32_t)i;
    static const enum relation rels[] = {REL_GROUP, REL_BYTES, REL_PIXELS, REL_RECORD};
    for (size_t r = 0; r < sizeof rels / sizeof rels[0]; r++)
        join_equal(cat, &uf, buf, rels[r]);
    free(buf);
    for (size_t i = 0; i < cat->n; i++)
        exact[i] = kiln_uf_find(&uf, (uint32_t)i);
    return KILN_OK;
}

/* Unit id precedence: a group key beats a content digest; among equals the byte-wise smallest. */
static bool better_id(const struct kiln_catalog *cat, uint32_t cand, uint32_t cur)
{
    const struct kiln_item *a = &cat->items[cand], *b = &cat->items[cur];
    bool ga = a->group[0] != 0, gb = b->group[0] != 0;
    if (ga != gb)
        return ga;
    if (ga)
        return strcmp(a->group, b->group) < 0;
    return memcmp(a->sha256, b->sha256, KILN_SHA256_LEN) < 0;
}

int kiln_units_build(const struct kiln_catalog *cat, const struct kiln_pairs *extra,
                     struct kiln_units *out, struct kiln_err *err)
{
    memset(out, 0, sizeof *out);
    if (cat->n >= KILN_NO_UNIT)
        return kiln_err_set(err, KILN_ETOOLARGE, "catalogue of %zu rows is too large", cat->n);
    struct kiln_uf uf = {kiln_alloc_array(cat->n, sizeof(uint32_t))};
    struct kiln_keyed *buf = kiln_alloc_array(cat->n, sizeof *buf);
    out->unit_of = kiln_alloc_array(cat->n, sizeof *out->unit_of);
    if (!uf.parent || !buf || !out->unit_of) {
        free(uf.parent);
        free(buf);
        kiln_units_free(out);
        return kiln_err_set(err, KILN_ENOMEM, "cannot allocate unit tables for %zu items", cat->n);
    }
    out->nitems = cat->n;
    for (size_t i = 0; i < cat->n; i++)
        uf.parent[i] = (uint32_t)i;
    out->merged_groups = join_equal(cat, &uf, buf, REL_GROUP);
    out->merged_bytes = join_equal(cat, &uf, buf, REL_BYTES);
    out->merged_pixels = join_equal(cat, &uf, buf, REL_PIXELS);
    out->merged_records = join_equal(cat, &uf, buf, REL_RECORD);
    free(buf);
    if (extra)
        for (size_t i = 0; i < extra->n; i++) {
            uint32_t a = extra->pair[i][0], b = extra->pair[i][1];
            if (a < cat->n && b < cat->n && cat->items[a].status == KILN_ST_OK &&
                cat->items[b].status == KILN_ST_OK && kiln_uf_union(&uf, a, b))
                out->merged_near++;
        }

    /* Number the roots in item order; each unit is then described by a scan over its items. */
    size_t nunits = 0;
    for (size_t i = 0; i < cat->n; i++) {
        out->unit_of[i] = KILN_NO_UNIT;
        if (cat->items[i].status == KILN_ST_OK && kiln_uf_find(&uf, (uint32_t)i) == i)
            out->unit_of[i] = (uint32_t)nunits++;
    }
    out->units = kiln_alloc_array(nunits, sizeof *out->units);
    /* Per-unit label tallies: label counts are gathered by sorting (unit, class) pairs. */
    uint64_t *pairs = kiln_alloc_array(cat->n, sizeof *pairs);
    if (!out->units || !pairs) {
        free(uf.parent);
        free(pairs);
        kiln_units_free(out);
        return kiln_err_set(err, KILN_ENOMEM, "cannot allocate %zu units", nunits);
    }
    memset(out->units, 0, nunits * sizeof *out->units);
    out->nunits = nunits;
    size_t npairs = 0;
    for (size_t i = 0; i < cat->n; i++) {
        if (cat->items[i].status != KILN_ST_OK)
            continue;
        uint32_t u = out->unit_of[kiln_uf_find(&uf, (uint32_t)i)];
        out->unit_of[i] = u;
        struct kiln_unit *un = &out->units[u];
        if (un->size == 0) {
            un->id_item = (uint32_t)i;
            un->split = KILN_SPLIT_NONE;
        } else if (better_id(cat, (uint32_t)i, un->id_item)) {
            un->id_item = (uint32_t)i;
        }
        un->size++;
        /* class -1 maps to 0 so that "unlabelled" sorts before every class */
        pairs[npairs++] = (uint64_t)u << 32 | (uint32_t)(cat->items[i].class_index + 1);
    }
    free(uf.parent);
    for (size_t u = 0; u < nunits; u++)
        out->units[u].id_kind =
            cat->items[out->units[u].id_item].group[0] ? KILN_UNIT_ID_GROUP : KILN_UNIT_ID_CONTENT;
    /* Most frequent class per unit, ties to the smallest class index (unlabelled smallest). */
    kiln_sort_by_head(pairs, npairs, sizeof *pairs, 0, cmp_u64); /* equal pairs are equal bytes */
    size_t i = 0;
    while (i < npairs) {
        uint32_t u = (uint32_t)(pairs[i] >> 32);
        size_t best_n = 0, distinct = 0;
        int32_t best = -1;
        while (i < npairs && (uint32_t)(pairs[i] >> 32) == u) {
            uint32_t cls = (uint32_t)pairs[i];
            size_t j = i;
            while (j < npairs && pairs[j] == pairs[i])
                j++;
            distinct++;
            if (j - i > best_n) { /* strict: earlier (smaller) classes win ties */
                best_n = j - i;
                best = (int32_t)cls - 1;
            }
            i = j;
        }
        out->units[u].stratum = best;
        out->units[u].mixed = distinct > 1;
    }
    free(pairs);
    return KILN_OK;
}
