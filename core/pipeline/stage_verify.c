/* Verify stage. Each file is hashed once; the digest is compared with both the manifest and
 * SHA256SUMS, so the two lists also vouch for each other. */
#include "stage_verify.h"

#include <jansson.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "../../formats/files/owner.h"
#include "../../formats/files/kten.h"
#include "../../formats/files/manifest.h"
#include "../../formats/files/outfile.h"
#include "../../formats/files/catalog_csv.h"
#include "../checked.h"
#include "../names.h"
#include "../sha256.h"
#include "stage_index.h"
#include "pipeline.h"

struct checked {
    char name[256];
    char hex[KILN_SHA256_HEX];
    int ok; /* the file could be read */
};

static void report(kiln_issue_fn fn, void *ctx, struct kiln_verify_report *rep, int kind,
                   const char *fmt, ...) __attribute__((format(printf, 5, 6)));

static void report(kiln_issue_fn fn, void *ctx, struct kiln_verify_report *rep, int kind,
                   const char *fmt, ...)
{
    char msg[768];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(msg, sizeof msg, fmt, ap);
    va_end(ap);
    rep->problems++;
    if (fn)
        fn(ctx, kind, msg);
}

/* Hashes a file; a missing or unreadable file is reported and gets ok = 0. */
static int hash_file(const char *dir, const char *name, struct checked *c, kiln_issue_fn fn,
                     void *ctx, struct kiln_verify_report *rep, uint64_t *size)
{
    snprintf(c->name, sizeof c->name, "%s", name);
    c->ok = 0;
    char *p = kiln_pipeline_path(dir, name);
    if (!p)
        return KILN_ENOMEM;
    uint8_t d[KILN_SHA256_LEN];
    struct kiln_err e;
    int rc = kiln_file_sha256(p, d, size, &e);
    free(p);
    if (rc) {
        report(fn, ctx, rep, KILN_ISSUE_MISSING, "%s: %s", name, e.msg);
        return KILN_OK;
    }
    kiln_sha256_hex(d, c->hex);
    c->ok = 1;
    rep->files_checked++;
    rep->bytes_hashed += *size;
    return KILN_OK;
}

static int check_kten(const char *dir, const char *name, kiln_issue_fn fn, void *ctx,
                      struct kiln_verify_report *rep)
{
    char *p = kiln_pipeline_path(dir, name);
    if (!p)
        return KILN_ENOMEM;
    struct kiln_kten_info info;
    struct kiln_err e;
    int rc = kiln_kten_open(p, &info, &e);
    if (rc) {
        report(fn, ctx, rep, KILN_ISSUE_DAMAGED, "%s", e.msg);
        free(p);
        return KILN_OK;
    }
    uint32_t bad;
    rc = kiln_kten_check(p, &info, &bad, &e);
    rep->arrays_checked += info.narrays;
    if (rc == KILN_EMISMATCH) {
        for (size_t i = 0; i < info.narrays; i++)
            if (bad & (1u << i))
                report(fn, ctx, rep, KILN_ISSUE_DAMAGED,
                       "%s: array '%s' does not match the SHA-256 in its header", name,
                       info.arrays[i].name);
        if (bad & (1u << 31))
            report(fn, ctx, rep, KILN_ISSUE_DAMAGED,
                   "%s: metadata block does not match the SHA-256 in its header", name);
    } else if (rc) {
        report(fn, ctx, rep, KILN_ISSUE_DAMAGED, "%s", e.msg);
    }
    kiln_kten_info_free(&info);
    free(p);
    return KILN_OK;
}

/* Each output the manifest lists: present, of the recorded size and SHA-256 (files[i]), and
 * for .kten files their own array digests. Returns KILN_ENOMEM only. */
static int check_outputs(const char *outdir, const json_t *outputs, struct checked *files,
                         kiln_issue_fn fn, void *ctx, struct kiln_verify_report *rep)
{
    for (size_t i = 0; i < json_array_size(outputs); i++) {
        const json_t *o = json_array_get(outputs, i);
        const char *name = kiln_json_str(o, "name"), *sha = kiln_json_str(o, "sha256");
        const json_t *bytes = json_object_get(o, "bytes");
        if (!name || !sha || !json_is_integer(bytes) || strchr(name, '/')) {
            report(fn, ctx, rep, KILN_ISSUE_DAMAGED, "manifest.json: output %zu is malformed", i);
            continue;
        }
        uint64_t size = 0;
        if (hash_file(outdir, name, &files[i], fn, ctx, rep, &size))
            return KILN_ENOMEM;
        if (!files[i].ok)
            continue;
        if ((json_int_t)size != json_integer_value(bytes))
            report(fn, ctx, rep, KILN_ISSUE_DAMAGED,
                   "%s: %llu bytes, manifest.json records %lld", name, (unsigned long long)size,
                   (long long)json_integer_value(bytes));
        else if (strcmp(files[i].hex, sha) != 0)
            report(fn, ctx, rep, KILN_ISSUE_DAMAGED,
                   "%s: SHA-256 %s differs from %s recorded in manifest.json", name,
                   files[i].hex, sha);
        size_t len = strlen(name);
        if (len > 5 && strcmp(name + len - 5, ".kten") == 0)
            check_kten(outdir, name, fn, ctx, rep);
    }
    return KILN_OK;
}

