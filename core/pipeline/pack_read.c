/* Pack's reader: fetches the bytes of every packed item into the work queue, in the order of
 * where they are read (plain files one by one, each archive in one streaming pass). Items are
 * read from their from_* location when reproduce set one. */
#include <sys/stat.h>
#include <inttypes.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "../../formats/sources/source.h"
#include "../checked.h"
#include "pack.h"
#include "pipeline.h"

static int queue_job(struct pack_run *run, uint32_t item, uint8_t *data, size_t size,
                     struct kiln_err *err)
{
    struct pack_job *j = malloc(sizeof *j);
    if (!j) {
        free(data);
        return kiln_err_set(err, KILN_ENOMEM, "cannot queue an item");
    }
    *j = (struct pack_job){item, data, size};
    run->delivered[item] = 1;
    if (!kiln_queue_push(&run->q, j, size + sizeof *j)) {
        free(data);
        free(j);
        return kiln_err_set(err, KILN_EINTERNAL, "pack stopped");
    }
    return KILN_OK;
}

static const char *fetch_source(const struct kiln_item *it)
{
    return it->from ? it->from->source : it->source;
}

static const char *fetch_path(const struct kiln_item *it)
{
    return it->from ? it->from->path : it->path;
}

static const char *fetch_member(const struct kiln_item *it)
{
    return it->from ? it->from->member : it->member;
}

/* The file to open for an item: its source itself for an archive that is the source. */
static char *item_fs_path(const struct kiln_item *it)
{
    if (!fetch_path(it)[0])
        return strdup(fetch_source(it));
    return kiln_pipeline_path(fetch_source(it), fetch_path(it));
}

const char *kiln_pack_item_name(const struct kiln_item *it, char *buf, size_t len)
{
    char rel[2048];
    kiln_catalog_relname(fetch_path(it), fetch_member(it), rel, sizeof rel);
    snprintf(buf, len, "%s/%s", fetch_source(it), rel);
    return buf;
}

/* Packed items in order of where their bytes are read, so each archive is one run. */
static int cmp_fetch(const void *a, const void *b, void *ctx)
{
    const struct kiln_item *items = ctx;
    const struct kiln_item *x = &items[*(const uint32_t *)a], *y = &items[*(const uint32_t *)b];
    int c = strcmp(fetch_source(x), fetch_source(y));
    if (!c)
        c = strcmp(fetch_path(x), fetch_path(y));
    if (!c)
        c = strcmp(fetch_member(x), fetch_member(y));
    return c;
}

/* Members wanted from one archive: fetch[first, last) share its source and path, sorted by
 * member. */
struct archive_fetch {
    struct pack_run *run;
    const uint32_t *fetch;
    size_t first, last;
};

static bool want_member(void *ctx, const char *path, const char *member)
{
    (void)path;
    struct archive_fetch *f = ctx;
    const struct kiln_item *items = f->run->cat->items;
    for (size_t lo = f->first, hi = f->last; lo < hi;) {
        size_t mid = lo + (hi - lo) / 2;
        int c = strcmp(fetch_member(&items[f->fetch[mid]]), member);
        if (c == 0)
            return true;
        if (c < 0)
            lo = mid + 1;
        else
            hi = mid;
    }
    return false;
}

static int got_member(void *ctx, struct kiln_source_entry *e, struct kiln_err *err)
{
    struct archive_fetch *f = ctx;
    struct pack_run *run = f->run;
    const struct kiln_item *items = run->cat->items;
    /* Duplicate member names are possible in tar: the bytes go to the first undelivered item
     * of that name, and copies to every other one recorded with the same content (reproduce
     * finds two identical recorded files in one member). The copies are queued first: once
     * queued, the original belongs to a worker. */
    size_t first = f->first;
    while (first < f->last && (run->delivered[f->fetch[first]] ||
                               strcmp(fetch_member(&items[f->fetch[first]]), e->member) != 0))
        first++;
    if (first == f->last) {
        free(e->data);
        return KILN_OK;
    }
    const struct kiln_item *it = &items[f->fetch[first]];
    if (e->status != KILN_ST_OK) {
        char name[2048];
        free(e->data);
        return kiln_err_set(err, KILN_EMISMATCH, "cannot read %s since it was scanned: %s",
                            kiln_pack_item_name(it, name, sizeof name), e->reason);
    }
    for (size_t k = first + 1; k < f->last; k++) {
        uint32_t i = f->fetch[k];
        if (run->delivered[i] || strcmp(fetch_member(&items[i]), e->member) != 0 ||
            memcmp(items[i].sha256, it->sha256, sizeof it->sha256) != 0)
            continue;
        uint8_t *copy = malloc(e->size ? e->size : 1);
        if (!copy) {
            free(e->data);
            return kiln_err_set(err, KILN_ENOMEM, "cannot copy %zu bytes", e->size);
        }
        memcpy(copy, e->data, e->size);
        int rc = queue_job(run, i, copy, e->size, err);
        if (rc) {
            free(e->data);
            return rc;
        }
    }
    return queue_job(run, f->fetch[first], e->data, e->size, err);
}

