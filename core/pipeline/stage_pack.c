/* The pack stage: checks the catalogue, plans the record order, prepares the output folder and
 * opens the tensor files, then runs the parts: pack_read.c and pack_work.c (the records),
 * pack_finish.c (everything that follows from them). */
#include "stage_pack.h"

#include <inttypes.h>
#include <sys/statvfs.h>

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "../checked.h"
#include "../textesc.h"
#include "pack.h"
#include "pipeline.h"
#include "../textesc.h"
#include "pack.h"
#include "pipeline.h"

struct order_key {
    const struct kiln_item *it;
    uint32_t index;
};

/* Records follow the unit key (a seeded hash, so classes are interleaved), then content, so
 * that moving or renaming source files never changes a tensor file. Identical files are then
 * in catalogue order, which scan fixed by location: not the names themselves, which reproduce
 * of a --hash-paths output only has in hashed form. */
static int cmp_record(const void *a, const void *b)
{
    const struct order_key *p = a, *q = b;
    const struct kiln_item *x = p->it, *y = q->it;
    if (x->unit_key != y->unit_key)
        return x->unit_key < y->unit_key ? -1 : 1;
    int c = memcmp(x->sha256, y->sha256, KILN_SHA256_LEN);
    if (c)
        return c;
    if (x->class_index != y->class_index)
        return x->class_index < y->class_index ? -1 : 1;
    return p->index < q->index ? -1 : p->index > q->index;
}

static int plan_records(struct pack_run *run, struct kiln_err *err)
{
    struct kiln_catalog *cat = run->cat;
    run->record_of = kiln_alloc_array(cat->n, sizeof *run->record_of);
    struct order_key *keys = kiln_alloc_array(cat->n, sizeof *keys);
    if (!run->record_of || !keys) {
        free(keys);
        return kiln_err_set(err, KILN_ENOMEM, "cannot plan %zu records", cat->n);
    }
    for (size_t i = 0; i < cat->n; i++)
        run->record_of[i] = NO_RECORD;
    for (int s = 0; s < KILN_NSPLITS; s++) {
        size_t n = 0;
        for (size_t i = 0; i < cat->n; i++)
            if (cat->items[i].split == s)
                keys[n++] = (struct order_key){&cat->items[i], (uint32_t)i};
        qsort(keys, n, sizeof *keys, cmp_record);
        run->order[s] = kiln_alloc_array(n, sizeof(uint32_t));
        if (!run->order[s]) {
            free(keys);
            return kiln_err_set(err, KILN_ENOMEM, "cannot plan %zu records", n);
        }
        for (size_t r = 0; r < n; r++) {
            run->order[s][r] = keys[r].index;
            run->record_of[keys[r].index] = (uint32_t)r;
        }
        run->rep->records[s] = n;
    }
    free(keys);
    return KILN_OK;
}

/* ---- output files ------------------------------------------------------------------------- */

/* A split has a tensor file when the split record gives it a part (a two-way split has no
 * val.kten), else when it has records; train always has one. */
static bool split_wanted(const struct pack_run *run, int s)
{
    if (run->o->split)
        return run->o->split->parts == 3 || s != KILN_SPLIT_VAL;
    return run->rep->records[s] > 0 || s == KILN_SPLIT_TRAIN;
}

/* The three arrays of split s's tensor file (docs/format.md). */
static void split_arrays(const struct pack_run *run, int s, struct kiln_kten_array arrays[3])
{
    const struct kiln_recipe *r = &run->o->recipe;
    const uint64_t n = run->rep->records[s];
    memset(arrays, 0, 3 * sizeof *arrays);
    snprintf(arrays[0].name, sizeof arrays[0].name, "images");
    arrays[0].dtype = r->dtype == KILN_OUT_F32   ? KILN_DT_F32
                      : r->dtype == KILN_OUT_U16 ? KILN_DT_U16
                                                 : KILN_DT_U8;
    arrays[0].rank = 4;
    if (r->layout == KILN_LAYOUT_NHWC) {
        const uint64_t d[4] = {n, r->height, r->width, r->channels};
        memcpy(arrays[0].dims, d, sizeof d);
    } else {
        const uint64_t d[4] = {n, r->channels, r->height, r->width};
        memcpy(arrays[0].dims, d, sizeof d);
    }
    snprintf(arrays[1].name, sizeof arrays[1].name, "labels");
    arrays[1].dtype = KILN_DT_I32;
    arrays[1].rank = 1;
    arrays[1].dims[0] = n;
    snprintf(arrays[2].name, sizeof arrays[2].name, "item");
    arrays[2].dtype = KILN_DT_U32;
    arrays[2].rank = 1;
    arrays[2].dims[0] = n;
}

/* f32 output of kiln pack: the integer records wait in a scratch file until the training
 * statistics are known (build's come from its record pool). */
