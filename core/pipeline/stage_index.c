/* Content index over source trees. Files are hashed in the walker's thread: SHA-256 with the
 * CPU's instructions runs at over a gigabyte a second, so reading dominates. */
#include <stdbool.h>
#include <stdlib.h>
#include <string.h>

#include "../../formats/sources/source.h"
#include "../catalog.h"
#include "../checked.h"
#include "../names.h"
#include "stage_index.h"

struct index_walk {
    struct kiln_index *idx;
    struct kiln_sha256 ctx;
};

static int add_entry(void *arg, struct kiln_source_entry *e, struct kiln_err *err)
{
    struct index_walk *w = arg;
    struct kiln_index *idx = w->idx;
    if (!e->data && e->status != 0) {
        idx->unreadable++;
        return KILN_OK;
    }
    if (!kiln_grow((void **)&idx->e, &idx->cap, idx->n + 1, sizeof *idx->e)) {
        free(e->data);
        return kiln_err_set(err, KILN_ENOMEM, "cannot grow the source index");
    }
    struct kiln_index_entry *x = &idx->e[idx->n];
    kiln_sha256_update(&w->ctx, e->data, e->size);
    int rc = kiln_sha256_final(&w->ctx, x->sha256, err);
    if (rc) {
        free(e->data);
        return rc;
    }
    x->size = e->size;
    x->source = kiln_arena_strdup(&idx->strings, e->root);
    x->path = kiln_arena_strdup(&idx->strings, e->path);
    x->member = kiln_arena_strdup(&idx->strings, e->member);
    free(e->data);
    if (!x->source || !x->path || !x->member)
        return kiln_err_set(err, KILN_ENOMEM, "cannot store source names");
    idx->n++;
    return KILN_OK;
}

static int cmp_entry(const void *a, const void *b)
{
    const struct kiln_index_entry *x = a, *y = b;
    int c = memcmp(x->sha256, y->sha256, KILN_SHA256_LEN);
    if (!c)
        c = strcmp(x->source, y->source);
    if (!c)
        c = strcmp(x->path, y->path);
    if (!c)
        c = strcmp(x->member, y->member);
    return c;
}

uint64_t kiln_index_max_bytes(const struct kiln_catalog *cat)
{
    uint64_t m = 1;
    for (size_t i = 0; i < cat->n; i++)
        if (cat->items[i].size > m)
            m = cat->items[i].size;
    return m;
}

int kiln_index_build(const char *const *sources, size_t nsources, bool follow_links,
                     uint64_t max_bytes, struct kiln_index *idx, struct kiln_err *err)
{
    memset(idx, 0, sizeof *idx);
    kiln_arena_init(&idx->strings);
    struct index_walk w = {idx, {NULL}};
    int rc = kiln_sha256_init(&w.ctx, err);
    const struct kiln_walk_opts opts = {follow_links, max_bytes ? max_bytes : 1};
    for (size_t i = 0; i < nsources && !rc; i++)
        rc = kiln_source_walk(sources[i], &opts, NULL, add_entry, &w, NULL, err);
    if (w.ctx.evp)
        kiln_sha256_free(&w.ctx);
    if (rc) {
        kiln_index_free(idx);
        return rc;
    }
    if (idx->n > 1)
        qsort(idx->e, idx->n, sizeof *idx->e, cmp_entry);
    return KILN_OK;
}

void kiln_index_free(struct kiln_index *idx)
{
    free(idx->e);
    kiln_arena_free(&idx->strings);
    memset(idx, 0, sizeof *idx);
}

/* Whether the entry's location, in recorded form, is the item's. */
static int same_place(const struct kiln_index_entry *x, const struct kiln_item *it,
                      const struct kiln_names *names, bool *same, struct kiln_err *err)
{
    char pb[KILN_NAME_HASH_LEN], mb[KILN_NAME_HASH_LEN];
    const char *p, *m;
    int rc = kiln_names_out(names, x->path, pb, &p, err);
    if (!rc)
        rc = kiln_names_out(names, x->member, mb, &m, err);
    *same = !rc && strcmp(p, it->path) == 0 && strcmp(m, it->member) == 0;
    return rc;
}

int kiln_index_locate(const struct kiln_index *idx, const struct kiln_item *it,
                      const struct kiln_names *names, const struct kiln_index_entry **hit,
                      bool *at_place, struct kiln_err *err)
{
    *at_place = false;
    *hit = kiln_index_find(idx, it->sha256);
    for (const struct kiln_index_entry *x = *hit;
         x && x < idx->e + idx->n && memcmp(x->sha256, it->sha256, KILN_SHA256_LEN) == 0; x++) {
        int rc = same_place(x, it, names, at_place, err);
        if (rc)
            return rc;
        if (*at_place) {
            *hit = x;
            break;
        }
    }
    return KILN_OK;
}

const struct kiln_index_entry *kiln_index_find(const struct kiln_index *idx,
                                               const uint8_t sha256[KILN_SHA256_LEN])
{
    size_t lo = 0, hi = idx->n;
    while (lo < hi) {
        size_t mid = lo + (hi - lo) / 2;
        if (memcmp(idx->e[mid].sha256, sha256, KILN_SHA256_LEN) < 0)
            lo = mid + 1;
        else
            hi = mid;
    }
    return lo < idx->n && memcmp(idx->e[lo].sha256, sha256, KILN_SHA256_LEN) == 0 ? &idx->e[lo]
                                                                                  : NULL;
}
