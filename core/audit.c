/* Leakage audit. Equal-key relations are found by sorting item indices by the key; near
 * duplicates by the multi-index search of neardup.c, so the audit stays near-linear. */
#include "audit.h"

#include <stdlib.h>
#include <string.h>

#include "checked.h"
#include "disjoint.h"
#include "neardup.h"

static const char *const kind_names[KILN_LEAK_KINDS] = {"group", "identical-file",
                                                         "identical-pixels", "near-duplicate"};

const char *kiln_leak_kind_name(int kind)
{
    return kind >= 0 && kind < KILN_LEAK_KINDS ? kind_names[kind] : "unknown";
}

void kiln_audit_free(struct kiln_audit *a)
{
    free(a->leaks);
    free(a->items);
    free(a->missing);
    memset(a, 0, sizeof *a);
}

static int add_leak(struct kiln_audit *a, int kind, const uint32_t *items, size_t n)
{
    if (!kiln_grow((void **)&a->leaks, &a->cap, a->nleaks + 1, sizeof *a->leaks) ||
        !kiln_grow((void **)&a->items, &a->icap, a->nitems + n, sizeof *a->items))
        return -1;
    a->leaks[a->nleaks++] = (struct kiln_leak){kind, a->nitems, n};
    memcpy(a->items + a->nitems, items, n * sizeof *items);
    a->nitems += n;
    a->per_kind[kind]++;
    return 0;
}

struct keyed {
    const void *key;
    uint32_t index;
};

static int cmp_digest(const void *x, const void *y)
{
    const struct keyed *a = x, *b = y;
    int c = memcmp(a->key, b->key, KILN_SHA256_LEN);
    return c ? c : (a->index > b->index) - (a->index < b->index);
}

static int cmp_u64(const void *x, const void *y)
{
    uint64_t a = *(const uint64_t *)x, b = *(const uint64_t *)y;
    return (a > b) - (a < b);
}

static int cmp_string(const void *x, const void *y)
{
    const struct keyed *a = x, *b = y;
    int c = strcmp(a->key, b->key);
    return c ? c : (a->index > b->index) - (a->index < b->index);
}

/* Clusters of equal key among split items; a cluster whose items have two splits is a leak. */
static int equal_key_leaks(const struct kiln_catalog *cat, int kind, struct keyed *buf,
                           uint32_t *tmp, struct kiln_audit *a)
{
    size_t n = 0;
    for (size_t i = 0; i < cat->n; i++) {
        const struct kiln_item *it = &cat->items[i];
        if (it->split == KILN_SPLIT_NONE)
            continue;
        if (kind == KILN_LEAK_GROUP && it->group[0])
            buf[n++] = (struct keyed){it->group, (uint32_t)i};
        else if (kind == KILN_LEAK_BYTES)
            buf[n++] = (struct keyed){it->sha256, (uint32_t)i};
        else if (kind == KILN_LEAK_PIXELS && it->has_pixels)
            buf[n++] = (struct keyed){it->pixel_sha256, (uint32_t)i};
    }
    int (*cmp)(const void *, const void *) = kind == KILN_LEAK_GROUP ? cmp_string : cmp_digest;
    qsort(buf, n, sizeof *buf, cmp);
    for (size_t i = 0; i < n;) {
        size_t j = i + 1;
        while (j < n && (kind == KILN_LEAK_GROUP
                             ? strcmp(buf[i].key, buf[j].key) == 0
                             : memcmp(buf[i].key, buf[j].key, KILN_SHA256_LEN) == 0))
            j++;
        bool mixed = false;
        for (size_t k = i + 1; k < j && !mixed; k++)
            mixed = cat->items[buf[k].index].split != cat->items[buf[i].index].split;
        if (mixed) {
            for (size_t k = i; k < j; k++)
                tmp[k - i] = buf[k].index;
            if (add_leak(a, kind, tmp, j - i))
                return -1;
        }
        i = j;
    }
    return 0;
}

/* Near duplicates: the connected components of "within BITS bits" among split items with a
 * difference hash, found from links (neardup.h), so a cluster of k alike pictures costs O(k)
 * rather than k^2 pairs. A cluster whose items lie in two splits is one finding, its items in
 * catalogue order; findings are ordered by their first item. */