static int open_scratch(struct pack_run *run, struct kiln_err *err)
{
    char *p = kiln_pipeline_path(run->o->outdir, KILN_FILE_POOL);
    if (!p)
        return kiln_err_set(err, KILN_ENOMEM, "out of memory");
    int rc = kiln_outfile_open(&run->pool, p, err);
    free(p);
    if (rc)
        return rc;
    run->pool_fd = run->pool.fd;
    uint64_t base = 0;
    for (int s = 0; s < KILN_NSPLITS; s++) {
        run->pool_base[s] = base;
        uint64_t len;
        if (!kiln_mul_u64(run->rep->records[s], run->int_record, &len) ||
            base > UINT64_MAX - len)
            return kiln_err_set(err, KILN_ENOMEM, "record pool too large");
        base += len;
    }
    return KILN_OK;
}

/* The tensor files (and for f32 the integer records kept beside them) are reserved whole: check
 * before reserving anything that the output folder's file system has room for all of it, so a
 * run that cannot fit says so at once and in those terms. */
static int check_room(const struct pack_run *run, struct kiln_err *err)
{
    const struct kiln_recipe *r = &run->o->recipe;
    uint64_t need = 0;
    for (int s = 0; s < KILN_NSPLITS; s++) {
        if (!split_wanted(run, s))
            continue;
        struct kiln_kten_array arrays[3];
        split_arrays(run, s, arrays);
        uint64_t bytes, pool = 0;
        int rc = kiln_kten_plan_bytes(arrays, 3, &bytes, err);
        if (rc)
            return rc;
        if (r->dtype == KILN_OUT_F32 && !run->o->pool &&
            !kiln_mul_u64(run->rep->records[s], run->int_record, &pool))
            return kiln_err_set(err, KILN_ENOMEM, "the record pool would exceed 2^64 bytes");
        if (need > UINT64_MAX - bytes - pool)
            return kiln_err_set(err, KILN_ENOMEM, "the outputs would exceed 2^64 bytes");
        need += bytes + pool;
    }
    struct statvfs fs;
    if (statvfs(run->o->outdir, &fs) != 0 || fs.f_blocks == 0)
        return KILN_OK; /* no figures to go by (some network file systems): let the writes tell */
    const uint64_t avail = (uint64_t)fs.f_bavail * fs.f_frsize;
    if (need > avail)
        return kiln_err_set(err, KILN_EWRITE,
                            "cannot write the tensor files into %s: they need %.1f MB (%" PRIu64
                            " bytes) and its file system has %.1f MB free",
                            run->o->outdir, (double)need / 1e6, need, (double)avail / 1e6);
    return KILN_OK;
}

static int open_outputs(struct pack_run *run, struct kiln_err *err)
{
    int rc = check_room(run, err);
    if (rc)
        return rc;
    for (int s = 0; s < KILN_NSPLITS; s++) {
        if (!split_wanted(run, s))
            continue;
        struct kiln_kten_array arrays[3];
        split_arrays(run, s, arrays);
        char *p = kiln_pipeline_path(run->o->outdir, kiln_manifest_split_files[s]);
        if (!p)
            return kiln_err_set(err, KILN_ENOMEM, "out of memory");
        rc = kiln_kten_create(&run->kten[s], p, arrays, 3, err);
        free(p);
        if (rc)
            return rc;
        run->kten_open[s] = true;
        run->rep->present[s] = true;
    }
    if (run->o->recipe.dtype == KILN_OUT_F32 && !run->o->pool)
        return open_scratch(run, err);
    return KILN_OK;
}

static void abort_outputs(struct pack_run *run)
{
    for (int s = 0; s < KILN_NSPLITS; s++)
        if (run->kten_open[s]) {
            kiln_kten_abort(&run->kten[s]);
            run->kten_open[s] = false;
        }
    if (run->pool_fd >= 0) {
        kiln_outfile_abort(&run->pool);
        run->pool_fd = -1;
    }
}

/* ---- the stage ---------------------------------------------------------------------------- */

/* The split record's parts decide which files are written (a two-way split has no val.kten);
 * a record edited or mixed up with another catalogue's must agree with the rows. */
static int check_parts(const struct kiln_catalog *cat, const struct kiln_split_record *split,
                       struct kiln_err *err)
{
    if (!split)
        return KILN_OK;
    if (split->parts != 2 && split->parts != 3)
        return kiln_err_set(err, KILN_EINVAL,
                            "the catalogue's split record says the split has %u parts; a split "
                            "has 2 (train:test) or 3 (train:val:test)",
                            split->parts);
    for (size_t i = 0; split->parts == 2 && i < cat->n; i++)
        if (cat->items[i].split == KILN_SPLIT_VAL) {
            char name[2048];
            kiln_catalog_item_name(&cat->items[i], name, sizeof name);
            return kiln_err_set(err, KILN_EINVAL,
                                "catalogue row %zu (%s) is in val, but the catalogue's split "
                                "record says the split has 2 parts (train:test); split again",
                                i + 1, name);
        }
    return KILN_OK;
}

