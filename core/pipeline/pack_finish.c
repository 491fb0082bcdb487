/* Pack's finish: completes each tensor file (f32 conversion with the training statistics,
 * the label and item arrays, the metadata block), gives every name its output form, and writes
 * items.csv, catalog.csv, the audit into manifest.json, and SHA256SUMS, each renamed into place
 * only when complete. */
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "../../formats/files/catalog_csv.h"
#include "../../formats/files/items_csv.h"
#include "../audit.h"
#include "../checked.h"
#include "../names.h"
#include "../../formats/files/outfile.h"
#include "pack.h"
#include "pipeline.h"
#include "record_pool.h"
#include "stage_near.h"
#include "stage_record.h"

/* f32 = (v / maxval - mean_c) / std_c with the training statistics in [0,1] scale; std holds 1
 * for a channel with zero spread (docs/pixels.md). */
static int convert_f32(struct pack_run *run, int s, const double mean[4], const double std[4],
                       struct kiln_err *err)
{
    const struct kiln_recipe *r = &run->o->recipe;
    const size_t samples = (size_t)r->width * r->height * r->channels;
    const size_t npx = (size_t)r->width * r->height;
    const double maxv = r->depth == 16 ? 65535.0 : 255.0;
    uint8_t *in = malloc(run->int_record);
    float *out = kiln_alloc_array(samples, sizeof *out);
    if (!in || !out) {
        free(in);
        free(out);
        return kiln_err_set(err, KILN_ENOMEM, "cannot allocate conversion buffers");
    }
    int rc = KILN_OK;
    for (size_t rec = 0; rec < run->rep->records[s] && !rc; rec++) {
        if (run->o->pool) {
            rc = kiln_record_pool_get(run->o->pool, run->cat->items[run->order[s][rec]].pool_slot,
                                      in, err);
            if (rc)
                break;
        } else {
            const uint64_t off = (uint64_t)rec * run->int_record;
            ssize_t got =
                pread(run->pool_fd, in, run->int_record, (off_t)(run->pool_base[s] + off));
            if (got != (ssize_t)run->int_record) {
                rc = kiln_err_sys(err, KILN_EIO, errno, "cannot read back record %zu", rec);
                break;
            }
        }
        for (size_t k = 0; k < samples; k++) {
            size_t c = r->layout == KILN_LAYOUT_NHWC ? k % r->channels : k / npx;
            double v = r->depth == 16 ? ((const uint16_t *)in)[k] : in[k];
            out[k] = (float)((v / maxv - mean[c]) / std[c]);
        }
        rc = kiln_kten_write(&run->kten[s], 0, (uint64_t)rec * samples * 4, out, samples * 4, err);
    }
    free(in);
    free(out);
    return rc;
}

/* The training statistics in [0,1] scale: f32's normalisation (std 1 where there is no
 * spread, so that channel is only shifted). */
static int train_norm(const struct pack_run *run, double mean[4], double std[4],
                      struct kiln_err *err)
{
    const struct kiln_recipe *r = &run->o->recipe;
    const double maxv = r->depth == 16 ? 65535.0 : 255.0;
    for (unsigned c = 0; c < 4; c++) {
        mean[c] = 0;
        std[c] = 1;
    }
    for (unsigned c = 0; c < r->channels; c++) {
        struct kiln_stats_summary u;
        int rc = kiln_stats_summarize(&run->rep->stats[KILN_SPLIT_TRAIN].ch[c], maxv, &u, err);
        if (rc)
            return rc;
        mean[c] = u.mean;
        std[c] = u.std_pop > 0 ? u.std_pop : 1.0;
    }
    return KILN_OK;
}

/* The labels (class index) and items (row of items.csv) arrays of split s. */
static int write_label_arrays(struct pack_run *run, int s, size_t row_base, struct kiln_err *err)
{
    const size_t n = run->rep->records[s];
    uint32_t *labels = kiln_alloc_array(n ? n : 1, sizeof *labels);
    uint32_t *items = kiln_alloc_array(n ? n : 1, sizeof *items);
    int rc = labels && items ? KILN_OK : kiln_err_set(err, KILN_ENOMEM, "cannot allocate label arrays");
    for (size_t k = 0; !rc && k < n; k++) {
        labels[k] = (uint32_t)run->cat->items[run->order[s][k]].class_index;
        items[k] = (uint32_t)(row_base + k);
    }
    if (!rc)
        rc = kiln_kten_write_le32(&run->kten[s], 1, labels, n, err);
    if (!rc)
        rc = kiln_kten_write_le32(&run->kten[s], 2, items, n, err);
    free(labels);
    free(items);
    return rc;
}