static int near_clusters(const struct kiln_catalog *cat, unsigned bits, uint32_t *tmp,
                         struct kiln_audit *a, struct kiln_err *err)
{
    size_t n = cat->n;
    uint64_t *hash = kiln_alloc_array(n ? n : 1, sizeof *hash);
    uint8_t *use = kiln_alloc_array(n ? n : 1, sizeof *use);
    struct kiln_uf uf = {kiln_alloc_array(n ? n : 1, sizeof(uint32_t))};
    uint64_t *order = kiln_alloc_array(n ? n : 1, sizeof *order);
    struct kiln_pairs links = {NULL, 0, 0};
    int rc = KILN_OK;
    if (!hash || !use || !uf.parent || !order) {
        rc = kiln_err_set(err, KILN_ENOMEM, "cannot allocate audit hashes for %zu items", n);
        goto done;
    }
    for (size_t i = 0; i < n; i++) {
        const struct kiln_item *it = &cat->items[i];
        use[i] = it->split != KILN_SPLIT_NONE && it->has_pixels;
        hash[i] = use[i] ? it->phash : 0;
        uf.parent[i] = (uint32_t)i;
    }
    rc = kiln_neardup_links(hash, use, n, bits, &links, err);
    if (rc)
        goto done;
    for (size_t k = 0; k < links.n; k++)
        kiln_uf_union(&uf, links.pair[k][0], links.pair[k][1]);
    /* (root, item) keys sort each cluster together, clusters by their smallest item. */
    size_t m = 0;
    for (size_t i = 0; i < n; i++)
        if (use[i])
            order[m++] = (uint64_t)kiln_uf_find(&uf, (uint32_t)i) << 32 | i;
    qsort(order, m, sizeof *order, cmp_u64);
    for (size_t i = 0, j; i < m && !rc; i = j) {
        bool mixed = false;
        int s0 = cat->items[(uint32_t)order[i]].split;
        for (j = i + 1; j < m && order[j] >> 32 == order[i] >> 32; j++)
            mixed |= cat->items[(uint32_t)order[j]].split != s0;
        if (!mixed)
            continue;
        for (size_t k = i; k < j; k++)
            tmp[k - i] = (uint32_t)order[k];
        if (add_leak(a, KILN_LEAK_NEAR, tmp, j - i))
            rc = kiln_err_set(err, KILN_ENOMEM, "cannot record audit findings");
    }
done:
    kiln_pairs_free(&links);
    free(hash);
    free(use);
    free(uf.parent);
    free(order);
    return rc;
}

int kiln_audit_run(const struct kiln_catalog *cat, int near_bits, const bool *present,
                   struct kiln_audit *out, struct kiln_err *err)
{
    memset(out, 0, sizeof *out);
    out->near_bits = near_bits;
    struct keyed *buf = kiln_alloc_array(cat->n ? cat->n : 1, sizeof *buf);
    uint32_t *tmp = kiln_alloc_array(cat->n ? cat->n : 1, sizeof *tmp);
    int rc = KILN_OK;
    if (!buf || !tmp)
        rc = kiln_err_set(err, KILN_ENOMEM, "cannot allocate audit tables");
    for (int kind = KILN_LEAK_GROUP; !rc && kind <= KILN_LEAK_PIXELS; kind++)
        if (equal_key_leaks(cat, kind, buf, tmp, out))
            rc = kiln_err_set(err, KILN_ENOMEM, "cannot record audit findings");
    free(buf);
    if (!rc && near_bits >= 0)
        rc = near_clusters(cat, (unsigned)near_bits, tmp, out, err);
    free(tmp);
    /* Classes missing from a split that exists while present elsewhere. */
    if (!rc && cat->nclasses) {
        size_t *count = calloc((size_t)KILN_NSPLITS * cat->nclasses, sizeof *count);
        out->missing = calloc((size_t)KILN_NSPLITS * cat->nclasses, 1);
        if (!count || !out->missing) {
            free(count);
            rc = kiln_err_set(err, KILN_ENOMEM, "cannot count classes");
        } else {
            out->nclasses = cat->nclasses;
            bool has[KILN_NSPLITS] = {false, false, false};
            for (size_t i = 0; i < cat->n; i++) {
                const struct kiln_item *it = &cat->items[i];
                if (it->split == KILN_SPLIT_NONE)
                    continue;
                has[it->split] = true;
                if (it->class_index >= 0)
                    count[(size_t)it->split * cat->nclasses + (size_t)it->class_index]++;
            }
            for (int s = 0; s < KILN_NSPLITS; s++) {
                if (present ? !present[s] : !has[s])
                    continue;
                for (size_t c = 0; c < cat->nclasses; c++)
                    if (!count[(size_t)s * cat->nclasses + c]) {
                        out->missing[(size_t)s * cat->nclasses + c] = 1;
                        out->missing_count++;
                    }
            }
            free(count);
        }
    }
    if (rc)
        kiln_audit_free(out);
    return rc;
}