/* SHA256SUMS must list exactly the outputs plus manifest.json (files[0..n]), with the same
 * digests. */
static void check_sums(const char *outdir, const struct checked *files, size_t n,
                       kiln_issue_fn fn, void *ctx, struct kiln_verify_report *rep)
{
    char *spath = kiln_pipeline_path(outdir, KILN_FILE_SUMS);
    FILE *f = spath ? fopen(spath, "r") : NULL;
    free(spath);
    if (!f) {
        report(fn, ctx, rep, KILN_ISSUE_MISSING, "SHA256SUMS: missing or unreadable");
        return;
    }
    char line[1024];
    unsigned char *seen = calloc(n + 1, 1);
    while (seen && fgets(line, sizeof line, f)) {
        size_t len = strlen(line);
        while (len && (line[len - 1] == '\n' || line[len - 1] == '\r'))
            line[--len] = '\0';
        if (len < 67 || line[64] != ' ' || line[65] != ' ') {
            report(fn, ctx, rep, KILN_ISSUE_DAMAGED, "SHA256SUMS: malformed line '%.80s'", line);
            continue;
        }
        line[64] = '\0';
        const char *name = line + 66;
        size_t k = 0;
        while (k <= n && strcmp(files[k].name, name) != 0)
            k++;
        if (k > n) {
            report(fn, ctx, rep, KILN_ISSUE_DAMAGED,
                   "SHA256SUMS: lists %s, which the manifest does not", name);
            continue;
        }
        seen[k] = 1;
        if (files[k].ok && strcmp(files[k].hex, line) != 0)
            report(fn, ctx, rep, KILN_ISSUE_DAMAGED,
                   "%s: SHA-256 %s differs from %s listed in SHA256SUMS", name, files[k].hex,
                   line);
    }
    for (size_t k = 0; seen && k <= n; k++)
        if (!seen[k] && files[k].name[0])
            report(fn, ctx, rep, KILN_ISSUE_DAMAGED, "SHA256SUMS: does not list %s",
                   files[k].name);
    free(seen);
    fclose(f);
}

int kiln_stage_verify(const char *outdir, kiln_issue_fn fn, void *ctx,
                      struct kiln_verify_report *rep, struct kiln_err *err)
{
    memset(rep, 0, sizeof *rep);
    struct kiln_recovery rec;
    int rc = kiln_outfile_recover(outdir, kiln_owner_is_output_name, &rec, err);
    if (rc)
        return rc;
    if (rec.busy)
        return kiln_err_set(err, KILN_EIO,
                            "kiln process %ld is replacing its files now (%s/%s); verify when it "
                            "has ended",
                            rec.pid, outdir, KILN_OUTFILE_JOURNAL);
    rep->restored = rec.restored;
    rep->restored_pid = rec.pid;
    char *mpath = kiln_pipeline_path(outdir, KILN_FILE_MANIFEST);
    if (!mpath)
        return kiln_err_set(err, KILN_ENOMEM, "out of memory");
    json_t *m;
    rc = kiln_manifest_load(mpath, &m, err);
    free(mpath);
    if (rc)
        return rc;
    const json_t *outputs = json_object_get(m, "outputs");
    if (!json_is_array(outputs)) {
        json_decref(m);
        return kiln_err_set(err, KILN_EINVAL, "%s/manifest.json lists no outputs", outdir);
    }
    size_t n = json_array_size(outputs);
    struct checked *files = calloc(n + 1, sizeof *files);
    if (!files || check_outputs(outdir, outputs, files, fn, ctx, rep)) {
        free(files);
        json_decref(m);
        return kiln_err_set(err, KILN_ENOMEM, "out of memory");
    }
    uint64_t msize;
    hash_file(outdir, KILN_FILE_MANIFEST, &files[n], fn, ctx, rep, &msize);
    check_sums(outdir, files, n, fn, ctx, rep);
    free(files);
    json_decref(m);
    return rep->problems ? kiln_err_set(err, KILN_EMISMATCH, "%zu problems found", rep->problems)
                         : KILN_OK;
}