static int finish_tensors(struct pack_run *run, struct kiln_err *err)
{
    const bool f32 = run->o->recipe.dtype == KILN_OUT_F32;
    double mean[4], std[4];
    int rc = train_norm(run, mean, std, err);
    size_t row_base = 0;
    for (int s = 0; s < KILN_NSPLITS && !rc; row_base += run->rep->records[s], s++) {
        if (!run->kten_open[s])
            continue;
        if (f32)
            rc = convert_f32(run, s, mean, std, err);
        if (!rc)
            rc = write_label_arrays(run, s, row_base, err);
        const struct kiln_kten_meta km = {&run->m, s, f32 ? mean : NULL, f32 ? std : NULL};
        char *text = rc ? NULL : kiln_manifest_kten_meta(&km, err);
        if (!rc && !text)
            rc = err->code;
        if (!rc)
            rc = kiln_kten_finish(&run->kten[s], text, strlen(text), err);
        run->kten_open[s] = false; /* finished, or removed by kiln_kten_finish on failure */
        free(text);
    }
    return rc;
}

static int write_tables(const struct pack_run *run, struct kiln_err *err)
{
    char *items = kiln_pipeline_path(run->o->outdir, KILN_FILE_ITEMS);
    char *cat = kiln_pipeline_path(run->o->outdir, KILN_FILE_CATALOG);
    int rc = items && cat ? KILN_OK : kiln_err_set(err, KILN_ENOMEM, "out of memory");
    if (!rc)
        rc = kiln_items_csv_save(items, run->cat, (const uint32_t *const *)run->order,
                                 run->rep->records, err);
    if (!rc)
        rc = kiln_catalog_csv_save(cat, run->cat, err);
    free(items);
    free(cat);
    return rc;
}

/* Adds an output file with its size and SHA-256 to the manifest's list. */
static int add_output(struct pack_run *run, const char *name, struct kiln_err *err)
{
    if (run->m.noutputs == sizeof run->m.outputs / sizeof run->m.outputs[0])
        return kiln_err_set(err, KILN_EINTERNAL, "too many outputs");
    struct kiln_manifest_output *out = &run->m.outputs[run->m.noutputs];
    char *path = kiln_pipeline_path(run->o->outdir, name);
    if (!path)
        return kiln_err_set(err, KILN_ENOMEM, "out of memory");
    /* Not in place yet: the file waits under its temporary name for the replace. */
    char *staged = kiln_outfile_staged_path(path);
    uint8_t d[KILN_SHA256_LEN];
    out->name = name;
    int rc = kiln_file_sha256(staged ? staged : path, d, &out->bytes, err);
    free(staged);
    free(path);
    if (!rc) {
        kiln_sha256_hex(d, out->sha256);
        run->m.noutputs++;
    }
    return rc;
}

/* manifest.json lists the tensor files, items.csv and catalog.csv; SHA256SUMS lists those
 * and manifest.json. */
static int write_manifest(struct pack_run *run, struct kiln_err *err)
{
    int rc = KILN_OK;
    for (int s = 0; s < KILN_NSPLITS && !rc; s++)
        if (run->rep->present[s])
            rc = add_output(run, kiln_manifest_split_files[s], err);
    if (!rc)
        rc = add_output(run, KILN_FILE_ITEMS, err);
    if (!rc)
        rc = add_output(run, KILN_FILE_CATALOG, err);
    char *mp = kiln_pipeline_path(run->o->outdir, KILN_FILE_MANIFEST);
    char *sp = kiln_pipeline_path(run->o->outdir, KILN_FILE_SUMS);
    if (!rc && (!mp || !sp))
        rc = kiln_err_set(err, KILN_ENOMEM, "out of memory");
    if (!rc)
        rc = kiln_manifest_save(mp, &run->m, err);
    const size_t listed = run->m.noutputs;
    if (!rc)
        rc = add_output(run, KILN_FILE_MANIFEST, err);
    run->m.noutputs = listed;
    if (!rc)
        rc = kiln_manifest_save_sums(sp, run->m.outputs, listed + 1, err);
    free(mp);
    free(sp);
    return rc;
}

/* Every file written takes the place of the earlier output's at once (docs/cli.md, "What a
 * failed run leaves"). */
static int put_in_place(const struct pack_run *run, struct kiln_err *err)
{
    const char *names[KILN_NSPLITS + 4];
    size_t n = 0;
    for (int s = 0; s < KILN_NSPLITS; s++)
        if (run->rep->present[s])
            names[n++] = kiln_manifest_split_files[s];
    names[n++] = KILN_FILE_ITEMS;
    names[n++] = KILN_FILE_CATALOG;
    names[n++] = KILN_FILE_MANIFEST;
    names[n++] = KILN_FILE_SUMS;
    return kiln_pipeline_replace_outputs(run->o->outdir, names, n, err);
}

/* The audit of the records as packed: their digests, and the near-duplicate links (the
 * split's in kiln build, else checked here with the split's settings). */
static int audit(struct pack_run *run, struct kiln_audit *a, struct kiln_err *err)
{
    const struct kiln_pack_opts *o = run->o;
    struct kiln_nearlinks own;
    memset(&own, 0, sizeof own);
    const struct kiln_nearlinks *near = o->near;
    int rc = KILN_OK;
    if (!near) {
        rc = kiln_stage_near(run->cat, &o->near_params, o->jobs, &own, err);
        near = &own;
    }
    if (!rc)
        rc = kiln_audit_run(run->cat, near, (const uint8_t(*)[KILN_RECORD_DIGEST_LEN])run->digest,
                            run->rep->present, a, err);
    kiln_nearlinks_free(&own);
    if (!rc) {
        run->rep->leaks = a->nleaks;
        run->rep->near_leaks = a->per_kind[KILN_LEAK_NEAR];
        run->rep->missing_classes = a->missing_count;
        run->m.audit = a;
    }
    return rc;
}

