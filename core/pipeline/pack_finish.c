/* Pack's finish: completes each tensor file (f32 conversion with the training statistics,
 * the label and item arrays, the metadata block), gives every name its output form, and writes
 * items.csv, catalog.csv, the audit into manifest.json, and SHA256SUMS, each renamed into place
 * only when complete. */
#include <errno.h>
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

/* The audit of what was packed, at the radius the split merged near duplicates at. */
static int audit(struct pack_run *run, struct kiln_audit *a, struct kiln_err *err)
{
    const struct kiln_split_record *sp = run->o->split;
    int rc = kiln_audit_run(run->cat, sp && sp->near_bits >= 0 ? sp->near_bits : KILN_AUDIT_NEAR_BITS,
                            run->rep->present, a, err);
    if (!rc) {
        run->rep->leaks = a->nleaks;
        run->rep->missing_classes = a->missing_count;
        run->m.audit = a;
    }
    return rc;
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
