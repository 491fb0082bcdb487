/* Reproduce stage. The old output's catalog.csv (checked against its manifest) holds every
 * recorded fact about each item: its content digest, label, group, digests for duplicate
 * detection and its split. Each item is found again in today's sources by content alone; pack
 * then reads the bytes from there but records the original names, so an unchanged data set
 * rebuilds to byte-identical files however the folders were reorganised. */
#include "stage_reproduce.h"

#include <jansson.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "../../formats/files/catalog_csv.h"
#include "../../formats/files/manifest.h"
#include "../../formats/files/outfile.h"
#include "../checked.h"
#include "../names.h"
#include "../split.h"
#include "stage_index.h"
#include "stage_near.h"
#include "stage_pack.h"
#include "stage_record.h"

static void note(kiln_reproduce_fn fn, void *ctx, int kind, const char *fmt, ...)
    __attribute__((format(printf, 4, 5)));

static void note(kiln_reproduce_fn fn, void *ctx, int kind, const char *fmt, ...)
{
    if (!fn)
        return;
    char msg[8400];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(msg, sizeof msg, fmt, ap);
    va_end(ap);
    fn(ctx, kind, msg);
}

static char *sibling(const char *manifest, const char *name)
{
    const char *slash = strrchr(manifest, '/');
    size_t dl = slash ? (size_t)(slash - manifest) : 1;
    char *s = malloc(dl + strlen(name) + 2);
    if (s)
        sprintf(s, "%.*s/%s", (int)dl, slash ? manifest : ".", name);
    return s;
}

static const char *recorded_sha(const json_t *m, const char *name)
{
    size_t i;
    json_t *o;
    json_array_foreach(json_object_get(m, "outputs"), i, o)
    {
        const char *n = kiln_json_str(o, "name");
        if (n && strcmp(n, name) == 0)
            return kiln_json_str(o, "sha256");
    }
    return NULL;
}

static int file_hex(const char *path, char hex[KILN_SHA256_HEX], struct kiln_err *err)
{
    uint8_t d[KILN_SHA256_LEN];
    uint64_t size;
    int rc = kiln_file_sha256(path, d, &size, err);
    if (!rc)
        kiln_sha256_hex(d, hex);
    return rc;
}

/* Adds one row to the comparison table: the recorded digest (given, or of the file at
 * recorded_file) against the rebuilt file in outdir. */
static void compare_output(const char *outdir, const char *name, const char *recorded,
                           const char *recorded_file, struct kiln_reproduce_report *rep)
{
    struct kiln_reproduce_output *r = &rep->out[rep->noutputs++];
    struct kiln_err e;
    snprintf(r->name, sizeof r->name, "%s", name);
    if (recorded)
        snprintf(r->recorded, sizeof r->recorded, "%s", recorded);
    else if (file_hex(recorded_file, r->recorded, &e) != 0)
        snprintf(r->recorded, sizeof r->recorded, "(unreadable)");
    size_t n = strlen(outdir) + strlen(name) + 2;
    char *fp = malloc(n);
    if (fp)
        snprintf(fp, n, "%s/%s", outdir, name);
    if (!fp || file_hex(fp, r->rebuilt, &e) != 0)
        snprintf(r->rebuilt, sizeof r->rebuilt, "(not written)");
    free(fp);
    r->identical = strcmp(r->rebuilt, r->recorded) == 0;
    rep->all_identical = rep->all_identical && r->identical;
}

static void compare_libraries(const json_t *m, kiln_reproduce_fn fn, void *ctx,
                              struct kiln_reproduce_report *rep)
{
    json_t *now = kiln_library_versions_json();
    const json_t *then = json_object_get(m, "libraries");
    const char *key;
    json_t *v;
    json_object_foreach(now, key, v)
    {
        const char *old = kiln_json_str(then, key);
        if (!old || strcmp(old, json_string_value(v)) != 0) {
            rep->library_differs++;
            note(fn, ctx, KILN_REPRO_LIBRARY, "%s %s was recorded, %s is in use now", key,
                 old ? old : "(not recorded)", json_string_value(v));
        }
    }
    json_decref(now);
}

/* Reruns the recorded split on the relocated catalogue and counts items that land elsewhere.
 * Units are formed from content, so with every item found the split must not change. */