struct located {
    const char *path, *member;
    const uint8_t *sha;
    size_t q; /* index entry */
};

static int cmp_located(const void *a, const void *b)
{
    const struct located *x = a, *y = b;
    int c = strcmp(x->path, y->path);
    return c ? c : strcmp(x->member, y->member);
}

/* The output's catalogue, trusted only when it matches the manifest, and the name rule its
 * recipe used (hashed names are compared hashed). */
static int load_trusted_catalog(const char *outdir, const uint8_t *path_key, size_t path_key_len,
                                struct kiln_catalog *cat, struct kiln_names *names,
                                struct kiln_err *err)
{
    char *cpath = kiln_pipeline_path(outdir, KILN_FILE_CATALOG),
         *mpath = kiln_pipeline_path(outdir, KILN_FILE_MANIFEST);
    json_t *m = NULL;
    int rc = cpath && mpath ? kiln_manifest_load(mpath, &m, err)
                            : kiln_err_set(err, KILN_ENOMEM, "out of memory");
    const char *want = NULL;
    size_t i;
    json_t *o;
    if (!rc)
        json_array_foreach(json_object_get(m, "outputs"), i, o)
            if (kiln_json_str(o, "name") && strcmp(kiln_json_str(o, "name"), KILN_FILE_CATALOG) == 0)
                want = kiln_json_str(o, "sha256");
    uint8_t d[KILN_SHA256_LEN];
    uint64_t size;
    char hex[KILN_SHA256_HEX];
    if (!rc && !want)
        rc = kiln_err_set(err, KILN_EINVAL, "%s lists no catalog.csv", mpath);
    if (!rc)
        rc = kiln_file_sha256(cpath, d, &size, err);
    if (!rc) {
        kiln_sha256_hex(d, hex);
        if (strcmp(hex, want) != 0)
            rc = kiln_err_set(err, KILN_EMISMATCH, "%s does not match its manifest", cpath);
    }
    kiln_names_init(names, json_is_true(json_object_get(json_object_get(m, "recipe"),
                                                         "hash_paths")),
                    path_key, path_key_len);
    json_decref(m);
    bool has_split;
    if (!rc)
        rc = kiln_catalog_csv_load(cpath, cat, &has_split, err);
    free(cpath);
    free(mpath);
    return rc;
}

/* Every indexed source file's location in the form the catalogue records it, sorted. */
static int index_locations(struct kiln_index *idx, const struct kiln_names *names,
                           struct located *loc, struct kiln_err *err)
{
    int rc = KILN_OK;
    for (size_t k = 0; k < idx->n && !rc; k++) {
        char pb[KILN_NAME_HASH_LEN], mb[KILN_NAME_HASH_LEN];
        const char *p, *mm;
        rc = kiln_names_out(names, idx->e[k].path, pb, &p, err);
        if (!rc)
            rc = kiln_names_out(names, idx->e[k].member, mb, &mm, err);
        if (!rc && p == pb)
            p = kiln_arena_strdup(&idx->strings, pb);
        if (!rc && mm == mb)
            mm = kiln_arena_strdup(&idx->strings, mb);
        if (!rc && (!p || !mm))
            rc = kiln_err_set(err, KILN_ENOMEM, "out of memory");
        loc[k] = (struct located){p, mm, idx->e[k].sha256, k};
    }
    if (!rc && idx->n > 1)
        qsort(loc, idx->n, sizeof *loc, cmp_located);
    return rc;
}

/* A recorded item found elsewhere: the item and the index entry of its first copy. */
struct moved {
    uint32_t item, entry;
};

/* Finds each recorded item among the sources: in place, moved (into moved[]), changed or
 * missing; marks every index entry accounted for in used[]. Returns the items in place. */