/* Whether a relative path leaves the folder it is relative to: absolute, or a ".." step. */
static bool path_leaves(const char *path)
{
    if (path[0] == '/')
        return true;
    for (const char *p = path; *p;) {
        size_t n = strcspn(p, "/");
        if (n == 2 && p[0] == '.' && p[1] == '.')
            return true;
        p += n;
        p += *p == '/';
    }
    return false;
}

/* Checks that need no resources: every row with a split is usable and reads inside its source
 * (unless allowed), some row has one, and the split record agrees with the rows. */
static int check_catalogue(const struct kiln_catalog *cat,
                           const struct kiln_split_record *split, bool allow_outside,
                           struct kiln_pack_report *rep, size_t *packed, struct kiln_err *err)
{
    *packed = 0;
    for (size_t i = 0; i < cat->n; i++) {
        const struct kiln_item *it = &cat->items[i];
        if (it->split != KILN_SPLIT_NONE && it->status != KILN_ST_OK)
            return kiln_err_set(err, KILN_EINVAL, "catalogue row %zu has a split but status %s",
                                i + 1, kiln_status_name(it->status));
        const char *path = it->from ? it->from->path : it->path;
        if (it->split != KILN_SPLIT_NONE && !allow_outside && path_leaves(path)) {
            char *shown = kiln_text_escape(path);
            char *src = kiln_text_escape(it->from ? it->from->source : it->source);
            kiln_err_set(err, KILN_EINVAL,
                         "catalogue row %zu names the path '%s', which leaves its source %s; "
                         "scan never writes such rows (--allow-outside-paths reads them)",
                         i + 1, shown ? shown : "?", src ? src : "?");
            free(shown);
            free(src);
            return KILN_EINVAL;
        }
        *packed += it->split != KILN_SPLIT_NONE;
    }
    rep->skipped = cat->n - *packed;
    if (*packed == 0)
        return kiln_err_set(err, KILN_EINVAL,
                            "no catalogue row has a split (run kiln split first, or no file was "
                            "usable)");
    return check_parts(cat, split, err);
}

static int plan(struct pack_run *run, struct kiln_err *err)
{
    const struct kiln_catalog *cat = run->cat;
    run->delivered = calloc(cat->n ? cat->n : 1, 1);
    run->digest = kiln_alloc_array(cat->n ? cat->n : 1, sizeof *run->digest);
    int rc = run->delivered && run->digest
                 ? plan_records(run, err)
                 : kiln_err_set(err, KILN_ENOMEM, "cannot plan %zu records", cat->n);
    if (!rc && run->o->recipe.dtype == KILN_OUT_F32 && run->rep->records[KILN_SPLIT_TRAIN] == 0)
        rc = kiln_err_set(err, KILN_EINVAL,
                          "the training split is empty, so --dtype f32 has no training "
                          "statistics to normalise with (use u8 or u16, or other ratios)");
    return rc;
}

int kiln_stage_pack(struct kiln_catalog *cat, const struct kiln_pack_opts *o,
                    struct kiln_pack_report *rep, struct kiln_err *err)
{
    memset(rep, 0, sizeof *rep);
    const struct kiln_recipe *r = &o->recipe;
    size_t packed;
    int rc = check_catalogue(cat, o->split, o->allow_outside_paths, rep, &packed, err);
    if (rc)
        return rc;
    struct pack_run run;
    memset(&run, 0, sizeof run);
    run.o = o;
    run.cat = cat;
    run.rep = rep;
    run.pool_fd = -1;
    run.prog.total_items = packed;
    struct kiln_recipe ints = *r;
    ints.dtype = r->depth == 16 ? KILN_OUT_U16 : KILN_OUT_U8;
    run.int_record = kiln_recipe_record_bytes(&ints);
    if (!run.int_record)
        return kiln_err_set(err, KILN_EINVAL, "the record size of %ux%ux%u overflows", r->width,
                            r->height, r->channels);
    rc = pthread_mutex_init(&run.mu, NULL);
    if (rc)
        return kiln_err_sys(err, KILN_ENOMEM, rc, "cannot create a lock for the pack");
    /* From here every path ends at the clean-up at the bottom. */
    rc = plan(&run, err);
    if (!rc)
        rc = o->pool ? KILN_OK : kiln_pipeline_prepare_outdir(o->outdir, &rep->debris, err);
    /* Nothing of an earlier output changes until every new file is complete: then they all
     * replace it at once (kiln_pack_finish). */
    bool staged = false;
    if (!rc)
        staged = (rc = kiln_pipeline_stage_outputs(o->outdir, err)) == KILN_OK;
    if (!rc)
        rc = open_outputs(&run, err);
    if (!rc)
        rc = kiln_pack_work(&run, err);
    if (!rc)
        rc = kiln_pack_check_identical(&run, err);
    if (!rc)
        rc = kiln_pack_finish(&run, err);
    if (rc)
        abort_outputs(&run);
    if (rc && staged)
        kiln_pipeline_discard_outputs();
    for (int s = 0; s < KILN_NSPLITS; s++)
        free(run.order[s]);
    free(run.record_of);
    free(run.delivered);
    free(run.digest);
    pthread_mutex_destroy(&run.mu);
    return rc;
}