static int rerun_split(struct kiln_catalog *cat, const struct kiln_split_record *split,
                       unsigned jobs, struct kiln_nearlinks *near, kiln_reproduce_fn fn, void *ctx,
                       struct kiln_reproduce_report *rep, struct kiln_err *err)
{
    struct kiln_split_params p;
    int rc = kiln_record_split_params(split, &p, err);
    if (!rc && p.near)
        rc = kiln_stage_near(cat, &p.near_params, jobs, near, err);
    if (rc)
        return rc;
    int8_t *was = kiln_alloc_array(cat->n ? cat->n : 1, 1);
    uint64_t *key = kiln_alloc_array(cat->n ? cat->n : 1, sizeof *key);
    if (!was || !key) {
        free(was);
        free(key);
        return kiln_err_set(err, KILN_ENOMEM, "out of memory");
    }
    for (size_t i = 0; i < cat->n; i++) {
        was[i] = cat->items[i].split;
        key[i] = cat->items[i].unit_key;
    }
    struct kiln_units units;
    struct kiln_split_report srep;
    rc = kiln_split_run(cat, &p, p.near ? near : NULL, &units, &srep, err);
    kiln_units_free(&units);
    for (size_t i = 0; !rc && i < cat->n; i++) {
        const struct kiln_item *it = &cat->items[i];
        if (it->split != was[i] || (was[i] >= 0 && it->unit_key != key[i])) {
            if (rep->split_differs++ < 20) {
                char rel[4096];
                kiln_catalog_relname(it->path, it->member, rel, sizeof rel);
                note(fn, ctx, KILN_REPRO_SPLIT, "%s: recorded in %s, the rerun split gives %s",
                     rel, was[i] >= 0 ? kiln_split_name(was[i]) : "no split",
                     it->split >= 0 ? kiln_split_name(it->split) : "no split");
            }
        }
    }
    free(was);
    free(key);
    return rc;
}

/* What one reproduce holds between its steps. */
struct repro_run {
    const struct kiln_reproduce_opts *o;
    kiln_reproduce_fn fn;
    void *ctx;
    struct kiln_reproduce_report *rep;
    json_t *m;   /* the recorded manifest */
    char *cpath; /* its catalog.csv */
    struct kiln_catalog cat;
    struct kiln_index idx;
    struct kiln_scan_record *scan;
    struct kiln_split_record *split;
    struct kiln_nearlinks near;
    struct kiln_pack_opts po;
};

/* The recorded catalogue (checked against the manifest's SHA-256), recipe and run records. */
static int load_recorded(struct repro_run *r, struct kiln_err *err)
{
    const struct kiln_reproduce_opts *o = r->o;
    int rc = kiln_manifest_load(o->manifest, &r->m, err);
    if (rc)
        return rc;
    r->cpath = sibling(o->manifest, KILN_FILE_CATALOG);
    const char *want = recorded_sha(r->m, KILN_FILE_CATALOG);
    char hex[KILN_SHA256_HEX];
    if (!r->cpath)
        rc = kiln_err_set(err, KILN_ENOMEM, "out of memory");
    else if (!want)
        rc = kiln_err_set(err, KILN_EINVAL, "%s lists no catalog.csv output", o->manifest);
    if (!rc)
        rc = file_hex(r->cpath, hex, err);
    if (!rc && strcmp(hex, want) != 0)
        rc = kiln_err_set(err, KILN_EMISMATCH,
                          "%s does not match the SHA-256 in %s; the record is damaged", r->cpath,
                          o->manifest);
    if (!rc)
        rc = kiln_recipe_from_json(json_object_get(r->m, "recipe"), &r->po.recipe, err);
    if (!rc && (rc = kiln_manifest_read_records(r->m, &r->scan, &r->split, err)) != 0)
        kiln_err_prefix(err, "%s", o->manifest);
    bool has_split;
    if (!rc)
        rc = kiln_near_attach_store(&r->cat, o->outdir, err);
    if (!rc)
        rc = kiln_catalog_csv_load(r->cpath, &r->cat, &has_split, err);
    if (!rc)
        rc = kiln_catalog_index_classes(&r->cat, err);
    return rc;
}

/* Finds every recorded item in the sources by content: from its recorded place when that
 * still holds its content (exact duplicates elsewhere do not make it "moved"), else from the
 * first copy found. moved receives the items found elsewhere. */
static int locate_items(struct repro_run *r, uint32_t *moved, struct kiln_err *err)
{
    struct kiln_reproduce_report *rep = r->rep;
    struct kiln_names names;
    kiln_names_init(&names, r->po.recipe.hash_paths, r->o->path_key, r->o->path_key_len);
    size_t in_place = 0;
    for (size_t i = 0; i < r->cat.n; i++) {
        struct kiln_item *it = &r->cat.items[i];
        if (it->split == KILN_SPLIT_NONE)
            continue;
        rep->items++;
        const struct kiln_index_entry *hit;
        bool at_place;
        int rc = kiln_index_locate(&r->idx, it, &names, &hit, &at_place, err);
        if (rc)
            return rc;
        if (!hit) {
            char rel[4096], sha[KILN_SHA256_HEX];
            kiln_catalog_relname(it->path, it->member, rel, sizeof rel);
            kiln_sha256_hex(it->sha256, sha);
            rep->missing++;
            note(r->fn, r->ctx, KILN_REPRO_MISSING, "%s (%s, SHA-256 %s) is in no source", rel,
                 kiln_split_name(it->split), sha);
            if (r->o->allow_missing)
                it->split = KILN_SPLIT_NONE;
            continue;
        }
        rep->found++;
        rc = kiln_catalog_set_from(&r->cat, it, hit->source, hit->path, hit->member, err);
        if (rc)
            return rc;
        in_place += at_place;
        if (!at_place)
            moved[rep->moved++] = (uint32_t)i;
    }
    /* Under the public key nothing in place, names hashed and no key given: the names were
     * most likely hashed with a secret key, and "moved" would be a guess. */
    rep->places_unknown = r->po.recipe.hash_paths && !r->o->path_key && rep->moved && !in_place;
    if (rep->places_unknown)
        rep->moved = 0;
    for (size_t k = 0; k < rep->moved; k++) {
        const struct kiln_item *it = &r->cat.items[moved[k]];
        char rel[4096], now[4096];
        kiln_catalog_relname(it->path, it->member, rel, sizeof rel);
        kiln_catalog_relname(it->from->path, it->from->member, now, sizeof now);
        note(r->fn, r->ctx, KILN_REPRO_MOVED, "%s is now %s/%s", rel, it->from->source, now);
    }
    if (rep->missing && !r->o->allow_missing)
        return kiln_err_set(err, KILN_EMISMATCH,
                            "%zu of %zu recorded items are in no source; nothing rebuilt "
                            "(--allow-missing rebuilds without them)",
                            rep->missing, rep->items);
    return KILN_OK;
}

