/* Catalogue storage, ordering and the class map. */
#include "catalog.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "checked.h"

static const char *const status_names[KILN_ST_COUNT] = {
    [KILN_ST_OK] = "ok",
    [KILN_ST_EMPTY] = "empty",
    [KILN_ST_UNREADABLE] = "unreadable",
    [KILN_ST_NOT_IMAGE] = "not-image",
    [KILN_ST_UNSUPPORTED] = "unsupported",
    [KILN_ST_CORRUPT] = "corrupt",
    [KILN_ST_TRUNCATED] = "truncated",
    [KILN_ST_TOO_LARGE] = "too-large",
    [KILN_ST_SYMLINK] = "symlink",
    [KILN_ST_NESTED_ARCHIVE] = "nested-archive",
    [KILN_ST_ENCRYPTED] = "encrypted",
    [KILN_ST_ARCHIVE_LINK] = "archive-link",
    [KILN_ST_SPECIAL] = "special-file",
    [KILN_ST_UNLABELLED] = "unlabelled",
    [KILN_ST_LINK_LOOP] = "link-loop",
};

const char *kiln_status_name(int status)
{
    if (status < 0 || status >= KILN_ST_COUNT)
        return "unknown";
    return status_names[status];
}

int kiln_status_parse(const char *name)
{
    for (int i = 0; i < KILN_ST_COUNT; i++)
        if (strcmp(name, status_names[i]) == 0)
            return i;
    return -1;
}

static const char *const split_names[KILN_NSPLITS] = {"train", "val", "test"};

const char *kiln_split_name(int split)
{
    if (split < 0 || split >= KILN_NSPLITS)
        return "";
    return split_names[split];
}

int kiln_split_parse(const char *name)
{
    for (int i = 0; i < KILN_NSPLITS; i++)
        if (strcmp(name, split_names[i]) == 0)
            return i;
    return -1;
}

void kiln_name_normalise(const char *name, char *out, size_t len)
{
    size_t n = 0;
    const char *p = name;
    while (*p) {
        size_t part = strcspn(p, "/");
        const bool skip = part == 0 || (part == 1 && p[0] == '.');
        if (!skip) {
            if (n && n < len - 1)
                out[n++] = '/';
            size_t room = n < len - 1 ? len - 1 - n : 0;
            size_t k = part < room ? part : room;
            memcpy(out + n, p, k);
            n += k;
        }
        p += part;
        if (*p == '/')
            p++;
    }
    out[n] = '\0';
}

void kiln_catalog_init(struct kiln_catalog *cat)
{
    memset(cat, 0, sizeof *cat);
    kiln_arena_init(&cat->strings);
}

void kiln_catalog_free(struct kiln_catalog *cat)
{
    if (cat->fps && cat->fps_close)
        cat->fps_close(cat->fps);
    free(cat->items);
    free(cat->classes);
    free(cat->interned);
    kiln_arena_free(&cat->strings);
    memset(cat, 0, sizeof *cat);
}

static const char *intern(struct kiln_catalog *cat, const char *s)
{
    if (!s || !*s)
        return "";
    return kiln_arena_strdup(&cat->strings, s);
}

/* Like intern, but a short string seen before is shared (FNV-1a, linear probing). When the
 * table is half full or cannot be allocated, new strings are simply copied. */
static const char *intern_shared(struct kiln_catalog *cat, const char *s)
{
    if (!s || !*s)
        return "";
    size_t len = strnlen(s, KILN_CATALOG_INTERN_MAXLEN + 1);
    if (len > KILN_CATALOG_INTERN_MAXLEN)
        return kiln_arena_strdup(&cat->strings, s);
    if (!cat->interned) {
        cat->interned = calloc(KILN_CATALOG_INTERN_SLOTS, sizeof *cat->interned);
        if (!cat->interned)
            return kiln_arena_strdup(&cat->strings, s);
    }
    uint32_t h = 2166136261u;
    for (size_t i = 0; i < len; i++)
        h = (h ^ (uint8_t)s[i]) * 16777619u;
    const size_t mask = KILN_CATALOG_INTERN_SLOTS - 1;
    size_t k = h & mask;
    for (; cat->interned[k]; k = (k + 1) & mask)
        if (strcmp(cat->interned[k], s) == 0)
            return cat->interned[k];
    const char *copy = kiln_arena_strndup(&cat->strings, s, len);
    if (copy && cat->ninterned < KILN_CATALOG_INTERN_SLOTS / 2) {
        cat->interned[k] = copy;
        cat->ninterned++;
    }
    return copy;
}