static size_t match_items(const struct kiln_catalog *cat, const struct kiln_index *idx,
                          const struct located *loc, uint8_t *used, struct moved *moved,
                          kiln_issue_fn fn, void *ctx, struct kiln_verify_report *rep)
{
    size_t in_place = 0;
    for (size_t k = 0; k < cat->n; k++) {
        const struct kiln_item *it = &cat->items[k];
        if (!it->has_sha)
            continue;
        rep->sources_checked++;
        char rel[4096];
        kiln_catalog_relname(it->path, it->member, rel, sizeof rel);
        const struct kiln_index_entry *hit = kiln_index_find(idx, it->sha256);
        struct located key = {it->path, it->member, NULL, 0};
        const struct located *at =
            idx->n ? bsearch(&key, loc, idx->n, sizeof *loc, cmp_located) : NULL;
        if (hit) {
            /* Every index entry with this digest is accounted for. */
            for (size_t q = (size_t)(hit - idx->e);
                 q < idx->n && memcmp(idx->e[q].sha256, it->sha256, KILN_SHA256_LEN) == 0; q++)
                used[q] = 1;
            if (!at || memcmp(at->sha, it->sha256, KILN_SHA256_LEN) != 0)
                moved[rep->sources_moved++] =
                    (struct moved){(uint32_t)k, (uint32_t)(hit - idx->e)};
            else
                in_place++;
        } else if (at) {
            used[at->q] = 1; /* the changed file is reported once, not also as extra */
            rep->sources_changed++;
            report(fn, ctx, rep, KILN_ISSUE_SOURCE_CHANGED,
                   "%s: content differs from the recorded SHA-256", rel);
        } else {
            rep->sources_missing++;
            report(fn, ctx, rep, KILN_ISSUE_SOURCE_MISSING,
                   "%s: no source file has the recorded SHA-256", rel);
        }
    }
    return in_place;
}

/* The moved items and the source files no item accounts for. */
static void report_moved_and_extra(const struct kiln_catalog *cat, const struct kiln_index *idx,
                                   const uint8_t *used, const struct moved *moved,
                                   kiln_issue_fn fn, void *ctx, struct kiln_verify_report *rep)
{
    for (size_t q = 0; q < rep->sources_moved && fn; q++) {
        const struct kiln_item *it = &cat->items[moved[q].item];
        const struct kiln_index_entry *hit = &idx->e[moved[q].entry];
        char rel[4096], now[4096], msg[8300];
        kiln_catalog_relname(it->path, it->member, rel, sizeof rel);
        kiln_catalog_relname(hit->path, hit->member, now, sizeof now);
        snprintf(msg, sizeof msg, "%s: found by content as %s/%s", rel, hit->source, now);
        fn(ctx, KILN_ISSUE_SOURCE_MOVED, msg);
    }
    for (size_t q = 0; q < idx->n; q++)
        if (!used[q]) {
            rep->sources_extra++;
            if (fn) {
                char now[4096], msg[8300];
                kiln_catalog_relname(idx->e[q].path, idx->e[q].member, now, sizeof now);
                snprintf(msg, sizeof msg, "%s/%s: not recorded in the output", idx->e[q].source,
                         now);
                fn(ctx, KILN_ISSUE_SOURCE_EXTRA, msg);
            }
        }
}

int kiln_stage_verify_sources(const char *outdir, const char *const *sources, size_t nsources,
                              const uint8_t *path_key, size_t path_key_len, kiln_issue_fn fn,
                              void *ctx, struct kiln_verify_report *rep, struct kiln_err *err)
{
    struct kiln_catalog cat;
    kiln_catalog_init(&cat);
    struct kiln_names names;
    int rc = load_trusted_catalog(outdir, path_key, path_key_len, &cat, &names, err);
    struct kiln_index idx;
    if (!rc)
        rc = kiln_index_build(sources, nsources, false, kiln_index_max_bytes(&cat), &idx, err);
    if (rc) {
        kiln_catalog_free(&cat);
        return rc;
    }
    struct located *loc = kiln_alloc_array(idx.n ? idx.n : 1, sizeof *loc);
    uint8_t *used = calloc(idx.n ? idx.n : 1, 1);
    struct moved *moved = kiln_alloc_array(cat.n ? cat.n : 1, sizeof *moved);
    rc = loc && used && moved ? index_locations(&idx, &names, loc, err)
                              : kiln_err_set(err, KILN_ENOMEM, "out of memory");
    if (!rc) {
        const size_t in_place = match_items(&cat, &idx, loc, used, moved, fn, ctx, rep);
        /* Hashed names, no key given, nothing in place under the public key: the names were
         * hashed with a secret key, and "moved" would be a guess. */
        rep->places_unknown = names.hash && !path_key && rep->sources_moved && !in_place;
        if (rep->places_unknown)
            rep->sources_moved = 0;
        report_moved_and_extra(&cat, &idx, used, moved, fn, ctx, rep);
    }
    free(moved);
    free(loc);
    free(used);
    kiln_index_free(&idx);
    kiln_catalog_free(&cat);
    if (rc)
        return rc;
    return rep->sources_missing || rep->sources_changed
               ? kiln_err_set(err, KILN_EMISMATCH, "%zu source files missing, %zu changed",
                              rep->sources_missing, rep->sources_changed)
               : KILN_OK;
}