static int cmp_digest_r(const void *x, const void *y, void *ctx)
{
    const uint8_t(*digest)[KILN_RECORD_DIGEST_LEN] = ctx;
    const uint32_t i = *(const uint32_t *)x, j = *(const uint32_t *)y;
    int c = memcmp(digest[i], digest[j], KILN_RECORD_DIGEST_LEN);
    return c ? c : (i > j) - (i < j);
}

int kiln_pack_check_identical(struct pack_run *run, struct kiln_err *err)
{
    const struct kiln_catalog *cat = run->cat;
    uint32_t *ord = kiln_alloc_array(cat->n ? cat->n : 1, sizeof *ord);
    if (!ord)
        return kiln_err_set(err, KILN_ENOMEM, "cannot sort %zu record digests", cat->n);
    size_t n = 0;
    for (size_t i = 0; i < cat->n; i++)
        if (cat->items[i].split != KILN_SPLIT_NONE)
            ord[n++] = (uint32_t)i;
    if (n > 1)
        qsort_r(ord, n, sizeof *ord, cmp_digest_r, run->digest);
    size_t pairs = 0;
    uint32_t first_a = UINT32_MAX, first_b = UINT32_MAX;
    for (size_t i = 0, j; i < n; i = j) {
        size_t per[KILN_NSPLITS] = {0, 0, 0};
        uint32_t other = UINT32_MAX; /* first item of the run in another split than ord[i]'s */
        for (j = i; j < n && memcmp(run->digest[ord[i]], run->digest[ord[j]],
                                    KILN_RECORD_DIGEST_LEN) == 0;
             j++) {
            per[cat->items[ord[j]].split]++;
            if (other == UINT32_MAX && cat->items[ord[j]].split != cat->items[ord[i]].split)
                other = ord[j];
        }
        pairs += per[0] * per[1] + per[0] * per[2] + per[1] * per[2];
        if (other != UINT32_MAX && ord[i] < first_a) {
            first_a = ord[i];
            first_b = other;
        }
    }
    free(ord);
    run->rep->identical_records = pairs;
    if (!pairs || run->o->allow_identical)
        return KILN_OK;
    char na[2048], nb[2048];
    const struct kiln_item *a = &cat->items[first_a], *b = &cat->items[first_b];
    char more[64] = "";
    if (pairs > 1)
        snprintf(more, sizeof more, " (%zu such pairs in all)", pairs);
    return kiln_err_set(err, KILN_ELEAK,
                        "identical records in two splits: %s (%s) and %s (%s) give the same "
                        "record with this recipe%s; put them in one group, or allow it (the "
                        "audit then lists them)",
                        kiln_pack_item_name(a, na, sizeof na), kiln_split_name(a->split),
                        kiln_pack_item_name(b, nb, sizeof nb), kiln_split_name(b->split), more);
}

int kiln_pack_finish(struct pack_run *run, struct kiln_err *err)
{
    const struct kiln_pack_opts *o = run->o;
    struct kiln_manifest *m = &run->m;
    m->recipe = &o->recipe;
    m->cat = run->cat;
    memcpy(m->present, run->rep->present, sizeof m->present);
    memcpy(m->records, run->rep->records, sizeof m->records);
    m->stats = run->rep->stats;
    m->dct_reduced = run->rep->dct_reduced;
    int rc = kiln_manifest_recipe_sha256(&o->recipe, m->recipe_sha256, err);
    if (!rc)
        rc = finish_tensors(run, err);
    if (run->pool_fd >= 0) {
        kiln_outfile_abort(&run->pool); /* the integer records were scratch */
        run->pool_fd = -1;
    }
    /* The one place names reach the outputs below: the catalogue's names and the records'
     * in their output form (hashed with --hash-paths). Nothing after this point reads a name
     * kept elsewhere. The bytes were all read before. */
    struct kiln_names namer;
    kiln_names_init(&namer, o->recipe.hash_paths, o->path_key, o->path_key_len);
    struct kiln_scan_record scan;
    struct kiln_split_record split;
    struct kiln_audit a;
    memset(&a, 0, sizeof a);
    if (!rc)
        rc = kiln_names_catalog(&namer, run->cat, err);
    if (!rc)
        rc = kiln_record_public(o->scan, o->split, &namer, &scan, &split, err);
    if (rc)
        return rc;
    m->scan = o->scan ? &scan : NULL;
    m->split = o->split ? &split : NULL;
    rc = write_tables(run, err);
    if (!rc)
        rc = audit(run, &a, err);
    if (!rc)
        rc = write_manifest(run, err);
    if (!rc)
        rc = put_in_place(run, err);
    kiln_audit_free(&a);
    kiln_scan_record_free(&scan);
    kiln_split_record_free(&split);
    m->scan = NULL;
    m->split = NULL;
    m->audit = NULL;
    return rc;
}