int kiln_catalog_add(struct kiln_catalog *cat, const struct kiln_item *item, struct kiln_err *err)
{
    if (!kiln_grow((void **)&cat->items, &cat->cap, cat->n + 1, sizeof *cat->items))
        return kiln_err_set(err, KILN_ENOMEM, "cannot grow the catalogue past %zu rows", cat->n);
    struct kiln_item *dst = &cat->items[cat->n];
    *dst = *item;
    dst->source = intern_shared(cat, item->source);
    dst->path = intern(cat, item->path);
    dst->member = intern(cat, item->member);
    dst->format = intern_shared(cat, item->format);
    dst->label = intern_shared(cat, item->label);
    dst->group = intern_shared(cat, item->group);
    dst->reason = intern_shared(cat, item->reason);
    dst->notes = intern_shared(cat, item->notes);
    if (!dst->source || !dst->path || !dst->member || !dst->format || !dst->label ||
        !dst->group || !dst->reason || !dst->notes)
        return kiln_err_set(err, KILN_ENOMEM, "cannot store catalogue strings");
    cat->n++;
    return KILN_OK;
}

int kiln_catalog_set_from(struct kiln_catalog *cat, struct kiln_item *it, const char *source,
                          const char *path, const char *member, struct kiln_err *err)
{
    struct kiln_location *at = kiln_arena_alloc(&cat->strings, sizeof *at);
    if (!at)
        return kiln_err_set(err, KILN_ENOMEM, "cannot record where an item is read from");
    *at = (struct kiln_location){source, path, member};
    it->from = at;
    return KILN_OK;
}

int kiln_item_location_cmp(const struct kiln_item *a, const struct kiln_item *b)
{
    int c = strcmp(a->source, b->source);
    if (c)
        return c;
    c = strcmp(a->path, b->path);
    if (c)
        return c;
    return strcmp(a->member, b->member);
}

static int location_qsort_cmp(const void *a, const void *b)
{
    return kiln_item_location_cmp(a, b);
}

void kiln_catalog_sort(struct kiln_catalog *cat)
{
    if (cat->n > 1)
        qsort(cat->items, cat->n, sizeof *cat->items, location_qsort_cmp);
}

static int str_ptr_cmp(const void *a, const void *b)
{
    return strcmp(*(const char *const *)a, *(const char *const *)b);
}

int kiln_catalog_index_classes(struct kiln_catalog *cat, struct kiln_err *err)
{
    free(cat->classes);
    cat->classes = NULL;
    cat->nclasses = 0;
    const char **labels = kiln_alloc_array(cat->n, sizeof *labels);
    if (!labels)
        return kiln_err_set(err, KILN_ENOMEM, "cannot index %zu labels", cat->n);
    /* Labels come in long runs (items are in location order, labels mostly from folders), so
     * only a label unlike the one before is collected, and a run's items share one look-up. */
    size_t n = 0;
    for (size_t i = 0; i < cat->n; i++)
        if (cat->items[i].status == KILN_ST_OK && cat->items[i].label[0] &&
            (n == 0 || strcmp(labels[n - 1], cat->items[i].label) != 0))
            labels[n++] = cat->items[i].label;
    qsort(labels, n, sizeof *labels, str_ptr_cmp);
    size_t u = 0;
    for (size_t i = 0; i < n; i++)
        if (u == 0 || strcmp(labels[u - 1], labels[i]) != 0)
            labels[u++] = labels[i];
    cat->classes = (char **)labels;
    cat->nclasses = u;
    const struct kiln_item *last = NULL; /* the last labelled ok item */
    for (size_t i = 0; i < cat->n; i++) {
        struct kiln_item *it = &cat->items[i];
        it->class_index = -1;
        if (it->status != KILN_ST_OK || !it->label[0])
            continue;
        if (last && strcmp(last->label, it->label) == 0) {
            it->class_index = last->class_index;
        } else {
            const char *key = it->label;
            const char **hit = bsearch(&key, labels, u, sizeof *labels, str_ptr_cmp);
            it->class_index = (int32_t)(hit - labels);
        }
        last = it;
    }
    return KILN_OK;
}

void kiln_catalog_count_status(const struct kiln_catalog *cat, size_t counts[KILN_ST_COUNT])
{
    memset(counts, 0, KILN_ST_COUNT * sizeof counts[0]);
    for (size_t i = 0; i < cat->n; i++)
        counts[cat->items[i].status]++;
}

void kiln_catalog_relname(const char *path, const char *member, char *buf, size_t len)
{
    if (!member[0])
        snprintf(buf, len, "%s", path);
    else if (!path[0])
        snprintf(buf, len, "%s", member);
    else
        snprintf(buf, len, "%s/%s", path, member);
}

void kiln_catalog_item_name(const struct kiln_item *it, char *buf, size_t len)
{
    char rel[4096];
    kiln_catalog_relname(it->path, it->member, rel, sizeof rel);
    snprintf(buf, len, "%s/%s", it->source, rel);
}
