/* Leakage audit. Equal-key relations are found by sorting item indices by the key; near
 * duplicates come checked from the near-duplicate stage, so the audit stays near-linear. */
#include "audit.h"

#include <stdlib.h>
#include <string.h>

#include "checked.h"
#include "keyed.h"

static const char *const kind_names[KILN_LEAK_KINDS] = {
    "group", "identical-file", "identical-pixels", "identical-record", "near-duplicate"};

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
    a->leaks[a->nleaks++] = (struct kiln_leak){.kind = kind, .first = a->nitems, .count = n};
    memcpy(a->items + a->nitems, items, n * sizeof *items);
    a->nitems += n;
    a->per_kind[kind]++;
    return 0;
}

/* Clusters of equal key among split items; a cluster whose items have two splits is a leak. */
static int equal_key_leaks(const struct kiln_catalog *cat, int kind,
                           const uint8_t (*record)[KILN_RECORD_DIGEST_LEN], struct kiln_keyed *buf,
                           uint32_t *tmp, struct kiln_audit *a)
{
    size_t n = 0;
    for (size_t i = 0; i < cat->n; i++) {
        const struct kiln_item *it = &cat->items[i];
        if (it->split == KILN_SPLIT_NONE)
            continue;
        if (kind == KILN_LEAK_GROUP && it->group[0])
            buf[n++] = kiln_keyed_string(it->group, (uint32_t)i);
        else if (kind == KILN_LEAK_BYTES)
            buf[n++] = kiln_keyed_digest(it->sha256, (uint32_t)i);
        else if (kind == KILN_LEAK_PIXELS && it->has_pixels)
            buf[n++] = kiln_keyed_digest(it->pixel_sha256, (uint32_t)i);
        else if (kind == KILN_LEAK_RECORD && (record || it->has_record))
            buf[n++] = kiln_keyed_digest(record ? record[i] : it->record_digest, (uint32_t)i);
    }
    int (*cmp)(const void *, const void *) = kind == KILN_LEAK_GROUP    ? kiln_keyed_cmp_string
                                             : kind == KILN_LEAK_RECORD ? kiln_keyed_cmp_record
                                                                        : kiln_keyed_cmp_sha256;
    const size_t len = kind == KILN_LEAK_GROUP    ? 0
                       : kind == KILN_LEAK_RECORD ? KILN_RECORD_DIGEST_LEN
                                                  : KILN_SHA256_LEN;
    if (n > 1)
        kiln_keyed_sort(buf, n, cmp);
    for (size_t i = 0; i < n;) {
        size_t j = i + 1;
        while (j < n && kiln_keyed_same(&buf[i], &buf[j], len))
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

/* Near duplicates: every checked link (whatever the unit rule decided) whose two items lie in
 * different splits, in the links' order (by items). */
static int near_leaks(const struct kiln_catalog *cat, const struct kiln_nearlinks *near,
                      struct kiln_audit *a)
{
    for (size_t k = 0; k < near->n; k++) {
        const struct kiln_nearlink *l = &near->link[k];
        if (l->c.a >= cat->n || l->c.b >= cat->n)
            continue;
        const int sa = cat->items[l->c.a].split, sb = cat->items[l->c.b].split;
        if (sa == KILN_SPLIT_NONE || sb == KILN_SPLIT_NONE || sa == sb)
            continue;
        const uint32_t pair[2] = {l->c.a, l->c.b};
        if (add_leak(a, KILN_LEAK_NEAR, pair, 2))
            return -1;
        a->leaks[a->nleaks - 1].near = *l;
    }
    return 0;
}

int kiln_audit_run(const struct kiln_catalog *cat, const struct kiln_nearlinks *near,
                   const uint8_t (*record)[KILN_RECORD_DIGEST_LEN], const bool *present,
                   struct kiln_audit *out, struct kiln_err *err)
{
    memset(out, 0, sizeof *out);
    out->near_checked = near != NULL;
    if (near)
        out->near_params = near->params;
    struct kiln_keyed *buf = kiln_alloc_array(cat->n ? cat->n : 1, sizeof *buf);
    uint32_t *tmp = kiln_alloc_array(cat->n ? cat->n : 1, sizeof *tmp);
    int rc = KILN_OK;
    if (!buf || !tmp)
        rc = kiln_err_set(err, KILN_ENOMEM, "cannot allocate audit tables");
    for (int kind = KILN_LEAK_GROUP; !rc && kind <= KILN_LEAK_RECORD; kind++)
        if (equal_key_leaks(cat, kind, record, buf, tmp, out))
            rc = kiln_err_set(err, KILN_ENOMEM, "cannot record audit findings");
    free(buf);
    free(tmp);
    if (!rc && near && near_leaks(cat, near, out))
        rc = kiln_err_set(err, KILN_ENOMEM, "cannot record audit findings");
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