static int read_plain(struct pack_run *run, uint32_t i, struct kiln_err *e)
{
    const struct kiln_item *it = &run->cat->items[i];
    char *p = item_fs_path(it);
    if (!p)
        return kiln_err_set(e, KILN_ENOMEM, "out of memory");
    uint8_t *data;
    size_t size;
    struct kiln_err re;
    /* The recorded size bounds what is read: a file that grew has changed, whatever it holds.
     * Something other than a file where one was (a FIFO would block the read) has changed too. */
    struct stat st;
    int rc = stat(p, &st) == 0 && !S_ISREG(st.st_mode)
                 ? kiln_err_set(&re, KILN_EIO, "it is no longer a regular file")
                 : kiln_source_read_file(p, it->size ? it->size : 1, &data, &size, &re);
    free(p);
    if (rc) {
        char name[2048];
        if (rc == KILN_ETOOLARGE)
            return kiln_err_set(e, KILN_EMISMATCH,
                                "%s changed since it was scanned (it is larger than the %" PRIu64
                                " bytes recorded); scan again",
                                kiln_pack_item_name(it, name, sizeof name), it->size);
        return kiln_err_set(e, KILN_EMISMATCH, "cannot read %s since it was scanned: %s",
                            kiln_pack_item_name(it, name, sizeof name), re.msg);
    }
    return queue_job(run, i, data, size, e);
}

void *kiln_pack_read(void *arg)
{
    struct pack_run *run = arg;
    struct kiln_catalog *cat = run->cat;
    struct kiln_err e;
    kiln_err_clear(&e);
    int rc = KILN_OK;
    size_t n = 0;
    uint32_t *fetch = kiln_alloc_array(cat->n ? cat->n : 1, sizeof *fetch);
    if (!fetch)
        rc = kiln_err_set(&e, KILN_ENOMEM, "cannot plan reading %zu items", cat->n);
    for (size_t i = 0; !rc && i < cat->n; i++)
        if (run->record_of[i] != NO_RECORD)
            fetch[n++] = (uint32_t)i;
    if (!rc)
        qsort_r(fetch, n, sizeof *fetch, cmp_fetch, cat->items);
    for (size_t k = 0; k < n && !rc;) {
        const struct kiln_item *it = &cat->items[fetch[k]];
        if (!fetch_member(it)[0]) {
            rc = read_plain(run, fetch[k++], &e);
            continue;
        }
        size_t j = k + 1;
        while (j < n && strcmp(fetch_source(&cat->items[fetch[j]]), fetch_source(it)) == 0 &&
               strcmp(fetch_path(&cat->items[fetch[j]]), fetch_path(it)) == 0)
            j++;
        char *p = item_fs_path(it);
        if (!p) {
            rc = kiln_err_set(&e, KILN_ENOMEM, "out of memory");
            break;
        }
        struct archive_fetch f = {run, fetch, k, j};
        struct kiln_walk_opts wo = {false, 1};
        for (size_t q = k; q < j; q++) /* members larger than recorded have changed */
            if (cat->items[fetch[q]].size > wo.max_file_bytes)
                wo.max_file_bytes = cat->items[fetch[q]].size;
        rc = kiln_archive_walk(p, fetch_source(it), fetch_path(it), &wo, want_member, got_member,
                               &f, NULL, &e);
        free(p);
        for (size_t q = k; q < j && !rc; q++)
            if (!run->delivered[fetch[q]]) {
                char name[2048];
                rc = kiln_err_set(&e, KILN_EMISMATCH, "%s is no longer in its archive",
                                  kiln_pack_item_name(&cat->items[fetch[q]], name, sizeof name));
            }
        k = j;
    }
    free(fetch);
    if (rc && !kiln_pack_failed(run))
        kiln_pack_fail(run, &e);
    kiln_queue_close(&run->q);
    return NULL;
}