/* Reruns the recorded split where it can and packs again into o->outdir. */
static int rebuild(struct repro_run *r, struct kiln_err *err)
{
    const struct kiln_reproduce_opts *o = r->o;
    struct kiln_pack_opts *po = &r->po;
    /* Rerun the recorded split, unless it depended on an earlier output (--keep) or items are
     * missing (which would reshuffle exact-mode dealing): then the recorded splits stand.
     * Hashed group keys (--hash-paths) no longer give the unit ids either. */
    bool near_rerun = false, near_on = true;
    if (r->split && !r->split->keep && !r->rep->missing && !po->recipe.hash_paths) {
        int rc = rerun_split(&r->cat, r->split, o->jobs, &r->near, r->fn, r->ctx, r->rep, err);
        if (rc)
            return rc;
        near_rerun = true;
    }
    /* The audit checks near duplicates with the split's settings (the rerun's links when there
     * was one). Identical records in two splits were allowed if the recorded output has them:
     * its manifest's audit lists them, and the comparison below shows any difference. */
    kiln_near_params_from_record(r->split, &near_on, &po->near_params);
    po->near = near_rerun && near_on ? &r->near : NULL;
    po->allow_identical = true;
    po->outdir = o->outdir;
    po->jobs = o->jobs;
    po->scan = r->scan;
    po->split = r->split;
    po->progress = o->progress;
    po->progress_ctx = o->progress_ctx;
    struct kiln_pack_report prep;
    int rc = kiln_stage_pack(&r->cat, po, &prep, err);
    r->rep->debris = prep.debris;
    return rc;
}

int kiln_stage_reproduce(const struct kiln_reproduce_opts *o, kiln_reproduce_fn fn, void *ctx,
                         struct kiln_reproduce_report *rep, struct kiln_err *err)
{
    memset(rep, 0, sizeof *rep);
    struct repro_run r;
    memset(&r, 0, sizeof r);
    r.o = o;
    r.fn = fn;
    r.ctx = ctx;
    r.rep = rep;
    kiln_catalog_init(&r.cat);
    kiln_arena_init(&r.idx.strings);
    uint32_t *moved = NULL; /* items found elsewhere than recorded */
    int rc = load_recorded(&r, err);
    if (!rc) {
        compare_libraries(r.m, fn, ctx, rep);
        kiln_arena_free(&r.idx.strings);
        rc = kiln_index_build(o->sources, o->nsources, false, kiln_index_max_bytes(&r.cat),
                              &r.idx, err);
    }
    if (!rc && !(moved = kiln_alloc_array(r.cat.n ? r.cat.n : 1, sizeof *moved)))
        rc = kiln_err_set(err, KILN_ENOMEM, "out of memory");
    if (!rc)
        rc = locate_items(&r, moved, err);
    if (!rc)
        rc = rebuild(&r, err);
    if (!rc) {
        /* Compare every recorded output, and the manifest itself. */
        rep->all_identical = true;
        size_t i;
        json_t *ob;
        json_array_foreach(json_object_get(r.m, "outputs"), i, ob)
        {
            const char *name = kiln_json_str(ob, "name"), *sha = kiln_json_str(ob, "sha256");
            if (name && sha && rep->noutputs < KILN_REPRO_MAX_OUTPUTS)
                compare_output(o->outdir, name, sha, NULL, rep);
        }
        if (rep->noutputs < KILN_REPRO_MAX_OUTPUTS)
            compare_output(o->outdir, KILN_FILE_MANIFEST, NULL, o->manifest, rep);
    }
    free(moved);
    kiln_scan_record_free(r.scan);
    kiln_split_record_free(r.split);
    free(r.scan);
    free(r.split);
    kiln_nearlinks_free(&r.near);
    kiln_catalog_free(&r.cat); /* before the index: items point into its strings */
    kiln_index_free(&r.idx);
    free(r.cpath);
    json_decref(r.m);
    return rc;
}
